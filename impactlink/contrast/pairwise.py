"""Pairwise distances between rows, in row blocks, so no (n, n, L) array is ever held, and the
per-county quantile summaries some of them compare."""

from __future__ import annotations

from functools import partial
from typing import Literal

import numpy as np

from impactlink.execution import blas_threads, thread_map

__all__ = ["group_quantiles", "pairwise_mean_distance"]

#: Largest temporary (block of rows x all rows x columns) array [bytes].
BLOCK_BYTES = 64 * 2**20

#: Rows per block of the ``rms`` products (a fixed size, so the numbers do not depend on
#: the threads).
RMS_BLOCK_ROWS = 512


def pairwise_mean_distance(values: np.ndarray, kind: Literal["abs", "rms"],
                           *, block_bytes: int = BLOCK_BYTES, jobs: int = 1) -> np.ndarray:
    """Mean absolute (``"abs"``) or root-mean-square (``"rms"``) difference of every two rows.

    Parameters
    ----------
    values : ndarray (n, L)
    kind : {"abs", "rms"}
        ``abs``: :math:`\\frac1L \\sum_w |v_{iw} - v_{jw}|`; ``rms``:
        :math:`(\\frac1L \\sum_w (v_{iw} - v_{jw})^2)^{1/2}`.
    block_bytes : int
        Size of the largest temporary array of the ``abs`` path; rows are taken in blocks of
        ``block_bytes / (8 n L)``.
    jobs : int, default 1
        Threads for the row blocks (:func:`impactlink.execution.thread_map`); the blocks
        are the same whatever ``jobs``, and so are the numbers.

    Returns
    -------
    ndarray (n, n)
        ``abs``: the same numbers as the one-shot broadcast ``values[:, None, :] -
        values[None]`` (each entry reduced over its own L values in the same order), with
        memory O(n^2 + block) instead of O(n^2 L): 79 MB instead of 8.2 GB for 3,143
        counties and a 104-week trajectory.

        ``rms``: from the identity :math:`|a - b|^2 = |a|^2 + |b|^2 - 2 a \\cdot b` on the
        column-centred values (a translation changes no distance and makes the norms
        small), one matrix product per row block, O(n^2 L) multiply-adds in BLAS instead of
        elementwise passes. It differs from the broadcast by rounding: the squared
        distance's error is a few units of 1e-16 times :math:`|a|^2 + |b|^2` (centred), so
        a distance near zero carries an absolute error of about 1e-8 index units and one of
        0.25 (the look-alike limit) a relative error near 1e-14. Tiny negative squares from
        the cancellation are clipped to 0 and the diagonal is exactly 0; the matrix is
        symmetric to rounding, not bit for bit.
    """
    v = np.asarray(values, dtype=np.float64)
    n, L = v.shape
    out = np.empty((n, n))
    if kind == "rms":
        c = v - v.mean(axis=0) if n else v
        starts = list(range(0, n, RMS_BLOCK_ROWS))
        work = partial(_rms_block, c, np.einsum("ij,ij->i", c, c), out, RMS_BLOCK_ROWS)
    else:
        step = max(1, int(block_bytes // max(8 * n * max(L, 1), 1)))
        starts = list(range(0, n, step))
        work = partial(_abs_block, v, out, step)
    with blas_threads(1):  # the same rounding whatever jobs
        thread_map(work, starts, jobs)  # each block writes its own rows of ``out``
    return out


def _abs_block(v, out, step, s) -> None:
    """Rows ``s:s + step`` of the mean absolute difference, vectorised over all rows."""
    diff = v[s:s + step, None, :] - v[None, :, :]
    np.abs(diff, out=diff)
    out[s:s + step] = diff.mean(axis=2)


def _rms_block(c, sq, out, step, s) -> None:
    """Rows ``s:s + step`` of the RMS difference of centred rows ``c`` (squared norms
    ``sq``) by the norm identity."""
    L = max(c.shape[1], 1)
    rows = out[s:s + step]
    np.matmul(c[s:s + step], c.T, out=rows)
    rows *= -2.0
    rows += sq[s:s + step, None]
    rows += sq[None, :]
    np.maximum(rows, 0.0, out=rows)  # cancellation can leave tiny negatives
    rows /= L
    np.sqrt(rows, out=rows)
    idx = np.arange(s, min(s + step, c.shape[0]))
    out[idx, idx] = 0.0


def group_quantiles(values: np.ndarray, groups: np.ndarray, sizes: np.ndarray,
                    q: np.ndarray) -> np.ndarray:
    """Quantiles ``q`` of the values of each group (G, len(q)), the numbers of
    ``np.quantile(values[groups == g], q)`` (its default "linear" method, Hyndman & Fan 1996
    definition 7, with numpy's interpolation formula), for all groups in one sort instead of
    one call per county. Every group must be non-empty.

    References
    ----------
    Hyndman, R. J., & Fan, Y. (1996). Sample quantiles in statistical packages. The American
    Statistician, 50(4), 361-365. https://doi.org/10.1080/00031305.1996.10473566
    """
    srt = values[np.lexsort((values, groups))]  # by group, then value
    start = (np.cumsum(sizes) - sizes)[:, None]
    virtual = (sizes[:, None] - 1).astype(np.float64) * q[None, :]
    prev = np.floor(virtual).astype(np.intp)
    top = virtual >= (sizes[:, None] - 1)
    prev[top] = np.broadcast_to(sizes[:, None] - 1, prev.shape)[top]
    nxt = np.where(top, prev, prev + 1)
    a, b = srt[start + prev], srt[start + nxt]
    t = virtual - prev
    diff = b - a
    out = a + diff * t
    np.subtract(b, diff * (1 - t), out=out, where=t >= 0.5)
    return out
