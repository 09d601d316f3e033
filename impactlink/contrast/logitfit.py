"""Logistic fits of the county contrasts on all rows: the maximum-likelihood estimate and its
cluster-robust covariance, in a few passes over the rows and without copies of the design.

statsmodels' ``GLM`` holds about a dozen (rows x p) arrays while it refits and builds the
sandwich (0.6 kB a row with six columns: 3 GB on a national weekly target); here the
estimate comes from the package's Newton solver and the CRV1 covariance from the score's
cluster sums and the information matrix, summed in row blocks. statsmodels stays the
fallback when the Newton fit gives no finite estimate, and the reference of the tests.

References
----------
Cameron, A. C., & Miller, D. L. (2015). A practitioner's guide to cluster-robust inference.
Journal of Human Resources, 50(2), 317-372. https://doi.org/10.3368/jhr.50.2.317
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.special import expit

from impactlink.errors import ContrastError

__all__ = ["LogitFit", "design_matrix", "logit_fit", "fitted_chances", "cluster_robust_fit"]

def design_matrix(xv: np.ndarray, z_c: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """``[1, x, z]`` per row in Fortran (column) order, traits taken from the county rows."""
    design = np.empty((xv.size, 2 + z_c.shape[1]), order="F")
    design[:, 0] = 1.0
    design[:, 1] = xv
    for k in range(z_c.shape[1]):
        np.take(z_c[:, k], codes, out=design[:, 2 + k])
    return design


@dataclass(frozen=True)
class LogitFit:
    """The parts of a fitted logistic model :func:`_terms` reads (statsmodels' names)."""

    params: np.ndarray
    bse: np.ndarray
    pvalues: np.ndarray


#: Rows per block of the information-matrix sums (bounds the (rows x p) temporaries).
_ROW_BLOCK = 1 << 16


def fitted_chances(y: np.ndarray, design: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """Event chances of the all-rows fit; a separated fit raises as statsmodels' check does
    (every fitted chance within 1e-8 of its outcome)."""
    if not np.isfinite(beta).all():
        return np.asarray(statsmodels_fit(y, np.ascontiguousarray(design)).predict())
    mu = expit(design @ beta)
    if np.all(np.abs(mu - y) <= 1e-8):
        raise ContrastError(_SEPARATED.format("PerfectSeparationWarning"))
    return mu


def cluster_robust_fit(y: np.ndarray, design: np.ndarray, beta: np.ndarray, codes: np.ndarray,
                 n_groups: int) -> LogitFit:
    r"""Cluster-robust (CRV1) standard errors and t-test p-values of the logistic fit
    ``beta`` (the maximum-likelihood estimate), as statsmodels' ``GLM(y, design,
    Binomial()).fit(cov_type="cluster", cov_kwds={"groups": codes, "use_correction": True},
    use_t=True)`` gives them: bread the inverse information :math:`H = X^T W X`, meat
    :math:`\sum_g s_g s_g^T` with :math:`s_g` the score :math:`\sum_{i \in g}(y_i -
    \mu_i) x_i`, times :math:`\frac{G}{G-1}\frac{n-1}{n-p}`; t with G - 1 degrees of
    freedom (Cameron & Miller 2015)."""
    from scipy.stats import t as t_dist

    if not np.isfinite(beta).all():  # no Newton estimate: statsmodels' own fit, as before
        return statsmodels_fit(y, np.ascontiguousarray(design), groups=codes)
    n, p = design.shape
    mu = expit(design @ beta)
    if np.all(np.abs(mu - y) <= 1e-8):
        raise ContrastError(_SEPARATED.format("PerfectSeparationWarning"))
    w = mu * (1.0 - mu)
    r = np.subtract(y, mu, out=mu)
    H = np.zeros((p, p))
    for s in range(0, n, _ROW_BLOCK):  # row blocks: no (rows x p) temporary
        X = design[s:s + _ROW_BLOCK]
        H += (X * w[s:s + _ROW_BLOCK, None]).T @ X
    del w
    score = np.column_stack([np.bincount(codes, weights=r * design[:, c], minlength=n_groups)
                             for c in range(p)])  # (G, p) cluster sums of the score
    try:
        h_inv = np.linalg.inv(H)
    except np.linalg.LinAlgError:
        raise ContrastError(_SEPARATED.format("LinAlgError")) from None
    with np.errstate(invalid="ignore", divide="ignore"):
        cov = h_inv @ (score.T @ score) @ h_inv.T
        cov *= n_groups / (n_groups - 1.0) * ((n - 1.0) / float(n - p))
        bse = np.sqrt(np.diag(cov))
        pvalues = 2.0 * t_dist.sf(np.abs(beta / bse), n_groups - 1)
    return LogitFit(params=np.asarray(beta, float), bse=bse, pvalues=pvalues)


_SEPARATED = ("the impact is perfectly separated by the index or traits (some trait or index "
              "range has only events or only non-events); the odds ratios are not estimable. "
              "Use fewer traits or more counties. ({})")


def statsmodels_fit(y, design, groups=None, start=None):
    """statsmodels' binomial ``GLM`` fit (cluster-robust when ``groups`` is given)."""
    import statsmodels.api as sm
    from statsmodels.tools.sm_exceptions import PerfectSeparationWarning

    model = sm.GLM(y, design, family=sm.families.Binomial())
    with warnings.catch_warnings():
        warnings.simplefilter("error", PerfectSeparationWarning)
        try:
            if start is not None and not np.isfinite(start).all():
                start = None
            if groups is None:
                return model.fit(start_params=start)
            codes = pd.factorize(groups)[0]
            return model.fit(cov_type="cluster", cov_kwds={"groups": codes, "use_correction": True},
                             use_t=True, start_params=start)
        except (PerfectSeparationWarning, np.linalg.LinAlgError) as err:
            raise ContrastError(_SEPARATED.format(type(err).__name__)) from None


def logit_fit(y, design) -> np.ndarray:
    """Maximum-likelihood logistic coefficients on all rows (no penalty): the estimate of
    both models and the start of every leave-one-year-out fold
    (:func:`impactlink.contrast.foldlogit.logistic_fit`, the Newton-Raphson iteration of
    :func:`impactlink.models.batch.fit_logistic_batch` without its per-step copies of the
    design; tested against statsmodels' ``GLM``)."""
    from impactlink.contrast.foldlogit import logistic_fit

    return logistic_fit(y, design, max_iter=100, tol=1e-8)
