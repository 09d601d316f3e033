"""Leave-one-year-out logistic fits on many rows without copying the training rows.

:func:`year_out_probabilities` fits one maximum-likelihood logistic model per held-out year
and returns every row's out-of-fold event chance. It runs the same Newton-Raphson iteration
as :func:`impactlink.models.batch.fit_logistic_batch` (no penalty, step-halving while the
log-likelihood decreases, stop when the largest step is below ``tol``), arranged for one
design shared by all folds:

- rows are sorted by year once, so a fold's training rows are the two contiguous slices
  before and after the held-out year: no per-fold copy of the design;
- every fold starts from the fit on all years; its first gradient, Hessian and
  log-likelihood at that start are the all-years sums minus the held-out year's, all
  computed in one pass over the rows (the per-year sums) instead of one pass per fold;
- the linear predictor at an accepted iterate serves both the step-halving test and the
  next step's gradient;
- later steps keep the fold's Hessian at the start (the chord, or simplified Newton, method:
  Kelley 1995, section 5.4) and need only the gradient, one matrix-vector product over the
  rows instead of a weighted cross-product: a fold's optimum lies close to the all-years fit,
  so the chord converges in a few steps to the same maximum (the gradient's zero). A fold
  that has not converged after :data:`CHORD_STEPS` steps goes on with Newton's own Hessian.

On a national weekly target (millions of rows, tens of years) this does about three passes
over the rows per fold instead of some thirty.

References
----------
McCullagh, P., Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall,
section 4.4 (iteratively reweighted least squares = Newton-Raphson for the canonical link).
Kelley, C. T. (1995). Iterative Methods for Linear and Nonlinear Equations. SIAM, chapter 5
(the chord method).
"""

from __future__ import annotations

import numpy as np
from scipy.special import expit

from impactlink.models._newton import solve

__all__ = ["year_out_probabilities", "CHORD_STEPS"]

#: Steps with the fold's Hessian at the start before Newton's own Hessian is used.
CHORD_STEPS = 12


def _sums(X, y, eta):
    """Gradient and Hessian of the log-likelihood of the rows of ``X`` at predictor ``eta``."""
    mu = 0.5 * (1.0 + np.tanh(0.5 * eta))
    grad = X.T @ (y - mu)
    H = (X * (mu * (1.0 - mu))[:, None]).T @ X
    return grad, H


def _grad(X, y, eta):
    """Gradient of the log-likelihood of the rows of ``X`` at predictor ``eta``."""
    r = expit(eta)  # one pass; in place below
    np.subtract(y, r, out=r)
    return X.T @ r


def _ll(y, eta) -> float:
    """Bernoulli log-likelihood ``sum(y * eta - log(1 + exp(eta)))``: ``logaddexp`` (stable for
    any ``eta``) and one dot product, two passes over the rows."""
    return float(y @ eta - np.logaddexp(0.0, eta).sum())


def year_out_probabilities(y: np.ndarray, X: np.ndarray, years: np.ndarray,
                           start: np.ndarray, *, max_iter: int = 100, tol: float = 1e-8,
                           max_halvings: int = 30) -> np.ndarray:
    """Out-of-fold event chances of leave-one-year-out logistic fits.

    Parameters
    ----------
    y : ndarray (n,)
        0/1 outcomes.
    X : ndarray (n, p)
        Design with its intercept column.
    years : ndarray (n,)
        Fold label of each row (one fold per distinct value).
    start : ndarray (p,)
        Starting coefficients of every fold, usually the fit on all years.
    max_iter, tol, max_halvings
        As in :func:`impactlink.models.batch.fit_logistic_batch`: a fold that has not
        converged after ``max_iter`` steps (near separation) keeps its last iterate.

    Returns
    -------
    ndarray (n,)
        The event chance of each row from the fit without its year; NaN for the rows of a
        year whose training rows hold a single outcome (no fit).
    """
    order = np.argsort(years, kind="stable")
    Xs = np.ascontiguousarray(X[order], dtype=float)
    ys = np.asarray(y, float)[order]
    ysr = np.asarray(years)[order]
    cuts = np.flatnonzero(ysr[1:] != ysr[:-1]) + 1
    lo = np.r_[0, cuts]
    hi = np.r_[cuts, ys.size]
    p = Xs.shape[1]
    start = np.asarray(start, float)
    eta0 = Xs @ start
    per_year = [(_ll(ys[a:b], eta0[a:b]),) + _sums(Xs[a:b], ys[a:b], eta0[a:b])
                for a, b in zip(lo, hi, strict=True)]
    ll_all = sum(s[0] for s in per_year)
    g_all = np.sum([s[1] for s in per_year], axis=0)
    H_all = np.sum([s[2] for s in per_year], axis=0)
    n_ev = np.add.reduceat(ys, lo) if ys.size else np.zeros(0)
    n_rows = hi - lo
    out = np.full(ys.size, np.nan)
    for f, (a, b) in enumerate(zip(lo, hi, strict=True)):
        ev_train = ys.sum() - n_ev[f]
        if ev_train == 0 or ev_train == ys.size - n_rows[f]:
            continue  # the training rows hold one outcome: no fit (as before)
        parts = ((Xs[:a], ys[:a]), (Xs[b:], ys[b:]))
        beta = start.copy()
        obj = ll_all - per_year[f][0]
        grad = g_all - per_year[f][1]
        H = H_all - per_year[f][2]
        etas = [eta0[:a], eta0[b:]]
        H = H + np.diag(np.full(p, 1e-12))
        for it in range(max_iter):
            if 0 < it < CHORD_STEPS:  # at the last accepted iterate; the start's Hessian
                grad = sum(_grad(Xp, yp, e) for (Xp, yp), e in zip(parts, etas, strict=True))
            elif it >= CHORD_STEPS:  # slow convergence: Newton's own Hessian
                sums = [_sums(Xp, yp, e) for (Xp, yp), e in zip(parts, etas, strict=True)]
                grad = sums[0][0] + sums[1][0]
                H = sums[0][1] + sums[1][1] + np.diag(np.full(p, 1e-12))
            step = solve(H[None], grad[None])[0]
            scale = 1.0
            for _ in range(max_halvings + 1):
                new = beta + scale * step
                new_etas = [Xp @ new for Xp, _ in parts]
                new_obj = sum(_ll(yp, e) for (_, yp), e in zip(parts, new_etas, strict=True))
                if new_obj >= obj - 1e-12 * abs(obj):
                    beta, obj, etas = new, new_obj, new_etas
                    break
                scale *= 0.5
            if np.abs(step).max() < tol:
                break
        out[order[a:b]] = expit(Xs[a:b] @ beta)
    return out
