"""Which rows of ``skill.csv`` are single-index candidates (shared by figures and text)."""

from __future__ import annotations

import pandas as pd

__all__ = ["BASELINE_MODELS", "PERSISTENCE_COMBOS", "single_candidates"]

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
