"""Index values aligned to target rows, one candidate (index, scale, lag) at a time.

Features are never stored as a wide table: each call reads one (weeks, counties) array of an
:class:`~impactlink.indices.cube.IndexCube` with numpy fancy indexing.
"""

from __future__ import annotations

import dataclasses
import weakref
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from impactlink.indices.cube import array_of
from impactlink.indices.timegrid import iso_week_start, week_monday
from impactlink.link._common import LinkError
from impactlink.link.target import Target
from impactlink.schema import COUNTY

__all__ = ["feature_values", "feature_reader", "FeatureReader", "RowPositions",
           "feature_matrix", "reference_weeks", "candidate_lags", "season_end_weeks",
           "end_week", "end_month", "with_end_week", "season_in_months"]

#: A region value needs index values for at least this share of the region's weight.
MIN_REGION_WEIGHT = 0.5


def feature_values(target: Target, cube, index: str, scale_weeks: int, lag_weeks: int
                   ) -> np.ndarray:
    """One candidate feature aligned to every row of ``target.frame``.

    Parameters
    ----------
    target : Target
    cube : impactlink.indices.cube.IndexCube
    index : str
        Index name, e.g. ``"spi"``.
    scale_weeks : int
        Time scale [weeks] (0 for an indicator used as supplied).
    lag_weeks : int
        Lag [weeks], >= 0: the value is taken ``lag_weeks`` weeks before the reference week.

    Returns
    -------
    ndarray of float64, shape (n_rows,)
        NaN where the index is undefined or the window leaves the cube's grid.

    Raises
    ------
    LinkError
        Negative lag, unknown reference rule, missing columns.
    KeyError
        The cube has no such (index, scale).

    Notes
    -----
    Reference week *r* per row (``target.rule.reference``):

    - ``row_week``: the row's own week (county-week targets; for onset and escalation targets
      this is week *t*, the forecast time, so the value is known when the forecast is made);
    - ``season_week``: ISO 8601 week ``season_week`` of the row's year (week 53 falls back to
      week 52 in years with 52 weeks);
    - ``month_end``: the last week that starts in the row's month.

    The value is :math:`x_{r-\\ell}` for window 1, otherwise ``window_stat`` (min or mean) of
    :math:`x_{r-\\ell-w+1}, \\ldots, x_{r-\\ell}`; a window with any missing week is NaN.
    Region rows combine county values with the rule's weights, renormalised over counties
    with a value; NaN when those hold less than half the region's weight.
    """
    return _read(cube.get(index, scale_weeks), _row_positions(target, cube), lag_weeks)


@dataclass(frozen=True, eq=False)
class RowPositions:
    """Where the rows of one target read an index cube: all that :func:`feature_values`
    needs of the target, without its frame (a few integer arrays, cheap to send to workers).

    ``ref_pos`` (rows,) the reference week's position on the cube's week grid; ``cp``
    (rows,) the county's column (-1: not in the cube; 0 for region rows); ``window`` and
    ``stat`` the window rule; ``region`` the (regions, counties) weights, each row's region
    position and its region's total weight, for region targets (else None).
    """

    name: str
    ref_pos: np.ndarray
    cp: np.ndarray
    window: int
    stat: str
    region: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None


@dataclass(frozen=True, eq=False)
class FeatureReader:
    """``reader(index, scale_weeks, lag_weeks)``: :func:`feature_values` of one target.

    The candidate grid's ``features`` argument in a form that pickles without the target
    frame: ``arrays`` is the cube's ``{(index, scale): (weeks, counties)}`` dict (the same
    object for every target of a run, so an engine can send it once) and ``rows`` the
    target's :class:`RowPositions`. Made by :func:`feature_reader`.
    """

    arrays: dict
    rows: RowPositions

    def __call__(self, index: str, scale_weeks: int, lag_weeks: int) -> np.ndarray:
        return _read(array_of(self.arrays, index, scale_weeks), self.rows, lag_weeks)

    def defined_rows(self, candidates) -> np.ndarray | None:
        """Rows where every (index, scale_weeks, lag_weeks) candidate is defined, or None.

        Found from each array's defined span per county (first and last week with a value)
        without reading the candidates: exact when every county's values run without a
        gap between those weeks. None where that does not hold or for region rows (whose
        values renormalise over the counties that have one); then read the candidates.
        """
        rp = self.rows
        if rp.region is not None:
            return None
        by_key: dict[tuple[str, int], list[int]] = {}
        for ix, sc, lg in candidates:
            by_key.setdefault((ix, int(sc)), []).append(int(lg))
        low = high = None
        for key, lags in by_key.items():
            span = _defined_span(self.arrays, key)
            if span is None:
                return None
            # defined at lag l: first <= ref - l - (w - 1) and ref - l <= last; the largest
            # lag binds the first condition and the smallest the second
            lo_k = span[0] + (max(lags) + rp.window - 1)
            hi_k = span[1] + min(lags)
            low = lo_k if low is None else np.maximum(low, lo_k)
            high = hi_k if high is None else np.minimum(high, hi_k)
        if low is None or high is None:
            return None
        cp = np.maximum(rp.cp, 0)
        return (rp.cp >= 0) & (rp.ref_pos >= low[cp]) & (rp.ref_pos <= high[cp])


#: id of a cube's arrays dict -> (the dict, {key: (first, last) weeks per county or None}):
#: the defined spans of :meth:`FeatureReader.defined_rows`, for the last two cubes.
_SPANS: dict[int, tuple[dict, dict]] = {}


def _defined_span(arrays: dict, key) -> tuple[np.ndarray, np.ndarray] | None:
    """First and last week position with a value, per county (first > last: none), of one
    array; None when some county has a missing week between the two."""
    hit = _SPANS.get(id(arrays))
    if hit is None or hit[0] is not arrays:
        while len(_SPANS) >= 2:
            _SPANS.pop(next(iter(_SPANS)))
        hit = _SPANS[id(arrays)] = (arrays, {})
    spans = hit[1]
    if key not in spans:
        have = np.isfinite(arrays[key])
        nt = have.shape[0]
        anyv = have.any(axis=0)
        first = np.where(anyv, have.argmax(axis=0), nt)
        last = np.where(anyv, nt - 1 - have[::-1].argmax(axis=0), -1)
        dense = have.sum(axis=0) == np.maximum(last - first + 1, 0)
        spans[key] = (first, last) if dense.all() else None
    return spans[key]


def feature_reader(target: Target, cube) -> FeatureReader:
    """The :class:`FeatureReader` of ``target`` on ``cube`` (same values as
    :func:`feature_values`)."""
    return FeatureReader(cube.arrays, _row_positions(target, cube))


def _read(arr: np.ndarray, rp: RowPositions, lag_weeks: int) -> np.ndarray:
    """The values of one (weeks, counties) array at every row, ``lag_weeks`` back."""
    lag = int(lag_weeks)
    if lag < 0:
        raise LinkError(f"feature_values: lag_weeks must be >= 0, got {lag_weeks}")
    w, stat = rp.window, rp.stat
    if w == 1 and rp.region is None:  # one week per row: one gather, no window
        flat, bad = _cells_of_rows(rp.ref_pos, rp.cp, lag, arr.shape)
        vals = np.take(arr, flat)
        if bad is not None:
            vals[bad] = np.nan
        return vals
    pos = rp.ref_pos - lag
    win = pos[:, None] - (w - 1) + np.arange(w)[None, :]
    ok = (win >= 0) & (win < arr.shape[0])
    winc = np.clip(win, 0, arr.shape[0] - 1)
    if rp.region is not None:
        return _region_values(rp.region, arr, winc, ok, stat)
    cp = rp.cp
    vals = arr[winc, np.maximum(cp, 0)[:, None]]
    vals = np.where(ok & (cp >= 0)[:, None], vals, np.nan)
    return _reduce(vals, stat, axis=1)


def feature_matrix(target: Target, cube, candidates: list[tuple[str, int, int]]) -> np.ndarray:
    """Columns of :func:`feature_values` for a short list of (index, scale_weeks, lag_weeks).

    Convenience for small lists only; model selection over many candidates should call
    :func:`feature_values` one candidate at a time.
    """
    if not candidates:
        raise LinkError("feature_matrix: candidates is empty; give (index, scale_weeks, lag_weeks)")
    return np.column_stack([feature_values(target, cube, i, s, lag) for i, s, lag in candidates])


def reference_weeks(target: Target) -> pd.DatetimeIndex:
    """Monday of the reference week of every row (before the lag)."""
    rule, fr = target.rule, target.frame
    if rule.reference == "row_week":
        return week_monday(fr["time"])
    if rule.reference == "season_week":
        if rule.season_week is None:
            raise LinkError(f"target {target.name!r}: reference 'season_week' needs season_week")
        return _season_start(fr["year"].to_numpy(), int(rule.season_week), target.name)
    if rule.reference == "month_end":
        t = pd.DatetimeIndex(pd.to_datetime(fr["time"]))
        return week_monday(t + pd.offsets.MonthEnd(0))
    raise LinkError(
        f"target {target.name!r}: rule.reference must be row_week, season_week or month_end, "
        f"got {rule.reference!r}"
    )


def season_end_weeks(first: int, last: int, step: int, *,
                     cadence: str = "weekly") -> tuple[int, ...]:
    """ISO weeks searched as the end of a seasonal accumulation window.

    Parameters
    ----------
    first, last : int
        First and last ISO week of the search (e.g. 22 and 40 for summer crops).
    step : int
        Weeks between searched end weeks (weekly input).
    cadence : {"weekly", "daily", "monthly"}
        Cadence of the index input. Monthly indices change once a month, so the searched
        weeks are the ISO weeks holding the middle (15th) of each month whose middle falls in
        ``first..last``: each month is searched once, labelled by its own name, and the
        week-to-month rule of the cube (a week takes the month holding its Thursday) maps
        that week to the month in every year.

    Returns
    -------
    tuple of int
        Sorted ISO weeks.

    Examples
    --------
    >>> season_end_weeks(22, 40, 2)
    (22, 24, 26, 28, 30, 32, 34, 36, 38, 40)
    >>> season_end_weeks(22, 40, 2, cadence="monthly")
    (25, 29, 33, 38)
    """
    first, last, step = int(first), int(last), int(step)
    if not 1 <= first <= last <= 53 or step < 1:
        raise LinkError(f"season end weeks must satisfy 1 <= first <= last <= 53 and step >= 1; "
                        f"got first={first}, last={last}, step={step}")
    if cadence != "monthly":
        return tuple(range(first, last + 1, step))
    # ISO week of the 15th of each month in a non-leap reference year whose 1 January is a
    # Thursday (1970): the week's Thursday lies within 3 days of the 15th.
    mids = pd.to_datetime([f"1970-{m:02d}-15" for m in range(1, 13)])
    weeks = mids.isocalendar().week.to_numpy()
    return tuple(int(w) for w in weeks if first <= w <= last)


def candidate_lags(target: Target, default_lags) -> tuple[int, ...]:
    """Lags [weeks] searched for a target: its season end weeks, else ``default_lags``.

    Examples
    --------
    >>> from impactlink.link.target import FeatureRule
    >>> rule = FeatureRule(reference="season_week", season_week=40, season_end_weeks=(36, 40))
    >>> t = Target(name="y", impact="y", kind="binary", grain="county_year", role="annual",
    ...            frame=pd.DataFrame(), levels=("no", "yes"), rule=rule)
    >>> candidate_lags(t, (0, 4, 8))
    (0, 4)
    """
    rule = target.rule
    if rule.reference == "season_week" and rule.season_end_weeks and rule.season_week:
        return tuple(sorted({int(rule.season_week) - int(w) for w in rule.season_end_weeks}))
    return tuple(int(x) for x in default_lags)


def end_month(week: int) -> int:
    """Calendar month (1-12) holding the Thursday of ISO week ``week`` in a year that starts
    on a Thursday (1970): the month a mid-month week of :func:`season_end_weeks` stands for.

    Examples
    --------
    >>> [end_month(w) for w in season_end_weeks(22, 40, 2, cadence="monthly")]
    [6, 7, 8, 9]
    """
    return int((pd.Timestamp("1970-01-01") + pd.Timedelta(weeks=int(week) - 1)).month)


def end_week(target: Target, lag: int) -> int | None:
    """ISO week at which a seasonal candidate's accumulation window ends (None otherwise)."""
    rule = target.rule
    if rule.reference != "season_week" or rule.season_week is None:
        return None
    return int(rule.season_week) - int(lag)


def with_end_week(table: pd.DataFrame, target: Target, lag_col: str,
                  monthly: bool) -> pd.DataFrame:
    """Add ``end_week`` (ISO week the accumulation window ends; seasonal targets only) and,
    for monthly input, ``end_month`` (1-12) after the lag column."""
    if table is None or table.empty or lag_col not in table.columns:
        return table
    if end_week(target, 0) is None:
        return table
    lag = pd.to_numeric(table[lag_col], errors="coerce")
    ew = (end_week(target, 0) - lag).astype("Int64")
    out = table.copy()
    at = out.columns.get_loc(lag_col) + 1
    name = "end_week" if lag_col == "lag_weeks" else "best_end_week"
    out.insert(at, name, ew)
    if monthly:
        out.insert(at + 1, name.replace("week", "month"),
                   ew.map(lambda w: end_month(int(w)) if pd.notna(w) else pd.NA).astype("Int64"))
    return out


def season_in_months(target: Target, cube) -> Target:
    """A monthly index changes once a month: search one mid-month end week per month."""
    ends = target.rule.season_end_weeks
    if not ends or not cube.provenance.get("scale_months_of_key"):
        return target
    months = season_end_weeks(min(ends), max(ends), 1, cadence="monthly")
    rule = dataclasses.replace(target.rule, season_week=max(months), season_end_weeks=months)
    return dataclasses.replace(target, rule=rule)


# --------------------------------------------------------------------------- private steps
def _season_start(years, week: int, name: str) -> pd.DatetimeIndex:
    if not 1 <= int(week) <= 53:
        raise LinkError(f"target {name!r}: season_week must be an ISO week 1..53, got {week}")
    return iso_week_start(years, week)


#: (id of a target frame, its rule, cube grid) -> (the rule's weights, the target's
#: :class:`RowPositions`). Target frames are results and are not modified after
#: construction; an entry is dropped when its frame is garbage-collected. Saves the date
#: and id lookups when hundreds of candidates are read for one target.
_POSITIONS: dict[tuple, Any] = {}


def _row_positions(target: Target, cube) -> RowPositions:
    fr, rule = target.frame, target.rule
    w = max(int(rule.window_weeks), 1)
    stat = rule.window_stat if w > 1 else "value"
    if stat not in ("value", "min", "mean"):
        raise LinkError(f"feature_values: window_stat must be value, min or mean, got {stat!r}")
    key = (id(fr), len(fr), rule.reference, rule.season_week, w, stat, id(rule.weights),
           cube.weeks[0], len(cube.weeks), hash(tuple(cube.county_ids)))
    hit = _POSITIONS.get(key)
    if hit is not None and hit[0] is rule.weights:  # held, so the weights' id is not reused
        return hit[1]
    ref = reference_weeks(target)
    ref_pos = ((ref - cube.weeks[0]).days // 7).to_numpy().astype(np.int64)
    region = None
    if target.grain == "region_month":
        cp = np.zeros(len(fr), dtype=np.int64)
        region = _region_weights(target, cube)
    else:
        if COUNTY not in fr.columns:
            raise LinkError(f"feature_values: target {target.name!r} has no county_id column")
        cp = pd.Index(cube.county_ids).get_indexer(fr[COUNTY].astype(str))
    rp = RowPositions(target.name, ref_pos, cp.astype(np.int64), w, stat, region)
    if len(_POSITIONS) > 256:
        _POSITIONS.clear()
    _POSITIONS[key] = (rule.weights, rp)
    weakref.finalize(fr, _POSITIONS.pop, key, None)
    return rp


#: (reference positions, county positions, lag, grid) -> (those two arrays, the cube cell
#: of every row, rows outside the grid or None): the last few only, since candidates are
#: read lag by lag (every index and scale at one lag shares the cells) and each entry is
#: one integer per row.
_CELLS: dict[tuple, tuple] = {}
_CELLS_KEPT = 4


def _cells_of_rows(ref_pos, cp, lag, shape) -> tuple[np.ndarray, np.ndarray | None]:
    key = (id(ref_pos), id(cp), int(lag), shape)
    hit = _CELLS.get(key)
    if hit is not None and hit[0] is ref_pos and hit[1] is cp:  # held, so ids are not reused
        return hit[2], hit[3]
    nt, nc = shape
    pos = ref_pos - lag
    good = (pos >= 0) & (pos < nt) & (cp >= 0)
    pos *= nc
    pos += cp
    flat = np.where(good, pos, 0)
    bad = None if good.all() else ~good
    while len(_CELLS) >= _CELLS_KEPT:
        _CELLS.pop(next(iter(_CELLS)), None)
    _CELLS[key] = (ref_pos, cp, flat, bad)
    return flat, bad


def _reduce(vals: np.ndarray, stat: str, axis: int) -> np.ndarray:
    if stat == "min":
        return vals.min(axis=axis)
    if stat == "mean":
        return vals.mean(axis=axis)
    return vals.take(-1, axis=axis)


def _region_values(region, arr, winc, ok, stat) -> np.ndarray:
    W, rows_r, need = region
    # the county values of each distinct window (rows of all regions share a month), then
    # region sums as matrix products: no (rows x window x counties) array
    # a window is fixed by its last week (``winc`` and ``ok`` are functions of it; windows
    # whose last week lies outside the record all reduce to NaN, so they share one key): the
    # distinct windows are the distinct last weeks, a 1-d unique, not a unique of rows
    _, first, inv = np.unique(winc[:, -1] + np.where(ok[:, -1], 0, -(1 << 40)),
                              return_index=True, return_inverse=True)
    inv = inv.reshape(-1)
    uwin = np.where(ok[first], winc[first], -1)
    # one (windows, counties) slice per week of the window, reduced as it comes: the same
    # sequential sums and minima as a reduction over the window axis, without that axis
    v = None
    for j in range(uwin.shape[1]) if stat != "value" else (uwin.shape[1] - 1,):
        col = arr[np.maximum(uwin[:, j], 0)]
        col[uwin[:, j] < 0] = np.nan
        if v is None:
            v = col
        elif stat == "min":
            np.minimum(v, col, out=v)
        else:
            v += col
    assert v is not None
    if stat == "mean":
        v /= uwin.shape[1]
    have = np.isfinite(v)
    num_u = np.where(have, v, 0.0) @ W.T               # (windows, regions)
    den_u = have.astype(float) @ W.T
    out = np.full(rows_r.size, np.nan)
    r = np.maximum(rows_r, 0)
    num = np.where(rows_r >= 0, num_u[inv, r], 0.0)
    den = np.where(rows_r >= 0, den_u[inv, r], 0.0)
    good = (den >= MIN_REGION_WEIGHT * need) & (den > 0)
    out[good] = num[good] / den[good]
    return out


def _region_weights(target, cube) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(regions, counties) weights, each row's region position (-1: none) and the total
    weight of its region (kept in the target's :class:`RowPositions`)."""
    wts = target.rule.weights
    if wts is None:
        raise LinkError(f"feature_values: region target {target.name!r} has no rule.weights")
    fr = target.frame
    regions = pd.Index(sorted(wts["region"].astype(str).unique()))
    W = np.zeros((len(regions), len(cube.county_ids)))
    cp = pd.Index(cube.county_ids).get_indexer(wts[COUNTY].astype(str))
    rp = regions.get_indexer(wts["region"].astype(str))
    keep = cp >= 0
    W[rp[keep], cp[keep]] = wts["weight"].to_numpy(float)[keep]
    rcol = "region" if "region" in fr.columns else "unit_id"
    rows_r = regions.get_indexer(fr[rcol].astype(str))
    need = np.where(rows_r >= 0, W.sum(axis=1)[np.maximum(rows_r, 0)], 0.0)
    return W, rows_r, need
