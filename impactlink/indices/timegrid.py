"""From tidy climate rows to regular (time, county) arrays, and accumulations over scales."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from .errors import IndicesError

__all__ = ["Grid", "week_monday", "iso_week_start", "detect_cadence", "build_grid", "grid_values", "period_of_year",
           "accumulate", "accumulate_many", "calibration_mask"]

Cadence = Literal["daily", "weekly", "monthly"]


@dataclass(frozen=True)
class Grid:
    """A regular time axis (ISO-week Mondays or month starts) and the county axis.

    ``cadence`` is the cadence of the *input rows*; ``step`` is the cadence of the grid
    (``"weekly"`` for daily or weekly rows, ``"monthly"`` for monthly rows).
    """

    times: pd.DatetimeIndex
    county_ids: tuple[str, ...]
    cadence: Cadence
    step: Literal["weekly", "monthly"]

    @property
    def shape(self) -> tuple[int, int]:
        return (len(self.times), len(self.county_ids))


def detect_cadence(dates: pd.Series) -> Cadence:
    """Cadence of climate rows from the median spacing of one county's distinct dates."""
    d = pd.DatetimeIndex(pd.to_datetime(dates)).unique().sort_values()
    if len(d) < 3:
        raise IndicesError(
            f"climate: only {len(d)} distinct dates; expected a daily, weekly or monthly "
            "series of several years per county"
        )
    secs = d.values.astype("datetime64[s]").astype(np.int64)
    gap = float(np.median(np.diff(secs)) / 86_400.0)
    if gap <= 1.5:
        return "daily"
    if 6.0 <= gap <= 8.0:
        return "weekly"
    if 27.0 <= gap <= 32.0:
        return "monthly"
    raise IndicesError(
        f"climate: median spacing of dates is {gap:.1f} days; expected about 1 (daily), "
        "7 (weekly) or 30 (monthly) days. Resample the series to one of these cadences."
    )


def week_monday(dates) -> pd.DatetimeIndex:
    """Monday of the ISO 8601 week holding each date (the one home of this rule).

    Weeks are ISO 8601 weeks (Monday to Sunday) labelled by their Monday, at midnight.

    Examples
    --------
    >>> week_monday(["2031-07-09", "2031-07-13", "2031-07-14"]).strftime("%m-%d").tolist()
    ['07-07', '07-07', '07-14']
    """
    d = pd.DatetimeIndex(pd.to_datetime(dates)).normalize()
    return d - pd.to_timedelta(d.day_of_week, unit="D")


def iso_week_start(years, week: int) -> pd.DatetimeIndex:
    """Monday of ISO 8601 week ``week`` of each year (week 53 -> 52 where the year has 52).

    ISO week 1 is the week holding 4 January (ISO 8601-1:2019, 3.1.1.23 "calendar week").

    Examples
    --------
    >>> iso_week_start([2020, 2021], 53).strftime("%Y-%m-%d").tolist()
    ['2020-12-28', '2021-12-27']
    """
    if not 1 <= int(week) <= 53:
        raise IndicesError(f"an ISO week must be 1..53; got {week}")
    y = np.asarray(years, dtype=np.int64)
    jan4 = pd.DatetimeIndex(pd.to_datetime(pd.DataFrame({"year": y, "month": 1, "day": 4})))
    out = week_monday(jan4) + pd.to_timedelta((int(week) - 1) * 7, unit="D")
    spill = out.isocalendar().year.to_numpy() != y
    return pd.DatetimeIndex(np.where(spill, out - pd.Timedelta(days=7), out))


def _monday_days(d: pd.DatetimeIndex) -> np.ndarray:
    """Days since 1970-01-01 of each date's :func:`week_monday` (int64).

    The rule of :func:`week_monday` in integer day numbers (1970-01-01 was a Thursday, so a
    day's weekday is ``(day + 3) % 7``, Monday 0): no timestamp arrays on a national daily
    table (test against :func:`week_monday`)."""
    days = np.asarray(d.values.astype("datetime64[D]"), dtype="datetime64[D]").view(np.int64)
    days -= (days + 3) % 7
    return days


def build_grid(county: pd.Series, dates: pd.Series, cadence: Cadence) -> tuple[Grid, np.ndarray, np.ndarray]:
    """Grid covering all rows, and each row's (time position, county position).

    Daily and weekly rows go to the ISO week that contains them (labelled by its Monday);
    monthly rows to their calendar month (labelled by its first day).
    """
    d = pd.DatetimeIndex(pd.to_datetime(dates))
    codes, uniques = pd.factorize(county.astype(str), sort=True)
    county_ids = tuple(str(u) for u in uniques)
    step: Literal["weekly", "monthly"]
    if cadence == "monthly":
        mi = (d.year * 12 + d.month - 1).to_numpy()
        m0, m1 = int(mi.min()), int(mi.max())
        times = pd.date_range(
            pd.Timestamp(year=m0 // 12, month=m0 % 12 + 1, day=1),
            pd.Timestamp(year=m1 // 12, month=m1 % 12 + 1, day=1),
            freq="MS",
        )
        tpos = mi - m0
        step = "monthly"
    else:
        mon = _monday_days(d)
        start, end = int(mon.min()), int(mon.max())
        tpos = mon
        tpos -= start  # in place: (mon - start) // 7
        tpos //= 7
        times = pd.date_range(pd.Timestamp(start, unit="D"), pd.Timestamp(end, unit="D"),
                              freq="7D")
        step = "weekly"
    return Grid(pd.DatetimeIndex(times), county_ids, cadence, step), tpos.astype(np.int64), codes


def grid_values(values: np.ndarray, tpos: np.ndarray, cpos: np.ndarray, shape, *,
                how: Literal["sum", "mean"], min_count: int = 1, scale_to: float | None = None,
                unique: bool = False):
    """Aggregate row values into a (time, county) array.

    Parameters
    ----------
    values : ndarray, shape (rows,)
        NaN = missing row value.
    tpos, cpos : ndarray of int
        Positions of each row on the grid.
    how : {"sum", "mean"}
        ``"mean"``: mean of the valid values. ``"sum"``: total; when ``scale_to`` is given
        the total is the mean of valid values times ``scale_to`` (e.g. 7 days per week), so
        a week with one missing day is not biased low.
    min_count : int
        Cells with fewer valid values are NaN (missing, never zero).
    unique : bool
        The caller guarantees at most one row per cell (checked weekly or monthly input).
    """
    nt, nc = shape
    flat = tpos * nc + cpos
    if unique and min_count <= 1 and scale_to is None:
        # at most one row per cell: a scatter is exact and much faster than bincount
        out = np.full(nt * nc, np.nan)
        out[flat] = values
        out = out.reshape(nt, nc)
        return out, (~np.isnan(out)).astype(np.int64)
    ok = ~np.isnan(values)
    if not ok.all():  # one copy of the valid rows' cells, not one per count
        flat, values = flat[ok], values[ok]
    del ok
    cnt = np.bincount(flat, minlength=nt * nc).reshape(nt, nc)
    tot = np.bincount(flat, weights=values, minlength=nt * nc).reshape(nt, nc)
    del flat
    with np.errstate(invalid="ignore", divide="ignore"):
        if how == "mean" or scale_to is not None:
            out = tot / cnt
            if scale_to is not None:
                out = out * scale_to
        else:
            out = tot
    out = np.where(cnt >= max(min_count, 1), out, np.nan)
    return out, cnt


def period_of_year(times: pd.DatetimeIndex, step: str) -> tuple[np.ndarray, int]:
    """Period of the year (0-based) of each grid time and the number of periods.

    Weekly: ISO week number 1-53 minus one, with week 53 pooled into week 52 (index 51).
    Monthly: calendar month minus one.
    """
    if step == "monthly":
        return (times.month - 1).to_numpy().astype(np.int64), 12
    wk = times.isocalendar().week.to_numpy().astype(np.int64)
    return np.minimum(wk, 52) - 1, 52


def grid_years(times: pd.DatetimeIndex, step: str) -> np.ndarray:
    """Year of each grid time (ISO year for weeks, calendar year for months)."""
    if step == "monthly":
        return times.year.to_numpy().astype(np.int64)
    return times.isocalendar().year.to_numpy().astype(np.int64)


def calibration_mask(years: np.ndarray, calibration: tuple[int, int]) -> np.ndarray:
    return (years >= calibration[0]) & (years <= calibration[1])


def accumulate(x: np.ndarray, scale: int, *, nonnegative: bool = False, how: str = "sum") -> np.ndarray:
    """Trailing sums (or means) over ``scale`` steps by cumulative sums, shape (T, C).

    The value at row t covers rows ``t - scale + 1 .. t``; it is NaN during spin-up and
    whenever any row of the window is missing. With ``nonnegative=True`` (precipitation,
    PET) a window without any positive value is exactly 0 and rounding never produces a
    negative total, so zero-precipitation windows stay exact zeros.
    """
    return next(iter(accumulate_many(x, (scale,), nonnegative=nonnegative, how=how)))[1]


def accumulate_many(x: np.ndarray, scales, *, nonnegative: bool = False, how: str = "sum"):
    """Yield ``(scale, accumulate(x, scale))`` for several scales from one set of cumsums."""
    x = np.asarray(x, dtype=float)
    nt = x.shape[0]
    miss = np.isnan(x)
    filled = np.where(miss, 0.0, x)
    cs = np.zeros((nt + 1,) + x.shape[1:])
    np.cumsum(filled, axis=0, out=cs[1:])
    cm = np.zeros((nt + 1,) + x.shape[1:], dtype=np.int32)
    np.cumsum(miss, axis=0, out=cm[1:])
    cp = None
    if nonnegative:
        cp = np.zeros((nt + 1,) + x.shape[1:], dtype=np.int32)
        np.cumsum(filled > 0, axis=0, out=cp[1:])
    del filled
    for scale in scales:
        scale = int(scale)
        if scale <= 1:
            yield scale, (x.copy() if how == "sum" or scale == 1 else x / scale)
            continue
        out = np.full(x.shape, np.nan)
        if scale <= nt:
            out[scale - 1:] = cs[scale:] - cs[:-scale]
            bad = (cm[scale:] - cm[:-scale]) > 0
            out[scale - 1:][bad] = np.nan
            if cp is not None:
                win = out[scale - 1:]
                npos = cp[scale:] - cp[:-scale]
                np.maximum(win, 0.0, out=win)
                win[(npos == 0) & ~np.isnan(win)] = 0.0
        if how == "mean":
            out /= scale
        yield scale, out
