"""Trigger stage: replay committee trigger plans (staged entry and exit, several indicators)
over the whole record, score them against impacts where impacts could be recorded, tune a
stage's thresholds (Peirce skill, economic value, target frequency) with year-block bootstrap
intervals and held-out years, compare uniform and local thresholds; plus the single-threshold
audit of the best index (``audit_triggers``).

Scores are statistical associations in past records, not causes; trigger plans are decided by
the responsible authorities.
"""

from impactlink.triggers.audit import (
    TRIGGER_COLUMNS,
    TriggerResult,
    audit_triggers,
    firing_rate_audit,
    impact_grid,
)
from impactlink.triggers.plan import TriggerPlan, load_trigger_plan, parse_trigger_plan
from impactlink.triggers.plan_replay import REPLAY_COLUMNS, PlanReplay, replay_plan
from impactlink.triggers.plan_run import (
    MEMO_COLUMNS,
    TriggerPlanResult,
    memo_numbers,
    plan_from_ladder,
    run_trigger_plan,
)
from impactlink.triggers.plan_scores import SCORE_COLUMNS, PlanScores, score_plan
from impactlink.triggers.plan_tune import (
    StageTuning,
    relative_economic_value,
    tune_stage,
    uniform_vs_local,
)
from impactlink.triggers.replay import replay_trigger
from impactlink.triggers.scores import TriggerScores, evaluate_trigger
from impactlink.triggers.tune import (
    DEFAULT_CANDIDATES,
    TuningResult,
    tune_thresholds,
)

__all__ = [
    "DEFAULT_CANDIDATES",
    "MEMO_COLUMNS",
    "REPLAY_COLUMNS",
    "SCORE_COLUMNS",
    "TRIGGER_COLUMNS",
    "PlanReplay",
    "PlanScores",
    "StageTuning",
    "TriggerPlan",
    "TriggerPlanResult",
    "TriggerResult",
    "TriggerScores",
    "TuningResult",
    "audit_triggers",
    "evaluate_trigger",
    "firing_rate_audit",
    "impact_grid",
    "load_trigger_plan",
    "memo_numbers",
    "parse_trigger_plan",
    "plan_from_ladder",
    "relative_economic_value",
    "replay_plan",
    "replay_trigger",
    "run_trigger_plan",
    "score_plan",
    "tune_stage",
    "tune_thresholds",
    "uniform_vs_local",
]
