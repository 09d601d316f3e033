"""Private helpers that several rooms of the skill stage need (one copy each).

``_as_float`` and ``_feature`` read the target's columns and a candidate's values;
``_score_oof`` turns out-of-fold level probabilities into the per-block losses, ROC area and
calibration slope that every record carries (baselines, fitted candidates, the boosted
challenger); ``_best_single`` applies the one rule of :func:`impactlink.skill.best_candidate`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.errors import SkillError
from impactlink.skill import _engine as E
from impactlink.skill.best import best_candidate


def _as_float(s: pd.Series) -> np.ndarray:
    """A column as float64 with NaN for missing (nullable integer columns included)."""
    return pd.to_numeric(s, errors="coerce").astype("Float64").to_numpy(dtype=float,
                                                                       na_value=np.nan)


def _feature(features, cand, n_rows) -> np.ndarray:
    """One candidate's values for every row of ``target.frame``, shape checked."""
    x = np.asarray(features(*cand), dtype=float)
    if x.shape != (n_rows,):
        raise SkillError(
            f"features{cand} returned shape {x.shape}; expected ({n_rows},), one value per "
            "row of target.frame"
        )
    return x


def _score_oof(P, N, layout, W, rank=None) -> dict:
    """Per-block losses, ROC area (point + replicates) and calibration slope of OOF P.

    ``rank`` (G, R), when given, is the ordering the ROC area uses instead of the event
    chance: for fitted models the held-out linear predictor without the cut-points.

    Notes
    -----
    Pooling out-of-fold event chances over many small folds biases the ROC area downward:
    leaving out a year with many events lowers the training fit's intercept, so that
    year's rows are ranked too low against the others (the pessimistic bias of pooled
    leave-one-out ROC areas; Airola et al. 2011; Parker et al. 2007). The cut-points do not
    change the ordering within a fit, so the area ranks rows by the held-out linear
    predictor (weights and direction still learned without the held-out block). Brier
    score, RPS and log loss use the event chances as they are.

    References
    ----------
    Airola, A., Pahikkala, T., Waegeman, W., De Baets, B., Salakoski, T. (2011). An
    experimental comparison of cross-validation techniques for estimating the area under
    the ROC curve. Computational Statistics & Data Analysis 55(4), 1828-1844.
    Parker, B. J., Günter, S., Bedo, J. (2007). Stratification bias in low signal
    microarray studies. BMC Bioinformatics 8, 326.
    """
    from impactlink.models.batch import fit_logistic_batch

    loss = E.block_losses(P, N)
    G, R, K = N.shape
    q = (1.0 - P[..., 0]).ravel()
    order_by = q if rank is None else np.broadcast_to(rank, (G, R)).ravel()
    n1 = N[..., 1:].sum(-1).ravel()
    n0 = N[..., 0].ravel()
    blk = np.repeat(np.arange(G), R)
    keep = (n1 + n0) > 0
    auc = E.auc_replicates(order_by[keep], n1[keep], n0[keep], blk[keep], W)
    lp = np.log(np.clip(q[keep], 1e-6, 1 - 1e-6) / (1 - np.clip(q[keep], 1e-6, 1 - 1e-6)))
    tot = n1[keep] + n0[keep]
    if np.ptp(lp) > 1e-9 and n1.sum() > 0 and n0.sum() > 0:
        X = np.column_stack([np.ones_like(lp), lp])[None]
        slope = float(fit_logistic_batch(X, (n1[keep] / tot)[None], tot[None], ridge=0.0,
                                         max_iter=100).coef[0, 1])
    else:
        slope = float("nan")
    return {
        "rps_g": loss["rps"], "sse_g": loss["sse"], "ll_g": loss["ll"],
        "n_g": N.sum((1, 2)), "ev_g": N[..., 1:].sum((1, 2)),
        "auc": auc[0], "auc_reps": auc[1:], "calibration_slope": slope,
    }


def _best_single(table) -> int | None:
    """Row position of the best single candidate (the rule of :func:`best_candidate`)."""
    bc = best_candidate(table.reset_index(drop=True))
    return None if bc is None else bc.row
