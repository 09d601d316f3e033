"""What :func:`impactlink.skill.rank_candidates` returns: the table contract and its container."""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

__all__ = ["SkillResult", "TABLE_COLUMNS"]

TABLE_COLUMNS = [
    "impact", "target", "role", "index", "scale_weeks", "lag_weeks", "index2", "scale2_weeks",
    "model", "events", "n", "n_years", "brier", "brier_lo", "brier_hi", "bss", "bss_lo",
    "bss_hi", "roc_auc", "roc_auc_lo", "roc_auc_hi", "log_loss", "rps", "rpss", "rpss_lo",
    "rpss_hi", "calibration_slope", "rank", "rank_overall", "indistinguishable_from_best",
    "beats_climatology", "beats_seasonal", "beats_persistence",
]


@dataclass(frozen=True)
class SkillResult:
    """Out-of-sample skill of every candidate for one target.

    Attributes
    ----------
    table : DataFrame
        One row per candidate and model, plus the baselines (``model`` = "climatology",
        "seasonal", "persistence"); columns :data:`TABLE_COLUMNS` (the rows of ``skill.csv``).
        The ranking score is ``rpss`` (equal to ``bss`` for a binary target).
    summary : DataFrame
        One row: best candidate, naive and nested skill with intervals, number of
        candidates and the persistence comparison (numbers and flags; the report words them).
    persistence : DataFrame
        Per lag: persistence-only skill, best index-only and index-plus-persistence skill,
        the gain over persistence with its paired-bootstrap interval.
    reliability : DataFrame
        Binned reliability of the best candidate's out-of-fold event chances.
    predictions : DataFrame
        Out-of-fold event chances (level >= 1) of the best candidate and the baselines.
    local : DataFrame
        Best of the leading candidates per region and per unit, with events and rows.
    provenance : dict
    """

    table: pd.DataFrame
    summary: pd.DataFrame
    persistence: pd.DataFrame
    reliability: pd.DataFrame
    predictions: pd.DataFrame
    local: pd.DataFrame
    provenance: dict = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        return self.table.copy()
