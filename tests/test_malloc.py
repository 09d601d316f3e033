"""glibc's malloc controls (mallopt(3) M_MMAP_THRESHOLD, M_TRIM_THRESHOLD; malloc_trim(3)):
freed arrays leave a run's process; a worker keeps them for the next task."""

from __future__ import annotations

import platform

import numpy as np
import pytest

from impactlink import _malloc as _memory

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


_CHURN = """
import ctypes, resource, sys
ctypes.CDLL("libc.so.6").prctl(41, 1, 0, 0, 0)  # PR_SET_THP_DISABLE: 4 KiB pages only
import numpy as np
from impactlink import _malloc
_malloc.large_blocks_by_mmap()  # as in a run's process (and a pool worker forked from it)
np.ones(1)


def churn():
    before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    for _ in range(100):
        a = np.ones(2**20)  # 8 MiB, touched, freed: a task's temporary array
        del a
    return resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before


if sys.argv[1] == "reuse":
    _malloc.reuse_freed_blocks()
if sys.argv[1] == "stage":  # inside the stage's block, then after it
    with _malloc.reusing_freed_blocks():
        inside = churn()
    print(inside, churn())
else:
    print(churn())
"""


@glibc
def test_a_worker_reuses_freed_blocks_instead_of_faulting_them_in_again():
    # mallopt(3): blocks below M_MMAP_THRESHOLD come from the heap, and a free heap top
    # below M_TRIM_THRESHOLD stays; so 100 arrays of 8 MiB fault their pages in once, not
    # 100 times: with transparent huge pages off for the process (prctl(2)
    # PR_SET_THP_DISABLE) one array is 2,048 pages of 4 KiB (a fresh process per case: the
    # settings are process-wide)
    import subprocess
    import sys

    def faults(mode: str) -> int:
        out = subprocess.run([sys.executable, "-c", _CHURN, mode], check=True,
                             capture_output=True, text=True)
        return int(out.stdout.strip())

    assert faults("unmapped") > 100 * 2048 * 0.9
    assert faults("reuse") < 10 * 2048


@glibc
def test_a_stage_block_reuses_freed_blocks_and_then_gives_them_back():
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-c", _CHURN, "stage"], check=True,
                         capture_output=True, text=True)
    inside, after = (int(v) for v in out.stdout.split())
    assert inside < 10 * 2048 and after > 100 * 2048 * 0.9
