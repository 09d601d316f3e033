"""Leave-one-year-out logistic fits on many rows without copying the training rows.

:func:`year_out_probabilities` fits one maximum-likelihood logistic model per held-out year
and returns every row's out-of-fold event chance. It runs the same Newton-Raphson iteration
as :func:`impactlink.models.batch.fit_logistic_batch` (no penalty, step-halving while the
log-likelihood decreases, stop when the largest step is below ``tol``), arranged for one
design shared by all folds:

- rows are sorted by year once, so a fold's training rows are the two contiguous slices
  before and after the held-out year: no per-fold copy of the design (and no copy at all
  when the rows come in year order with a float64 design in Fortran order, as the contrast
  builds it from a time-sorted target frame);
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
over the rows per fold instead of some thirty. Each pass is kept cheap: the design is held
column by column (Fortran order: the matrix-vector products stream each column once, about
twice as fast as row order for a few columns), the log-likelihood's ``y . eta`` term is
``beta . (X'y)`` from per-year sums (no pass), ``log(1 + exp(eta))`` is
``max(eta, 0) + log(1 + exp(-|eta|))`` through numpy's vectorised ``exp`` and ``log`` in
buffers reused across steps (``logaddexp`` is several times slower), and ``mu`` is
``(1 + tanh(eta / 2)) / 2``. These change the numbers by rounding only. The folds are
independent given the start, so ``jobs`` threads run them (numpy's elementwise loops and
BLAS release the GIL); each fold's arithmetic is the same on any thread.

References
----------
McCullagh, P., Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall,
section 4.4 (iteratively reweighted least squares = Newton-Raphson for the canonical link).
Kelley, C. T. (1995). Iterative Methods for Linear and Nonlinear Equations. SIAM, chapter 5
(the chord method).
"""

from __future__ import annotations

from functools import partial

import numpy as np
from scipy.special import expit

from impactlink.execution import blas_threads, thread_map
from impactlink.models._newton import solve

__all__ = ["year_out_probabilities", "logistic_fit", "CHORD_STEPS"]

#: Steps with the fold's Hessian at the start before Newton's own Hessian is used.
CHORD_STEPS = 12


def year_out_probabilities(y: np.ndarray, X: np.ndarray, years: np.ndarray,
                           start: np.ndarray, *, max_iter: int = 100, tol: float = 1e-8,
                           max_halvings: int = 30, jobs: int = 1) -> np.ndarray:
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
    jobs : int, default 1
        Threads for the per-year sums and the folds
        (:func:`impactlink.execution.thread_map`); a fold's arithmetic does not depend on
        the thread that runs it, so neither does the result.

    Returns
    -------
    ndarray (n,)
        The event chance of each row from the fit without its year; NaN for the rows of a
        year whose training rows hold a single outcome (no fit).
    """
    years = np.asarray(years)
    X = np.asarray(X)
    if np.all(years[1:] >= years[:-1]):  # rows already in year order (a time-sorted frame)
        order = None
        ys, ysr = np.asarray(y, float), years
        Xs = X if X.dtype == np.float64 and X.flags.f_contiguous else _sorted_columns(X, None)
    else:
        order = np.argsort(years, kind="stable")
        ys, ysr = np.asarray(y, float)[order], years[order]
        Xs = _sorted_columns(X, order)
    cuts = np.flatnonzero(ysr[1:] != ysr[:-1]) + 1
    del ysr
    lo = np.r_[0, cuts].astype(np.int64)
    hi = np.r_[cuts, ys.size].astype(np.int64)
    start = np.asarray(start, float)
    eta0 = Xs @ start
    with blas_threads(1):  # the same rounding whatever jobs
        per_year = thread_map(partial(_year_sums, Xs, ys, eta0), list(zip(lo, hi)), jobs)
        # the all-years totals in year order, whatever the threads
        total = [np.sum([s[k] for s in per_year], axis=0) for k in range(4)]
        fold = partial(_fold, Xs, ys, eta0, lo, hi, float(ys.sum()), per_year, total, start,
                       max_iter=max_iter, tol=tol, max_halvings=max_halvings)
        betas = thread_map(fold, list(range(lo.size)), jobs)
    out = np.full(ys.size, np.nan)
    for a, b, beta in zip(lo, hi, betas, strict=True):
        if beta is not None:
            out[slice(a, b) if order is None else order[a:b]] = expit(Xs[a:b] @ beta)
    return out


def _sorted_columns(X: np.ndarray, order: np.ndarray | None) -> np.ndarray:
    """``X[order]`` (``X`` when ``order`` is None) as float64 in Fortran order, built column
    by column (one copy)."""
    out = np.empty(X.shape, dtype=np.float64, order="F")
    for c in range(X.shape[1]):
        if order is None:
            out[:, c] = X[:, c]
        else:
            np.take(X[:, c], order, out=out[:, c])
    return out


def _year_sums(Xs, ys, eta0, bounds):
    """Softplus sum, ``X'y``, gradient and Hessian of one year's rows at the start."""
    a, b = bounds
    X, y, eta = Xs[a:b], ys[a:b], eta0[a:b]
    buf = np.empty(b - a)
    mu = _mu(eta, np.empty(b - a))
    H = _information(X, mu)
    np.subtract(y, mu, out=mu)
    return _softplus_sum(eta, buf), X.T @ y, X.T @ mu, H


def _fold(Xs, ys, eta0, lo, hi, n_events, per_year, total, start, f, *, max_iter, tol, max_halvings):
    """Coefficients of the fit without year ``f`` (None: its training rows hold one
    outcome). Newton-Raphson from ``start`` with chord steps, step-halving while the
    log-likelihood decreases (see the module docstring)."""
    a, b = int(lo[f]), int(hi[f])
    n = ys.size
    ev_train = n_events - float(ys[a:b].sum())  # 0/1 sums: exact
    if ev_train == 0 or ev_train == n - (b - a):
        return None  # the training rows hold one outcome: no fit (as before)
    sp, xty, grad, H = (t - s for t, s in zip(total, per_year[f], strict=True))
    # the training rows: the slices before and after the held-out year (empty ones dropped)
    parts = [_Part(Xs[s:e], ys[s:e], eta0[s:e]) for s, e in ((0, a), (b, n)) if e > s]
    return _newton(parts, start.copy(), float(start @ xty) - sp, grad, H, xty, CHORD_STEPS,
                   max_iter=max_iter, tol=tol, max_halvings=max_halvings)


def logistic_fit(y: np.ndarray, X: np.ndarray, *, max_iter: int = 100, tol: float = 1e-8,
                 max_halvings: int = 30) -> np.ndarray:
    """Maximum-likelihood logistic coefficients on all rows (no penalty).

    The iteration of :func:`impactlink.models.batch.fit_logistic_batch` with ``ridge=0``
    (Newton-Raphson from the base rate in the intercept, step-halving while the
    log-likelihood decreases, stop when the largest step is below ``tol``) on the buffered
    passes of the folds: no copy of ``X`` per step, and the information matrix summed in
    row blocks (a few MB of temporaries instead of a (rows x p) one).

    Parameters
    ----------
    y : ndarray (n,)
        0/1 outcomes.
    X : ndarray (n, p)
        Design; a first column of ones is the intercept (used for the start).

    Returns
    -------
    ndarray (p,)
        The estimate; a fit that has not converged after ``max_iter`` steps (near
        separation) returns its last iterate.
    """
    X = np.asarray(X, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    beta = np.zeros(X.shape[1])
    if y.size and np.all(X[:, 0] == 1.0):
        rate = min(max(float(y.mean()), 1e-4), 1 - 1e-4)
        beta[0] = np.log(rate / (1 - rate))
    part = _Part(X, y, X @ beta)
    xty = X.T @ y
    grad, H = part.grad_hessian()
    obj = float(beta @ xty) - _softplus_sum(part.eta, part.buf)
    return _newton([part], beta, obj, grad, H, xty, 1, max_iter=max_iter, tol=tol,
                   max_halvings=max_halvings)


def _newton(parts, beta, obj, grad, H, xty, chord_steps, *, max_iter, tol, max_halvings):
    """Newton-Raphson on the rows of ``parts`` from ``beta`` (log-likelihood ``obj``,
    gradient ``grad`` and information ``H`` there): the first ``chord_steps`` steps keep
    ``H``, later ones recompute it; step-halving while the log-likelihood decreases."""
    ridge = np.diag(np.full(beta.size, 1e-12))
    H = H + ridge
    for it in range(max_iter):
        if 0 < it < chord_steps:  # at the last accepted iterate; the start's Hessian
            grad = _add(part.grad() for part in parts)
        elif it >= chord_steps:  # slow convergence (or plain Newton): the iterate's Hessian
            sums = [part.grad_hessian() for part in parts]
            grad = _add(s[0] for s in sums)
            H = _add(s[1] for s in sums) + ridge
        step = solve(H[None], grad[None])[0]
        scale = 1.0
        for _ in range(max_halvings + 1):
            new = beta + scale * step
            new_obj = float(new @ xty) - _add(part.trial(new) for part in parts)
            if new_obj >= obj - 1e-12 * abs(obj):
                beta, obj = new, new_obj
                for part in parts:
                    part.accept()
                break
            scale *= 0.5
        if np.abs(step).max() < tol:
            break
    return beta


class _Part:
    """One contiguous slice of training rows with its predictor at the accepted iterate and
    buffers reused across steps (no per-step allocation of row-length arrays)."""

    def __init__(self, X, y, eta):
        self.X, self.y = X, y
        self.eta = eta  # the start's predictor, shared by the folds: never written
        self.own = False
        self.new = np.empty(y.size)
        self.buf = np.empty(y.size)

    def trial(self, beta) -> float:
        """Softplus sum at ``beta``; its predictor kept for :meth:`accept`."""
        np.matmul(self.X, beta, out=self.new)
        return _softplus_sum(self.new, self.buf)

    def accept(self) -> None:
        """The trial predictor becomes the accepted one (buffers swapped, not copied)."""
        spare = self.eta if self.own else np.empty(self.y.size)
        self.eta, self.new, self.own = self.new, spare, True

    def grad(self):
        r = _mu(self.eta, self.buf)
        np.subtract(self.y, r, out=r)
        return self.X.T @ r

    def grad_hessian(self):
        mu = _mu(self.eta, self.buf)
        H = _information(self.X, mu)
        np.subtract(self.y, mu, out=mu)
        return self.X.T @ mu, H


#: Rows per block of the information-matrix sums (bounds the (rows x p) temporary).
_ROW_BLOCK = 1 << 16


def _information(X, mu):
    """``X' diag(mu (1 - mu)) X``, summed over row blocks."""
    H = np.zeros((X.shape[1], X.shape[1]))
    for s in range(0, mu.size, _ROW_BLOCK):
        Xb, m = X[s:s + _ROW_BLOCK], mu[s:s + _ROW_BLOCK]
        H += (Xb * (m * (1.0 - m))[:, None]).T @ Xb
    return H


def _add(items):
    """Sum in the given order (parts, then years: fixed whatever the threads)."""
    it = iter(items)
    acc = next(it)
    for v in it:
        acc = acc + v
    return acc


def _mu(eta, out):
    """Logistic ``1 / (1 + exp(-eta)) = (1 + tanh(eta / 2)) / 2``, written into ``out``."""
    np.multiply(eta, 0.5, out=out)
    np.tanh(out, out=out)
    out += 1.0
    out *= 0.5
    return out


def _softplus_sum(eta, buf) -> float:
    """``sum log(1 + exp(eta))`` as ``sum max(eta, 0) + sum log(1 + exp(-|eta|))`` (stable for
    any ``eta``; ``1 + exp(-|eta|)`` lies in (1, 2], where ``log`` is accurate to rounding),
    using ``buf`` for the passes."""
    np.maximum(eta, 0.0, out=buf)
    pos = float(buf.sum())
    np.abs(eta, out=buf)
    np.negative(buf, out=buf)
    np.exp(buf, out=buf)
    buf += 1.0
    np.log(buf, out=buf)
    return pos + float(buf.sum())
