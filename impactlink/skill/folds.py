"""Cross-validation folds that leave out whole years (or whole regions)."""

from __future__ import annotations

from typing import Literal

import numpy as np

from impactlink.errors import SkillError

__all__ = ["year_folds", "CV_CHOICES"]

CV_CHOICES = ("leave_one_year_out", "blocked_k_fold", "leave_one_region_out")
CVChoice = Literal["leave_one_year_out", "blocked_k_fold", "leave_one_region_out"]


def year_folds(
    years,
    *,
    cv: CVChoice = "leave_one_year_out",
    k_folds: int = 5,
    regions=None,
    seed: int = 0,
) -> np.ndarray:
    """Fold number (0..F-1) of every row, keeping whole years (or regions) together.

    Parameters
    ----------
    years : array of int, shape (n,)
        Year of each row (the fold key).
    cv : {"leave_one_year_out", "blocked_k_fold", "leave_one_region_out"}
        ``leave_one_year_out``: one fold per year. ``blocked_k_fold``: the sorted years cut
        into ``k_folds`` contiguous blocks of (nearly) equal numbers of years, so a drought
        spanning two neighbouring years mostly stays in one fold. ``leave_one_region_out``:
        one fold per region (transfer to unseen places); needs ``regions``.
    k_folds : int, default 5
        Number of blocks for ``blocked_k_fold`` (at most the number of years).
    regions : array of str, shape (n,), optional
        Region of each row, for ``leave_one_region_out``.
    seed : int, default 0
        Kept for a uniform signature: every scheme here is deterministic (contiguous
        blocks, sorted keys), so the seed changes nothing.

    Returns
    -------
    ndarray of int, shape (n,)

    Raises
    ------
    ValueError
        For an unknown ``cv``, fewer than 2 folds, or a missing ``regions``.

    Notes
    -----
    Impact years are autocorrelated and droughts are regional, so rows of one year must
    not sit on both sides of a split (Roberts et al. 2017).

    References
    ----------
    Roberts, D. R. et al. (2017). Cross-validation strategies for data with temporal,
    spatial, hierarchical, or phylogenetic structure. Ecography 40(8), 913-929.
    """
    del seed
    y = np.asarray(years)
    if cv not in CV_CHOICES:
        raise SkillError(f"cv={cv!r} is not one of {CV_CHOICES}")
    if cv == "leave_one_region_out":
        if regions is None:
            raise SkillError("cv='leave_one_region_out' needs regions (one per row); got None")
        r = np.asarray(regions).astype(str)
        if r.shape != y.shape:
            raise SkillError(f"regions has {r.shape[0]} values; expected {y.shape[0]} (one per row)")
        uniq, fold = np.unique(r, return_inverse=True)
        if uniq.size < 2:
            raise SkillError(
                f"cv='leave_one_region_out' needs at least 2 regions; found {uniq.size}")
        return fold.astype(np.int64)
    uniq, inv = np.unique(y, return_inverse=True)
    if uniq.size < 2:
        raise SkillError(f"cross-validation needs at least 2 years; found {uniq.size}")
    if cv == "leave_one_year_out":
        return inv.astype(np.int64)
    k = int(k_folds)
    if k < 2 or k > uniq.size:
        raise SkillError(f"k_folds={k_folds} must be between 2 and the number of years ({uniq.size})")
    block = np.zeros(uniq.size, dtype=np.int64)
    for i, part in enumerate(np.array_split(np.arange(uniq.size), k)):
        block[part] = i
    return block[inv]
