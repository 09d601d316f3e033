"""The histogram fast path: per-block outcome counts in narrow index bins, batched CV fits.

A univariate impact model only needs, per block (a year, or a year x region for
leave-one-region-out), the count of each outcome level in each narrow bin of the index
value, and the sum of the index values there. Every fold's training data is then the total
minus the held-out blocks, each fit runs on a few hundred weighted rows (bins x cells x
levels), and all fits of a chunk of candidates run at once through
:func:`impactlink.models.batch.fit_cumlogit_batch` (a binary target is the two-level case).
The held-out rows of a bin are predicted at their own mean index value, so binning only
approximates the *fit*, not the scored values; ``tests/skill/test_engine.py`` checks the
binned fit against the exact unbinned fit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from impactlink.execution import blas_threads
from impactlink.models.batch import fit_cumlogit_batch, fit_logistic_batch
from impactlink.skill.folds import year_bootstrap_weights

PRIOR_WEIGHT = 1.0  # total weight of the pseudo-rows that keep every fit finite
NESTED_MAX_GROUPS = 10  # selection groups of outer folds in the nested estimate


# --------------------------------------------------------------------------- structures
@dataclass(frozen=True)
class Layout:
    """Block / fold structure shared by every candidate of one target."""

    n_blocks: int
    block_fold: np.ndarray  # (G,)
    block_year: np.ndarray  # (G,) year position 0..Y-1
    n_folds: int
    excl: np.ndarray  # (J, F) 1 where a fold is left out of job j's training data
    scored: np.ndarray  # (J, G) 1 where job j scores block g
    n_main: int  # jobs 0..F-1 are the main CV fits (job f leaves out fold f)
    inner_of: np.ndarray  # (J,) selection group of an inner job, -1 for main jobs
    boot: np.ndarray  # (R, G) block multiplicities of the year bootstrap
    n_levels: int
    group_of_fold: np.ndarray | None = None  # (F,) selection group of each outer fold
    n_groups: int = 0  # selection groups of the nested estimate (0: no inner jobs)


@dataclass
class Hist:
    """Histogram of one candidate: counts (G, R, K) and index sums (G, R, P) over rows R.

    Rows are bins (x cells): ``cell`` (R,) gives each row's cell (persistence category)
    and ``n_cells`` their number (1 when there are none).
    """

    N: np.ndarray
    S: np.ndarray
    cell: np.ndarray
    n_cells: int
    keep: np.ndarray  # (NB * C,) which (bin, cell) rows are kept


def make_layout(block_fold, block_year, n_years, n_levels, *, k_inner, n_boot, seed,
                max_groups: int = NESTED_MAX_GROUPS):
    """The fold layout: main CV jobs, the inner jobs of the nested estimate, the bootstrap.

    Notes
    -----
    The nested estimate (Varma & Simon 2006) picks a candidate for each outer fold by an
    inner CV that never sees that fold. With many folds (leave-one-year-out on a long
    record) the outer folds are first dealt into at most ``max_groups`` interleaved
    selection groups (fold f joins group ``f mod max_groups``: every group spans the whole
    record, as leave-one-year-out folds do); the inner CV of a group leaves the whole group
    out (``k_inner`` blocks of the remaining folds), and every fold of the group is scored
    with the pick made without it. The estimate stays selection-aware (no fold's data enter the choice
    scored on it) and slightly conservative (each choice sees fewer years), while the inner
    fits drop from ``F * k_inner`` to ``max_groups * k_inner``: 485 -> 50 on a 97-year
    record. With ``F <= max_groups`` every fold is its own group, the textbook scheme.
    """
    G = block_fold.size
    F = int(block_fold.max()) + 1
    excl, scored, inner_of = [], [], []
    for f in range(F):
        e = np.zeros(F)
        e[f] = 1
        excl.append(e)
        scored.append((block_fold == f).astype(float))
        inner_of.append(-1)
    n_groups = min(F, max_groups)
    groups = [np.arange(i, F, n_groups) for i in range(n_groups)]  # interleaved folds
    group_of_fold = np.zeros(F, dtype=np.int64)
    for i, grp in enumerate(groups):
        group_of_fold[grp] = i
    if k_inner > 0 and F > 1:
        for i, out in enumerate(groups):
            rest = np.setdiff1d(np.arange(F), out)
            if rest.size == 0:
                continue
            for grp in np.array_split(rest, min(k_inner, rest.size)):
                e = np.zeros(F)
                e[out] = 1
                e[grp] = 1
                excl.append(e)
                scored.append(np.isin(block_fold, grp).astype(float))
                inner_of.append(i)
    boot = year_bootstrap_weights(n_years, n_boot, seed=seed)[:, block_year]
    return Layout(G, block_fold, block_year, F, np.array(excl), np.array(scored), F,
                  np.array(inner_of), boot, n_levels, group_of_fold,
                  len(groups) if len(excl) > F else 0)


def bin_codes(x: np.ndarray, n_bins: int, lo: float | None = None,
              hi: float | None = None) -> np.ndarray:
    """Equal-width bin of each value between ``lo`` and ``hi`` (default: the sample minimum
    and maximum); values beyond them fall in the edge bins."""
    if lo is None or hi is None:
        lo, hi = float(x.min()), float(x.max())
    if hi <= lo:
        return np.zeros(x.size, dtype=np.int64)
    t = x - lo  # in place after the first step; truncation is the floor where t >= 0
    t *= n_bins / (hi - lo)
    b = t.astype(np.int64)
    return np.clip(b, 0, n_bins - 1, out=b)


def hist_bases(block, level, cell, *, n_bins_total, n_cells, n_levels
               ) -> tuple[np.ndarray, np.ndarray]:
    """The part of every row's histogram position that no candidate's bin changes.

    A row in bin ``b`` sits at ``row = b * C + row_base`` of the (block, bin, cell) sums and
    at ``rk = b * C * K + rk_base`` of the (block, bin, cell, level) counts, with
    ``row_base = block * NB * C + cell`` and ``rk_base = row_base * K + level``; every
    candidate of a target shares them (the persistence variant per lag).
    """
    row_base = np.multiply(block, n_bins_total * n_cells, dtype=np.int64)  # widened
    if n_cells > 1:
        row_base += cell
    rk_base = row_base * n_levels
    rk_base += level
    return row_base, rk_base


def build_hist(block, level, xs, bins, cell, *, n_blocks, n_bins_total, n_cells, n_levels,
               marginal: bool = False, bases=None, affine=None):
    """Counts and sums for one candidate (one pass over the rows).

    With ``marginal=True`` also returns the histogram summed over cells (the same candidate
    without the persistence split), computed from the histogram instead of the rows.
    ``bases`` are the rows' :func:`hist_bases` when already made; ``affine`` (one
    ``(mean, sd)`` or None per column of ``xs``) turns the sums of a column into sums of
    ``(x - mean) / sd`` from the cell counts, so the rows are never standardized.
    """
    G, NB, C, K = n_blocks, n_bins_total, n_cells, n_levels
    row_base, rk_base = bases if bases is not None else hist_bases(
        block, level, cell, n_bins_total=NB, n_cells=C, n_levels=K)
    rk = bins * (C * K)
    rk += rk_base
    N = np.bincount(rk, minlength=G * NB * C * K).reshape(G, NB * C, K)
    del rk
    if C == 1:
        row = bins + row_base
    else:
        row = bins * C
        row += row_base
    S: np.ndarray = np.stack([np.bincount(row, weights=x, minlength=G * NB * C)
                              for x in xs], axis=-1)
    del row
    S = S.reshape(G, NB * C, len(xs))
    if affine is not None:
        cnt = N.sum(axis=2)
        for j, ms in enumerate(affine):
            if ms is not None:
                S[..., j] -= ms[0] * cnt
                S[..., j] /= ms[1]
    h = _compress(N, S, NB, C)
    if not marginal:
        return h
    Nm = N.reshape(G, NB, C, K).sum(2)
    Sm = S.reshape(G, NB, C, len(xs)).sum(2)
    return h, _compress(Nm, Sm, NB, 1)


def _compress(N, S, NB, C) -> Hist:
    keep = N.sum(axis=(0, 2)) > 0
    cells = np.tile(np.arange(C), NB)[keep]
    return Hist(N=N[:, keep].astype(float), S=S[:, keep], cell=cells, n_cells=C, keep=keep)


# --------------------------------------------------------------------------- seasons
WEEKLY_PERIOD = 52.1775  # mean ISO weeks per year (365.2425 / 7)
MONTHLY_PERIOD = 12.0
WEEKS_PER_CLASS = 4


@dataclass(frozen=True)
class SeasonClasses:
    """Season classes of the rows and the harmonic terms at each class midpoint.

    ``code`` (rows,) class 0..S-1 of every row; ``midpoint`` (S,) the class midpoint in
    season units (ISO weeks or months); ``harmonics`` (S, 2) ``sin`` and ``cos`` of
    ``2 pi midpoint / period``; ``period`` in season units.
    """

    code: np.ndarray
    midpoint: np.ndarray
    harmonics: np.ndarray
    period: float

    @property
    def n_classes(self) -> int:
        return int(self.midpoint.size)


def season_classes(season: np.ndarray, *, weekly: bool) -> SeasonClasses:
    """Group row seasons into a few classes for the seasonal histogram fast path.

    Parameters
    ----------
    season : ndarray of int, shape (rows,)
        ISO week 1-53 (``weekly=True``) or month 1-12.
    weekly : bool
        Weekly seasons form 13 four-week classes (weeks 1-4, 5-8, ..., 49-52; week 53 joins
        the last class, as in the seasonal base rate); monthly seasons are their own class.

    Returns
    -------
    SeasonClasses
        Only the classes that occur are kept (codes are compact).

    Notes
    -----
    One pair of harmonics :math:`\\sin(2\\pi s/P), \\cos(2\\pi s/P)` (common practice for a
    smooth annual cycle) with :math:`P` = 52.1775 weeks or 12 months. The histogram rows
    carry one season value each, so every row of a class uses the class midpoint
    :math:`s_c = 4c + 2.5` (weeks; :math:`s_c` = the month for monthly targets, which is
    exact). For weekly rows the midpoint is at most 1.5 weeks (week 53: 2.5 weeks) from the
    row's own week, a phase error of at most :math:`2\\pi \\cdot 1.5/52.18 = 0.18` rad, so
    each harmonic column differs from the exact per-row value by at most 0.18 (0.30 for
    week 53); averaged over a class the step function keeps 99.1% of the sinusoid's
    amplitude (:math:`\\sin(4\\delta/2)/(4\\sin(\\delta/2))`, :math:`\\delta = 2\\pi/52.18`).
    ``tests/skill/test_seasonal.py`` compares the fit with the exact per-row harmonic fit.
    """
    s = np.asarray(season).astype(np.int64)
    if weekly:
        raw = np.minimum((np.minimum(s, 52) - 1) // WEEKS_PER_CLASS, 12)
        mids_all = WEEKS_PER_CLASS * np.arange(13) + (WEEKS_PER_CLASS + 1) / 2
        period = WEEKLY_PERIOD
    else:
        raw = s
        period = MONTHLY_PERIOD
    used, code = np.unique(raw, return_inverse=True)
    mid = mids_all[used] if weekly else used.astype(float)
    ang = 2.0 * np.pi * mid / period
    harm = np.column_stack([np.sin(ang), np.cos(ang)])
    return SeasonClasses(code.astype(np.int64), mid, harm, float(period))


# --------------------------------------------------------------------------- fitting
def fit_chunk(hists: list[Hist], layout: Layout, *, use_cells: bool, jobs_subset: str = "all",
              prior: float = PRIOR_WEIGHT, ridge: float = 1e-4, max_iter: int = 30,
              tol: float = 1e-6):
    """Fit every CV job for a list of candidates with the same shape; return coefficients.

    Returns an array (U, J, q) of cumulative-logit coefficients (K-1 cut-points, then slopes
    of the P index columns, then the C-1 cell effects when ``use_cells``).
    """
    K = layout.n_levels
    J = layout.excl.shape[0] if jobs_subset == "all" else layout.n_main
    excl = layout.excl[:J]
    feats, Ns = [], []
    Rmax = max(h.N.shape[1] for h in hists)
    for h in hists:
        N, S = _padded(h, Rmax)
        NF = _fold_sums(N, layout)  # (F, R, K)
        SF = _fold_sums(S, layout)
        Ntr = N.sum(0)[None] - np.einsum("jf,frk->jrk", excl, NF)
        Str = S.sum(0)[None] - np.einsum("jf,frp->jrp", excl, SF)
        Ntr = np.maximum(Ntr, 0.0)  # guard against round-off in the subtraction
        n = Ntr.sum(-1)
        xbar = Str / np.maximum(n, 1e-12)[..., None]
        Ns.append(Ntr)
        feats.append(_design(xbar, _cells(h, Rmax), h.n_cells if use_cells else 1))
    Ntr = np.stack(Ns)  # (U, J, R, K)
    X = np.stack(feats)  # (U, J, R, p)
    U, _, R, p = X.shape
    n_row = Ntr.sum(-1).reshape(U * J, R)
    Xflat = X.reshape(U * J, R, p)
    xm = (Xflat * n_row[..., None]).sum(1) / np.maximum(n_row.sum(1), 1e-12)[:, None]
    if K == 2:
        # the two-level cumulative logit is a logistic regression (intercept = -theta_0):
        # fit it on R binomial rows instead of 2R level rows
        Xb = np.concatenate([np.ones((U * J, R, 1)), Xflat], axis=2)
        yb = Ntr[..., 1].reshape(U * J, R) / np.maximum(n_row, 1e-12)
        wb = n_row
        if prior > 0:
            xp = np.concatenate([np.ones((U * J, 1)), xm], axis=1)[:, None, :]
            Xb = np.concatenate([Xb, xp, xp], axis=1)
            yb = np.concatenate([yb, np.zeros((U * J, 1)), np.ones((U * J, 1))], axis=1)
            wb = np.concatenate([wb, np.full((U * J, 2), prior / 2)], axis=1)
        start = _warm_start(fit_logistic_batch, Xb, yb, wb, U, J, ridge=ridge)
        fit = fit_logistic_batch(Xb, yb, wb, ridge=ridge, max_iter=max_iter, tol=tol,
                                 start=start)
        coef = fit.coef.copy()
        coef[:, 0] = -coef[:, 0]
        return coef.reshape(U, J, -1), fit.converged.reshape(U, J)
    # expand rows to the (row, level) cells that occur for each candidate; pad to a common
    # length; add pseudo-rows (one per level) at the weighted mean design row
    cells = [np.nonzero(Ntr[u].sum(0) > 0) for u in range(U)]
    n_max = max(c[0].size for c in cells)
    Xl = np.zeros((U, J, n_max + K, p))
    yl = np.zeros((U, J, n_max + K))
    wl = np.zeros((U, J, n_max + K))
    for u, (r, k) in enumerate(cells):  # candidates of the chunk (a handful)
        m = r.size
        Xl[u, :, :m] = X[u][:, r, :]
        yl[u, :, :m] = k
        wl[u, :, :m] = Ntr[u][:, r, k]
    Xl[:, :, n_max:] = xm.reshape(U, J, 1, p)
    yl[:, :, n_max:] = np.arange(K)
    wl[:, :, n_max:] = prior / K
    Xc, yc, wc = Xl.reshape(U * J, n_max + K, p), yl.reshape(U * J, -1), wl.reshape(U * J, -1)
    start = _warm_start(lambda *a, **k: fit_cumlogit_batch(*a, n_levels=K, **k),
                        Xc, yc, wc, U, J, ridge=ridge)
    fit = fit_cumlogit_batch(Xc, yc, wc, n_levels=K, ridge=ridge, max_iter=max_iter, tol=tol,
                             start=start)
    return fit.coef.reshape(U, J, -1), fit.converged.reshape(U, J)


def _warm_start(solver, X, y, w, U, J, *, ridge):
    """Fit each candidate's first job once and start all its jobs there (Newton then needs
    two or three steps per fold, since folds differ by a few years of data)."""
    first = np.arange(U) * J
    pre = solver(X[first], y[first], w[first], ridge=ridge, max_iter=50, tol=1e-6)
    return np.repeat(pre.coef, J, axis=0)


def _padded(h: Hist, R: int):
    pad = R - h.N.shape[1]
    if pad == 0:
        return h.N, h.S
    return (np.pad(h.N, ((0, 0), (0, pad), (0, 0))), np.pad(h.S, ((0, 0), (0, pad), (0, 0))))


def _cells(h: Hist, R: int) -> np.ndarray:
    return np.pad(h.cell, (0, R - h.cell.size))


def _fold_sums(A: np.ndarray, layout: Layout) -> np.ndarray:
    out = np.zeros((layout.n_folds,) + A.shape[1:])
    np.add.at(out, layout.block_fold, A)
    return out


def _design(xbar: np.ndarray, cell: np.ndarray, n_cells: int) -> np.ndarray:
    """Design rows: index means (..., P) then one-hot cells 1..C-1."""
    if n_cells <= 1:
        return xbar
    D = np.zeros(xbar.shape[:-1] + (n_cells - 1,))
    on = cell > 0
    D[..., on, cell[on] - 1] = 1.0
    return np.concatenate([xbar, D], axis=-1)


# --------------------------------------------------------------------------- prediction
def predict_blocks(h: Hist, coef: np.ndarray, *, use_cells: bool, n_levels: int,
                   jobs: np.ndarray, blocks: np.ndarray, return_eta: bool = False):
    """Level probabilities (pairs, R, K) of the rows of block ``blocks[i]`` under the fit of
    job ``jobs[i]``, each held-out row predicted at its own bin's mean index value.

    With ``return_eta`` also the linear predictor (pairs, R) without the cut-points, the
    ordering the ROC area uses (see :func:`impactlink.skill._shared._score_oof`)."""
    K = n_levels
    n = h.N[blocks].sum(-1)
    xbar = h.S[blocks] / np.maximum(n, 1e-12)[..., None]  # (pairs, R, P)
    X = _design(xbar, h.cell, h.n_cells if use_cells else 1)  # (pairs, R, p)
    c = coef[jobs]
    eta = (X @ c[:, K - 1:, None])[..., 0]  # (pairs, R)
    a = c[:, None, : K - 1] - eta[..., None]
    F = 0.5 * (1.0 + np.tanh(0.5 * a))
    shape = F.shape[:-1] + (1,)
    F = np.concatenate([np.zeros(shape), F, np.ones(shape)], axis=-1)
    P = np.maximum(np.diff(F, axis=-1), 1e-15)
    return (P, eta) if return_eta else P


def block_losses(P: np.ndarray, N: np.ndarray) -> dict[str, np.ndarray]:
    """Per-block sums of RPS, event Brier and log loss; P (..., G, R, K), N (G, R, K)."""
    K = P.shape[-1]
    if K == 2:  # binary: RPS is the Brier score of the event
        q = P[..., 1]
        sse = (N[..., 1] * (1 - q) ** 2 + N[..., 0] * q**2).sum(-1)
        ll = -(N[..., 1] * np.log(P[..., 1]) + N[..., 0] * np.log(P[..., 0])).sum(-1)
        return {"rps": sse, "sse": sse, "ll": ll}
    cumP = np.cumsum(P, -1)[..., : K - 1]  # (..., G, R, K-1)
    # RPS of a row observed at level k: sum_m (C_m - [k <= m])^2
    #   = sum_m C_m^2 - 2 sum_{m >= k} C_m + (K - 1 - k)
    s2 = (cumP**2).sum(-1)
    tail = np.cumsum(cumP[..., ::-1], -1)[..., ::-1]  # T_k = sum_{m >= k} C_m, k < K-1
    n = N.sum(-1)
    rps = (s2 * n + (N * (K - 1 - np.arange(K))).sum(-1)
           - 2.0 * (N[..., : K - 1] * tail).sum(-1)).sum(-1)
    q = 1.0 - P[..., 0]  # event chance
    n1 = N[..., 1:].sum(-1)
    n0 = N[..., 0]
    return {
        "rps": rps,
        "sse": (n1 * (1 - q) ** 2 + n0 * q**2).sum(-1),
        "ll": -(N * np.log(P)).sum((-1, -2)),
    }


# --------------------------------------------------------------------------- rates (baselines)
def rate_predictions(Ncat: np.ndarray, layout: Layout, *, shrink: float) -> np.ndarray:
    """Out-of-fold level probabilities (G, R, K) of a table of categorical rows.

    ``Ncat`` (G, R, K) counts per block and category. For each fold the training rate of a
    category is ``(N_r + shrink * pi) / (n_r + shrink)`` with ``pi`` the training
    climatology (itself smoothed by half a count): a conditional base rate. One category
    (R = 1) gives the climatological base rate.
    """
    K = Ncat.shape[-1]
    NF = _fold_sums(Ncat, layout)
    tot = Ncat.sum(0)
    out = np.zeros(Ncat.shape)
    for f in range(layout.n_folds):  # few folds; each is one vectorised step
        tr = tot - NF[f]
        clim = (tr.sum(0) + 0.5 / K) / (tr.sum() + 0.5)
        rate = (tr + shrink * clim) / (tr.sum(-1, keepdims=True) + shrink)
        m = layout.block_fold == f
        out[m] = rate[None]
    return out


# --------------------------------------------------------------------------- ROC area
def auc_replicates(q: np.ndarray, n1: np.ndarray, n0: np.ndarray, block: np.ndarray,
                   W: np.ndarray) -> np.ndarray:
    """Weighted ROC area for each row of block weights ``W`` (R, G); rows (q, n1, n0).

    Notes
    -----
    The area's numerator is a sum over pairs of blocks, :math:`\\sum_{g,h} w_g w_h A_{gh}`
    with :math:`A_{gh}` the number of (event row in block g, non-event row in block h)
    pairs ranked correctly (ties one half), and its denominator is
    :math:`(\\sum_g w_g P_g)(\\sum_h w_h N_h)`. ``A`` is computed once from one sort, so
    every bootstrap replicate is a quadratic form (ties as in
    :func:`sklearn.metrics.roc_auc_score`).
    """
    G = W.shape[1]
    order = np.argsort(q, kind="stable")
    qs = q[order]
    grp = np.cumsum(np.r_[True, qs[1:] != qs[:-1]]) - 1
    ng = int(grp[-1]) + 1 if grp.size else 0
    key = grp * G + block[order]
    Pg = np.bincount(key, weights=n1[order], minlength=ng * G).reshape(ng, G)
    Ng = np.bincount(key, weights=n0[order], minlength=ng * G).reshape(ng, G)
    below = np.cumsum(Ng, 0) - Ng
    with blas_threads(1):  # a small product: BLAS threads only contend here
        A = Pg.T @ (below + 0.5 * Ng)  # (G, G)
    num = np.einsum("rg,gh,rh->r", W, A, W)
    den = (W @ Pg.sum(0)) * (W @ Ng.sum(0))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / den, np.nan)
