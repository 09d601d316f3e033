"""Year-blocked folds."""

import numpy as np
import pytest

from impactlink.skill import year_folds


def test_leave_one_year_out_gives_one_fold_per_year():
    years = np.array([2003, 2001, 2001, 2002, 2003])
    np.testing.assert_array_equal(year_folds(years), [2, 0, 0, 1, 2])


def test_blocked_k_fold_keeps_neighbouring_years_together():
    years = np.repeat(np.arange(2000, 2010), 3)
    f = year_folds(years, cv="blocked_k_fold", k_folds=3)
    # 10 years in 3 contiguous blocks of 4, 3, 3 years (numpy.array_split)
    per_year = f[::3]
    np.testing.assert_array_equal(per_year, [0, 0, 0, 0, 1, 1, 1, 2, 2, 2])
    # property: no year is split across folds
    for y in np.unique(years):
        assert np.unique(f[years == y]).size == 1


def test_leave_one_region_out():
    years = np.array([2001, 2001, 2002, 2002])
    f = year_folds(years, cv="leave_one_region_out", regions=["b", "a", "b", "a"])
    np.testing.assert_array_equal(f, [1, 0, 1, 0])


def test_fold_errors_name_the_problem():
    with pytest.raises(ValueError, match="cv='weekly' is not one of"):
        year_folds([2001, 2002], cv="weekly")
    with pytest.raises(ValueError, match="at least 2 years"):
        year_folds([2001, 2001])
    with pytest.raises(ValueError, match="k_folds=5 must be between 2 and the number of years"):
        year_folds([2001, 2002, 2003], cv="blocked_k_fold", k_folds=5)
    with pytest.raises(ValueError, match="needs regions"):
        year_folds([2001, 2002], cv="leave_one_region_out")
