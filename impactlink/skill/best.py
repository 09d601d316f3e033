"""One rule for "the best candidate" of a skill table, shared by every stage."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["BestCandidate", "best_candidate"]


@dataclass(frozen=True)
class BestCandidate:
    """The best single-index candidate of one target.

    Attributes
    ----------
    index : str
    scale : int
        Time scale in the table's own unit column (``scale_weeks``).
    lag : int
        Lag in weeks (``lag_weeks``).
    model : str
        Always ``"index"`` (one index, no persistence term, no second index).
    row : int
        Position label of the row in the table passed in.
    rpss, rpss_lo, rpss_hi : float
        Out-of-sample ranked probability skill and its interval.
    rank : float
        The row's ``rank`` within its model type (NaN when the table has none).
    """

    index: str
    scale: int
    lag: int
    model: str
    row: int
    rpss: float
    rpss_lo: float
    rpss_hi: float
    rank: float


def best_candidate(skill_table: pd.DataFrame, target: str | None = None) -> BestCandidate | None:
    """The best single-index candidate of ``target`` in a skill table, or None.

    The rule: among rows with ``model == "index"`` (one index at one time scale and lag;
    baselines, index-plus-persistence, two-scale pairs and the boosted challenger are
    excluded) with a finite ``rpss``, take the highest out-of-sample ``rpss``; ties are
    broken by (``rank``, index name, scale, lag), smallest first.

    Parameters
    ----------
    skill_table : DataFrame
        Rows of ``skill.csv`` (columns ``model``, ``index``, ``scale_weeks``, ``lag_weeks``,
        ``rpss``; ``target``, ``rank``, ``rpss_lo``, ``rpss_hi`` used when present).
    target : str, optional
        Keep only rows of this target (column ``target``); None uses every row.

    Returns
    -------
    BestCandidate or None
        None when no row qualifies.
    """
    if skill_table is None or skill_table.empty:
        return None
    t = skill_table
    keep = np.array(t["model"] == "index", dtype=bool)
    if target is not None and "target" in t.columns:
        keep = keep & np.array(t["target"] == target, dtype=bool)
    rpss = np.array(pd.to_numeric(t["rpss"], errors="coerce"), dtype=float)
    keep = keep & np.isfinite(rpss)
    if not keep.any():
        return None
    s = t.loc[keep].assign(
        _r=rpss[keep],
        _rank=pd.to_numeric(t["rank"], errors="coerce").to_numpy()[keep]
        if "rank" in t.columns else np.nan,
    )
    s = s.sort_values(["_r", "_rank", "index", "scale_weeks", "lag_weeks"],
                      ascending=[False, True, True, True, True], kind="mergesort",
                      na_position="last")
    b = s.iloc[0]

    def g(k: str) -> float:
        return float(b[k]) if k in b.index and pd.notna(b[k]) else float("nan")

    return BestCandidate(index=str(b["index"]), scale=int(b["scale_weeks"]),
                         lag=int(b["lag_weeks"]), model="index", row=int(s.index[0]),
                         rpss=float(b["_r"]), rpss_lo=g("rpss_lo"), rpss_hi=g("rpss_hi"),
                         rank=g("_rank"))
