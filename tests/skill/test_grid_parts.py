"""Parts of the candidate grid: the one-pass mean and SD, the stop at a gap."""

from __future__ import annotations

import numpy as np
import pytest

from impactlink.skill.grid import _mean_sd


@pytest.mark.parametrize("shift", [0.0, 50.0, 1e7])
def test_mean_sd_match_numpy(shift):
    # reference: numpy.mean and numpy.std (ddof 0); a shift of 1e7 on unit noise takes the
    # two-pass branch (the one-pass variance would lose every digit to cancellation)
    x = shift + np.random.default_rng(0).normal(size=100_000)
    mu, sd = _mean_sd(x)
    assert mu == pytest.approx(np.mean(x), rel=1e-12, abs=1e-12)
    assert sd == pytest.approx(np.std(x), rel=1e-9)


def test_mean_sd_of_a_constant_column_is_one():
    assert _mean_sd(np.full(10, 3.0)) == (3.0, 1.0)
