"""Batched Newton-Raphson solvers: the one engine behind every impact-model fit.

:func:`fit_cumlogit_batch` fits cumulative link (proportional-odds) models, logit or probit,
with an optional ridge penalty and, on request, the covariance from the observed
information. It is the solver of :func:`impactlink.models.fit_impact_model` (a binary target
is its two-level case, the separation fallback its ridge-penalised case) and of the
cross-validation engine in :mod:`impactlink.skill`. :func:`fit_logistic_batch` is the
binomial GLM on event proportions with an intercept column, used where the outcome of a row
is a fraction of its weight (histogram cells, recalibration slopes).

Cross-validation over hundreds of candidates means tens of thousands of small fits (a few
hundred weighted rows each: the histogram cells of :mod:`impactlink.skill`); every fit of
one shape is a slice of a ``(B, n, p)`` array and Newton-Raphson runs on all of them
together in numpy. statsmodels (``GLM``, ``OrderedModel``) and R's ``MASS::polr`` are the
references these solvers are tested against (``tests/models``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from impactlink.errors import ModelError
from impactlink.models import _links, _onefit
from impactlink.models._newton import (
    _EPS,
    check_batch,
    check_start,
    drop_empty_rows,
    inverse,
    mv,
    newton,
    quad,
    sigmoid,
    solve,
    tv,
)

__all__ = ["BatchFit", "fit_logistic_batch", "fit_cumlogit_batch", "predict_logistic",
           "predict_cumlogit"]


@dataclass(frozen=True)
class BatchFit:
    """Coefficients of ``B`` independent fits.

    Attributes
    ----------
    coef : ndarray, shape (B, q)
        Logistic: the coefficients of the columns of ``X``. Cumulative link: the ``K-1``
        cut-points first, then the slopes of the columns of ``X``.
    converged : ndarray of bool, shape (B,)
        True where the largest Newton step fell below ``tol``.
    n_iter : int
        Newton iterations used (the slowest fit of the batch).
    loglik : ndarray, shape (B,)
        Weighted log-likelihood at ``coef`` (without the ridge term).
    cov : ndarray, shape (B, q, q), or None
        Cumulative link fits with ``covariance=True``: the inverse of minus the (penalised)
        Hessian of the log-likelihood at ``coef`` (observed information), in the order of
        ``coef``; NaN for a fit whose Hessian is singular. None otherwise.
    """

    coef: np.ndarray
    converged: np.ndarray
    n_iter: int
    loglik: np.ndarray
    cov: np.ndarray | None = None


# --------------------------------------------------------------------------- logistic
def fit_logistic_batch(
    X: np.ndarray,
    y: np.ndarray,
    w: np.ndarray | None = None,
    *,
    ridge: float = 1e-6,
    max_iter: int = 50,
    tol: float = 1e-8,
    start: np.ndarray | None = None,
) -> BatchFit:
    """Fit ``B`` weighted logistic regressions by Newton-Raphson, all at once.

    Parameters
    ----------
    X : ndarray, shape (B, n, p)
        Design matrices; include a column of ones for the intercept. Rows with zero weight
        are ignored, so fits of different sizes are padded to a common ``n``.
    y : ndarray, shape (B, n)
        Outcome in [0, 1]: 0/1, or the proportion of events among the row's weight
        (a binomial row of ``w`` trials).
    w : ndarray, shape (B, n), optional
        Non-negative weights (counts of trials). Default 1.
    ridge : float, default 1e-6
        Penalty ``ridge/2 * ||beta||^2`` on every coefficient except constant columns
        (the intercept); it keeps fits finite under complete separation and is negligible
        otherwise.
    max_iter : int, default 50
    tol : float, default 1e-8
        Convergence when the largest absolute Newton step is below ``tol``.
    start : ndarray, shape (B, p), optional
        Starting coefficients (e.g. the fit on all data, to warm-start fold fits).

    Returns
    -------
    BatchFit

    Raises
    ------
    ModelError
        If shapes disagree, values are not finite, or weights are negative.

    Notes
    -----
    Maximises :math:`\\ell(\\beta) = \\sum_i w_i [y_i \\eta_i - \\log(1 + e^{\\eta_i})] -
    \\tfrac{\\lambda}{2}\\lVert\\beta\\rVert^2` with :math:`\\eta = X\\beta`; each step solves
    :math:`(X^T W X + \\lambda I)\\,\\delta = X^T w (y - p) - \\lambda\\beta` with
    :math:`W = \\mathrm{diag}(w p (1-p))` (iteratively reweighted least squares,
    McCullagh & Nelder 1989, section 4.4), halving the step while the penalised
    log-likelihood decreases.

    References
    ----------
    McCullagh, P., Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall.
    """
    X, y, w = check_batch(X, y, w, "fit_logistic_batch")
    if ((y < 0) | (y > 1)).any():
        raise ModelError("fit_logistic_batch: y must lie in [0, 1] (event proportions)")
    X, y, w = drop_empty_rows(X, y, w)
    B, n, p = X.shape
    pen = np.full((B, p), float(ridge))
    if ridge != 0.0:  # without a ridge every penalty is 0 already: skip two passes over X
        pen[_constant_columns(X, w)] = 0.0
    # start from the weighted base rate in the intercept-like column, zero elsewhere
    beta = np.zeros((B, p))
    wsum = np.maximum(w.sum(1), _EPS)
    rate = np.clip((w * y).sum(1) / wsum, 1e-4, 1 - 1e-4)
    const = pen == 0.0
    has = const.any(1)
    first = np.argmax(const, axis=1)
    rows = np.flatnonzero(has)
    cval = X[rows, np.argmax(w[rows] > 0, axis=1), first[rows]]
    beta[rows, first[rows]] = np.log(rate[rows] / (1 - rate[rows])) / cval
    if start is not None:
        beta = check_start(start, (B, p), "fit_logistic_batch")
    obj = _logit_objective(X, y, w, beta, pen)

    def newton_step(A, ba):
        Xa, ya, wa, pa = X[A], y[A], w[A], pen[A]
        eta = mv(Xa, ba)
        mu = sigmoid(eta)
        grad = tv(Xa, wa * (ya - mu)) - pa * ba
        H = quad(Xa, wa * mu * (1 - mu), Xa)
        H[:, np.arange(p), np.arange(p)] += pa + 1e-12
        return solve(H, grad), lambda bb: _logit_objective(Xa, ya, wa, bb, pa)

    converged, it = newton(newton_step, beta, obj, max_iter=max_iter, tol=tol)
    ll = _logit_objective(X, y, w, beta, np.zeros_like(pen))
    return BatchFit(coef=beta, converged=converged, n_iter=it, loglik=ll)


def predict_logistic(X: np.ndarray, coef: np.ndarray) -> np.ndarray:
    """Event probability ``1 / (1 + exp(-X @ coef))`` for ``X`` (B, n, p), coef (B, p)."""
    return sigmoid(np.einsum("bnp,bp->bn", np.asarray(X, float), np.asarray(coef, float)))


def _constant_columns(X: np.ndarray, w: np.ndarray) -> np.ndarray:
    """(B, p) True where a column is constant and non-zero over rows with weight."""
    mask = (w > 0)[:, :, None]
    lo = np.where(mask, X, np.inf).min(axis=1)
    hi = np.where(mask, X, -np.inf).max(axis=1)
    return (lo == hi) & (lo != 0) & np.isfinite(lo)


def _logit_objective(X, y, w, beta, pen) -> np.ndarray:
    eta = mv(X, beta)
    # y log s(eta) + (1 - y) log s(-eta) = y eta - log(1 + e^eta)
    softplus = np.maximum(eta, 0.0) + np.log1p(np.exp(-np.abs(eta)))
    ll = (w * (y * eta - softplus)).sum(1)
    return ll - 0.5 * (pen * beta**2).sum(1)




# --------------------------------------------------------------------------- cumulative link
def fit_cumlogit_batch(
    X: np.ndarray,
    y: np.ndarray,
    w: np.ndarray | None = None,
    *,
    n_levels: int | None = None,
    link: str = "logit",
    ridge: float | np.ndarray = 1e-6,
    max_iter: int = 50,
    tol: float = 1e-8,
    start: np.ndarray | None = None,
    covariance: bool = False,
) -> BatchFit:
    """Fit ``B`` weighted cumulative link (proportional-odds) models at once.

    Parameters
    ----------
    X : ndarray, shape (B, n, p)
        Predictors **without** an intercept column (the cut-points play its part).
    y : ndarray, shape (B, n)
        Outcome level, integer 0..K-1.
    w : ndarray, shape (B, n), optional
        Non-negative weights (counts). Default 1. Zero-weight rows are padding.
    n_levels : int, optional
        Number of levels K (default: ``max(y) + 1``). Every level should occur in each fit
        with positive weight; a level that never occurs sends its cut-point towards
        infinity and the fit reports ``converged=False``.
    link : {"logit", "probit"}, default "logit"
        The distribution function F (logistic: the proportional-odds model; standard
        normal: the ordered probit). The function keeps the name of its common case.
    ridge : float or ndarray of shape (p,) or (B, p), default 1e-6
        Penalty ``ridge_j / 2 * beta_j^2`` on the slopes (not the cut-points): a number for
        every slope, or one precision per slope (a normal prior of variance 1/ridge_j).
        0 gives the maximum-likelihood fit.
    max_iter : int, default 50
    tol : float, default 1e-8
        Convergence when the largest absolute Newton step is below ``tol``.
    start : ndarray, shape (B, K-1+p), optional
        Starting coefficients, cut-points increasing.
    covariance : bool, default False
        Also return ``cov``, the inverse of minus the penalised Hessian at the solution.

    Returns
    -------
    BatchFit
        ``coef[:, :K-1]`` are the cut-points :math:`\\theta_0 < ... < \\theta_{K-2}`;
        ``coef[:, K-1:]`` the slopes.

    Raises
    ------
    ModelError
        If shapes disagree, values are not finite, weights are negative, levels are not
        integers in 0..K-1, ``K < 2``, the link is unknown or ``ridge`` has a wrong shape.

    Notes
    -----
    :math:`P(Y \\le k \\mid x) = F(\\theta_k - x^T\\beta)` (McCullagh 1980, eq. 2.2; the
    sign convention of statsmodels' ``OrderedModel`` and R's ``MASS::polr``: a positive
    slope moves weight to higher levels). With :math:`a_k = \\theta_k - x^T\\beta`, a row at
    level :math:`j` contributes :math:`\\log[F(a_j) - F(a_{j-1})]`
    (:math:`a_{-1} = -\\infty`, :math:`a_{K-1} = \\infty`); with :math:`P` that difference
    and :math:`f = F'`, the derivatives in :math:`(a_j, a_{j-1})` are
    :math:`f(a_j)/P`, :math:`-f(a_{j-1})/P`, :math:`f'(a_j)/P - (f(a_j)/P)^2`,
    :math:`-f'(a_{j-1})/P - (f(a_{j-1})/P)^2` and :math:`f(a_j) f(a_{j-1})/P^2`, and the
    gradient and Hessian in :math:`(\\theta, \\beta)` follow by the chain rule. When both
    :math:`a`'s are positive, :math:`P` is computed as :math:`F(-a_{j-1}) - F(-a_j)` (F is
    symmetric), which keeps its precision in the upper tail. For a log-concave F (logistic,
    normal) the log-likelihood is concave in :math:`(\\theta, \\beta)` (Pratt 1981), so
    Newton-Raphson with step-halving (keeping the cut-points ordered) converges; the
    covariance is the inverse of the observed information (minus the Hessian), the same
    quantity statsmodels' ``OrderedModel`` and ``GLM`` (canonical logit) report.

    References
    ----------
    McCullagh, P. (1980). Regression models for ordinal data. Journal of the Royal
    Statistical Society B 42(2), 109-142.
    Pratt, J. W. (1981). Concavity of the log likelihood. Journal of the American
    Statistical Association 76(373), 103-106.
    """
    X, yf, w = check_batch(X, y, w, "fit_cumlogit_batch")
    _links.check_link(link)
    if np.any(yf != np.round(yf)) or (yf < 0).any():
        raise ModelError("fit_cumlogit_batch: y must hold integer levels 0..K-1")
    K = int(yf.max()) + 1 if n_levels is None else int(n_levels)
    if K < 2:
        raise ModelError(f"fit_cumlogit_batch: need at least 2 levels; got n_levels={K}")
    if yf.max() > K - 1:
        raise ModelError(f"fit_cumlogit_batch: y has level {int(yf.max())} >= n_levels={K}")
    X, yf, w = drop_empty_rows(X, yf, w)
    yi = yf.astype(np.int64)
    B, n, p = X.shape
    q = K - 1 + p
    rows = _LevelRows(X, yi, w, K)
    pen = np.zeros((B, q))
    pen[:, K - 1:] = _ridge(ridge, B, p)
    # start: cut-points at F^-1 of the weighted cumulative proportions, slopes 0
    counts = np.stack([(w * (yi == k)).sum(1) for k in range(K)], axis=1) + 0.5
    cum = np.cumsum(counts, 1)[:, :-1] / counts.sum(1, keepdims=True)
    theta = np.zeros((B, q))
    theta[:, : K - 1] = _links.ppf(cum, link)
    if start is not None:
        theta = check_start(start, (B, q), "fit_cumlogit_batch")
        if K > 2 and not (np.diff(theta[:, : K - 1], axis=1) > 0).all():
            raise ModelError("fit_cumlogit_batch: start cut-points must be increasing")

    one = _onefit.SortedRows(X[0], yi[0], w[0], K) if B == 1 else None

    def loglik(par):
        if one is not None:  # one large fit: level slices (impactlink.models._onefit)
            return np.array([_onefit.loglik(par[0], one, link)])
        return _cum_loglik(par, rows, link)

    def derivatives(par, ra, pa):
        if one is not None:
            g, h = _onefit.derivatives(par[0], one, pa[0], link)
            return g[None], h[None]
        return _cum_derivatives(par, ra, pa, link)

    def objective(par):
        return loglik(par) - 0.5 * (pen * par**2).sum(1)

    def ordered(par):
        if K <= 2:
            return np.ones(par.shape[0], dtype=bool)
        return (np.diff(par[:, : K - 1], axis=1) > 0).all(1)

    obj = objective(theta)

    def newton_step(A, par):
        ra, pa = (rows if one is not None else rows.subset(A)), pen[A]
        grad, H = derivatives(par, ra, pa)
        H[:, np.arange(q), np.arange(q)] -= 1e-12

        def obj_a(pp):
            ll = loglik(pp) if one is not None else _cum_loglik(pp, ra, link)
            return ll - 0.5 * (pa * pp**2).sum(1)

        return solve(-H, grad), obj_a

    converged, it = newton(newton_step, theta, obj, max_iter=max_iter, tol=tol, valid=ordered)
    ll = loglik(theta)
    cov = None
    if covariance:
        _, H = derivatives(theta, rows, pen)
        cov = inverse(-H)
        cov = 0.5 * (cov + cov.transpose(0, 2, 1))
    return BatchFit(coef=theta, converged=converged, n_iter=it, loglik=ll, cov=cov)


def predict_cumlogit(X: np.ndarray, coef: np.ndarray, n_levels: int, *,
                     link: str = "logit") -> np.ndarray:
    """Level probabilities, shape (B, n, K), of cumulative link fits.

    ``X`` (B, n, p) without intercept; ``coef`` (B, K-1+p) as returned by
    :func:`fit_cumlogit_batch` with the same ``link``.
    """
    X = np.asarray(X, float)
    coef = np.asarray(coef, float)
    K = int(n_levels)
    xb = np.einsum("bnp,bp->bn", X, coef[:, K - 1:])
    a = coef[:, None, : K - 1] - xb[..., None]
    F = _links.cdf(a, _links.check_link(link))
    F = np.concatenate([np.zeros(F.shape[:2] + (1,)), F, np.ones(F.shape[:2] + (1,))], axis=2)
    return np.maximum(np.diff(F, axis=2), 0.0)


def _ridge(ridge, B: int, p: int) -> np.ndarray:
    """The slope penalties as a (B, p) array, or a ModelError naming the shape expected."""
    r = np.asarray(ridge, dtype=float)
    try:
        r = np.broadcast_to(r, (B, p))
    except ValueError:
        raise ModelError(
            f"fit_cumlogit_batch: ridge must be a number or have shape (p,) = ({p},) or "
            f"(B, p) = ({B}, {p}); got shape {r.shape}"
        ) from None
    if not (np.isfinite(r).all() and (r >= 0).all()):
        raise ModelError("fit_cumlogit_batch: ridge must be finite and >= 0")
    return r


class _LevelRows:
    """The rows of a batch of cumulative link fits, grouped by their observed level.

    A row at level j has the upper argument :math:`a_j = \\theta_j - x^T\\beta` (none at
    the top level) and the lower one :math:`a_{j-1}` (none at level 0). Sums over the rows
    of one level are bincounts on ``code = b * K + j``, so the gradient and Hessian need
    O(B n p) work and memory, without (B, n, K-1+p) indicator designs.
    """

    def __init__(self, X, yi, w, K, code=None):
        self.X, self.yi, self.w, self.K = X, yi, w, K
        B = X.shape[0]
        self.code = (np.arange(B)[:, None] * K + yi) if code is None else code
        self.has_u = yi < K - 1
        self.has_l = yi > 0

    def subset(self, A) -> _LevelRows:
        if isinstance(A, slice) and A == slice(None):
            return self
        yi = self.yi[A]
        return _LevelRows(self.X[A], yi, self.w[A], self.K)

    def level_sums(self, v: np.ndarray) -> np.ndarray:
        """(B, K): the sum of ``v`` (B, n) over the rows of each fit at each level."""
        B, K = self.X.shape[0], self.K
        return np.bincount(self.code.ravel(), weights=v.ravel(), minlength=B * K).reshape(B, K)


def _bounds(par, rows: _LevelRows):
    """Upper and lower arguments a_j, a_{j-1} (+-inf where absent), the tail sign s and x'b."""
    K = rows.K
    B = par.shape[0]
    xb = mv(rows.X, par[:, K - 1:])
    cuts_u = np.concatenate([par[:, : K - 1], np.full((B, 1), np.inf)], axis=1)
    cuts_l = np.concatenate([np.full((B, 1), -np.inf), par[:, : K - 1]], axis=1)
    au = np.take_along_axis(cuts_u, rows.yi, axis=1) - xb
    al = np.take_along_axis(cuts_l, rows.yi, axis=1) - xb
    # s = -1 where both arguments are positive: evaluate F(-a) there (F is symmetric)
    s = np.where(al > 0, -1.0, 1.0)
    return au, al, s


def _cum_loglik(par, rows: _LevelRows, link: str) -> np.ndarray:
    au, al, s = _bounds(par, rows)
    P = s * (_links.cdf(s * au, link) - _links.cdf(s * al, link))
    return (rows.w * np.log(np.maximum(P, _EPS))).sum(1)


def _cum_derivatives(par, rows: _LevelRows, pen, link: str):
    """Gradient (B, q) and Hessian (B, q, q) of the penalised log-likelihood.

    With :math:`g_u, g_l, h_{uu}, h_{ll}, h_{ul}` the derivatives of a row's log-probability
    in its arguments :math:`(a_j, a_{j-1})` (zero where an argument is absent), the chain
    rule through :math:`a_j = \\theta_j - x^T\\beta` gives per level sums for the
    cut-points and x-weighted sums for the slopes (the terms of
    :math:`D_u^T\\,\\mathrm{diag}(h)\\,D_l` with indicator designs, summed level by level).
    """
    K = rows.K
    X, w = rows.X, rows.w
    B, _, p = X.shape
    q = K - 1 + p
    au, al, s = _bounds(par, rows)
    Gu, fu, dfu = _link_terms(au, s, link)
    Gl, fl, dfl = _link_terms(al, s, link)
    P = np.maximum(s * (Gu - Gl), _EPS)
    gu, gl = fu / P, -fl / P
    huu = dfu / P - gu**2
    hll = -dfl / P - gl**2
    hul = fu * fl / P**2
    grad = np.zeros((B, q))
    H = np.zeros((B, q, q))
    lu = rows.level_sums(w * gu)  # (B, K): level j's sum, for cut-point j (upper)
    ll_ = rows.level_sums(w * gl)  # for cut-point j-1 (lower)
    grad[:, : K - 1] = lu[:, : K - 1] + ll_[:, 1:]
    grad[:, K - 1:] = -tv(X, w * (gu + gl))
    suu = rows.level_sums(w * huu)
    sll = rows.level_sums(w * hll)
    sul = rows.level_sums(w * hul)
    k = np.arange(K - 1)
    H[:, k, k] = suu[:, : K - 1] + sll[:, 1:]
    if K > 2:  # level j couples cut-points j and j-1
        H[:, k[1:], k[1:] - 1] = sul[:, 1: K - 1]
        H[:, k[1:] - 1, k[1:]] = sul[:, 1: K - 1]
    cu = w * (huu + hul)  # x-weighted, for cut-point j (upper) of the row's level
    cl = w * (hll + hul)  # for cut-point j-1 (lower)
    cross = np.stack([rows.level_sums(cu * X[..., c]) for c in range(p)], axis=-1)
    crossl = np.stack([rows.level_sums(cl * X[..., c]) for c in range(p)], axis=-1)
    tb = -(cross[:, : K - 1] + crossl[:, 1:])  # (B, K-1, p)
    H[:, : K - 1, K - 1:] = tb
    H[:, K - 1:, : K - 1] = tb.transpose(0, 2, 1)
    H[:, K - 1:, K - 1:] = quad(X, w * (huu + hll + 2.0 * hul), X)
    grad -= pen * par
    H[:, np.arange(q), np.arange(q)] -= pen
    return grad, H


def _link_terms(a: np.ndarray, s: np.ndarray, link: str):
    """F(s a), f(a) and f'(a) for the symmetric link F (f = F'); f = f' = 0 at +-inf."""
    G = _links.cdf(s * a, link)
    if link == "logit":
        f = G * (1.0 - G)  # f(a) = F(a) F(-a) whatever the sign s
        df = s * f * (1.0 - 2.0 * G)  # f'(a) = f(a) (1 - 2 F(a)) and F(a) = G or 1 - G
        return G, f, df
    fin = np.isfinite(a)
    az = np.where(fin, a, 0.0)
    f = np.where(fin, np.exp(-0.5 * az**2) / np.sqrt(2.0 * np.pi), 0.0)
    return G, f, -az * f
