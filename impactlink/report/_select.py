"""How the report reads the skill stage's tables (shared by sections, figures and words):
which rows of ``skill.csv`` are single-index candidates, and which columns of
``skill_summary.csv`` hold the ranking score."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

__all__ = ["BASELINE_MODELS", "PERSISTENCE_COMBOS", "single_candidates", "SummarySkill",
           "summary_skill"]

#: Models that are baselines, not index candidates.
BASELINE_MODELS = ("climatology", "seasonal", "persistence")

#: Models that combine an index with the persistence baseline (both spellings accepted).
PERSISTENCE_COMBOS = ("index_plus_persistence", "index_persistence")


def single_candidates(skill: pd.DataFrame) -> pd.DataFrame:
    """Rows of one index at one time scale and lag: no baselines, no persistence
    combinations, no second index."""
    keep = ~skill["model"].isin(BASELINE_MODELS + PERSISTENCE_COMBOS).fillna(False)
    keep &= skill["index"].notna()
    if "index2" in skill.columns:
        keep &= skill["index2"].isna()
    return skill.loc[keep.to_numpy(dtype=bool)]


@dataclass(frozen=True)
class SummarySkill:
    """The ranking score of one ``skill_summary.csv`` row and its values.

    Attributes
    ----------
    score : str
        Score column name ("rpss", "bss"); higher is better, 0 = climatological base rate.
    naive : float
        The best candidate's own out-of-sample score.
    nested, nested_lo, nested_hi : float
        Selection-aware (nested) estimate and its interval.
    """

    score: str
    naive: float
    nested: float
    nested_lo: float
    nested_hi: float


def summary_skill(row: pd.Series) -> SummarySkill:
    """Read the ranking score of a ``skill_summary.csv`` row under the skill stage's names.

    The skill stage names the score in ``ranking_score`` (e.g. ``"rpss"``) and writes
    ``naive_<score>``, ``nested_<score>``, ``nested_<score>_lo`` and ``nested_<score>_hi``;
    a missing column reads as NaN, a missing ``ranking_score`` as ``"bss"``.
    """
    name = row.get("ranking_score")
    score = "bss" if name is None or pd.isna(name) else str(name)

    def value(col: str) -> float:
        v = pd.to_numeric(row.get(col), errors="coerce")
        return float("nan") if v is None or pd.isna(v) else float(v)

    return SummarySkill(score, value(f"naive_{score}"), value(f"nested_{score}"),
                        value(f"nested_{score}_lo"), value(f"nested_{score}_hi"))
