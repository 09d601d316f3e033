"""One large cumulative link fit: the rows sorted by level, each level a contiguous slice.

The final fits of a national run (one impact model on millions of county-weeks) are one fit
each, ``B = 1`` in :func:`impactlink.models.batch.fit_cumlogit_batch`. With the rows sorted by
their observed level, a level's rows are a view, and only the arguments a row has are
evaluated: a row at level 0 has no lower argument and a row at the top level no upper one,
so a binary fit evaluates the link once per row instead of twice. The log-likelihood,
gradient and Hessian are those of :func:`impactlink.models.batch._cum_derivatives` (the same
sums, taken level by level); ``tests/models/test_batch_onefit.py`` checks both paths agree.
"""

from __future__ import annotations

import numpy as np

from impactlink.models import _links
from impactlink.models._newton import _EPS


class SortedRows:
    """The rows of one fit, sorted by level (stable), with each level's slice."""

    def __init__(self, X: np.ndarray, yi: np.ndarray, w: np.ndarray, K: int) -> None:
        order = np.argsort(yi, kind="stable")
        self.X = np.ascontiguousarray(X[order])  # (n, p)
        self.w = w[order]
        counts = np.bincount(yi, minlength=K)
        edges = np.concatenate([[0], np.cumsum(counts)])
        self.slices = [slice(int(edges[j]), int(edges[j + 1])) for j in range(K)]
        self.K = K


def _terms(a: np.ndarray | None, s, link: str, upper: bool, derivs: bool):
    """G = F(s a), f(a), f'(a) of one argument; the limits where the argument is absent."""
    if a is None:  # a = +inf (upper) or -inf (lower): F(s a) is 1 or 0, f = f' = 0
        G = (np.asarray(s) > 0).astype(float) if upper else (np.asarray(s) < 0).astype(float)
        return G, 0.0, 0.0
    G = _links.cdf(s * a, link)
    if not derivs:
        return G, None, None
    if link == "logit":
        f = G * (1.0 - G)
        return G, f, s * f * (1.0 - 2.0 * G)
    f = np.exp(-0.5 * a**2) / np.sqrt(2.0 * np.pi)
    return G, f, -a * f


def _level(par: np.ndarray, rows: SortedRows, j: int, link: str, derivs: bool):
    """Arguments, probabilities and link terms of the rows at level ``j``."""
    K = rows.K
    sl = rows.slices[j]
    xb = rows.X[sl] @ par[K - 1:]
    au = par[j] - xb if j < K - 1 else None
    al = par[j - 1] - xb if j > 0 else None
    s = np.where(al > 0, -1.0, 1.0) if al is not None else 1.0
    Gu, fu, dfu = _terms(au, s, link, True, derivs)
    Gl, fl, dfl = _terms(al, s, link, False, derivs)
    P = np.maximum(s * (Gu - Gl), _EPS)
    return sl, au, al, P, (fu, dfu, fl, dfl)


def loglik(par: np.ndarray, rows: SortedRows, link: str) -> float:
    """Weighted log-likelihood of one fit's coefficients ``par`` (K-1 cut-points, slopes)."""
    total = 0.0
    for j in range(rows.K):
        sl, _, _, P, _ = _level(par, rows, j, link, False)
        total += float(rows.w[sl] @ np.log(P))
    return total


def derivatives(par: np.ndarray, rows: SortedRows, pen: np.ndarray, link: str
                ) -> tuple[np.ndarray, np.ndarray]:
    """Gradient (q,) and Hessian (q, q) of the penalised log-likelihood of one fit."""
    K = rows.K
    p = rows.X.shape[1]
    q = K - 1 + p
    grad = np.zeros(q)
    H = np.zeros((q, q))
    b = slice(K - 1, q)
    for j in range(K):
        sl, au, al, P, (fu, dfu, fl, dfl) = _level(par, rows, j, link, True)
        X, w = rows.X[sl], rows.w[sl]
        if X.shape[0] == 0:
            continue
        gu = fu / P if au is not None else 0.0
        gl = -fl / P if al is not None else 0.0
        huu = dfu / P - gu**2 if au is not None else 0.0
        hll = -dfl / P - gl**2 if al is not None else 0.0
        hul = fu * fl / P**2 if (au is not None and al is not None) else 0.0
        grad[b] -= (w * (gu + gl)) @ X
        H[b, b] += (X * (w * (huu + hll + 2.0 * hul))[:, None]).T @ X
        if au is not None:  # cut-point j is this level's upper argument
            grad[j] += float(w @ gu)
            H[j, j] += float(w @ huu)
            H[j, b] -= (w * (huu + hul)) @ X
        if al is not None:  # cut-point j-1 is its lower argument
            grad[j - 1] += float(w @ gl)
            H[j - 1, j - 1] += float(w @ hll)
            H[j - 1, b] -= (w * (hll + hul)) @ X
        if au is not None and al is not None:
            H[j, j - 1] += float(w @ hul)
            H[j - 1, j] += float(w @ hul)
    H[b, :K - 1] = H[:K - 1, b].T
    grad -= pen * par
    H[np.arange(q), np.arange(q)] -= pen
    return grad, H
