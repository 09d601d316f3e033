"""Separation: when a maximum-likelihood impact model diverges, and the ridge that replaces it.

Perfect or quasi-complete separation (a value of a predictor beyond which every row is an
impact, or none is) sends maximum-likelihood slopes to infinity (Albert and Anderson 1984).
:func:`separation_symptom` names the symptom of a fit; :func:`slope_precision` gives the
ridge of the refit: a normal prior of sd :data:`PRIOR_SD` on each slope per two standard
deviations of its predictor (the scale of Gelman et al. 2008, with a normal prior instead of
their Cauchy). Both the fit and the refit are made by
:func:`impactlink.models.batch.fit_cumlogit_batch`.

References
----------
Albert, A. and Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71(1), 1-10. https://doi.org/10.1093/biomet/71.1.1
Gelman, A., Jakulin, A., Pittau, M. G. and Su, Y.-S. (2008). A weakly informative default
prior distribution for logistic and other regression models. Annals of Applied Statistics
2(4), 1360-1383. https://doi.org/10.1214/08-AOAS191
"""

from __future__ import annotations

import numpy as np

__all__ = ["SEPARATION_LIMIT", "PRIOR_SD", "separation_symptom", "slope_precision"]

#: A slope whose effect per standard deviation of its predictor exceeds this (on the
#: link scale; e^10 ~ 22000 as an odds ratio) is taken as a symptom of separation.
SEPARATION_LIMIT = 10.0

#: Prior scale of a slope per two standard deviations of its predictor (Gelman et al. 2008
#: recommend 2.5 on inputs scaled to sd 0.5, with a Cauchy prior; we use a normal prior).
PRIOR_SD = 2.5


def separation_symptom(beta: np.ndarray, cuts: np.ndarray, cov: np.ndarray, converged: bool,
                       sd: np.ndarray) -> str:
    """Text naming the symptom of (quasi-)separation or failed convergence, or "".

    Parameters
    ----------
    beta, cuts : ndarray
        Slopes (p,) and thresholds (K,) of the maximum-likelihood fit.
    cov : ndarray (p+K, p+K)
        Their covariance (inverse observed information).
    converged : bool
        Whether Newton-Raphson converged.
    sd : ndarray (p,)
        Standard deviation of each predictor over the fitted rows.

    Returns
    -------
    str
        "" for a usable fit; otherwise the first symptom found, in this order: non-finite
        coefficients, a slope above :data:`SEPARATION_LIMIT` per sd of its predictor,
        standard errors not finite, no convergence.
    """
    if not np.all(np.isfinite(beta)) or not np.all(np.isfinite(cuts)):
        return "non-finite coefficients (separation)"
    scaled = np.abs(beta) * sd
    if np.any(scaled > SEPARATION_LIMIT):
        return (f"slope of {scaled.max():.1f} per sd of its predictor exceeds "
                f"{SEPARATION_LIMIT:g} (separation)")
    se = np.sqrt(np.diag(cov)) if np.all(np.isfinite(cov)) else np.array([np.nan])
    if not np.all(np.isfinite(se)) or np.any(se <= 0):
        return "standard errors not finite (separation or a singular design)"
    if not converged:
        return "maximum-likelihood fit did not converge"
    return ""


def slope_precision(sd: np.ndarray, prior_sd: float = PRIOR_SD) -> np.ndarray:
    """Ridge of the refit: the prior precision ``(2 sd_j / prior_sd)^2`` of each slope.

    A normal prior of sd ``prior_sd`` on ``beta_j * 2 sd_j`` (the effect of a change of two
    standard deviations of predictor j) is a normal prior of sd ``prior_sd / (2 sd_j)`` on
    ``beta_j`` (Gelman et al. 2008, section 2.1, with a normal prior).
    """
    return (2.0 * np.asarray(sd, dtype=float) / prior_sd) ** 2
