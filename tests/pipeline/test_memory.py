"""Freed arrays leave the process (glibc's mallopt(3) M_MMAP_THRESHOLD and malloc_trim(3))."""

from __future__ import annotations

import platform

import numpy as np
import pytest

from impactlink.pipeline import _memory

glibc = pytest.mark.skipif(platform.system() != "Linux" or platform.libc_ver()[0] != "glibc",
                           reason="glibc's malloc controls only (elsewhere both are no-ops)")


def _rss() -> int:
    with open("/proc/self/status", encoding="ascii") as fh:
        return next(int(line.split()[1]) * 1024 for line in fh if line.startswith("VmRSS:"))


@glibc
def test_a_freed_large_array_is_returned_to_the_system():
    _memory.large_blocks_by_mmap()
    before = _rss()
    block = np.ones(200 * 2**20 // 8)  # 200 MB, touched
    assert _rss() - before > 150 * 2**20
    del block
    _memory.trim()
    assert _rss() - before < 20 * 2**20


def test_both_calls_are_safe_anywhere():
    _memory.large_blocks_by_mmap()
    _memory.trim()
