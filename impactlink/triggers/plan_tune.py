"""Tune one rule of a plan stage against an impact, and compare uniform with local thresholds.

Every candidate (entry threshold x entry weeks) is replayed at once through the whole ladder
(arrays of weeks x candidates x units), so the tuned stage keeps its place among the others.
Counts are summed per year, which makes the year-block bootstrap and leave-one-year-out
re-tuning a matter of weighted sums.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from impactlink.errors import TriggerError
from impactlink.execution import thread_map
from impactlink.schema import COUNTY, REGION
from impactlink.skill.folds import leave_one_year_out, year_bootstrap_weights
from impactlink.skill.scores import ContingencyScores
from impactlink.triggers.kernels import ColumnPercentiles, col_percentiles
from impactlink.triggers.plan import PlanTuning
from impactlink.triggers.plan_replay import (
    PlanReplay,
    combine_rules,
    ladder_tests,
    ladder_walk,
    persistence_met,
    rule_thresholds,
)
from impactlink.triggers.plan_scores import unit_impacts

__all__ = ["StageTuning", "tune_stage", "uniform_vs_local", "relative_economic_value"]

#: Cells (weeks x candidates x units) of one block of units in :func:`tune_stage`.
_MAX_CELLS = 8_000_000
_COUNTS = ("hits", "false_alarms", "misses", "correct_negatives", "entries", "weeks_on")


def relative_economic_value(hit_rate, false_alarm_rate, base_rate, cost_loss_ratio):
    """Relative economic value of yes/no warnings for a user with cost/loss ratio C/L.

    Higher is better. 1 = as valuable as a perfect forecast; 0 = no better than the best of
    "always protect" and "never protect" (climatology); negative = worse.

    Parameters
    ----------
    hit_rate, false_alarm_rate, base_rate : array_like
        H = a/(a+c), F = b/(b+d) and the base rate o = (a+c)/n of the 2x2 table.
    cost_loss_ratio : array_like
        alpha = C/L, in (0, 1): the cost of protecting over the loss it avoids.

    Returns
    -------
    ndarray

    Notes
    -----
    Richardson (2000), eq. (8):

    .. math:: V = \\frac{\\min(\\alpha, \\bar o) - F\\alpha(1-\\bar o) + H\\bar o(1-\\alpha)
              - \\bar o}{\\min(\\alpha, \\bar o) - \\bar o\\alpha}

    Its maximum over alpha is at :math:`\\alpha = \\bar o`, where V = H - F (the Peirce skill
    score).

    References
    ----------
    Richardson, D. S. (2000). Skill and relative economic value of the ECMWF ensemble
    prediction system. Quarterly Journal of the Royal Meteorological Society 126(563),
    649-667. https://doi.org/10.1002/qj.49712656313

    Examples
    --------
    >>> round(float(relative_economic_value(0.6, 0.1, 0.2, 0.2)), 12)  # alpha = o: V = H - F
    0.5
    """
    h, f, o, a = (np.asarray(v, dtype=np.float64) for v in
                  (hit_rate, false_alarm_rate, base_rate, cost_loss_ratio))
    clim = np.minimum(a, o)
    den = clim - o * a
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, (clim - f * a * (1 - o) + h * o * (1 - a) - o) /
                        np.where(den > 0, den, 1.0), np.nan)


@dataclass(frozen=True)
class StageTuning:
    """Result of :func:`tune_stage`.

    Attributes
    ----------
    curve : pandas.DataFrame
        One row per candidate: ``threshold`` (in the rule's kind), ``enter_weeks``, the weekly
        2x2 counts and ``hit_rate``, ``false_alarm_ratio``, ``false_alarm_rate``,
        ``peirce_skill_score``, ``economic_value``, ``weeks_in_stage_share`` (share of
        unit-weeks at the stage or higher), ``entries_per_unit_year``, ``objective_value`` and
        ``chosen`` (True on the chosen row).
    summary : pandas.DataFrame
        One row per quantity (``threshold``, ``enter_weeks``, ``peirce_skill_score``,
        ``economic_value``, ``entries_per_unit_year``): ``estimate`` (whole record), ``lo``,
        ``hi`` (year-block bootstrap interval) and ``held_out`` (skill scored on years left out
        of the tuning, leave-one-year-out).
    folds : pandas.DataFrame
        ``year, threshold, enter_weeks`` chosen without that year.
    settings : dict
    """

    curve: pd.DataFrame
    summary: pd.DataFrame
    folds: pd.DataFrame
    settings: dict


def tune_stage(
    replay: PlanReplay,
    impact_level: np.ndarray,
    tuning: PlanTuning,
    *,
    exposed: np.ndarray | None = None,
    min_level: int = 1,
    seed: int = 0,
    jobs: int = 1,
) -> StageTuning:
    """Search the entry threshold of one rule and the entry weeks of one stage.

    Parameters
    ----------
    replay : PlanReplay
        The plan replayed as written (gives values, units and the other thresholds).
    impact_level : ndarray, shape (weeks, counties)
        As :func:`~impactlink.triggers.plan_scores.score_plan`.
    tuning : PlanTuning
        Stage, rule, candidate thresholds (in the rule's kind), candidate entry weeks (default:
        the stage's), objective, cost/loss ratio, target frequency, bootstrap size and coverage.
    exposed : ndarray of bool, optional
        Where the impact could be recorded (as in ``score_plan``).
    min_level : int, default 1
    seed : int, default 0
        Seed of the year-block bootstrap.
    jobs : int, default 1
        Threads for the blocks of units (the counts are the same for any ``jobs``).

    Returns
    -------
    StageTuning

    Raises
    ------
    TriggerError
        For an unknown stage or rule, or a record with fewer than 3 years.

    Notes
    -----
    A candidate replaces the rule's entry threshold everywhere (its month and region overrides
    are dropped) and moves its exit threshold with it (the same distance); a candidate number of
    entry weeks n keeps the stage's slack (n of the last n + enter_window - enter_weeks). The
    yes forecast is "at this stage or higher". Objectives: ``peirce`` (weekly Peirce skill
    score, Wilks 2011 eq. 8.18), ``economic_value`` (:func:`relative_economic_value` at the
    stated C/L; Richardson 2000), ``frequency`` (entries per unit and year closest to
    1/``once_in_years``: the percentile approach of Steinemann et al. 2015). Ties go to the
    first candidate in (threshold, entry weeks) order.

    Bootstrap: whole years resampled with replacement
    (:func:`~impactlink.skill.folds.year_bootstrap_weights`); in each replicate the search is
    repeated (interval of the tuned threshold) and the chosen candidate re-scored (interval of
    its skill). Held-out: the search is repeated without each year
    (:func:`~impactlink.skill.folds.leave_one_year_out`) and that year scored with the choice.

    References
    ----------
    Richardson, D. S. (2000). Q. J. R. Meteorol. Soc. 126, 649-667.
    Steinemann, A., Iacobellis, S. F., Cayan, D. R. (2015). Journal of Hydrometeorology 16(4),
    1793-1803. https://doi.org/10.1175/JHM-D-14-0234.1
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed.
    """
    plan = replay.plan
    s = next((i for i, st in enumerate(plan.stages) if st.name == tuning.stage), None)
    if s is None:
        raise TriggerError(f"{plan.source}: key tune.stage: {tuning.stage!r} is not a stage; "
                           f"write one of {list(plan.stage_names)}.")
    stage = plan.stages[s]
    j = next((i for i, r in enumerate(stage.rules) if r.indicator == tuning.rule), None)
    if j is None:
        raise TriggerError(f"{plan.source}: key tune.rule: {tuning.rule!r} is not a rule of "
                           f"{stage.name!r}; write one of {[r.indicator for r in stage.rules]}.")
    rule = stage.rules[j]
    persist = tuning.enter_weeks or (stage.enter_weeks,)
    grid = [(float(c), int(p)) for c in tuning.candidates for p in persist]
    thr = np.array([g[0] for g in grid])
    gap = rule.exit - rule.enter
    cand_rules = [replace(rule, enter=c, exit=c + gap, overrides=()) for c in tuning.candidates]
    impact, counted = unit_impacts(replay, impact_level, exposed=exposed, min_level=min_level)
    years = replay.weeks.isocalendar().year.to_numpy(dtype=np.int64)
    n_weeks, n_units = len(replay.weeks), len(replay.unit_ids)
    # units in blocks: the (weeks, candidates, units) arrays of a national record would hold
    # billions of cells; every unit's ladder is walked on its own, so the counts of the
    # blocks add up to those of all units at once
    step = max(1, _MAX_CELLS // max(1, n_weeks * len(grid)))
    blocks = [slice(lo, min(n_units, lo + step)) for lo in range(0, n_units, step)]
    # blocks run on `jobs` threads (one block: its walk does); counts are added in block order
    walk_jobs = jobs if len(blocks) == 1 else 1

    def block_counts(sl: slice) -> dict[str, np.ndarray]:
        on = _candidate_on(_unit_block(replay, sl), s, j, cand_rules, [g[1] for g in grid],
                           len(persist), jobs=walk_jobs)
        return _year_counts(on, impact[:, sl], counted[:, sl], years)[0]

    parts = thread_map(block_counts, blocks, jobs)
    per_year = {k: sum(p[k] for p in parts[1:]) + parts[0][k] for k in parts[0]}
    uniq_years = np.unique(years)
    choose = _Objective(tuning, n_units)
    total = {k: v.sum(axis=0) for k, v in per_year.items()}
    score_all = choose(total, len(uniq_years))
    k_best = int(np.nanargmax(np.where(np.isnan(score_all), -np.inf, score_all)))
    curve = _curve(total, thr, [g[1] for g in grid], choose, len(uniq_years), n_units,
                   n_weeks)
    curve["objective_value"] = score_all
    curve["chosen"] = np.arange(len(grid)) == k_best
    summary, folds = _intervals(per_year, uniq_years, grid, choose, k_best, tuning, seed)
    settings = {"stage": stage.name, "rule": rule.indicator, "kind": rule.kind,
                "objective": tuning.objective, "cost_loss_ratio": tuning.cost_loss_ratio,
                "once_in_years": tuning.once_in_years, "n_boot": tuning.n_boot,
                "ci": tuning.ci, "seed": int(seed), "years": len(uniq_years)}
    return StageTuning(curve=curve, summary=summary, folds=folds, settings=settings)


def uniform_vs_local(
    replay: PlanReplay,
    impact_level: np.ndarray,
    tuning: PlanTuning,
    *,
    exposed: np.ndarray | None = None,
    min_level: int = 1,
    jobs: int = 1,
) -> pd.DataFrame:
    """One statewide threshold against per-unit thresholds at the same local percentile.

    The tuned rule's entry threshold is set (a) per unit to the ``tuning.local_percentile``-th
    (10th when not given) percentile of the unit's own record, (b) to one value for all units, the same percentile of
    all units' values pooled; exit thresholds keep the rule's distance (in percentile points for
    the local plan, in index units at the pooled percentile for the uniform one). Both plans are
    replayed through the whole ladder.

    Returns
    -------
    pandas.DataFrame
        One row per unit and plan (``plan`` = "uniform" or "local") plus pooled rows
        (``unit`` = "all"): ``threshold_value`` (index units), ``weeks_in_stage_share``,
        ``entries_per_decade``, weekly 2x2 counts, ``hit_rate``, ``false_alarm_ratio``,
        ``peirce_skill_score``.
    """
    plan = replay.plan
    s = plan.stage_names.index(tuning.stage)
    j = [r.indicator for r in plan.stages[s].rules].index(tuning.rule)
    rule = plan.stages[s].rules[j]
    p = tuning.local_percentile if tuning.local_percentile is not None else 10.0
    x = replay.values[rule.indicator]
    low = plan.indicator(rule.indicator).dry == "low"
    # exit distance in percentile points: the rule's own for a percentile rule, else 10 points
    gap = rule.exit - rule.enter if rule.kind == "percentile" else (10.0 if low else -10.0)
    p_exit = float(np.clip(p + gap, 0, 100))
    with np.errstate(invalid="ignore"):
        local = col_percentiles(x, [p, p_exit], jobs=jobs)  # (2, units): nanpercentile
        pooled = np.nanpercentile(x[np.isfinite(x)], [p, p_exit])
    enter = np.stack([np.broadcast_to(pooled[0], local[0].shape), local[0]])  # (2, units)
    exit_ = np.stack([np.broadcast_to(pooled[1], local[1].shape), local[1]])
    on = _ladder_on(replay, s, j, np.broadcast_to(enter[None], (len(replay.weeks),) + enter.shape),
                    np.broadcast_to(exit_[None], (len(replay.weeks),) + exit_.shape), None, 1,
                    jobs=jobs)
    impact, counted = unit_impacts(replay, impact_level, exposed=exposed, min_level=min_level)
    imp, cnt = impact[:, None, :], counted[:, None, :]
    prev = np.zeros_like(on)
    prev[1:] = on[:-1]
    counts = {
        "hits": (on & imp).sum(0), "false_alarms": (on & cnt & ~imp).sum(0),
        "misses": (~on & imp).sum(0), "correct_negatives": (~on & cnt & ~imp).sum(0),
        "entries": (on & ~prev).sum(0), "weeks_on": on.sum(0),
    }  # each (2, units)
    n_t = on.shape[0]
    decades = n_t / 52.1775 / 10
    parts = []
    for k, name in enumerate(("uniform", "local")):
        c = {key: np.append(v[k], v[k].sum()) for key, v in counts.items()}
        f = ContingencyScores.frame_from_counts(c["hits"], c["false_alarms"], c["misses"],
                                                c["correct_negatives"])
        n_u = len(replay.unit_ids)
        parts.append(pd.DataFrame({
            "plan": name, "unit": list(replay.unit_ids) + ["all"],
            REGION: list(replay.unit_regions) + [""],
            "percentile": p, "threshold_value": np.append(enter[k], np.nan if k else pooled[0]),
            "weeks_in_stage_share": c["weeks_on"] / np.append(np.full(n_u, n_t), n_t * n_u),
            "entries_per_decade": c["entries"] / np.append(np.full(n_u, decades), decades * n_u),
            "hits": c["hits"], "false_alarms": c["false_alarms"], "misses": c["misses"],
            "correct_negatives": c["correct_negatives"], "hit_rate": f["hit_rate"],
            "false_alarm_ratio": f["false_alarm_ratio"],
            "peirce_skill_score": f["peirce_skill_score"],
        }))
    out = pd.concat(parts, ignore_index=True)
    return out.rename(columns={"unit": COUNTY}) if plan.unit == "county" else out


# --------------------------------------------------------------------------- private steps
def _unit_block(replay: PlanReplay, sl: slice) -> PlanReplay:
    """The replay restricted to the units ``sl`` (every per-unit array cut on its last axis)."""
    if sl.start == 0 and sl.stop >= len(replay.unit_ids):
        return replay
    cut = {k: v[..., sl] for k, v in replay.values.items()}
    return replace(replay, unit_ids=replay.unit_ids[sl], unit_regions=replay.unit_regions[sl],
                   members=replay.members[:, sl], stage=replay.stage[:, sl], values=cut,
                   enter_thresholds={k: v[..., sl] for k, v in replay.enter_thresholds.items()},
                   exit_thresholds={k: v[..., sl] for k, v in replay.exit_thresholds.items()})


def _candidate_on(replay, s, j, cand_rules, persist_of_k, n_persist, *, jobs=1) -> np.ndarray:
    """(weeks, candidates, units): unit at stage s+1 or higher, for every candidate."""
    x = replay.values[cand_rules[0].indicator]
    month = replay.weeks.month.to_numpy() - 1
    woy = np.minimum(replay.weeks.isocalendar().week.to_numpy(dtype=np.int64), 52) - 1
    reg = replay.unit_regions
    pct = None
    if cand_rules[0].kind == "percentile":  # sorted once; every candidate's values at once
        pct = ColumnPercentiles(x)
        pct.prepare([v for r in cand_rules for v in (r.enter, r.exit)])
    e = np.stack([rule_thresholds(r, "enter", x, reg, month, woy, percentiles=pct)
                  for r in cand_rules], axis=1)
    x_ = np.stack([rule_thresholds(r, "exit", x, reg, month, woy, percentiles=pct)
                   for r in cand_rules], axis=1)
    # candidates are threshold-major: each threshold's rule tests are repeated for every
    # persistence value (as booleans, after the comparisons)
    return _ladder_on(replay, s, j, e, x_, np.array(persist_of_k), n_persist, jobs=jobs)


def _ladder_on(replay, s, j, enter, exit_, persist, n_persist, *, jobs=1) -> np.ndarray:
    """(weeks, candidates, units) at stage s+1 or higher; ``enter``/``exit_`` hold one
    threshold per candidate threshold, each repeated ``n_persist`` times in ``persist``."""
    plan = replay.plan
    values = {k: v[:, None, :] for k, v in replay.values.items()}
    e_thr = {k: v[:, None, :] for k, v in replay.enter_thresholds.items()}
    x_thr = {k: v[:, None, :] for k, v in replay.exit_thresholds.items()}
    e_thr[(s, j)], x_thr[(s, j)] = enter, exit_
    be, bx, known = ladder_tests(plan, values, e_thr, x_thr)
    if n_persist > 1:
        bx[s] = np.repeat(bx[s], n_persist, axis=2)
        known[s] = np.repeat(known[s], n_persist, axis=1)
    ready = None
    if persist is None and n_persist > 1:
        be[s] = np.repeat(be[s], n_persist, axis=2)
    if persist is not None:
        st = plan.stages[s]
        cond = np.repeat(combine_rules(be[s], st), n_persist, axis=1)
        slack = st.enter_window - st.enter_weeks
        ready_s = np.zeros(cond.shape, dtype=bool)
        for p in np.unique(persist):  # a few entry-week values, each one array operation
            sel = persist == p
            ready_s[:, sel] = persistence_met(cond[:, sel], int(p), int(p) + slack)
        ready = {s: ready_s}
    return ladder_walk(plan, be, bx, known, entry_ready=ready, jobs=jobs) >= s + 1


def _year_counts(on, impact, counted, years):
    """Counts per (year, candidate) summed over units. Misses and correct negatives follow
    from the impact and no-impact weeks (per week) less the hits and false alarms."""
    uniq, code = np.unique(years, return_inverse=True)
    starts = np.searchsorted(code, np.arange(len(uniq)))
    imp, nimp = impact[:, None, :], (counted & ~impact)[:, None, :]
    prev = np.zeros_like(on)
    prev[1:] = on[:-1]
    cells = {"hits": on & imp, "false_alarms": on & nimp, "entries": on & ~prev, "weeks_on": on}
    n_u = on.shape[2]  # sums over a block's units in the smallest type that holds them (exact)
    acc = np.uint8 if n_u <= 255 else np.uint16 if n_u <= 65535 else np.int64
    per_week = {k: v.view(np.uint8).sum(axis=2, dtype=acc).astype(np.int64)
                for k, v in cells.items()}  # (weeks, cands)
    per_week["misses"] = impact.sum(axis=1, dtype=np.int64)[:, None] - per_week["hits"]
    per_week["correct_negatives"] = (nimp[:, 0].sum(axis=1, dtype=np.int64)[:, None]
                                     - per_week["false_alarms"])
    out = {k: np.add.reduceat(per_week[k], starts, axis=0) for k in _COUNTS}  # (years, cands)
    return out, uniq


class _Objective:
    """Objective of every candidate from counts ``{name: (..., candidates)}``."""

    def __init__(self, tuning: PlanTuning, n_units: int) -> None:
        self.t = tuning
        self.n_units = n_units

    def scores(self, c: dict) -> dict[str, np.ndarray]:
        f = ContingencyScores.frame_from_counts(c["hits"], c["false_alarms"], c["misses"],
                                                c["correct_negatives"])
        shape = np.shape(c["hits"])
        n = c["hits"] + c["false_alarms"] + c["misses"] + c["correct_negatives"]
        with np.errstate(invalid="ignore", divide="ignore"):
            base = (c["hits"] + c["misses"]) / n
        h = f["hit_rate"].to_numpy().reshape(shape)
        fr = f["false_alarm_rate"].to_numpy().reshape(shape)
        return {"hit_rate": h, "false_alarm_rate": fr,
                "false_alarm_ratio": f["false_alarm_ratio"].to_numpy().reshape(shape),
                "peirce_skill_score": f["peirce_skill_score"].to_numpy().reshape(shape),
                "economic_value": relative_economic_value(h, fr, base, self.t.cost_loss_ratio)}

    def __call__(self, c: dict, n_years) -> np.ndarray:
        if self.t.objective == "frequency":
            rate = np.asarray(c["entries"], dtype=float) / (self.n_units * np.asarray(n_years))
            return -np.abs(rate - 1.0 / self.t.once_in_years)
        key = "peirce_skill_score" if self.t.objective == "peirce" else "economic_value"
        return self.scores(c)[key]


def _curve(total, thr, persist, choose, n_years, n_units, n_weeks) -> pd.DataFrame:
    sc = choose.scores(total)
    frame = pd.DataFrame({"threshold": thr, "enter_weeks": persist})
    for k in ("hits", "false_alarms", "misses", "correct_negatives"):
        frame[k] = total[k]
    for k in ("hit_rate", "false_alarm_ratio", "false_alarm_rate", "peirce_skill_score",
              "economic_value"):
        frame[k] = sc[k]
    frame["weeks_in_stage_share"] = total["weeks_on"] / (n_weeks * n_units)
    frame["entries_per_unit_year"] = total["entries"] / (n_units * n_years)
    return frame


def _intervals(per_year, years, grid, choose, k_best, tuning, seed):
    n_y = len(years)
    if n_y < 3:
        raise TriggerError(f"tuning needs at least 3 years of record; found {n_y}.")
    thr = np.array([g[0] for g in grid])
    pers = np.array([g[1] for g in grid], dtype=float)
    w = year_bootstrap_weights(n_y, tuning.n_boot, seed=seed)  # (B, years)
    boot = {k: w @ v for k, v in per_year.items()}  # (B, candidates)
    n_years_b = w.sum(axis=1)[:, None]
    obj = choose(boot, n_years_b)
    kb = np.argmax(np.where(np.isnan(obj), -np.inf, obj), axis=1)
    sc = choose.scores(boot)
    rate_b = boot["entries"] / (choose.n_units * n_years_b)
    # held-out: re-tune without each year (leave_one_year_out gives one fold per year)
    fold = leave_one_year_out(years)
    total = {k: v.sum(axis=0) for k, v in per_year.items()}
    held = {k: 0.0 for k in per_year}
    rows = []
    for y in range(n_y):  # one iteration per year (tens): array lookups over candidates
        train = {k: total[k] - v[fold == y].sum(axis=0) for k, v in per_year.items()}
        o = choose(train, n_y - 1)
        ky = int(np.argmax(np.where(np.isnan(o), -np.inf, o)))
        for k, v in per_year.items():
            held[k] += v[fold == y, ky].sum()
        rows.append({"year": int(years[y]), "threshold": thr[ky], "enter_weeks": int(pers[ky])})
    held_sc = choose.scores({k: np.array([v]) for k, v in held.items()})
    full = choose.scores(total)
    lo_q, hi_q = (1 - tuning.ci) / 2, (1 + tuning.ci) / 2

    def ci(x):
        x = np.asarray(x, dtype=float)
        x = x[np.isfinite(x)]
        return (float(np.quantile(x, lo_q)), float(np.quantile(x, hi_q))) if x.size else (
            np.nan, np.nan)

    b_idx = np.arange(len(kb))
    entries_rate = total["entries"] / (choose.n_units * n_y)
    quantities = [
        ("threshold", thr[k_best], thr[kb], np.nan),
        ("enter_weeks", pers[k_best], pers[kb], np.nan),
        ("peirce_skill_score", full["peirce_skill_score"][k_best],
         sc["peirce_skill_score"][b_idx, k_best], held_sc["peirce_skill_score"][0]),
        ("economic_value", full["economic_value"][k_best], sc["economic_value"][b_idx, k_best],
         held_sc["economic_value"][0]),
        ("entries_per_unit_year", entries_rate[k_best], rate_b[b_idx, k_best],
         held["entries"] / (choose.n_units * n_y)),
    ]
    summary = pd.DataFrame([
        {"quantity": q, "estimate": float(est), "lo": ci(bs)[0], "hi": ci(bs)[1],
         "held_out": float(ho)} for q, est, bs, ho in quantities
    ])
    summary["ci"] = tuning.ci
    summary["n_boot"] = tuning.n_boot
    return summary, pd.DataFrame(rows)
