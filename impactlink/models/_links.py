"""Link functions of cumulative link models: distribution function, density and its slope.

Every impact model in this package is written in one form,

    P(level >= k | x) = F(eta - c_k),   eta = x' beta,   k = 1..K,

with increasing thresholds c_1 < ... < c_K. A binary logistic regression is the case K = 1 with
c_1 = -intercept. ``F`` is the logistic or the standard normal distribution function.
"""

from __future__ import annotations

import numpy as np
from scipy import special

from impactlink.errors import ModelError

_SQRT_2PI = np.sqrt(2.0 * np.pi)

LINKS = ("logit", "probit")


def check_link(link: str) -> str:
    if link not in LINKS:
        raise ModelError(f"link must be one of {LINKS}; got {link!r}")
    return link


def cdf(z: np.ndarray, link: str) -> np.ndarray:
    """F(z): logistic or standard normal distribution function."""
    if link == "logit":
        return special.expit(z)
    return special.ndtr(z)


def ppf(p: np.ndarray | float, link: str) -> np.ndarray:
    """F^-1(p)."""
    if link == "logit":
        return special.logit(p)
    return special.ndtri(p)


def pdf(z: np.ndarray, link: str) -> np.ndarray:
    """f(z) = F'(z); 0 at +-inf."""
    with np.errstate(over="ignore", invalid="ignore"):
        if link == "logit":
            e = special.expit(z)
            out = e * (1.0 - e)
        else:
            out = np.exp(-0.5 * z**2) / _SQRT_2PI
    return np.where(np.isfinite(z), out, 0.0)


def dpdf(z: np.ndarray, link: str) -> np.ndarray:
    """f'(z); 0 at +-inf."""
    with np.errstate(over="ignore", invalid="ignore"):
        if link == "logit":
            e = special.expit(z)
            out = e * (1.0 - e) * (1.0 - 2.0 * e)
        else:
            out = -z * np.exp(-0.5 * z**2) / _SQRT_2PI
    return np.where(np.isfinite(z), out, 0.0)


def bounds(eta: np.ndarray, cuts: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Arguments (a, b) with P(level = y) = F(a) - F(b).

    a = eta - c_y (a = +inf for y = 0) and b = eta - c_{y+1} (b = -inf for y = K).
    ``cuts`` is either shape (K,) or per row (n, K).
    """
    cuts = np.asarray(cuts, dtype=float)
    n = eta.shape[0]
    if cuts.ndim == 1:
        cuts = np.broadcast_to(cuts, (n, cuts.shape[0]))
    ext = np.concatenate([np.full((n, 1), -np.inf), cuts, np.full((n, 1), np.inf)], axis=1)
    rows = np.arange(n)
    a = eta - ext[rows, y]
    b = eta - ext[rows, y + 1]
    return a, b


def row_loglik(
    eta: np.ndarray, cuts: np.ndarray, y: np.ndarray, link: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Log-likelihood of each row and its first and second derivative in eta."""
    a, b = bounds(eta, cuts, y)
    p = np.clip(cdf(a, link) - cdf(b, link), 1e-300, None)
    fa, fb = pdf(a, link), pdf(b, link)
    d1 = (fa - fb) / p
    d2 = (dpdf(a, link) - dpdf(b, link)) / p - d1**2
    return np.log(p), d1, d2
