"""The trigger-plan stage in one call: replay, scores, tuning, uniform vs local, memo numbers."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.errors import TriggerError
from impactlink.schema import COUNTY, WEEK
from impactlink.triggers.audit import impact_grid
from impactlink.triggers.plan import TriggerPlan, load_trigger_plan, parse_trigger_plan
from impactlink.triggers.plan_replay import PlanReplay, replay_plan
from impactlink.triggers.plan_scores import PlanScores, score_plan, unit_impacts
from impactlink.triggers.plan_tune import StageTuning, tune_stage, uniform_vs_local

__all__ = [
    "TriggerPlanResult",
    "run_trigger_plan",
    "memo_numbers",
    "plan_from_ladder",
    "MEMO_COLUMNS",
]

#: Columns of ``trigger_plan_memo.csv`` (the numbers behind one memo sentence per stage).
MEMO_COLUMNS = (
    "stage", "stage_name", "impact", "since_year", "exposed_units", "onsets", "onsets_matched",
    "lead_weeks_median", "entries", "entries_without_impact", "matched_entries", "top_driver",
    "top_driver_index", "top_driver_scale_weeks", "top_driver_entries", "driver_counts",
    "flip_flops",
)


@dataclass(frozen=True)
class TriggerPlanResult:
    """Everything the trigger-plan stage produces.

    Attributes
    ----------
    plan : TriggerPlan
    replay : PlanReplay
    scores : PlanScores or None
        None when the plan names no impact (``[score] impact``).
    tuning : StageTuning or None
        None without a ``[tune]`` table or an impact.
    uniform_local : pandas.DataFrame or None
        :func:`~impactlink.triggers.plan_tune.uniform_vs_local`.
    memo : pandas.DataFrame
        :data:`MEMO_COLUMNS`, one row per stage (empty without an impact).
    timeline : pandas.DataFrame
        ``unit, week, indicator, value, enter_threshold, exit_threshold, stage,
        impact_level`` for two contrasting units (the thresholds of ``timeline_stage``).
    settings : dict
    """

    plan: TriggerPlan
    replay: PlanReplay
    scores: PlanScores | None
    tuning: StageTuning | None
    uniform_local: pd.DataFrame | None
    memo: pd.DataFrame
    timeline: pd.DataFrame
    settings: dict

    def frames(self) -> dict[str, pd.DataFrame]:
        """File name -> tidy frame, for the run folder (absent parts are left out)."""
        out = {"trigger_plan_replay.csv": self.replay.to_frame(),
               "trigger_plan_changes.csv": self.replay.changes,
               "trigger_plan_timeline.csv": self.timeline}
        if self.scores is not None:
            out["trigger_plan_scores.csv"] = self.scores.table
            out["trigger_plan_leads.csv"] = self.scores.leads
            out["trigger_plan_decades.csv"] = self.scores.decades
            out["trigger_plan_memo.csv"] = self.memo
        if self.tuning is not None:
            out["trigger_plan_tuning.csv"] = self.tuning.curve
            out["trigger_plan_tuned.csv"] = self.tuning.summary
            out["trigger_plan_tuning_folds.csv"] = self.tuning.folds
        if self.uniform_local is not None:
            out["trigger_plan_uniform_local.csv"] = self.uniform_local
        return out


def run_trigger_plan(
    plan: TriggerPlan | str | Path,
    *,
    cube,
    targets,
    counties: pd.DataFrame,
    water_systems: pd.DataFrame | None = None,
    seed: int = 0,
    jobs: int = 1,
) -> TriggerPlanResult:
    """Replay a trigger plan, score it against its impact, tune it and compare thresholds.

    Parameters
    ----------
    plan : TriggerPlan or path
        A plan, or the path of a plan file (read with
        :func:`~impactlink.triggers.plan.load_trigger_plan`).
    cube : IndexCube
        The run's index values.
    targets : sequence of Target
        The run's targets; the plan is scored against the county-week ``state`` target of
        ``[score] impact``.
    counties : pandas.DataFrame
        ``county_id`` and ``region`` of every county.
    water_systems : pandas.DataFrame, optional
        ``county_id`` of every water system; needed with ``[score] exposure =
        "water_systems"`` (a county without one is not exposed to restrictions).
    seed : int, default 0
        Seed of the year-block bootstrap.
    jobs : int, default 1
        Threads for the replay's stage walk and the tuning's blocks of units (the same numbers
        for any ``jobs``).

    Returns
    -------
    TriggerPlanResult

    Raises
    ------
    TriggerError
        If the plan's impact has no county-week state target, or the exposure table is absent.

    Notes
    -----
    Replayed stages and their scores are statistical associations with past impact records,
    not causes; a plan is decided by the responsible authorities under their own codes.
    """
    if not isinstance(plan, TriggerPlan):
        plan = load_trigger_plan(plan)
    replay = replay_plan(plan, cube=cube, counties=counties, jobs=jobs)
    sc = plan.scoring
    if sc.impact is None:
        empty = pd.DataFrame(columns=list(MEMO_COLUMNS))
        timeline = _timeline(replay, None, None, None, len(plan.stages))
        return TriggerPlanResult(plan, replay, None, None, None, empty, timeline,
                                 {"impact": None, "seed": int(seed)})
    target = _state_target(plan, targets)
    level = impact_grid(target, cube.weeks, cube.county_ids)
    exposed = _exposure(plan, cube.county_ids, water_systems)
    scores = score_plan(replay, level, exposed=exposed, min_level=sc.min_level,
                        window_weeks=sc.window_weeks, flip_weeks=sc.flip_weeks)
    tuning = ul = None
    if plan.tuning is not None:
        tuning = tune_stage(replay, level, plan.tuning, exposed=exposed,
                            min_level=sc.min_level, seed=seed, jobs=jobs)
        ul = uniform_vs_local(replay, level, plan.tuning, exposed=exposed,
                              min_level=sc.min_level, jobs=jobs)
    memo = memo_numbers(replay, scores, level, exposed=exposed, impact=sc.impact,
                        min_level=sc.min_level)
    t_stage = (plan.stage_names.index(plan.tuning.stage) + 1 if plan.tuning is not None
               else len(plan.stages))
    timeline = _timeline(replay, scores, level, exposed, t_stage)
    settings = {"impact": sc.impact, "target": target.name, "seed": int(seed),
                "exposure": sc.exposure, "exposed_units": scores.settings["exposed_units"],
                "window_weeks": sc.window_weeks, "flip_weeks": sc.flip_weeks,
                "min_level": sc.min_level, "plan_file": plan.source}
    return TriggerPlanResult(plan, replay, scores, tuning, ul, memo, timeline, settings)


def memo_numbers(replay: PlanReplay, scores: PlanScores, impact_level, *, exposed=None,
                 impact: str = "impact", min_level: int = 1) -> pd.DataFrame:
    """The numbers of one memo sentence per stage (:data:`MEMO_COLUMNS`).

    ``matched_entries`` are the entries matched to an onset; ``top_driver`` is the indicator
    most often among the drivers of those entries and ``top_driver_entries`` how often;
    ``driver_counts`` lists every indicator as ``name:count`` joined by ";".
    """
    _, counted = unit_impacts(replay, impact_level, exposed=exposed, min_level=min_level)
    rows_with = np.flatnonzero(counted.any(axis=1))
    # calendar year in which the first counted week ends (its Sunday)
    since = int((replay.weeks[rows_with[0]] + pd.Timedelta(days=6)).year) if rows_with.size else -1
    allrows = scores.table[scores.table["by"] == "all"].set_index("stage")
    ch = replay.changes
    out = []
    for s, name in enumerate(replay.plan.stage_names, start=1):
        r = allrows.loc[s]
        lead = scores.leads[scores.leads["stage"] == s]
        ent = lead[["unit", "entry_week"]].drop_duplicates()
        up = ch[(ch["change"] == "enter") & (ch["to_stage"] >= s) & (ch["from_stage"] < s)]
        drv = ent.merge(up, left_on=["unit", "entry_week"], right_on=["unit", WEEK], how="left")
        names = drv["driving_indicators"].fillna("").str.split("+").explode()
        counts = names[names != ""].value_counts()
        counts = counts.reindex(sorted(counts.index, key=lambda k: (-counts[k], k)))
        top = str(counts.index[0]) if len(counts) else ""
        out.append({
            "stage": s, "stage_name": name, "impact": impact, "since_year": since,
            "exposed_units": int(counted.any(axis=0).sum()), "onsets": int(r["onsets"]),
            "onsets_matched": int(r["onsets_matched"]),
            "lead_weeks_median": float(r["lead_weeks_median"]), "entries": int(r["entries"]),
            "entries_without_impact": int(r["entries_without_impact"]),
            "matched_entries": len(ent),
            "top_driver": top,
            "top_driver_index": replay.plan.indicator(top).index if top else "",
            "top_driver_scale_weeks": replay.plan.indicator(top).scale_weeks if top else -1,
            "top_driver_entries": int(counts.iloc[0]) if len(counts) else 0,
            "driver_counts": ";".join(f"{k}:{int(v)}" for k, v in counts.items()),
            "flip_flops": int(r["flip_flops"]),
        })
    return pd.DataFrame(out, columns=list(MEMO_COLUMNS))


def plan_from_ladder(ladder, *, impact: str | None = None, entry_weeks: int = 2,
                     exit_weeks: int = 4, exposure: str = "none") -> TriggerPlan:
    """A one-indicator plan from a threshold ladder (a project's ``[[audit]]`` entry).

    Parameters
    ----------
    ladder : AuditLadder-like
        ``name, index, scale_weeks, kind ("value" | "percentile"), thresholds, stages``, one
        threshold per stage, mildest first (dry = low values).
    impact : str, optional
        Impact to score against.
    entry_weeks, exit_weeks : int
        Persistence of every stage (the project's ``[triggers]`` settings); the exit threshold
        equals the entry threshold (no hysteresis), as a plain ladder has none.
    exposure : {"none", "water_systems"}

    Returns
    -------
    TriggerPlan
        Validated like a plan file (source ``[[audit]] NAME``).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> lad = SimpleNamespace(name="l", index="spi", scale_weeks=13, kind="value",
    ...                       thresholds=(-1.0, -1.5), stages=("dry", "drier"))
    >>> plan_from_ladder(lad).stage_names
    ('dry', 'drier')
    """
    ind = f"{ladder.index}{int(ladder.scale_weeks)}"
    raw: dict = {
        "plan": {"name": str(ladder.name)},
        "indicators": {ind: {"index": str(ladder.index),
                             "scale_weeks": int(ladder.scale_weeks)}},
        "stage": [{"name": str(n), "enter_weeks": int(entry_weeks),
                   "exit_weeks": int(exit_weeks),
                   "rule": [{"indicator": ind, "kind": str(ladder.kind), "enter": float(t),
                             "exit": float(t)}]}
                  for n, t in zip(ladder.stages, ladder.thresholds, strict=True)],
        "score": {"exposure": exposure, **({"impact": impact} if impact else {})},
    }
    return parse_trigger_plan(raw, source=f"[[audit]] {ladder.name}")


# --------------------------------------------------------------------------- private steps
def _state_target(plan: TriggerPlan, targets):
    impact = plan.scoring.impact
    for t in targets:
        if t.impact == impact and t.grain == "county_week" and t.role == "state":
            return t
    have = sorted({t.impact for t in targets if t.grain == "county_week"})
    raise TriggerError(
        f"{plan.source}: key score.impact: {impact!r} has no weekly county target in this run; "
        f"write one of {have} or add [impacts.{impact}] to the project file."
    )


def _exposure(plan: TriggerPlan, county_ids, water_systems) -> np.ndarray | None:
    if plan.scoring.exposure == "none":
        return None
    if water_systems is None or COUNTY not in water_systems.columns:
        raise TriggerError(
            f"{plan.source}: key score.exposure: 'water_systems' needs the water_systems table "
            "(with county_id); add it under [tables] or write exposure = \"none\"."
        )
    have = set(water_systems[COUNTY].astype(str))
    return np.array([str(c) in have for c in county_ids], dtype=bool)


def _timeline(replay, scores, level, exposed, stage: int) -> pd.DataFrame:
    units = _contrasting_units(replay, scores, level, exposed, stage)
    lev = None
    if level is not None:
        lev = np.where(np.isfinite(level) & (level >= 0), level, -np.inf)
        if exposed is not None:
            lev = np.where(np.broadcast_to(exposed, lev.shape), lev, -np.inf)
    st = replay.plan.stages[stage - 1]
    parts = []
    for u in units:  # two units for a figure
        imp = np.full(len(replay.weeks), np.nan)
        if lev is not None:  # highest exposed, covered level among the unit's counties
            imp = lev[:, replay.members[:, u] > 0].max(axis=1)
            imp = np.where(np.isneginf(imp), np.nan, imp)
        for j, rule in enumerate(st.rules):
            parts.append(pd.DataFrame({
                "unit": replay.unit_ids[u], WEEK: replay.weeks, "indicator": rule.indicator,
                "value": replay.values[rule.indicator][:, u],
                "enter_threshold": replay.enter_thresholds[(stage - 1, j)][:, u],
                "exit_threshold": replay.exit_thresholds[(stage - 1, j)][:, u],
                "threshold_stage": st.name,
                "stage": replay.stage[:, u].astype(np.int64),
                "impact_level": imp,
            }))
    return pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()


def _contrasting_units(replay, scores, level, exposed, stage) -> list[int]:
    """The exposed unit whose onsets the stage caught best and the one it caught worst."""
    if scores is None or not len(scores.leads):
        return list(range(min(2, len(replay.unit_ids))))
    impact, counted = unit_impacts(replay, level, exposed=exposed)
    prev = np.zeros_like(counted)
    prev[1:] = (counted & ~impact)[:-1]
    onsets = (impact & prev).sum(axis=0)
    lead = scores.leads[scores.leads["stage"] == stage]
    matched = lead.groupby("unit").size().reindex(list(replay.unit_ids), fill_value=0).to_numpy()
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(onsets >= 2, matched / np.maximum(onsets, 1), np.nan)
    if not np.isfinite(share).any():
        return list(range(min(2, len(replay.unit_ids))))
    best, worst = int(np.nanargmax(share)), int(np.nanargmin(share))
    return [best] if best == worst else [best, worst]
