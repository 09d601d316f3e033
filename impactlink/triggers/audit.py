"""The trigger stage in one call: uniform vs local thresholds, scores, firing audit, timelines."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd
from scipy.special import ndtr

from impactlink.errors import TriggerError
from impactlink.execution import thread_map
from impactlink.indices.timegrid import week_monday
from impactlink.link.target import Target
from impactlink.schema import COUNTY
from impactlink.triggers.replay import _check_values, _replay
from impactlink.triggers.scores import TriggerScores, _labels, _ratio, evaluate_trigger
from impactlink.triggers.tune import (
    DEFAULT_CANDIDATES,
    IndexScale,
    Objective,
    TuningResult,
    _check_choice,
    _tune_scopes,
)

__all__ = ["TriggerResult", "audit_triggers", "firing_rate_audit", "impact_grid", "TRIGGER_COLUMNS"]

#: Columns of ``triggers.csv``, in order.
TRIGGER_COLUMNS = (
    COUNTY, "region", "scope", "index", "scale_weeks", "threshold", "entry_weeks",
    "exit_weeks", "weeks_on_share", "below_share", "nominal_share", "activations", "hit_rate",
    "false_alarm_ratio", "peirce_skill", "csi", "lead_weeks_median", "lead_weeks_q1",
    "lead_weeks_q3", "events", "cv_peirce_skill",
)


@dataclass(frozen=True)
class TriggerResult:
    """Uniform and locally tuned trigger plans for one index and time scale.

    Attributes
    ----------
    index, scale_weeks : str, int
        The candidate the plans read.
    county_ids, regions : tuple of str
    uniform, local : TuningResult
        Threshold search results (``local`` is per county, shrunk toward the region, or per
        region, as chosen).
    uniform_scores, local_scores : TriggerScores
        In-sample scores of each plan replayed on the whole record, with lead times.
    firing : pandas.DataFrame
        Firing-rate audit per county for both plans (``scope`` column).
    timeline : pandas.DataFrame
        ``week, county_id, scope, index_value, threshold, trigger_on, impact_level`` for a few
        counties (the report's timeline plot).
    settings : dict
    """

    index: str
    scale_weeks: int
    county_ids: tuple[str, ...]
    regions: tuple[str, ...]
    uniform: TuningResult
    local: TuningResult
    uniform_scores: TriggerScores
    local_scores: TriggerScores
    firing: pd.DataFrame
    timeline: pd.DataFrame
    settings: dict = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        """Rows of ``triggers.csv``: one per county and plan, plus pooled rows (``"all"``)."""
        parts = []
        for scope, tuned, scores in [
            ("uniform", self.uniform, self.uniform_scores),
            ("local", self.local, self.local_scores),
        ]:
            t = scores.table
            fire = self.firing[self.firing["scope"] == scope]
            n = len(self.county_ids)
            is_uniform = scope == "uniform"
            cv = tuned.cv_scores["peirce_skill"].to_numpy() if tuned.cv_scores is not None else (
                np.full(n + 1, np.nan)
            )
            nominal = fire["nominal_share"].to_numpy()
            below = fire["below_share"].to_numpy()
            weeks = fire["weeks"].to_numpy()
            frame = pd.DataFrame(
                {
                    COUNTY: list(self.county_ids) + ["all"],
                    "region": list(self.regions) + [""],
                    "scope": scope,
                    "index": self.index,
                    "scale_weeks": int(self.scale_weeks),
                    "threshold": np.append(
                        tuned.thresholds,
                        tuned.thresholds[0] if is_uniform and n else np.nan,
                    ),
                    "entry_weeks": int(self.settings["entry_weeks"]),
                    "exit_weeks": int(self.settings["exit_weeks"]),
                    "weeks_on_share": t["weeks_on_share"].to_numpy(),
                    "below_share": np.append(
                        below, np.nansum(below * weeks) / max(weeks.sum(), 1)
                    ),
                    "nominal_share": np.append(
                        nominal, np.nanmean(nominal) if np.isfinite(nominal).any() else np.nan
                    ),
                    "activations": t["activations"].to_numpy(),
                    "hit_rate": t["hit_rate"].to_numpy(),
                    "false_alarm_ratio": t["false_alarm_ratio"].to_numpy(),
                    "peirce_skill": t["peirce_skill"].to_numpy(),
                    "csi": t["csi"].to_numpy(),
                    "lead_weeks_median": t["lead_weeks_median"].to_numpy(),
                    "lead_weeks_q1": t["lead_weeks_q1"].to_numpy(),
                    "lead_weeks_q3": t["lead_weeks_q3"].to_numpy(),
                    "events": t["episodes"].to_numpy(),
                    "cv_peirce_skill": cv,
                }
            )
            parts.append(frame)
        return pd.concat(parts, ignore_index=True)[list(TRIGGER_COLUMNS)]

    def timeline_frame(self) -> pd.DataFrame:
        return self.timeline.copy()


def audit_triggers(
    index_values: np.ndarray,
    impact_level: np.ndarray,
    *,
    weeks: pd.DatetimeIndex,
    county_ids: list[str] | tuple[str, ...],
    regions: list[str] | np.ndarray | None = None,
    index: str = "index",
    scale_weeks: int = 0,
    local_scope: Literal["county", "region"] = "county",
    objective: Objective = "peirce",
    candidates: np.ndarray = DEFAULT_CANDIDATES,
    max_false_alarm_ratio: float = 0.5,
    entry_weeks: int = 2,
    exit_weeks: int = 4,
    exit_offset: float = 0.0,
    window_weeks: int = 8,
    min_level: int = 1,
    shrink_events: float = 5.0,
    index_scale: IndexScale = "normal",
    timeline_counties: int | list[str] = 3,
    seed: int = 0,
    jobs: int = 1,
) -> TriggerResult:
    """Tune, replay and audit a uniform and a local trigger plan for one index and scale.

    Parameters
    ----------
    index_values, impact_level : ndarray, shape (weeks, counties)
        See :func:`tune_thresholds` (impact levels NaN or -1 where unknown; build them from a
        county-week state target with :func:`impact_grid`).
    weeks : pandas.DatetimeIndex
        Mondays of the rows (the IndexCube's weeks); fold years are their ISO years.
    county_ids : sequence of str
        Column labels.
    regions : sequence of str, optional
        Region of each county (shrinkage target and the ``region`` column).
    index, scale_weeks : str, int
        Labels written to ``triggers.csv``.
    local_scope : {"county", "region"}
        How the local plan is tuned.
    objective, candidates, max_false_alarm_ratio, entry_weeks, exit_weeks, exit_offset,
    window_weeks, min_level, shrink_events
        See :func:`tune_thresholds`.
    index_scale : {"normal", "percentile", "none"}
        Nominal firing rate (see :func:`firing_rate_audit`).
    timeline_counties : int or list of str, default 3
        Counties for the timeline frame; an integer n picks the county with the most impact
        episodes, then the ones where the uniform threshold is reached most and least often.
    seed : int
    jobs : int, default 1
        Threads for the threshold search (blocks of counties) and for the two plans' replays;
        every number is the same for any ``jobs``.

    Returns
    -------
    TriggerResult

    Raises
    ------
    TriggerError
        As :func:`tune_thresholds`; also for unknown timeline counties.

    Notes
    -----
    The scores in ``triggers.csv`` (hit rate, false-alarm ratio, Peirce skill, CSI, lead time)
    are in-sample for thresholds tuned on the same record and therefore optimistic;
    ``cv_peirce_skill`` is the held-out (leave-one-year-out) Peirce skill, the one to compare
    plans by. Triggers are statistical associations in past records, not causes; a plan is the
    responsible authority's decision.
    """
    values = _check_values(index_values, "index_values")
    if len(county_ids) != values.shape[1]:
        raise TriggerError(
            f"county_ids has {len(county_ids)} entries; index_values has {values.shape[1]} "
            "counties."
        )
    if local_scope not in ("county", "region"):
        raise TriggerError(f"local_scope must be 'county' or 'region'; got {local_scope!r}.")
    ids = tuple(str(c) for c in county_ids)
    regs = tuple("" for _ in ids) if regions is None else tuple(str(r) for r in regions)
    common = dict(
        weeks=weeks, candidates=candidates, objective=objective,
        max_false_alarm_ratio=max_false_alarm_ratio, regions=regions, entry_weeks=entry_weeks,
        exit_weeks=exit_weeks, exit_offset=exit_offset, window_weeks=window_weeks,
        min_level=min_level,
        shrink_events=shrink_events, county_ids=ids, seed=seed,
    )
    # the candidates are replayed and counted once for both scopes
    uniform, local = _tune_scopes(values, impact_level, ("uniform", local_scope), jobs=jobs,
                                  **common)

    def plan(item):
        scope, tuned = item
        on = _replay(
            values, tuned.thresholds, tuned.thresholds + exit_offset, entry_weeks, exit_weeks
        )
        scores = evaluate_trigger(
            on, impact_level, weeks=weeks, min_level=min_level, window_weeks=window_weeks,
            county_ids=ids,
        )
        fire = firing_rate_audit(values, tuned.thresholds, index_scale=index_scale, county_ids=ids)
        fire.insert(0, "scope", scope)
        return tuned, on, scores, fire

    # the two plans are independent: one thread each (results kept in this order)
    items = [("uniform", uniform), ("local", local)]
    plans = dict(zip(("uniform", "local"), thread_map(plan, items, jobs), strict=True))
    firing = pd.concat([plans["uniform"][3], plans["local"][3]], ignore_index=True)
    chosen = _timeline_counties(timeline_counties, ids, plans["uniform"][2], plans["uniform"][3])
    timeline = _timeline(values, impact_level, weeks, ids, chosen, plans)
    settings = {
        "entry_weeks": int(entry_weeks), "exit_weeks": int(exit_weeks),
        "exit_offset": float(exit_offset),
        "window_weeks": int(window_weeks), "min_level": int(min_level),
        "objective": objective, "local_scope": local_scope, "shrink_events": float(shrink_events),
        "index_scale": index_scale, "seed": int(seed),
    }
    return TriggerResult(
        index=str(index), scale_weeks=int(scale_weeks), county_ids=ids, regions=regs,
        uniform=uniform, local=local, uniform_scores=plans["uniform"][2],
        local_scores=plans["local"][2], firing=firing, timeline=timeline, settings=settings,
    )


def impact_grid(
    target: Target, weeks: pd.DatetimeIndex, county_ids: list[str] | tuple[str, ...]
) -> np.ndarray:
    """Impact levels of a county-week target on the index grid; NaN outside its coverage.

    Parameters
    ----------
    target : Target
        A county-week target (use the ``state`` role: every week in coverage, not only the
        weeks at risk of an onset).
    weeks : pandas.DatetimeIndex
        Mondays of the grid.
    county_ids : sequence of str

    Returns
    -------
    ndarray of float, shape (weeks, counties)
        Level of each week (the highest if a week appears twice); NaN where the target has no
        row (unknown, not "no impact").

    Raises
    ------
    TriggerError
        If the target is not on the county-week grain or lacks ``county_id``/``time``/``level``.
    """
    if target.grain != "county_week":
        raise TriggerError(
            f"target {target.name!r} is on the {target.grain!r} grain; trigger audits need a "
            "county_week target (the 'state' role of a weekly impact)."
        )
    missing = [c for c in (COUNTY, "time", "level") if c not in target.frame.columns]
    if missing:
        raise TriggerError(f"target {target.name!r} frame lacks columns {missing}.")
    f = target.frame
    w = pd.DatetimeIndex(weeks)
    monday = week_monday(f["time"])
    wp = np.asarray((monday - w[0]).days // 7, dtype=np.int64)
    ids = pd.Index([str(c) for c in county_ids])
    keys = f[COUNTY].astype(str)
    n_cols = len(ids)
    if ids.is_unique:  # one vectorised lookup instead of a Python loop over the rows
        cp = ids.get_indexer(keys).astype(np.int64)
    else:  # a repeated id: its last position, as before
        lookup = {c: i for i, c in enumerate(ids)}
        cp = np.array([lookup.get(c, -1) for c in keys], dtype=np.int64)
        n_cols = len(lookup)
    ok = (wp >= 0) & (wp < len(w)) & (cp >= 0)
    lev = f["level"].to_numpy(dtype=np.float64)
    ok &= np.isfinite(lev)
    grid = np.full((len(w), n_cols), -np.inf)
    np.maximum.at(grid, (wp[ok], cp[ok]), lev[ok])
    grid[np.isneginf(grid)] = np.nan
    return grid


def firing_rate_audit(
    index_values: np.ndarray,
    threshold: float | np.ndarray,
    *,
    index_scale: IndexScale = "normal",
    county_ids: list[str] | tuple[str, ...] | None = None,
) -> pd.DataFrame:
    """How often a threshold is reached in each county, against how often it should be.

    Parameters
    ----------
    index_values : ndarray, shape (weeks, counties)
        Index values; NaN weeks are left out.
    threshold : float or ndarray of shape (counties,)
        Threshold in index units.
    index_scale : {"normal", "percentile", "none"}
        How to get the nominal share: standardized index -> :math:`\\Phi(\\theta)`; percentile
        indicator (0-100) -> :math:`\\theta/100`; "none" -> NaN (no nominal rate).
    county_ids : sequence of str, optional

    Returns
    -------
    pandas.DataFrame
        ``county, threshold, weeks, below_share, nominal_share, share_ratio, z_binomial``:
        share of finite weeks at or below the threshold, the nominal share, their ratio, and
        :math:`(\\hat p - p_0)/\\sqrt{p_0(1-p_0)/n}` (a rough guide only: weekly values are
        autocorrelated, so the effective n is smaller and |z| is overstated).

    Raises
    ------
    TriggerError
        On a bad shape, threshold or ``index_scale``.

    Notes
    -----
    If a standardized index is well calibrated in every county, a uniform threshold is reached
    in the same share of weeks everywhere (that is the purpose of standardizing: McKee et al.
    1993). Departures show fitted distributions that do not match the local climate (many
    zero-precipitation weeks in dry counties, short calibration records) or raw indicators
    whose scale differs between places; local thresholds equalise the firing rate.

    References
    ----------
    McKee, T. B., Doesken, N. J., & Kleist, J. (1993). The relationship of drought frequency and
    duration to time scales. Proceedings of the 8th Conference on Applied Climatology, American
    Meteorological Society, 179-184.
    """
    values = _check_values(index_values, "index_values")
    n_counties = values.shape[1]
    thr = np.asarray(threshold, dtype=np.float64)
    if thr.ndim == 0:
        thr = np.full(n_counties, float(thr))
    if thr.shape != (n_counties,) or not np.all(np.isfinite(thr)):
        raise TriggerError(
            f"threshold must be a finite number or one per county (shape ({n_counties},)); got "
            f"shape {thr.shape}."
        )
    _check_choice(index_scale, ("normal", "percentile", "none"), "index_scale")
    finite = np.isfinite(values)
    n = finite.sum(axis=0)
    with np.errstate(invalid="ignore"):
        below = (values <= thr).sum(axis=0)
    share = _ratio(below, n)
    if index_scale == "normal":
        nominal = ndtr(thr)
    elif index_scale == "percentile":
        nominal = thr / 100.0
    else:
        nominal = np.full(n_counties, np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        z = (share - nominal) / np.sqrt(nominal * (1 - nominal) / n)
    return pd.DataFrame(
        {
            "county": _labels(county_ids, n_counties),
            "threshold": thr,
            "weeks": n,
            "below_share": share,
            "nominal_share": nominal,
            "share_ratio": _ratio(share, nominal),
            "z_binomial": z,
        }
    )


# --------------------------------------------------------------------------- private steps
def _timeline_counties(choice, ids, scores: TriggerScores, fire: pd.DataFrame) -> list[str]:
    if isinstance(choice, (int, np.integer)) and not isinstance(choice, bool):
        n = max(0, int(choice))
        episodes = scores.table["episodes"].to_numpy()[:-1]
        share = fire["below_share"].to_numpy()
        order = [int(np.argmax(episodes))] if len(ids) else []
        if np.isfinite(share).any():
            order += [int(np.nanargmax(share)), int(np.nanargmin(share))]
        order += list(np.argsort(-episodes, kind="stable"))
        picked: list[str] = []
        for i in order:
            if ids[i] not in picked:
                picked.append(ids[i])
            if len(picked) >= n:
                break
        return picked
    unknown = [c for c in choice if str(c) not in ids]
    if unknown:
        raise TriggerError(f"timeline_counties {unknown} are not among the county_ids.")
    return [str(c) for c in choice]


def _timeline(values, impact_level, weeks, ids, chosen, plans) -> pd.DataFrame:
    pos = [ids.index(c) for c in chosen]
    lev = np.asarray(impact_level, dtype=np.float64)
    lev = np.where(lev < 0, np.nan, lev)
    parts = []
    for scope in ("uniform", "local"):
        tuned, on = plans[scope][0], plans[scope][1]
        for p in pos:  # a handful of counties for a plot
            parts.append(
                pd.DataFrame(
                    {
                        "week": pd.DatetimeIndex(weeks),
                        COUNTY: ids[p],
                        "scope": scope,
                        "index_value": values[:, p],
                        "threshold": tuned.thresholds[p],
                        "trigger_on": on[:, p],
                        "impact_level": lev[:, p],
                    }
                )
            )
    if not parts:
        return pd.DataFrame(
            columns=["week", COUNTY, "scope", "index_value", "threshold", "trigger_on",
                     "impact_level"]
        )
    return pd.concat(parts, ignore_index=True)
