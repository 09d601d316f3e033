"""Shared numerics of the batched Newton-Raphson solvers in :mod:`impactlink.models.batch`.

Every fit of a batch is a slice of a ``(B, n, q)`` array; these helpers check the inputs,
do the batched linear algebra and run Newton-Raphson with step-halving on all fits at once.
"""

from __future__ import annotations

import numpy as np

from impactlink.errors import ModelError

_EPS = 1e-300


def check_batch(X, y, w, name: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Arrays ``X`` (B, n, p), ``y`` (B, n), ``w`` (B, n) as floats, or a ModelError."""
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


def check_start(start, shape, name) -> np.ndarray:
    s = np.array(start, dtype=float)
    if s.shape != shape or not np.isfinite(s).all():
        raise ModelError(f"{name}: start must be finite with shape {shape}; got {s.shape}")
    return s


def drop_empty_rows(X, y, w):
    """Drop rows whose weight is zero in every fit of the batch (padding)."""
    keep = (w > 0).any(0)
    if keep.all() or not keep.any():
        return X, y, w
    return X[:, keep], y[:, keep], w[:, keep]


def mv(A: np.ndarray, v: np.ndarray) -> np.ndarray:
    """``einsum("bnq,bq->bn")`` through batched BLAS matmul."""
    return (A @ v[..., None])[..., 0]


def tv(A: np.ndarray, v: np.ndarray) -> np.ndarray:
    """``einsum("bnq,bn->bq")``."""
    return (v[:, None, :] @ A)[:, 0, :]


def quad(A: np.ndarray, v: np.ndarray, C: np.ndarray) -> np.ndarray:
    """``einsum("bnq,bn,bnr->bqr")``: A^T diag(v) C per fit."""
    return (A * v[..., None]).transpose(0, 2, 1) @ C


def sigmoid(z: np.ndarray) -> np.ndarray:
    return 0.5 * (1.0 + np.tanh(0.5 * z))


def solve(H: np.ndarray, g: np.ndarray) -> np.ndarray:
    """Batched ``H^-1 g``; the pseudo-inverse where ``H`` is singular."""
    try:
        return np.linalg.solve(H, g[..., None])[..., 0]
    except np.linalg.LinAlgError:
        return (np.linalg.pinv(H) @ g[..., None])[..., 0]


def inverse(H: np.ndarray) -> np.ndarray:
    """Batched inverse of ``H`` (B, q, q); NaN for a fit whose ``H`` is singular."""
    try:
        return np.linalg.inv(H)
    except np.linalg.LinAlgError:
        out = np.full_like(H, np.nan)
        for b in range(H.shape[0]):  # rare path: find the singular fits one by one
            try:
                out[b] = np.linalg.inv(H[b])
            except np.linalg.LinAlgError:
                pass
        return out


def newton(newton_step, beta, obj, *, max_iter: int, tol: float, valid=None
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
