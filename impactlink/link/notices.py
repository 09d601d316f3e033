"""Restriction notices -> county-week level in force, onset and escalation risk sets.

A notice says that an issuer (a utility or authority) put a restriction at some level of a
ladder (1 = mildest ... K = most severe) in force from ``start_date`` to ``end_date``. This
module turns notices (and restriction lists published as periodic snapshots) into:

- a **state** target: the highest level in force in each county and week (0 = none);
- **onset** targets: for county-weeks *at risk* (covered, not in an episode at level >= k),
  does an episode at level >= k start within the next L weeks?
- **escalation** targets: for county-weeks in an episode below the top of the ladder, does
  the level rise within the next L weeks?

Worked example
--------------
One notice, issuer "Brambeth Waterworks" in county "90001", level 2, from Wednesday
2031-07-09 to Tuesday 2031-07-22, on a grid of Mondays from 2031-06-30::

    week (Monday)  2031-06-30  07-07  07-14  07-21  07-28
    level in force      0        2      2      2      0

The notice touches three ISO weeks (a week counts when the notice is in force on any of its
days): the week of 07-07 (in force from Wednesday), the week of 07-14 (all week) and the week of
07-21 (Monday and Tuesday). With ``horizon_weeks=(2,)`` the onset target has one row for the
week of 06-30 (at risk, and the episode starts within 1-2 weeks: event = 1); the weeks of
07-07 to 07-21 are in the episode and are not at risk; the week of 07-28 is at risk again
only when two further covered weeks follow it in the record.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from impactlink.link._common import (
    OUTSIDE,
    Ledger,
    LinkError,
    LinkResult,
    check_options,
    check_weeks,
    coverage_rows,
    iso_season,
    iso_year,
    paint,
    week_coverage,
    week_pos,
)
from impactlink.link._notice_records import (
    _close_open,
    _horizons,
    _prepare_notices,
    _regions,
    _rejected_only_counts,
    _snapshots_to_intervals,
)
from impactlink.link.target import FeatureRule, Target
from impactlink.schema import COUNTY, EQUAL_AREA_CRS

__all__ = ["link_notices", "notice_levels", "risk_set", "episodic_targets", "NOTICE_OPTIONS"]

NOTICE_OPTIONS = {
    "ladder", "stage_names", "open_end_cap_weeks", "drought_causes", "episodic",
    "horizon_weeks", "onset_level", "supersede_open", "snapshot_hold_weeks", "defined_by",
}


def link_notices(spec, tables: dict[str, pd.DataFrame], *, counties, weeks: pd.DatetimeIndex,
                 lags_weeks: tuple[int, ...] = (0,), equal_area_crs: str = EQUAL_AREA_CRS
                 ) -> LinkResult:
    """Link restriction notices (and snapshot lists) to county-week targets.

    Parameters
    ----------
    spec : impactlink.project.ImpactSpec
        ``source="notices"``. Options (all optional):

        - ``ladder`` (list, default ``["stage_1", ..., "stage_K"]`` with K the highest
          level found): levels 1..K; names are used as labels, numbers give
          ``stage_<n>``; level 0 is "none".
        - ``stage_names``: used by the inputs stage (issuer stage names -> integer level);
          accepted and ignored here.
        - ``open_end_cap_weeks`` (int or None, default None): a notice without an end date stays
          in force to the end of the record, or at most this many weeks; either way the weeks are
          flagged (``open_end`` column) and an :class:`OpenNoticeWarning` gives the count.
        - ``supersede_open`` (bool, default True): an open notice ends the day before the same
          issuer's next notice for the same county starts (a new stage replaces the old one; a
          level-0 notice lifts the restriction). Notices with explicit end dates that overlap
          merge: the highest level in force counts.
        - ``drought_causes`` (list of str, default drought, dry, low flow, water shortage,
          shortage): where a ``cause`` column exists, notices whose cause (case-insensitive) is
          not in this list are rejected; a blank cause is kept.
        - ``episodic`` (bool, default True): build onset and escalation targets.
        - ``horizon_weeks`` (list of int, default [4, 13]): onset/escalation windows L.
        - ``onset_level`` (int, default 1): onset means an episode at level >= this starts.
        - ``snapshot_hold_weeks`` (int, default 8): a snapshot's stage holds until the next
          snapshot of the issuer, but at most this many weeks.
        - ``defined_by`` (str, optional): index name the restriction is keyed to (circularity).
    tables : dict
        Validated frames: ``notices`` and/or ``notice_snapshots``; optional ``coverage``
        (``source`` "notices", the impact name, or "notice_snapshots"), ``water_systems``.
    counties : geopandas.GeoDataFrame
        ``county_id``, geometry, optional ``region``.
    weeks : pandas.DatetimeIndex
        Mondays of the record.
    lags_weeks : tuple of int
        Lags for the persistence columns ``persistence_<L>``.

    Returns
    -------
    LinkResult

    Examples
    --------
    One notice (level 2, Wednesday 2031-07-09 to Tuesday 2031-07-22) becomes county-week
    levels; a week counts when the notice is in force on any of its days:

    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> from impactlink.schema import EQUAL_AREA_CRS
    >>> from impactlink.project import ImpactSpec
    >>> counties = gpd.GeoDataFrame({"county_id": ["90001"]},
    ...                             geometry=[box(0, 1.8e6, 1e4, 1.81e6)], crs=EQUAL_AREA_CRS)
    >>> notices = pd.DataFrame({"notice_id": ["N-17"], "issuer": ["Brambeth Waterworks"],
    ...     "county_id": ["90001"], "level": [2],
    ...     "start_date": pd.to_datetime(["2031-07-09"]),
    ...     "end_date": pd.to_datetime(["2031-07-22"])})
    >>> res = link_notices(ImpactSpec("restrictions", "notices", {"horizon_weeks": [2]}),
    ...                    {"notices": notices}, counties=counties,
    ...                    weeks=pd.date_range("2031-06-30", periods=5, freq="7D"))
    >>> state = res.targets[0].frame
    >>> state["time"].dt.strftime("%m-%d").tolist(), state["level"].tolist()
    (['06-30', '07-07', '07-14', '07-21', '07-28'], [0, 2, 2, 2, 0])
    >>> onset = res.targets[1].frame
    >>> onset["time"].dt.strftime("%m-%d").tolist(), onset["level"].tolist()
    (['06-30'], [1])
    """
    opts = dict(spec.options)
    check_options(opts, NOTICE_OPTIONS, impact=spec.name, source="notices")
    weeks = check_weeks(weeks)
    notices = tables.get("notices")
    snaps = tables.get("notice_snapshots")
    if notices is None and snaps is None:
        raise LinkError(
            f"[impacts.{spec.name}] source 'notices' needs a notices or notice_snapshots table; "
            "neither was given: add one to [tables]"
        )
    ledger = Ledger(spec.name)
    county_ids = tuple(sorted(counties[COUNTY].astype(str)))
    region_of = _regions(counties)
    nw, nc = len(weeks), len(county_ids)

    levels_found = []
    if notices is not None and len(notices):
        levels_found.append(int(pd.to_numeric(notices["level"]).max()))
    if snaps is not None and len(snaps):
        levels_found.append(int(pd.to_numeric(snaps["stage"]).max()))
    ladder = opts.get("ladder")
    if ladder is None:
        k_max = max([1, *levels_found])
        ladder = [f"stage_{k}" for k in range(1, k_max + 1)]
    # a ladder of names gives the labels; a ladder of numbers (1, 2, 3) only its length
    ladder = [x if isinstance(x, str) else f"stage_{x}" for x in ladder]
    K = len(ladder)
    cap = opts.get("open_end_cap_weeks")
    record_end = weeks[-1] + pd.Timedelta(days=6)

    cov = coverage_rows(tables, {spec.name, "notices", "notice_snapshots"})
    mask = week_coverage(cov, weeks, county_ids, counties)

    parts = []
    if notices is not None:
        parts.append(_prepare_notices(notices, ledger, opts=opts, K=K, counties=counties,
                                      tables=tables, crs=equal_area_crs))
    if snaps is not None:
        parts.append(_snapshots_to_intervals(snaps, ledger, opts=opts, K=K, counties=counties,
                                             tables=tables, crs=equal_area_crs))
    iv = pd.concat(parts, ignore_index=True)
    iv = _close_open(iv, record_end=record_end, cap=cap,
                     supersede=bool(opts.get("supersede_open", True)), ledger=ledger)

    # --- weeks on the grid, and which intervals touch covered weeks
    cpos = pd.Index(county_ids).get_indexer(iv[COUNTY])
    ws = week_pos(weeks, iv["start_date"])
    we = week_pos(weeks, iv["end_date"])
    cc = np.vstack([np.zeros((1, nc), dtype=np.int64), np.cumsum(mask, axis=0)])
    on_grid = (we >= 0) & (ws < nw) & (cpos >= 0)
    s_c, e_c = np.clip(ws, 0, nw - 1), np.clip(we, 0, nw - 1)
    touched = np.zeros(len(iv), dtype=bool)
    touched[on_grid] = (cc[e_c[on_grid] + 1, cpos[on_grid]] - cc[s_c[on_grid], cpos[on_grid]]) > 0
    iv["used"] = touched
    rejected_only = _rejected_only_counts(ledger, iv, notices, snaps)
    for table, g in iv.groupby("table"):
        ledger.count(table, records=int(g["n_records"].sum()),
                     used=int(g.loc[g["used"], "n_records"].sum()),
                     outside=int(g.loc[~g["used"], "n_records"].sum()))
        # records touching no covered week of the record: listed with their file row
        frame = notices if table == "notices" else snaps
        assert frame is not None  # the intervals came from it
        off = frame.index.isin(g.loc[~g["used"], "row"])
        ledger.reject(str(table), frame, off, OUTSIDE,
                      column="start_date" if table == "notices" else "date")
    for table, n_rej in rejected_only.items():
        ledger.count(table, records=n_rej, used=0, outside=0)

    paintable = iv[iv["used"] & (iv["level"] >= 1)]
    pc = cpos[iv["used"].to_numpy() & (iv["level"].to_numpy() >= 1)]
    level = notice_levels(week_pos(weeks, paintable["start_date"]),
                          week_pos(weeks, paintable["end_date"]), pc,
                          paintable["level"].to_numpy(), nw=nw, nc=nc)
    po = paintable["open_end"].to_numpy()
    open_flag = paint(week_pos(weeks, paintable["start_date"])[po],
                      week_pos(weeks, paintable["end_date"])[po], pc[po], nw, nc) > 0
    n_force = paint(week_pos(weeks, paintable["start_date"]),
                    week_pos(weeks, paintable["end_date"]), pc, nw, nc)

    # --- targets
    labels = ("none", *ladder)
    lags = tuple(sorted({int(x) for x in lags_weeks}))
    base = _grid_columns(weeks, county_ids, region_of, level, mask, lags)
    state_extra = {"open_end": open_flag, "notices_in_force": n_force}
    flags = _flags(opts)
    state = _target_from_grid(
        spec.name, f"{spec.name}:state", "state", "ordinal", labels, base, mask,
        values=level, extra=state_extra, lags=[x for x in lags if x >= 1], horizon=0,
        provenance={"ladder": list(labels), "open_end_cap_weeks": cap, "flags": flags,
                    "episodes": _episode_stats(level, mask)})
    targets = [state]
    if bool(opts.get("episodic", True)):
        targets += episodic_targets(spec.name, level, mask, base, opts=opts, top_level=K,
                                    lags=lags, flags=flags)
    return ledger.result(targets, summarize(targets))


# --------------------------------------------------------------------------- core arrays
def notice_levels(start_pos, end_pos, county_pos, levels, *, nw: int, nc: int) -> np.ndarray:
    """Highest level in force per (week, county) from intervals of week positions.

    Parameters
    ----------
    start_pos, end_pos : array of int
        First and last week position (inclusive) of each interval; clipped to the grid.
    county_pos : array of int
        County column of each interval (-1 = ignore).
    levels : array of int
        Level 1..K of each interval.

    Returns
    -------
    ndarray of int64, shape (nw, nc)
        0 where nothing is in force.

    Notes
    -----
    For each k = 1..K a difference array counts intervals at level >= k; the level in force
    is the number of k whose count is positive (so overlapping notices merge to their maximum).

    Examples
    --------
    >>> notice_levels([1, 2], [3, 2], [0, 0], [1, 3], nw=5, nc=1)[:, 0].tolist()
    [0, 1, 3, 1, 0]
    """
    levels = np.asarray(levels, dtype=np.int64)
    out = np.zeros((nw, nc), dtype=np.int64)
    if len(levels) == 0:
        return out
    for k in range(1, int(levels.max()) + 1):  # loop over ladder steps (K <= ~6), not weeks
        out += paint(start_pos, end_pos, county_pos, nw, nc, weight=(levels >= k).astype(np.int64)) > 0
    return out


def risk_set(level: np.ndarray, covered: np.ndarray, *, horizon_weeks: int,
             role: str = "onset", onset_level: int = 1, top_level: int | None = None
             ) -> tuple[np.ndarray, np.ndarray]:
    """County-weeks at risk and the event indicator for onset or escalation within L weeks.

    Parameters
    ----------
    level : ndarray (weeks, counties)
        Level in force (0 = none).
    covered : ndarray of bool (weeks, counties)
        Weeks inside the source's coverage.
    horizon_weeks : int
        L: the event window is weeks t+1 .. t+L.
    role : {"onset", "escalation"}
    onset_level : int, default 1
        k: onset means a week at level >= k in the window.
    top_level : int, optional
        K, the top of the ladder (escalation is impossible from K); default ``level.max()``.

    Returns
    -------
    at_risk, event : ndarray of bool (weeks, counties)
        ``event`` is meaningful only where ``at_risk``.

    Notes
    -----
    Onset: at risk when week t is covered, ``level[t] < k`` and weeks t+1..t+L are all covered
    (so the outcome is known); event when ``max(level[t+1..t+L]) >= k``. Because the county is
    below k at t, a week at >= k in the window means an episode started in the window.
    Escalation: at risk when ``1 <= level[t] < K`` (an escalation counts only from a lower
    level inside an episode), event when ``max(level[t+1..t+L]) > level[t]``.
    """
    if role not in ("onset", "escalation"):
        raise LinkError(f"risk_set: role must be 'onset' or 'escalation', got {role!r}")
    h = int(horizon_weeks)
    if h < 1:
        raise LinkError(f"risk_set: horizon_weeks must be >= 1, got {horizon_weeks}")
    level = np.asarray(level, dtype=np.int64)
    covered = np.asarray(covered, dtype=bool)
    nw, nc = level.shape
    from numpy.lib.stride_tricks import sliding_window_view

    lv = np.vstack([level[1:], np.full((h, nc), -1, dtype=np.int64)])
    cv = np.vstack([covered[1:], np.zeros((h, nc), dtype=bool)])
    fmax = sliding_window_view(lv, h, axis=0)[:nw].max(axis=-1)
    fcov = sliding_window_view(cv, h, axis=0)[:nw].all(axis=-1)
    if role == "onset":
        at_risk = covered & (level < onset_level) & fcov
        event = fmax >= onset_level
    else:
        top = int(level.max()) if top_level is None else int(top_level)
        at_risk = covered & (level >= 1) & (level < top) & fcov
        event = fmax > level
    return at_risk, event & at_risk


def episodic_targets(impact: str, level: np.ndarray, mask: np.ndarray, base: dict, *, opts,
                     top_level: int, lags, flags) -> list[Target]:
    """Onset (and, for ladders of two or more levels, escalation) targets for each horizon.

    Options read: ``horizon_weeks`` (default [4, 13]) and ``onset_level`` (default 1).
    """
    k = int(opts.get("onset_level", 1))
    if not 1 <= k <= top_level:
        raise LinkError(
            f"[impacts.{impact}] onset_level must be between 1 and {top_level} (the ladder), "
            f"got {k}"
        )
    out = []
    for h in _horizons(opts, impact):
        # escalation needs a ladder with at least two levels
        for role in ("onset", "escalation") if top_level >= 2 else ("onset",):
            at_risk, event = risk_set(level, mask, horizon_weeks=h, role=role, onset_level=k,
                                      top_level=top_level)
            out.append(_target_from_grid(
                impact, f"{impact}:{role}:{h}w", role, "binary", ("no", "yes"), base, at_risk,
                values=event.astype(np.int64), extra={"state": level}, lags=list(lags),
                horizon=h, provenance={"onset_level": k, "at_risk": int(at_risk.sum()),
                                       "events": int(event[at_risk].sum()), "flags": flags}))
    return out


# --------------------------------------------------------------------------- frames
def _grid_columns(weeks, county_ids, region_of, level, mask, lags) -> dict[str, Any]:
    """Per-week columns of the grid (persistence, weeks since end, episode weeks), each (W, C),
    and under ``"_meta"`` the tuple ``(weeks, county_ids, region_of)`` that
    :func:`_target_from_grid` needs to label rows."""
    nw, nc = level.shape
    t = np.arange(nw)[:, None]
    known = np.where(mask, level.astype(float), np.nan)
    cols: dict[str, Any] = {"_meta": (weeks, county_ids, region_of)}
    for L in lags:
        p = np.full((nw, nc), np.nan)
        if L < nw:
            p[L:] = known[: nw - L]
        cols[f"persistence_{L}"] = p
    inf = (level >= 1) & mask
    last = np.maximum.accumulate(np.where(inf, t, -1), axis=0)
    unc = np.cumsum(~mask, axis=0)
    gap = unc - np.take_along_axis(unc, np.maximum(last, 0), axis=0) > 0
    wse = np.where(last >= 0, (t - last).astype(float), np.nan)
    wse[gap] = np.nan
    cols["weeks_since_end"] = np.where(inf, 0.0, wse)
    prev = np.vstack([np.zeros((1, nc), dtype=bool), level[:-1] >= 1])
    start = (level >= 1) & ~prev
    spos = np.maximum.accumulate(np.where(start, t, -1), axis=0)
    cols["episode_weeks"] = np.where(level >= 1, t - spos + 1, 0)
    return cols


def _target_from_grid(impact, name, role, kind, labels, base, rows_mask, *, values, extra, lags,
                      horizon, provenance) -> Target:
    w_idx, c_idx = np.nonzero(rows_mask)
    weeks_, county_ids, region_of = base["_meta"]
    cid = np.asarray(county_ids, dtype=object)[c_idx]
    time = weeks_[w_idx]
    frame = pd.DataFrame({
        "unit_id": cid, COUNTY: cid,
        "region": region_of.reindex(cid).to_numpy(),
        "time": time, "year": iso_year(time), "season": iso_season(time),
        "level": values[w_idx, c_idx].astype(np.int64),
    })
    for k, v in extra.items():
        frame[k] = v[w_idx, c_idx]
    for L in lags:
        frame[f"persistence_{L}"] = base[f"persistence_{L}"][w_idx, c_idx]
    frame["weeks_since_end"] = base["weeks_since_end"][w_idx, c_idx]
    if role == "state":
        frame["episode_weeks"] = base["episode_weeks"][w_idx, c_idx]
    frame["unit_id"] = frame["unit_id"].astype(str)
    frame[COUNTY] = frame[COUNTY].astype(str)
    prov = {"rows": len(frame), **provenance}
    return Target(name=name, impact=impact, kind=kind, grain="county_week", role=role,
                  frame=frame, levels=tuple(labels), rule=FeatureRule(),
                  horizon_weeks=int(horizon), provenance=prov)


def _episode_stats(level, mask) -> dict:
    inf = level >= 1
    prev = np.vstack([np.zeros((1, level.shape[1]), dtype=bool), inf[:-1]])
    n = int((inf & ~prev).sum())
    weeks_in = int(inf.sum())
    return {"episodes": n, "weeks_in_force": weeks_in,
            "mean_duration_weeks": (weeks_in / n) if n else None}


def _flags(opts) -> list[str]:
    f = []
    if opts.get("defined_by"):
        f.append(f"circular:{opts['defined_by']}")
    return f


def summarize(targets) -> pd.DataFrame:
    """One row per target: rows, events per level, years, units, risk-set size, flags."""
    rows = []
    for t in targets:
        fr = t.frame
        counts = fr["level"].value_counts().sort_index()
        rows.append({
            "target": t.name, "impact": t.impact, "role": t.role, "kind": t.kind,
            "grain": t.grain, "horizon_weeks": t.horizon_weeks, "rows": len(fr),
            "events": t.events,
            "events_by_level": ";".join(f"{int(k)}:{int(v)}" for k, v in counts.items()),
            "years": int(fr["year"].nunique()) if len(fr) else 0,
            "first_year": int(fr["year"].min()) if len(fr) else None,
            "last_year": int(fr["year"].max()) if len(fr) else None,
            "units": int(fr["unit_id"].nunique()) if len(fr) else 0,
            "at_risk": len(fr) if t.role in ("onset", "escalation") else None,
            "episodes": (t.provenance.get("episodes") or {}).get("episodes"),
            "mean_duration_weeks": (t.provenance.get("episodes") or {}).get(
                "mean_duration_weeks"),
            "flags": ";".join(t.provenance.get("flags", [])),
        })
    return pd.DataFrame(rows)
