"""Pairwise distances between rows, in row blocks, so no (n, n, L) array is ever held."""

from __future__ import annotations

from typing import Literal

import numpy as np

__all__ = ["pairwise_mean_distance"]

#: Largest temporary (block of rows x all rows x columns) array [bytes].
BLOCK_BYTES = 64 * 2**20


def pairwise_mean_distance(values: np.ndarray, kind: Literal["abs", "rms"],
                           *, block_bytes: int = BLOCK_BYTES) -> np.ndarray:
    """Mean absolute (``"abs"``) or root-mean-square (``"rms"``) difference of every two rows.

    Parameters
    ----------
    values : ndarray (n, L)
    kind : {"abs", "rms"}
        ``abs``: :math:`\\frac1L \\sum_w |v_{iw} - v_{jw}|`; ``rms``:
        :math:`(\\frac1L \\sum_w (v_{iw} - v_{jw})^2)^{1/2}`.
    block_bytes : int
        Size of the largest temporary array; rows are taken in blocks of
        ``block_bytes / (8 n L)``.

    Returns
    -------
    ndarray (n, n)
        The same numbers as the one-shot broadcast ``values[:, None, :] - values[None]``
        (each entry is reduced over its own L values in the same order), with memory
        O(n^2 + block) instead of O(n^2 L): 79 MB instead of 8.2 GB for 3,143 counties and
        a 104-week trajectory.
    """
    v = np.asarray(values, dtype=np.float64)
    n, L = v.shape
    out = np.empty((n, n))
    step = max(1, int(block_bytes // max(8 * n * max(L, 1), 1)))
    for s in range(0, n, step):  # row blocks; each block vectorised over all rows
        diff = v[s:s + step, None, :] - v[None, :, :]
        if kind == "abs":
            out[s:s + step] = np.abs(diff).mean(axis=2)
        else:
            out[s:s + step] = np.sqrt((diff**2).mean(axis=2))
    return out
