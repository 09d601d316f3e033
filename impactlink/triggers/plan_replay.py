"""Replay a trigger plan: the weekly stage of every unit over the whole record.

Computation is vectorised over (weeks, units): thresholds, rule tests, combinations and entry
persistence are whole-array operations. Only the stage walk itself loops over weeks, because
the exit rules (exit run counted while in the stage, minimum weeks in stage, one step down at a
time) make week t depend on the stage at week t-1; each step of that loop is a handful of numpy
operations over all units at once.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from impactlink.errors import TriggerError
from impactlink.schema import COUNTY, REGION, WEEK
from impactlink.triggers.kernels import ColumnPercentiles, stage_walk, trailing_sum, walk_stages
from impactlink.triggers.plan import PlanRule, PlanStage, TriggerPlan

__all__ = [
    "PlanReplay",
    "replay_plan",
    "plan_units",
    "ladder_tests",
    "ladder_walk",
    "rule_thresholds",
    "combine_rules",
    "persistence_met",
    "walk_stages",
    "REPLAY_COLUMNS",
]

#: Columns of ``trigger_plan_replay.csv``.
REPLAY_COLUMNS = ("unit", REGION, WEEK, "stage", "stage_name", "change", "driving_indicators")


@dataclass(frozen=True)
class PlanReplay:
    """Weekly stages of a replayed plan.

    Attributes
    ----------
    plan : TriggerPlan
    weeks : pandas.DatetimeIndex
        Mondays of the rows.
    unit_ids, unit_regions : tuple of str
        Columns: counties, regions or the one plan area (``plan.unit``).
    members : ndarray of float, shape (counties, units)
        1 where a county belongs to a unit (county order of the cube).
    stage : ndarray of int8, shape (weeks, units)
        0 = no stage; s = the s-th stage of ``plan.stages``.
    values : dict
        Indicator name -> (weeks, units) values on the unit grid.
    enter_thresholds, exit_thresholds : dict
        (stage position, rule position) -> (weeks, units) thresholds in index units.
    changes : pandas.DataFrame
        One row per change of stage: ``unit, week, from_stage, to_stage, change``
        ("enter" or "exit") and ``driving_indicators`` ("+"-joined indicator names: the rules
        of the entered stage beyond their entry thresholds, or the rules of the left stage back
        across their exit thresholds).
    """

    plan: TriggerPlan
    weeks: pd.DatetimeIndex
    unit_ids: tuple[str, ...]
    unit_regions: tuple[str, ...]
    members: np.ndarray
    stage: np.ndarray
    values: dict[str, np.ndarray]
    enter_thresholds: dict[tuple[int, int], np.ndarray]
    exit_thresholds: dict[tuple[int, int], np.ndarray]
    changes: pd.DataFrame

    def to_frame(self) -> pd.DataFrame:
        """Rows of ``trigger_plan_replay.csv``: one per unit and week."""
        n_t, n_u = self.stage.shape
        names = np.array(("",) + self.plan.stage_names, dtype=object)
        frame = pd.DataFrame({
            "unit": np.tile(np.array(self.unit_ids, dtype=object), n_t),
            REGION: np.tile(np.array(self.unit_regions, dtype=object), n_t),
            WEEK: np.repeat(self.weeks.to_numpy(), n_u),
            "stage": self.stage.ravel().astype(np.int64),
            "stage_name": names[self.stage.ravel()],
            "change": "",
            "driving_indicators": "",
        })
        if len(self.changes):
            t = self.weeks.get_indexer(pd.DatetimeIndex(self.changes[WEEK]))
            u = pd.Index(self.unit_ids).get_indexer(self.changes["unit"])
            pos = t * n_u + u
            frame.loc[pos, "change"] = self.changes["change"].to_numpy()
            frame.loc[pos, "driving_indicators"] = self.changes["driving_indicators"].to_numpy()
        return frame[list(REPLAY_COLUMNS)]


def replay_plan(plan: TriggerPlan, *, cube, counties: pd.DataFrame, jobs: int = 1) -> PlanReplay:
    """Replay a trigger plan over the whole record of an :class:`~impactlink.indices.IndexCube`.

    Parameters
    ----------
    plan : TriggerPlan
    cube : IndexCube
        Weekly index values; every plan indicator must be one of its (index, scale) arrays.
    counties : pandas.DataFrame
        ``county_id`` and ``region`` of every county (regions set region units and region
        overrides).
    jobs : int, default 1
        Threads for the stage walk (blocks of units; the stages are the same for any
        ``jobs``).

    Returns
    -------
    PlanReplay

    Raises
    ------
    TriggerError
        If an indicator is not in the cube, a plan county is unknown, or a percent-of-normal
        rule reads an indicator whose normal is not positive.

    Notes
    -----
    Unit values: a county unit reads its own column; a region or a list of counties reads the
    mean over its counties with a value that week. Thresholds are converted to index units per
    unit: a percentile threshold p is the p-th percentile of the unit's own record (all weeks,
    linear interpolation, Hyndman & Fan 1996 type 7); a percent-of-normal threshold q is
    q/100 times the unit's mean for the same ISO week of the year. A rule holds in a week when
    its indicator is at or beyond the threshold on the dry side; a missing value never holds and
    breaks exit runs (a gap neither starts nor ends a stage).

    Stage walk (per unit, all units at once): the unit moves up to the highest stage whose entry
    persistence is met, if higher than its stage; otherwise it moves down one stage when the
    current stage's exit condition (its combination fails at the exit thresholds, all
    indicators known) has held for ``exit_weeks`` consecutive weeks since it entered the stage
    and it has spent ``min_weeks`` in it. This is the staged, hysteretic form common in state
    drought plans (common practice; e.g. Steinemann et al. 2015).

    References
    ----------
    Hyndman, R. J., Fan, Y. (1996). Sample quantiles in statistical packages. The American
    Statistician 50(4), 361-365.
    Steinemann, A., Iacobellis, S. F., Cayan, D. R. (2015). Developing and evaluating drought
    indicators for decision-making. Journal of Hydrometeorology 16(4), 1793-1803.
    https://doi.org/10.1175/JHM-D-14-0234.1
    """
    ids, regions, members = plan_units(plan, cube.county_ids, counties)
    weeks = pd.DatetimeIndex(cube.weeks)
    values = {}
    for ind in plan.indicators:
        key = (ind.index, int(ind.scale_weeks))
        if key not in cube.arrays:
            raise TriggerError(
                f"{plan.source}: key indicators.{ind.name}: no index {ind.index!r} at "
                f"{ind.scale_weeks} weeks in this run; write one of {cube.keys} or add it "
                "to [indices]."
            )
        values[ind.name] = _unit_mean(cube.arrays[key], members)
    _check_override_regions(plan, regions)
    month = weeks.month.to_numpy() - 1
    woy = np.minimum(weeks.isocalendar().week.to_numpy(dtype=np.int64), 52) - 1
    enter_thr: dict[tuple[int, int], np.ndarray] = {}
    exit_thr: dict[tuple[int, int], np.ndarray] = {}
    pct: dict = {}  # one column sort per indicator serves all its percentile rules
    for s, st in enumerate(plan.stages):
        for j, rule in enumerate(st.rules):
            if rule.kind == "percentile" and rule.indicator not in pct:
                pct[rule.indicator] = ColumnPercentiles(values[rule.indicator])
            for which, store in (("enter", enter_thr), ("exit", exit_thr)):
                store[(s, j)] = rule_thresholds(rule, which, values[rule.indicator], regions,
                                                month, woy, source=plan.source, where=(s, j),
                                                percentiles=pct.get(rule.indicator))
    beyond_enter, beyond_exit, known = ladder_tests(plan, values, enter_thr, exit_thr)
    stage = ladder_walk(plan, beyond_enter, beyond_exit, known, jobs=jobs)
    changes = _changes(stage, beyond_enter, beyond_exit, plan, weeks, ids)
    return PlanReplay(
        plan=plan, weeks=weeks, unit_ids=ids, unit_regions=regions, members=members,
        stage=stage, values=values, enter_thresholds=enter_thr, exit_thresholds=exit_thr,
        changes=changes,
    )


def ladder_tests(plan: TriggerPlan, values: dict, enter_thr: dict, exit_thr: dict):
    """Rule tests of every stage: lists (one per stage) of (rules, weeks, ...) arrays.

    Returns ``beyond_enter`` (rule at or beyond its entry threshold), ``beyond_exit`` (at or
    beyond its exit threshold) and ``known`` ((weeks, ...): every rule's indicator finite).
    Values and thresholds broadcast (e.g. (weeks, 1, units) against (weeks, candidates, units)).
    """
    be_all, bx_all, known = [], [], []
    for s, st in enumerate(plan.stages):
        be, bx, kn = [], [], []
        for j, rule in enumerate(st.rules):
            x = values[rule.indicator]
            low = plan.indicator(rule.indicator).dry == "low"
            e, x_, f = np.broadcast_arrays(enter_thr[(s, j)], exit_thr[(s, j)], x)
            be.append(_beyond(f, e, low))
            bx.append(_beyond(f, x_, low))
            kn.append(np.isfinite(f))
        shape = np.broadcast_shapes(*(b.shape for b in be))
        be_all.append(np.stack([np.broadcast_to(b, shape) for b in be]))
        bx_all.append(np.stack([np.broadcast_to(b, shape) for b in bx]))
        known.append(np.all([np.broadcast_to(k, shape) for k in kn], axis=0))
    return be_all, bx_all, known


def ladder_walk(plan: TriggerPlan, beyond_enter, beyond_exit, known, *, entry_ready=None,
                jobs: int = 1):
    """Stages (weeks, ...) from the rule tests of :func:`ladder_tests`.

    ``entry_ready`` (stage position -> (weeks, ...) bool) replaces the entry persistence of
    some stages (used by tuning to try several entry rules at once). ``jobs`` threads walk
    blocks of the trailing cells (:func:`walk_stages`).
    """
    entry_ready = entry_ready or {}
    ready = [entry_ready[s] if s in entry_ready else persistence_met(
        combine_rules(beyond_enter[s], st), st.enter_weeks, st.enter_window)
        for s, st in enumerate(plan.stages)]
    exit_cond = [~combine_rules(beyond_exit[s], st) & known[s] for s, st in enumerate(plan.stages)]
    exit_weeks = np.array([st.exit_weeks for st in plan.stages])
    min_weeks = np.array([st.min_weeks for st in plan.stages])
    return stage_walk(ready, exit_cond, exit_weeks, min_weeks, jobs=jobs)


def plan_units(
    plan: TriggerPlan, county_ids, counties: pd.DataFrame
) -> tuple[tuple[str, ...], tuple[str, ...], np.ndarray]:
    """Unit ids, unit regions and the (counties, units) membership matrix of a plan."""
    ids = [str(c) for c in county_ids]
    if COUNTY not in counties.columns or REGION not in counties.columns:
        raise TriggerError(
            f"counties table lacks {COUNTY!r} or {REGION!r}; pass the counties table of the run."
        )
    region_of = dict(zip(counties[COUNTY].astype(str), counties[REGION].astype(str)))
    county_region = np.array([region_of.get(c, "") for c in ids], dtype=object)
    if plan.unit == "county":
        return tuple(ids), tuple(county_region), np.eye(len(ids))
    if plan.unit == "region":
        uniq = sorted(set(county_region))
        members = (county_region[:, None] == np.array(uniq, dtype=object)[None, :])
        return tuple(uniq), tuple(uniq), members.astype(float)
    unknown = [c for c in plan.counties if c not in ids]
    if unknown:
        raise TriggerError(
            f"{plan.source}: key plan.counties: {unknown} are not counties of this run; write "
            f"county ids from the counties table (e.g. {ids[:3]})."
        )
    members = np.isin(np.array(ids), np.array(plan.counties)).astype(float)[:, None]
    regs = sorted({county_region[ids.index(c)] for c in plan.counties})
    return (plan.unit_name,), (regs[0] if len(regs) == 1 else "",), members


def combine_rules(beyond: np.ndarray, stage: PlanStage) -> np.ndarray:
    """Whether a stage's rules hold together: ``beyond`` is (rules, weeks, ...) boolean.

    "all": every rule; "any": at least one; "k_of_n": at least ``stage.k``; "weights": the
    weights of the rules that hold sum to at least ``stage.min_weight``.
    """
    if stage.combine == "all":
        return np.asarray(beyond.all(axis=0))
    if stage.combine == "any":
        return np.asarray(beyond.any(axis=0))
    if stage.combine == "k_of_n":  # rules held, added as bytes (a stage has few rules)
        held = np.zeros(beyond.shape[1:], dtype=np.uint8 if len(beyond) < 256 else np.int64)
        for b in beyond:
            held += b.view(np.uint8) if held.dtype == np.uint8 else b
        return held >= stage.k
    # weights of the rules that hold, added rule by rule in rule order (as a sum over axis 0)
    w = np.array([r.weight for r in stage.rules], dtype=float)
    total = beyond[0] * w[0]
    for b, wr in zip(beyond[1:], w[1:], strict=True):
        total += b * wr
    return total >= stage.min_weight - 1e-12


def persistence_met(cond: np.ndarray, n: int, m: int) -> np.ndarray:
    """True where ``cond`` held in at least ``n`` of the last ``m`` weeks (axis 0), this week
    included; ``n == m`` = n consecutive weeks. Weeks before the record count as not held."""
    return trailing_sum(cond, m) >= n


# --------------------------------------------------------------------------- private steps
def _check_override_regions(plan: TriggerPlan, regions) -> None:
    have = sorted(set(regions))
    for s, st in enumerate(plan.stages, start=1):
        for j, rule in enumerate(st.rules, start=1):
            for k, o in enumerate(rule.overrides, start=1):
                if o.region is not None and o.region not in have:
                    raise TriggerError(
                        f"{plan.source}: key stage[{s}] (\"{st.name}\").rule[{j}].override[{k}]"
                        f".region: {o.region!r} is not a region of the plan's units; write one "
                        f"of {have}."
                    )


def _unit_mean(x: np.ndarray, members: np.ndarray) -> np.ndarray:
    if members.shape[0] == members.shape[1] and np.array_equal(members, np.eye(len(members))):
        return np.asarray(x, dtype=np.float64)
    finite = np.isfinite(x)
    num = np.where(finite, x, 0.0) @ members
    den = finite.astype(float) @ members
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


def rule_thresholds(rule: PlanRule, which: str, x: np.ndarray, regions, month, woy, *,
                    source: str = "<plan>", where: tuple[int, int] = (0, 0),
                    percentiles=None) -> np.ndarray:
    """(weeks, units) threshold of one rule in index units (see :func:`replay_plan`, Notes).

    ``which`` is "enter" or "exit"; ``month`` (0-11) and ``woy`` (ISO week of year 0-51) are
    per row; ``regions`` per unit. ``percentiles`` (q -> (len(q), units)), when given, stands
    for ``np.nanpercentile(x, q, axis=0)`` (e.g. a
    :class:`~impactlink.triggers.kernels.ColumnPercentiles` of ``x``, sorted once for many
    rules).
    """
    s, j = where
    base = rule.enter if which == "enter" else rule.exit
    table = np.full((12, x.shape[1]), float(base))
    reg = np.array(regions, dtype=object)
    for o in rule.overrides:
        v = o.enter if which == "enter" else o.exit
        if v is None:
            continue
        rows = np.array(o.months, dtype=np.int64) - 1 if o.months else np.arange(12)
        cols = reg == o.region if o.region is not None else np.ones(x.shape[1], dtype=bool)
        table[np.ix_(rows, np.flatnonzero(cols))] = float(v)
    if rule.kind == "value":
        return table[month]
    if rule.kind == "percentile":
        uniq, inv = np.unique(table, return_inverse=True)
        # no warnings filter here: catch_warnings is process-wide and this runs on threads;
        # ColumnPercentiles leaves all-NaN units NaN without numpy's all-NaN warning
        q = (percentiles or ColumnPercentiles(x))(uniq)  # (values, units)
        q = q.reshape(len(uniq), -1)
        conv = q[inv.reshape(table.shape), np.arange(x.shape[1])[None, :]]
        return conv[month]
    normal = _weekly_normal(x, woy)
    if np.any(np.isfinite(normal) & (normal <= 0)):
        raise TriggerError(
            f"{source}: key stage[{s + 1}].rule[{j + 1}].kind: percent_of_normal needs an "
            f"indicator whose normal is positive; {rule.indicator!r} has normals <= 0. Write "
            'kind = "value" or "percentile" for a standardized index.'
        )
    return table[month] / 100.0 * normal[woy]


def _weekly_normal(x: np.ndarray, woy: np.ndarray) -> np.ndarray:
    """Mean of each unit for each ISO week of the year (weeks 52 and 53 together)."""
    finite = np.isfinite(x)
    onehot = np.zeros((52, len(woy)))
    onehot[woy, np.arange(len(woy))] = 1.0
    num = onehot @ np.where(finite, x, 0.0)
    den = onehot @ finite.astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


def _beyond(x: np.ndarray, thr: np.ndarray, low: bool) -> np.ndarray:
    with np.errstate(invalid="ignore"):
        return (x <= thr) if low else (x >= thr)


def _changes(stage, beyond_enter, beyond_exit, plan, weeks, ids) -> pd.DataFrame:
    prev = np.zeros_like(stage)
    prev[1:] = stage[:-1]
    t, u = np.nonzero(stage != prev)
    to, fr = stage[t, u].astype(np.int64), prev[t, u].astype(np.int64)
    up = to > fr
    drivers = np.empty(len(t), dtype=object)
    for s, st in enumerate(plan.stages):  # a few stages; each is one vectorised lookup
        names = [r.indicator for r in st.rules]
        for is_up, arr in ((True, beyond_enter[s]), (False, ~beyond_exit[s])):
            sel = np.flatnonzero((up == is_up) & (np.where(up, to, fr) == s + 1))
            if not sel.size:
                continue
            bits = arr[:, t[sel], u[sel]]  # (rules, changes)
            code = (bits * (1 << np.arange(len(names)))[:, None]).sum(axis=0)
            label = {c: "+".join(n for k, n in enumerate(names) if c >> k & 1)
                     for c in np.unique(code)}
            drivers[sel] = [label[c] for c in code]
    return pd.DataFrame({
        "unit": np.array(ids, dtype=object)[u], WEEK: weeks[t], "from_stage": fr,
        "to_stage": to, "change": np.where(up, "enter", "exit"),
        "driving_indicators": drivers,
    })
