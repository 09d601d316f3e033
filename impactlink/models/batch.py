"""Batched Newton-Raphson solvers for many small impact models at once.

Cross-validation over hundreds of candidates means tens of thousands of small fits (a few
hundred weighted rows each: the histogram cells of :mod:`impactlink.skill`). Fitting them one
by one through statsmodels would take minutes; here every fit of one shape is a slice of a
``(B, n, p)`` array and Newton-Raphson runs on all of them together in numpy. statsmodels
stays the reference these solvers are tested against (``tests/models/test_batch.py``) and
the engine for the final fits with intervals.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from impactlink.errors import ModelError

__all__ = ["BatchFit", "fit_logistic_batch", "fit_cumlogit_batch", "predict_logistic",
           "predict_cumlogit"]

_EPS = 1e-300


@dataclass(frozen=True)
class BatchFit:
    """Coefficients of ``B`` independent fits.

    Attributes
    ----------
    coef : ndarray, shape (B, q)
        Logistic: the coefficients of the columns of ``X``. Cumulative logit: the ``K-1``
        cut-points first, then the slopes of the columns of ``X``.
    converged : ndarray of bool, shape (B,)
        True where the largest Newton step fell below ``tol``.
    n_iter : int
        Newton iterations used (the slowest fit of the batch).
    loglik : ndarray, shape (B,)
        Weighted log-likelihood at ``coef`` (without the ridge term).
    """

    coef: np.ndarray
    converged: np.ndarray
    n_iter: int
    loglik: np.ndarray


def _check_batch(X, y, w, name: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.ones_like(y) if w is None else np.asarray(w, dtype=float)
    if X.ndim != 3:
        raise ModelError(f"{name}: X must have shape (B, n, p); got shape {X.shape}")
    if y.shape != X.shape[:2] or w.shape != X.shape[:2]:
        raise ModelError(
            f"{name}: y and w must have shape (B, n) = {X.shape[:2]}; got y {y.shape}, "
            f"w {w.shape}"
        )
    if not (np.isfinite(X).all() and np.isfinite(y).all() and np.isfinite(w).all()):
        raise ModelError(f"{name}: X, y and w must be finite; drop or fill NaN rows first")
    if (w < 0).any():
        raise ModelError(f"{name}: weights w must be >= 0; found {w.min()}")
    return X, y, w


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
    ValueError
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
    X, y, w = _check_batch(X, y, w, "fit_logistic_batch")
    if ((y < 0) | (y > 1)).any():
        raise ModelError("fit_logistic_batch: y must lie in [0, 1] (event proportions)")
    X, y, w = _drop_empty_rows(X, y, w)
    B, n, p = X.shape
    pen = np.full((B, p), float(ridge))
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
        beta = _start(start, (B, p), "fit_logistic_batch")
    obj = _logit_objective(X, y, w, beta, pen)

    def newton_step(A, ba):
        Xa, ya, wa, pa = X[A], y[A], w[A], pen[A]
        eta = _mv(Xa, ba)
        mu = _sigmoid(eta)
        grad = _tv(Xa, wa * (ya - mu)) - pa * ba
        H = _quad(Xa, wa * mu * (1 - mu), Xa)
        H[:, np.arange(p), np.arange(p)] += pa + 1e-12
        return _solve(H, grad), lambda bb: _logit_objective(Xa, ya, wa, bb, pa)

    converged, it = _newton(newton_step, beta, obj, max_iter=max_iter, tol=tol)
    ll = _logit_objective(X, y, w, beta, np.zeros_like(pen))
    return BatchFit(coef=beta, converged=converged, n_iter=it, loglik=ll)


def predict_logistic(X: np.ndarray, coef: np.ndarray) -> np.ndarray:
    """Event probability ``1 / (1 + exp(-X @ coef))`` for ``X`` (B, n, p), coef (B, p)."""
    return _sigmoid(np.einsum("bnp,bp->bn", np.asarray(X, float), np.asarray(coef, float)))


def _constant_columns(X: np.ndarray, w: np.ndarray) -> np.ndarray:
    """(B, p) True where a column is constant and non-zero over rows with weight."""
    mask = (w > 0)[:, :, None]
    lo = np.where(mask, X, np.inf).min(axis=1)
    hi = np.where(mask, X, -np.inf).max(axis=1)
    return (lo == hi) & (lo != 0) & np.isfinite(lo)


def _start(start, shape, name) -> np.ndarray:
    s = np.array(start, dtype=float)
    if s.shape != shape or not np.isfinite(s).all():
        raise ModelError(f"{name}: start must be finite with shape {shape}; got {s.shape}")
    return s


def _drop_empty_rows(X, y, w):
    """Drop rows whose weight is zero in every fit of the batch (padding)."""
    keep = (w > 0).any(0)
    if keep.all() or not keep.any():
        return X, y, w
    return X[:, keep], y[:, keep], w[:, keep]


def _mv(A: np.ndarray, v: np.ndarray) -> np.ndarray:
    """``einsum("bnq,bq->bn")`` through batched BLAS matmul."""
    return (A @ v[..., None])[..., 0]


def _tv(A: np.ndarray, v: np.ndarray) -> np.ndarray:
    """``einsum("bnq,bn->bq")``."""
    return (v[:, None, :] @ A)[:, 0, :]


def _quad(A: np.ndarray, v: np.ndarray, C: np.ndarray) -> np.ndarray:
    """``einsum("bnq,bn,bnr->bqr")``: A^T diag(v) C per fit."""
    return (A * v[..., None]).transpose(0, 2, 1) @ C


def _sigmoid(z: np.ndarray) -> np.ndarray:
    return 0.5 * (1.0 + np.tanh(0.5 * z))


def _log_sigmoid(z: np.ndarray) -> np.ndarray:
    return -np.logaddexp(0.0, -z)


def _logit_objective(X, y, w, beta, pen) -> np.ndarray:
    eta = _mv(X, beta)
    # y log s(eta) + (1 - y) log s(-eta) = y eta - log(1 + e^eta)
    softplus = np.maximum(eta, 0.0) + np.log1p(np.exp(-np.abs(eta)))
    ll = (w * (y * eta - softplus)).sum(1)
    return ll - 0.5 * (pen * beta**2).sum(1)


def _solve(H: np.ndarray, g: np.ndarray) -> np.ndarray:
    try:
        return np.linalg.solve(H, g[..., None])[..., 0]
    except np.linalg.LinAlgError:
        return (np.linalg.pinv(H) @ g[..., None])[..., 0]


def _newton(newton_step, beta, obj, *, max_iter: int, tol: float, valid=None
            ) -> tuple[np.ndarray, int]:
    """Newton-Raphson with step-halving on a batch of fits, updating ``beta`` (B, q) and
    ``obj`` (B,) in place.

    ``newton_step(A, beta[A])`` returns the Newton step of the fits ``A`` and their
    objective as a function of candidate coefficients. Fits stop once their largest
    absolute step is below ``tol``. Returns the converged flags (B,) and the iterations used.
    """
    converged = np.zeros(beta.shape[0], dtype=bool)
    it = 0
    for it in range(1, max_iter + 1):
        active = ~converged
        if not active.any():
            it -= 1
            break
        # compute on views of all fits while most are active (no copies); on the
        # remaining few once most have converged
        A = slice(None) if active.mean() > 0.5 else np.flatnonzero(active)
        ba = beta[A]
        step, objective = newton_step(A, ba)
        step[converged[A]] = 0.0
        new, new_obj = _halve(objective, ba, step, obj[A], valid=valid)
        beta[A] = new
        obj[A] = new_obj
        converged[A] |= np.abs(step).max(1) < tol
    return converged, it


def _halve(objective, beta, step, obj_old, *, max_halvings: int = 30, valid=None):
    """Newton step with step-halving until the objective does not decrease (per fit)."""
    scale = np.ones(beta.shape[0])
    new = beta + step
    new_obj = objective(new)
    ok = new_obj >= obj_old - 1e-12 * np.abs(obj_old)
    if valid is not None:
        ok &= valid(new)
    for _ in range(max_halvings):
        if ok.all():
            break
        scale = np.where(ok, scale, scale * 0.5)
        new = beta + scale[:, None] * step
        new_obj = objective(new)
        ok = new_obj >= obj_old - 1e-12 * np.abs(obj_old)
        if valid is not None:
            ok &= valid(new)
    # fits whose step never improved keep their old values
    new = np.where(ok[:, None], new, beta)
    new_obj = np.where(ok, new_obj, obj_old)
    return new, new_obj


# --------------------------------------------------------------------------- cumulative logit
def fit_cumlogit_batch(
    X: np.ndarray,
    y: np.ndarray,
    w: np.ndarray | None = None,
    *,
    n_levels: int | None = None,
    ridge: float = 1e-6,
    max_iter: int = 50,
    tol: float = 1e-8,
    start: np.ndarray | None = None,
) -> BatchFit:
    """Fit ``B`` weighted cumulative-logit (proportional-odds) models at once.

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
        infinity (held back by ``ridge``) and the fit reports ``converged=False``.
    ridge : float, default 1e-6
        Penalty on the slopes (not the cut-points).
    max_iter, tol, start : as in :func:`fit_logistic_batch` (``start`` of shape (B, K-1+p),
        cut-points increasing).

    Returns
    -------
    BatchFit
        ``coef[:, :K-1]`` are the cut-points :math:`\\theta_0 < ... < \\theta_{K-2}`;
        ``coef[:, K-1:]`` the slopes.

    Raises
    ------
    ValueError
        If shapes disagree, values are not finite, weights are negative, levels are not
        integers in 0..K-1, or ``K < 2``.

    Notes
    -----
    :math:`P(Y \\le k \\mid x) = F(\\theta_k - x^T\\beta)`, :math:`F` the logistic CDF
    (McCullagh 1980, eq. 2.2; the sign convention of statsmodels' ``OrderedModel``: a
    positive slope moves weight to higher levels). With :math:`a_k = \\theta_k - x^T\\beta`,
    a row at level :math:`j` contributes :math:`\\log[F(a_j) - F(a_{j-1})]`
    (:math:`a_{-1} = -\\infty`, :math:`a_{K-1} = \\infty`); the gradient and Hessian in
    :math:`(\\theta, \\beta)` follow from the chain rule through the two active
    :math:`a`'s. The log-likelihood is concave in :math:`(\\theta, \\beta)` (Pratt 1981), so
    Newton-Raphson with step-halving (keeping the cut-points ordered) converges.

    References
    ----------
    McCullagh, P. (1980). Regression models for ordinal data. Journal of the Royal
    Statistical Society B 42(2), 109-142.
    Pratt, J. W. (1981). Concavity of the log likelihood. Journal of the American
    Statistical Association 76(373), 103-106.
    """
    X, yf, w = _check_batch(X, y, w, "fit_cumlogit_batch")
    if np.any(yf != np.round(yf)) or (yf < 0).any():
        raise ModelError("fit_cumlogit_batch: y must hold integer levels 0..K-1")
    K = int(yf.max()) + 1 if n_levels is None else int(n_levels)
    if K < 2:
        raise ModelError(f"fit_cumlogit_batch: need at least 2 levels; got n_levels={K}")
    if yf.max() > K - 1:
        raise ModelError(f"fit_cumlogit_batch: y has level {int(yf.max())} >= n_levels={K}")
    X, yf, w = _drop_empty_rows(X, yf, w)
    yi = yf.astype(np.int64)
    B, n, p = X.shape
    q = K - 1 + p
    # indicator designs of the upper (a_j) and lower (a_{j-1}) active cut-points
    Du = np.zeros((B, n, q))
    Dl = np.zeros((B, n, q))
    bi, ni = np.nonzero(yi < K - 1)
    Du[bi, ni, yi[bi, ni]] = 1.0
    Du[:, :, K - 1:] = np.where((yi < K - 1)[..., None], -X, 0.0)
    bi, ni = np.nonzero(yi > 0)
    Dl[bi, ni, yi[bi, ni] - 1] = 1.0
    Dl[:, :, K - 1:] = np.where((yi > 0)[..., None], -X, 0.0)
    has_u = yi < K - 1
    has_l = yi > 0

    pen = np.zeros((B, q))
    pen[:, K - 1:] = float(ridge)
    # start: cut-points at the logits of the weighted cumulative proportions, slopes 0
    counts = np.stack([(w * (yi == k)).sum(1) for k in range(K)], axis=1) + 0.5
    cum = np.cumsum(counts, 1)[:, :-1] / counts.sum(1, keepdims=True)
    theta = np.zeros((B, q))
    theta[:, : K - 1] = np.log(cum / (1 - cum))
    if start is not None:
        theta = _start(start, (B, q), "fit_cumlogit_batch")
        if K > 2 and not (np.diff(theta[:, : K - 1], axis=1) > 0).all():
            raise ModelError("fit_cumlogit_batch: start cut-points must be increasing")

    def objective(par, Du=Du, Dl=Dl, hu=has_u, hl=has_l, w=w, pen=pen):
        return _cum_loglik(par, Du, Dl, hu, hl, w) - 0.5 * (pen * par**2).sum(1)

    def ordered(par):
        if K <= 2:
            return np.ones(par.shape[0], dtype=bool)
        return (np.diff(par[:, : K - 1], axis=1) > 0).all(1)

    obj = objective(theta)

    def newton_step(A, par):
        du, dl, hu, hl, wa, pa = Du[A], Dl[A], has_u[A], has_l[A], w[A], pen[A]
        au = np.where(hu, _mv(du, par), np.inf)
        al = np.where(hl, _mv(dl, par), -np.inf)
        Fu, Fl = _sigmoid(au), _sigmoid(al)
        fu, fl = Fu * (1 - Fu), Fl * (1 - Fl)
        P = np.maximum(Fu - Fl, 1e-300)
        gu, gl = fu / P, -fl / P
        huu = fu * (1 - 2 * Fu) / P - gu**2
        hll = -fl * (1 - 2 * Fl) / P - gl**2
        hul = fu * fl / P**2
        grad = _tv(du, wa * gu) + _tv(dl, wa * gl)
        grad -= pa * par
        cross = _quad(du, wa * hul, dl)
        H = (_quad(du, wa * huu, du) + _quad(dl, wa * hll, dl)
             + cross + cross.transpose(0, 2, 1))
        H[:, np.arange(q), np.arange(q)] -= pa + 1e-12

        def obj_a(pp):
            return _cum_loglik(pp, du, dl, hu, hl, wa) - 0.5 * (pa * pp**2).sum(1)

        return _solve(-H, grad), obj_a

    converged, it = _newton(newton_step, theta, obj, max_iter=max_iter, tol=tol, valid=ordered)
    ll = _cum_loglik(theta, Du, Dl, has_u, has_l, w)
    return BatchFit(coef=theta, converged=converged, n_iter=it, loglik=ll)


def predict_cumlogit(X: np.ndarray, coef: np.ndarray, n_levels: int) -> np.ndarray:
    """Level probabilities, shape (B, n, K), of cumulative-logit fits.

    ``X`` (B, n, p) without intercept; ``coef`` (B, K-1+p) as returned by
    :func:`fit_cumlogit_batch`.
    """
    X = np.asarray(X, float)
    coef = np.asarray(coef, float)
    K = int(n_levels)
    xb = np.einsum("bnp,bp->bn", X, coef[:, K - 1:])
    a = coef[:, None, : K - 1] - xb[..., None]
    F = _sigmoid(a)
    F = np.concatenate([np.zeros(F.shape[:2] + (1,)), F, np.ones(F.shape[:2] + (1,))], axis=2)
    return np.maximum(np.diff(F, axis=2), 0.0)


def _cum_loglik(par, Du, Dl, has_u, has_l, w) -> np.ndarray:
    au = np.where(has_u, _mv(Du, par), np.inf)
    al = np.where(has_l, _mv(Dl, par), -np.inf)
    P = _sigmoid(au) - _sigmoid(al)
    # for precision in the far tails use the complementary form when both are large
    P = np.where(P > 0, P, 0.0)
    return (w * np.log(np.maximum(P, _EPS))).sum(1)
