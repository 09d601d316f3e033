"""Monthly cubes on the weekly grid: hand-checked weeks of 2020 (a leap year) and 2026."""

import numpy as np
import pandas as pd
import pytest

from impactlink.indices import IndexCube
from impactlink.indices.cadence import monthly_to_weekly, months_to_weeks


def test_month_scales_map_to_the_default_week_scales():
    # 52.1775 weeks per year / 12 (mean Gregorian year 365.2425 days; common practice)
    assert [months_to_weeks(m) for m in (1, 2, 3, 6, 9, 12, 24)] == [4, 9, 13, 26, 39, 52, 104]


def test_each_week_takes_the_month_of_its_thursday():
    months = pd.date_range("2020-01-01", "2020-03-01", freq="MS")
    arr = np.array([[1.0, 10.0], [2.0, 20.0], [3.0, 30.0]])  # (months, counties)
    cube = IndexCube(months, ("a", "b"), {("spi", 3): arr}, {"cadence": "monthly"})
    weekly = monthly_to_weekly(cube)
    # 2020-01-02 is the first Thursday -> week of Monday 2019-12-30 belongs to January
    assert weekly.weeks[0] == pd.Timestamp("2019-12-30")
    # March 2020 ends on Tuesday 31st; its last Thursday is the 26th -> week of Monday 23rd
    assert weekly.weeks[-1] == pd.Timestamp("2020-03-23")
    v = weekly.get("spi", 13)
    w = pd.DatetimeIndex(weekly.weeks)
    # Monday 2020-01-27: Thursday 30 Jan -> January; Monday 2020-02-24: Thursday 27 Feb -> Feb
    assert v[w.get_loc(pd.Timestamp("2020-01-27")), 0] == 1.0
    assert v[w.get_loc(pd.Timestamp("2020-02-24")), 1] == 20.0
    # Monday 2020-02-03 (Thursday 6 Feb) -> February
    assert v[w.get_loc(pd.Timestamp("2020-02-03")), 0] == 2.0
    assert (v[:, 1] == 10 * v[:, 0]).all()
    assert weekly.provenance["scale_months_of_key"] == {"spi:13": 3}


def test_error_messages():
    bad = IndexCube(pd.date_range("2020-01-06", periods=3, freq="7D"), ("a",),
                    {("spi", 1): np.zeros((3, 1))})
    with pytest.raises(ValueError, match="first day of each month"):
        monthly_to_weekly(bad)


def test_monday_day_numbers_follow_the_iso_week_rule():
    """The integer shortcut gives the Monday of each date's ISO 8601 week, as pandas'
    ``day_of_week`` (Monday = 0) defines it, before and after 1970 (the reference)."""
    import numpy as np
    import pandas as pd

    from impactlink.indices.timegrid import _monday_days

    d = pd.DatetimeIndex(pd.date_range("1895-01-01", "2030-12-31", freq="D")[::17])
    want = (d - pd.to_timedelta(d.day_of_week, unit="D")).values.astype("datetime64[D]")
    assert np.array_equal(_monday_days(d), want.astype(np.int64))
    assert (pd.to_datetime(_monday_days(d), unit="D").day_of_week == 0).all()
