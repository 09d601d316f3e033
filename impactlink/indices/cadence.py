"""Put a monthly index cube on the weekly grid that the linking stage works on.

Monthly climate input keeps a monthly cadence in the index engine (scales in months). The
impact targets live on ISO 8601 weeks, so the pipeline expands a monthly cube to weeks: each
week takes the value of the month that holds its Thursday (the ISO 8601 rule that assigns a
week to a year, applied to months), and a scale of m months is labelled by its nearest whole
number of weeks, round(m * 52.1775 / 12): 1 -> 4, 2 -> 9, 3 -> 13, 6 -> 26, 9 -> 39,
12 -> 52, 24 -> 104.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.errors import IndicesError
from impactlink.indices.cube import IndexCube

__all__ = ["monthly_to_weekly", "months_to_weeks"]

WEEKS_PER_MONTH = 52.1775 / 12.0  # mean Gregorian year of 365.2425 days / 7 / 12


def months_to_weeks(months: int) -> int:
    """Nearest whole number of weeks to ``months`` calendar months (0 stays 0)."""
    return int(round(int(months) * WEEKS_PER_MONTH))


def monthly_to_weekly(cube: IndexCube) -> IndexCube:
    """Expand a monthly cube (``weeks`` = month starts) to the ISO-week grid.

    Parameters
    ----------
    cube : IndexCube
        A cube whose ``weeks`` are the first days of consecutive months and whose keys carry
        scales in months (``provenance["cadence"] == "monthly"``).

    Returns
    -------
    IndexCube
        Mondays from the week holding the first month's first Thursday to the week holding
        the last month's last Thursday; arrays (weeks, counties) hold each week's month
        value (a step function); keys are ``(index, months_to_weeks(scale))``. The
        provenance records the expansion and the month scale of every key.

    Raises
    ------
    ValueError
        If ``weeks`` are not month starts.
    """
    months = pd.DatetimeIndex(cube.weeks)
    if len(months) == 0 or not (months.day == 1).all():
        raise IndicesError(
            "monthly_to_weekly needs a cube whose time axis holds the first day of each month; "
            f"got {months[:3].tolist()}"
        )
    first_thu = months[0] + pd.Timedelta(days=(3 - months[0].day_of_week) % 7)
    last_month_end = months[-1] + pd.offsets.MonthEnd(0)
    last_thu = last_month_end - pd.Timedelta(days=(last_month_end.day_of_week - 3) % 7)
    weeks = pd.date_range(first_thu - pd.Timedelta(days=3), last_thu - pd.Timedelta(days=3),
                          freq="7D")
    thursdays = weeks + pd.Timedelta(days=3)
    month_no = (thursdays.year - months[0].year) * 12 + (thursdays.month - months[0].month)
    pos = np.asarray(month_no, dtype=np.int64)
    ok = (pos >= 0) & (pos < len(months))
    arrays: dict[tuple[str, int], np.ndarray] = {}
    scale_months: dict[str, int] = {}
    for (index, scale), arr in cube.arrays.items():
        key = (index, months_to_weeks(scale))  # distinct months never share a week label
        out = np.full((len(weeks), arr.shape[1]), np.nan)
        out[ok] = arr[pos[ok]]
        arrays[key] = out
        scale_months[f"{index}:{key[1]}"] = int(scale)
    prov = dict(cube.provenance)
    prov["weekly_expansion"] = (
        "monthly values repeated over the ISO weeks whose Thursday falls in the month; "
        "scale labels converted from months to the nearest whole weeks"
    )
    prov["scale_months_of_key"] = scale_months
    return IndexCube(weeks=weeks, county_ids=cube.county_ids, arrays=arrays, provenance=prov)
