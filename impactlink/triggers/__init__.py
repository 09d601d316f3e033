"""Trigger stage: replay threshold plans with entry/exit persistence rules, score them against
impact records (hits, false alarms, lead time), tune thresholds (uniform vs local, scored on
held-out years) and audit how often a uniform threshold fires in each county.

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
from impactlink.triggers.replay import replay_trigger
from impactlink.triggers.scores import TriggerScores, evaluate_trigger
from impactlink.triggers.tune import (
    DEFAULT_CANDIDATES,
    TuningResult,
    tune_thresholds,
)

__all__ = [
    "DEFAULT_CANDIDATES",
    "TRIGGER_COLUMNS",
    "TriggerResult",
    "TriggerScores",
    "TuningResult",
    "audit_triggers",
    "evaluate_trigger",
    "firing_rate_audit",
    "impact_grid",
    "replay_trigger",
    "tune_thresholds",
]
