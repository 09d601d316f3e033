"""Cross-validation folds that leave out whole years (or whole regions)."""

from __future__ import annotations

from typing import Literal

import numpy as np

from impactlink.errors import SkillError

__all__ = ["year_folds", "leave_one_year_out", "year_bootstrap_weights", "CV_CHOICES"]

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
    SkillError
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


def leave_one_year_out(years) -> np.ndarray:
    """Fold number of every row with one fold per distinct year (sorted).

    The one home of leave-one-year-out folds; the same as
    ``year_folds(years, cv="leave_one_year_out")``.

    Examples
    --------
    >>> leave_one_year_out([2001, 1999, 2001, 2000]).tolist()
    [2, 0, 2, 1]
    """
    return year_folds(years, cv="leave_one_year_out")


def year_bootstrap_weights(n_years: int, n_boot: int, *, seed: int) -> np.ndarray:
    """Year-block bootstrap: how often each year is drawn in each replicate.

    The one home of the year-block bootstrap. Whole years are resampled with replacement
    (a block bootstrap with one block per year), so the dependence between weeks, counties
    and seasons of one year is kept inside each block (Kunsch 1989; Wilks 2011, section 5.3.5).

    Parameters
    ----------
    n_years : int
        Number of distinct years (blocks).
    n_boot : int
        Number of bootstrap replicates (0 gives an empty (0, n_years) array).
    seed : int
        Seed of the generator: the same seed gives the same replicates.

    Returns
    -------
    ndarray of float, shape (n_boot, n_years)
        Multiplicity of each year in each replicate; every row sums to ``n_years``.
        A statistic that is a sum over years is recomputed on replicate ``b`` as
        ``weights[b] @ per_year``.

    References
    ----------
    Kunsch, H. R. (1989). The jackknife and the bootstrap for general stationary
    observations. Annals of Statistics 17(3), 1217-1241.
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed.

    Examples
    --------
    >>> w = year_bootstrap_weights(5, 3, seed=1)
    >>> w.shape, w.sum(axis=1).tolist()
    ((3, 5), [5.0, 5.0, 5.0])
    """
    n_years, n_boot = int(n_years), int(n_boot)
    if n_years < 1 or n_boot < 0:
        raise SkillError(
            f"year bootstrap needs at least 1 year and n_boot >= 0; got {n_years} years, "
            f"n_boot={n_boot}")
    if n_boot == 0:
        return np.zeros((0, n_years))
    rng = np.random.default_rng(seed)
    return rng.multinomial(n_years, np.full(n_years, 1.0 / n_years), size=n_boot).astype(float)
