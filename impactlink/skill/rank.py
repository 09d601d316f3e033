"""Rank candidate (index, time scale, lag) predictors of one impact target out of sample.

:func:`rank_candidates` reads as a short sequence of steps: check the inputs, find the rows
every candidate can score, build the year-blocked fold layout, score the baselines
(climatological base rate, seasonal base rate, persistence), build one histogram per
candidate and fit every fold of every candidate in batches, then summarise (intervals by a
block bootstrap over years, paired comparisons with the best, a nested selection-aware
estimate, the persistence comparison, the boosted challenger, per-place best candidates).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from impactlink.errors import SkillError, SkillWarning
from impactlink.link.target import Target
from impactlink.skill import _engine as E
from impactlink.skill.best import best_candidate
from impactlink.skill.folds import CV_CHOICES, year_folds
from impactlink.skill.scores import reliability_table, rps_per_row

__all__ = ["rank_candidates", "SkillResult", "SkillWarning", "TABLE_COLUMNS"]

PERSISTENCE_ROLES = ("state", "onset", "escalation")
SHORT_MAX_WEEKS = 13  # a "short" scale of a two-predictor pair (<= 13 weeks)
LONG_MIN_WEEKS = 26  # a "long" scale (>= 26 weeks)

TABLE_COLUMNS = [
    "impact", "target", "role", "index", "scale_weeks", "lag_weeks", "index2", "scale2_weeks",
    "model", "events", "n", "n_years", "brier", "brier_lo", "brier_hi", "bss", "bss_lo",
    "bss_hi", "roc_auc", "roc_auc_lo", "roc_auc_hi", "log_loss", "rps", "rpss", "rpss_lo",
    "rpss_hi", "calibration_slope", "rank", "rank_overall", "indistinguishable_from_best",
    "beats_climatology", "beats_seasonal", "beats_persistence",
]


@dataclass(frozen=True)
class SkillResult:
    """Out-of-sample skill of every candidate for one target.

    Attributes
    ----------
    table : DataFrame
        One row per candidate and model, plus the baselines (``model`` = "climatology",
        "seasonal", "persistence"); columns :data:`TABLE_COLUMNS` (the rows of ``skill.csv``).
        The ranking score is ``rpss`` (equal to ``bss`` for a binary target).
    summary : DataFrame
        One row: best candidate, naive and nested skill with intervals, number of
        candidates and the persistence comparison (numbers and flags; the report words them).
    persistence : DataFrame
        Per lag: persistence-only skill, best index-only and index-plus-persistence skill,
        the gain over persistence with its paired-bootstrap interval.
    reliability : DataFrame
        Binned reliability of the best candidate's out-of-fold event chances.
    predictions : DataFrame
        Out-of-fold event chances (level >= 1) of the best candidate and the baselines.
    local : DataFrame
        Best of the leading candidates per region and per unit, with events and rows.
    provenance : dict
    """

    table: pd.DataFrame
    summary: pd.DataFrame
    persistence: pd.DataFrame
    reliability: pd.DataFrame
    predictions: pd.DataFrame
    local: pd.DataFrame
    provenance: dict = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        return self.table.copy()


# --------------------------------------------------------------------------- public entry
def rank_candidates(
    target: Target,
    features: Callable[[str, int, int], np.ndarray],
    candidates: Sequence[tuple[str, int, int]],
    *,
    cv: str = "leave_one_year_out",
    k_folds: int = 5,
    n_boot: int = 200,
    ci: float = 0.90,
    n_bins: int = 200,
    pairs: bool = True,
    challenger: bool = True,
    seed: int = 0,
    jobs: int = 1,
    dask_address: str | None = None,
    progress: Callable[[str], None] | None = None,
    k_inner: int = 5,
    pair_bins: int = 16,
    n_local: int = 10,
    keep_predictions: bool = True,
    seasonal: bool = False,
) -> SkillResult:
    """Score every candidate predictor of ``target`` out of sample and rank them.

    Parameters
    ----------
    target : Target
        The impact outcome (binary or ordinal), one row per unit and time step.
    features : callable
        ``features(index, scale_weeks, lag_weeks)`` returns the candidate's value for every
        row of ``target.frame`` (ndarray (n_rows,), NaN where undefined), index convention
        negative = dry. Usually ``functools.partial(impactlink.link.feature_values, target,
        cube)`` reordered to this signature.
    candidates : list of (index, scale_weeks, lag_weeks)
    cv : {"leave_one_year_out", "blocked_k_fold", "leave_one_region_out"}
        Fold scheme (see :func:`impactlink.skill.year_folds`).
    k_folds : int, default 5
        Blocks for ``blocked_k_fold``.
    n_boot : int, default 200
        Replicates of the block bootstrap over years (0: no intervals).
    ci : float, default 0.90
        Coverage of the percentile intervals and of the paired comparisons.
    n_bins : int, default 200
        Equal-width bins of each candidate's values for the histogram fast path.
    pairs : bool, default True
        Also score two-predictor models pairing a short (<= 13 weeks) and a long
        (>= 26 weeks) time scale of the same index at the same lag.
    challenger : bool, default True
        Also score a monotone histogram gradient boosting model on the best candidate.
    seed : int, default 0
        Seeds the bootstrap and the challenger.
    jobs, dask_address, progress
        Passed to :func:`impactlink.execution.map_tasks` for the batched fits.
    k_inner : int, default 5
        Inner folds of the nested (selection-aware) estimate.
    pair_bins : int, default 16
        Bins per axis of the two-predictor histograms.
    n_local : int, default 10
        Leading candidates compared per region and unit for ``local``.
    keep_predictions : bool, default True
        Return the row-level out-of-fold predictions.
    seasonal : bool, default False
        Add one pair of annual harmonics of the season to the ``index`` and
        ``index_persistence`` models (see Notes). Ignored (with the result unchanged) when
        the target's ``season`` column is absent or takes a single value (annual targets).

    Returns
    -------
    SkillResult

    Raises
    ------
    SkillError
        For a target frame without the needed columns, an empty candidate list, a feature
        of the wrong length, an unknown ``cv``, or no row that every candidate can score.

    Warns
    -----
    SkillWarning
        When rows are dropped because some candidate is undefined there (e.g. the spin-up
        of a long time scale), or when fits did not converge.

    Notes
    -----
    *Models.* Every model is a cumulative-logit (proportional-odds) model,
    :math:`P(Y \\le k) = F(\\theta_k - x^T\\beta)`, which for a binary target is the
    logistic model. ``index``: one candidate; ``index_pair``: a short and a long scale;
    ``index_persistence``: the candidate plus the impact level known at forecast time
    (``persistence_<lag>``, with "unknown" as its own category); ``boosted``: histogram
    gradient boosting, monotone in the index (Chen & Guestrin 2016; scikit-learn's
    ``HistGradientBoostingClassifier``), one classifier per exceedance level.

    *Seasonal terms* (``seasonal=True``). The ``index`` and ``index_persistence`` models
    gain :math:`\\beta_s \\sin(2\\pi s/P) + \\beta_c \\cos(2\\pi s/P)` with :math:`P` = 52.1775
    weeks (weekly seasons) or 12 months. The histograms gain a season dimension: 13
    four-week classes of ISO weeks or the 12 months, and every row of a class uses the
    harmonics at the class midpoint (for weeks at most 1.5 weeks, 0.18 rad, from the row's
    own week; exact for months; see :func:`impactlink.skill._engine.season_classes`).
    The fits then run on up to 13 times as many histogram rows. ``index_pair`` and
    ``boosted`` ignore the season (index values only), and the baselines are unchanged.

    *Baselines.* ``climatology``: level frequencies of the training folds;
    ``seasonal``: the same per season (4-week blocks of ISO weeks for weekly targets,
    months for monthly ones), shrunk towards climatology by 2 pseudo-rows; ``persistence``
    (per lag): level frequencies conditional on the level known at forecast time, shrunk by
    1 pseudo-row — a calibrated persistence forecast.

    *Scores.* Out-of-fold scores pooled over folds: Brier score of the event (level >= 1)
    and its skill score ``bss`` against climatology; ranked probability score and
    ``rpss`` (Wilks 2011, eqs. 8.36-8.53); ROC area; log loss; calibration slope. The
    ranking score is ``rpss`` (for a binary target it equals ``bss``). ``rank`` is within a
    model type, ``rank_overall`` across all non-baseline models.

    *Uncertainty.* Whole years are resampled (block bootstrap, Künsch 1989; the same
    replicates for every candidate, so comparisons are paired). A candidate is
    ``indistinguishable_from_best`` when the ``ci`` interval of the paired difference
    with the best of its model type reaches 0; ``beats_*`` flags need the lower end of
    the paired difference with that baseline above 0. The nested estimate picks the best
    ``index`` candidate afresh inside each outer fold by an inner year-blocked CV on the
    remaining folds (Varma & Simon 2006) and scores that pick on the outer fold.

    References
    ----------
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed. Academic Press.
    Künsch, H. R. (1989). The jackknife and the bootstrap for general stationary
    observations. Annals of Statistics 17(3), 1217-1241.
    Varma, S., Simon, R. (2006). Bias in error estimation when using cross-validation for
    model selection. BMC Bioinformatics 7, 91. https://doi.org/10.1186/1471-2105-7-91
    Chen, T., Guestrin, C. (2016). XGBoost: a scalable tree boosting system. KDD '16, 785-794.
    """
    _check_options(target, candidates, cv=cv, ci=ci, n_boot=n_boot, n_bins=n_bins,
                   seasonal=seasonal)
    cands = list(dict.fromkeys((str(i), int(s), int(lg)) for i, s, lg in candidates))
    frame = target.frame
    level_all = _as_float(frame["level"])
    ok = np.isfinite(level_all)
    # one pass in the usual case: assume every candidate is defined wherever the level is;
    # the histogram pass stops at the first candidate with a gap, and then a first pass
    # finds the rows every candidate can score
    units = None
    for attempt in range(2):
        rows = np.flatnonzero(ok)
        if rows.size == 0:
            raise SkillError(
                f"target {target.name!r}: no row where every candidate is defined; drop "
                "candidates whose time scale or lag runs past the index record"
            )
        ctx = _Context.build(target, rows, cv=cv, k_folds=k_folds, n_boot=n_boot, ci=ci,
                             seed=seed, k_inner=k_inner, seasonal=seasonal)
        units = _histograms(ctx, features, cands, n_bins=n_bins, pairs=pairs,
                            pair_bins=pair_bins)
        if units is not None or attempt == 1:
            break
        for c in cands:  # pass 1: the rows every candidate can score
            ok &= np.isfinite(_feature(features, c, len(frame)))
    if rows.size < len(frame):
        warnings.warn(
            f"target {target.name!r}: {len(frame) - rows.size} of {len(frame)} rows dropped "
            "because the level or some candidate is undefined there (spin-up of long time "
            "scales or lags)",
            SkillWarning, stacklevel=2,
        )
    base = _baselines(ctx, cands)
    records = _fit_all(ctx, units, jobs=jobs, dask_address=dask_address, progress=progress)
    table, reps = _table(ctx, base, records)
    best = _best_single(table)
    if challenger and best is not None:
        rec = _challenger(ctx, units, (base + records)[best], seed=seed, jobs=jobs,
                          dask_address=dask_address)
        table, reps = _table(ctx, base, records + [rec])
    nested = _nested(ctx, records, base)
    pers = _persistence_gain(ctx, table, reps)
    local, preds, rel = _local_and_predictions(ctx, features, units, records, base, table,
                                               n_local=n_local, keep=keep_predictions)
    summary = _summary(ctx, table, nested, pers, reps)
    prov = {
        "method": "histogram fast path, batched cumulative-logit fits",
        "cv": cv, "k_folds": k_folds if cv == "blocked_k_fold" else None,
        "n_folds": ctx.layout.n_folds, "n_boot": n_boot, "ci": ci, "n_bins": n_bins,
        "pair_bins": pair_bins, "k_inner": k_inner, "seed": seed,
        "rows_in_target": len(frame), "rows_scored": int(rows.size),
        "candidates": len(cands), "ranking_score": "rpss",
        "seasonal": bool(seasonal), "seasonal_terms": ctx.seasons is not None,
    }
    if ctx.seasons is not None:
        prov.update(
            seasonal_models=["index", "index_persistence"],
            season_classes=ctx.seasons.n_classes, season_period=ctx.seasons.period,
            season_harmonics="one sin/cos pair at the season-class midpoints",
        )
    return SkillResult(table=table, summary=summary, persistence=pers, reliability=rel,
                       predictions=preds, local=local, provenance=prov)


# --------------------------------------------------------------------------- checks
def _check_options(target, candidates, *, cv, ci, n_boot, n_bins, seasonal=False):
    if not isinstance(target, Target):
        raise SkillError(f"target must be an impactlink Target; got {type(target).__name__}")
    need = {"year", "level", "unit_id"}
    missing = sorted(need - set(target.frame.columns))
    if missing:
        raise SkillError(
            f"target {target.name!r}: frame lacks columns {missing}; expected at least "
            f"{sorted(need)} (see impactlink.link.Target)"
        )
    if target.n_levels < 2:
        raise SkillError(f"target {target.name!r} has {target.n_levels} level(s); need >= 2")
    if len(candidates) == 0:
        raise SkillError("candidates is empty; pass a list of (index, scale_weeks, lag_weeks)")
    for c in candidates:
        if len(c) != 3:
            raise SkillError(f"candidate {c!r} is not a tuple (index, scale_weeks, lag_weeks)")
    if cv not in CV_CHOICES:
        raise SkillError(f"cv={cv!r} is not one of {CV_CHOICES}")
    if not 0 < ci < 1:
        raise SkillError(f"ci={ci} must lie strictly between 0 and 1 (e.g. 0.90)")
    if n_boot < 0:
        raise SkillError(f"n_boot={n_boot} must be >= 0")
    if n_bins < 2:
        raise SkillError(f"n_bins={n_bins} must be >= 2")
    if not isinstance(seasonal, (bool, np.bool_)):
        raise SkillError(
            f"seasonal={seasonal!r} must be True or False (add annual harmonics of the "
            "season to the index models, or not)"
        )


def _as_float(s: pd.Series) -> np.ndarray:
    """A column as float64 with NaN for missing (nullable integer columns included)."""
    return pd.to_numeric(s, errors="coerce").astype("Float64").to_numpy(dtype=float,
                                                                       na_value=np.nan)


def _feature(features, cand, n_rows) -> np.ndarray:
    x = np.asarray(features(*cand), dtype=float)
    if x.shape != (n_rows,):
        raise SkillError(
            f"features{cand} returned shape {x.shape}; expected ({n_rows},), one value per "
            "row of target.frame"
        )
    return x


# --------------------------------------------------------------------------- context
@dataclass
class _Context:
    target: Target
    rows: np.ndarray
    level: np.ndarray
    block: np.ndarray
    layout: E.Layout
    n_years: int
    ci: float
    pers_cells: dict  # lag -> cell codes (rows,) or absent
    season: np.ndarray
    boot_w: np.ndarray  # (1 + R, G): point weights then replicates
    seasons: E.SeasonClasses | None = None  # season classes of the seasonal terms, if used

    @classmethod
    def build(cls, target, rows, *, cv, k_folds, n_boot, ci, seed, k_inner, seasonal=False):
        fr = target.frame
        K = target.n_levels
        level = _as_float(fr["level"])[rows].astype(np.int64)
        if level.min() < 0 or level.max() > K - 1:
            raise SkillError(
                f"target {target.name!r}: level values run {level.min()}..{level.max()}; "
                f"expected 0..{K - 1} for its {K} levels"
            )
        years = fr["year"].to_numpy()[rows].astype(np.int64)
        regions = fr["region"].to_numpy()[rows] if "region" in fr else None
        if cv == "leave_one_region_out" and regions is None:
            raise SkillError(f"target {target.name!r}: cv='leave_one_region_out' needs a "
                             "'region' column in the frame")
        fold = year_folds(years, cv=cv, k_folds=k_folds, regions=regions, seed=seed)
        uy, ypos = np.unique(years, return_inverse=True)
        key = ypos * (fold.max() + 1) + fold
        ukey, block = np.unique(key, return_inverse=True)
        block_year = ukey // (fold.max() + 1)
        block_fold = ukey % (fold.max() + 1)
        layout = E.make_layout(block_fold, block_year, uy.size, K, k_inner=k_inner,
                               n_boot=n_boot, seed=seed)
        pers = {}
        if target.role in PERSISTENCE_ROLES:
            for col in fr.columns:
                if col.startswith("persistence_"):
                    lag = int(col.split("_", 1)[1])
                    v = _as_float(fr[col])[rows]
                    cell = np.where(np.isfinite(v), np.clip(np.nan_to_num(v), 0, K - 1), K)
                    pers[lag] = cell.astype(np.int64)
        if "season" in fr:
            s = fr["season"].to_numpy()[rows].astype(np.int64)
            if target.grain == "county_week":
                s = np.minimum((np.minimum(s, 52) - 1) // 4, 12)
            season = np.unique(s, return_inverse=True)[1]
        else:
            season = np.zeros(rows.size, dtype=np.int64)
        seasons = None
        if seasonal and "season" in fr:
            sc = E.season_classes(fr["season"].to_numpy()[rows],
                                  weekly=target.grain != "region_month")
            seasons = sc if sc.n_classes > 1 else None
        boot_w = np.vstack([np.ones((1, layout.n_blocks)), layout.boot])
        return cls(target, rows, level, block.astype(np.int64), layout, uy.size, ci, pers,
                   season, boot_w, seasons)


# --------------------------------------------------------------------------- baselines
def _categorical(ctx, cat, n_cat, *, shrink):
    K = ctx.layout.n_levels
    G = ctx.layout.n_blocks
    N = np.bincount((ctx.block * n_cat + cat) * K + ctx.level,
                    minlength=G * n_cat * K).reshape(G, n_cat, K).astype(float)
    P = E.rate_predictions(N, ctx.layout, shrink=shrink)
    return P, N


def _baselines(ctx, cands) -> list[dict]:
    out = []
    zero = np.zeros(ctx.rows.size, dtype=np.int64)
    specs = [("climatology", None, zero, 1, 1.0),
             ("seasonal", None, ctx.season, int(ctx.season.max()) + 1, 2.0)]
    lags = sorted({c[2] for c in cands})
    for lag in lags:
        if lag in ctx.pers_cells:
            specs.append(("persistence", lag, ctx.pers_cells[lag], ctx.layout.n_levels + 1, 1.0))
    for model, lag, cat, n_cat, shrink in specs:
        P, N = _categorical(ctx, cat, n_cat, shrink=shrink)
        rec = _score_oof(P, N, ctx.layout, ctx.boot_w)
        rec.update(model=model, index=None, scale_weeks=None, lag_weeks=lag, index2=None,
                   scale2_weeks=None, P_oof=P, cat=cat)
        out.append(rec)
    return out


def _score_oof(P, N, layout, W) -> dict:
    """Per-block losses, ROC area (point + replicates) and calibration slope of OOF P."""
    from impactlink.models.batch import fit_logistic_batch

    loss = E.block_losses(P, N)
    G, R, K = N.shape
    q = (1.0 - P[..., 0]).ravel()
    n1 = N[..., 1:].sum(-1).ravel()
    n0 = N[..., 0].ravel()
    blk = np.repeat(np.arange(G), R)
    keep = (n1 + n0) > 0
    auc = E.auc_replicates(q[keep], n1[keep], n0[keep], blk[keep], W)
    lp = np.log(np.clip(q[keep], 1e-6, 1 - 1e-6) / (1 - np.clip(q[keep], 1e-6, 1 - 1e-6)))
    tot = n1[keep] + n0[keep]
    if np.ptp(lp) > 1e-9 and n1.sum() > 0 and n0.sum() > 0:
        X = np.column_stack([np.ones_like(lp), lp])[None]
        slope = float(fit_logistic_batch(X, (n1[keep] / tot)[None], tot[None], ridge=0.0,
                                         max_iter=100).coef[0, 1])
    else:
        slope = float("nan")
    return {
        "rps_g": loss["rps"], "sse_g": loss["sse"], "ll_g": loss["ll"],
        "n_g": N.sum((1, 2)), "ev_g": N[..., 1:].sum((1, 2)),
        "auc": auc[0], "auc_reps": auc[1:], "calibration_slope": slope,
    }


# --------------------------------------------------------------------------- histograms
@dataclass
class _Unit:
    kind: str  # "single" | "single_pers" | "pair"
    key: tuple  # (index, scale, lag) or (index, short, long, lag)
    hist: E.Hist
    lag: int
    use_cells: bool
    transform: tuple  # per predictor (mean, sd, lo, hi) for mapping rows to bins
    row_map: np.ndarray  # (NB * C,) compressed row of each (bin, cell), -1 if empty
    n_bins: int
    n_season: int = 1  # season classes crossed with the bins (bin * n_season + class)
    plain: E.Hist | None = None  # the index-only histogram without seasons (challenger)


def _histograms(ctx, features, cands, *, n_bins, pairs, pair_bins) -> list[_Unit] | None:
    by_group: dict[tuple[str, int], list[int]] = {}
    for ix, sc, lg in cands:
        by_group.setdefault((ix, lg), []).append(sc)
    units = []
    n_full = len(ctx.target.frame)
    K = ctx.layout.n_levels
    zero = np.zeros(ctx.rows.size, dtype=np.int64)
    sea = ctx.seasons
    n_sea = sea.n_classes if sea is not None else 1
    for (ix, lg), scales in by_group.items():  # one pass per (index, lag) group
        cell = ctx.pers_cells.get(lg)
        xs = {}
        for sc in sorted(set(scales)):
            x = _feature(features, (ix, sc, lg), n_full)[ctx.rows]
            if not np.isfinite(x).all():
                return None  # a gap: the caller finds the common rows first
            mu, sd = float(x.mean()), float(x.std())
            sd = sd if sd > 0 else 1.0
            z = (x - mu) / sd
            xs[sc] = (z, mu, sd, E.bin_codes(z, pair_bins) if pairs else None)
            b = E.bin_codes(z, n_bins)
            tr: tuple[tuple[float, float, float, float], ...] = (
                (mu, sd, float(z.min()), float(z.max())),)
            plain = None
            if sea is None:
                cols, bs = [z], b
            else:  # seasonal terms: rows by bin x season class, harmonics at class midpoints
                cols = [z, sea.harmonics[sea.code, 0], sea.harmonics[sea.code, 1]]
                bs = b * n_sea + sea.code
                plain = _hist(ctx, [z], b, zero, n_bins, 1)
            if cell is None:
                h = _hist(ctx, cols, bs, zero, n_bins * n_sea, 1)
            else:  # the index-plus-persistence variant: rows by bin x level known
                hc, h = _hist(ctx, cols, bs, cell, n_bins * n_sea, K + 1, marginal=True)
                units.append(_Unit("single_pers", (ix, sc, lg), hc, lg, True, tr,
                                   _row_map(hc), n_bins, n_sea))
            units.append(_Unit("single", (ix, sc, lg), h, lg, False, tr, _row_map(h), n_bins,
                               n_sea, plain))
        if pairs:
            shorts = [s for s in sorted(xs) if s <= SHORT_MAX_WEEKS]
            longs = [s for s in sorted(xs) if s >= LONG_MIN_WEEKS]
            for s1 in shorts:
                for s2 in longs:
                    b = xs[s1][3] * pair_bins + xs[s2][3]
                    h = _hist(ctx, [xs[s1][0], xs[s2][0]], b, zero, pair_bins**2, 1)
                    tr = tuple((xs[s][1], xs[s][2], float(xs[s][0].min()),
                                float(xs[s][0].max())) for s in (s1, s2))
                    units.append(_Unit("pair", (ix, s1, s2, lg), h, lg, False, tr, _row_map(h),
                                       pair_bins))
    return units


def _hist(ctx, xs, bins, cell, n_bins_total, C, *, marginal=False):
    return E.build_hist(ctx.block, ctx.level, xs, bins, cell, n_blocks=ctx.layout.n_blocks,
                        n_bins_total=n_bins_total, n_cells=C, n_levels=ctx.layout.n_levels,
                        marginal=marginal)


def _row_map(h: E.Hist) -> np.ndarray:
    """The compressed row of every (bin, cell), -1 where empty (data rows -> predictions)."""
    rmap = np.full(h.keep.size, -1, dtype=np.int64)
    rmap[h.keep] = np.arange(int(h.keep.sum()))
    return rmap


# --------------------------------------------------------------------------- fitting
def _fit_all(ctx, units, *, jobs, dask_address, progress, chunk=8) -> list[dict]:
    from impactlink.execution import map_tasks

    groups: dict[tuple, list[int]] = {}
    for i, u in enumerate(units):
        groups.setdefault((u.kind, u.hist.n_cells, u.use_cells), []).append(i)
    tasks, where = [], []
    for (kind, _, _use_cells), idx in groups.items():
        for s in range(0, len(idx), chunk):
            part = idx[s: s + chunk]
            if kind == "single":
                variants = [("index", False, True)]
            elif kind == "single_pers":
                variants = [("index_persistence", True, False)]
            else:
                variants = [("index_pair", False, False)]
            tasks.append(([units[i].hist for i in part], ctx.layout, variants, ctx.boot_w,
                          jobs > 1 or dask_address is not None))
            where.append(part)
    results = map_tasks(_score_chunk, tasks, jobs=jobs, dask_address=dask_address,
                        progress=progress, label=f"skill {ctx.target.name}")
    records = []
    n_bad = 0
    for part, res in zip(where, results, strict=True):
        for i, per_unit in zip(part, res, strict=True):
            u = units[i]
            for rec in per_unit:
                n_bad += rec.pop("n_unconverged")
                if u.kind in ("single", "single_pers"):
                    ix, sc, lg = u.key
                    rec.update(index=ix, scale_weeks=sc, lag_weeks=lg, index2=None,
                               scale2_weeks=None)
                else:
                    ix, s1, s2, lg = u.key
                    rec.update(index=ix, scale_weeks=s1, lag_weeks=lg, index2=ix,
                               scale2_weeks=s2)
                rec["unit"] = i
                records.append(rec)
    if n_bad:
        warnings.warn(f"target {ctx.target.name!r}: {n_bad} cross-validation fits stopped "
                      "before converging (their last iterate is used)", SkillWarning,
                      stacklevel=3)
    return records


def _score_chunk(task) -> list[list[dict]]:
    """Worker: fit and score every CV job of a chunk of same-shaped candidates."""
    hists, layout, variants, W, parallel = task
    if parallel:  # one BLAS thread per worker process: workers already fill the cores
        with E._one_blas_thread():
            return _score_chunk((hists, layout, variants, W, False))
    out: list[list[dict]] = [[] for _ in hists]
    for model, use_cells, nested in variants:
        coef, conv = E.fit_chunk(hists, layout, use_cells=use_cells,
                                 jobs_subset="all" if nested else "main")
        G = layout.n_blocks
        ji, gi = np.nonzero(layout.scored[layout.n_main:])
        for u, h in enumerate(hists):
            P_oof = E.predict_blocks(h, coef[u], use_cells=use_cells, n_levels=layout.n_levels,
                                     jobs=layout.block_fold, blocks=np.arange(G))
            rec = _score_oof(P_oof, h.N, layout, W)
            rec["model"] = model
            rec["coef_main"] = coef[u, : layout.n_main]
            rec["n_unconverged"] = int((~conv[u]).sum())
            if nested:
                # inner jobs: only the (job, block) pairs each inner fit scores
                P_in = E.predict_blocks(h, coef[u], use_cells=use_cells,
                                        n_levels=layout.n_levels, jobs=ji + layout.n_main,
                                        blocks=gi)
                rps = E.block_losses(P_in, h.N[gi])["rps"]
                inner = np.zeros(layout.n_folds)
                np.add.at(inner, layout.inner_of[ji + layout.n_main], rps)
                rec["inner"] = inner
            out[u].append(rec)
    return out


# --------------------------------------------------------------------------- table
_ID = ["index", "scale_weeks", "lag_weeks", "index2", "scale2_weeks", "model"]


def _table(ctx, base, records):
    t = ctx.target
    recs = base + records
    W = ctx.boot_w
    ci = ctx.ci
    lo_q, hi_q = (1 - ci) / 2, 1 - (1 - ci) / 2
    rps = np.array([r["rps_g"] for r in recs]) @ W.T  # (T, 1 + R)
    sse = np.array([r["sse_g"] for r in recs]) @ W.T
    ll = np.array([r["ll_g"] for r in recs]) @ W.T
    n = np.array([r["n_g"] for r in recs]) @ W.T
    ev = np.array([r["ev_g"] for r in recs]) @ W.T
    clim = 0  # the climatology baseline is always the first record
    with np.errstate(divide="ignore", invalid="ignore"):
        rpss = 1 - rps / rps[clim]
        bss = 1 - sse / sse[clim]
        brier = sse / n
    auc = np.array([np.r_[r["auc"], r["auc_reps"]] for r in recs])
    has_boot = W.shape[0] > 1

    def interval(a):
        if not has_boot:
            return np.full(a.shape[0], np.nan), np.full(a.shape[0], np.nan)
        return _quantile(a[:, 1:], lo_q), _quantile(a[:, 1:], hi_q)

    df = pd.DataFrame({k: [r.get(k) for r in recs] for k in _ID})
    df.insert(0, "role", t.role)
    df.insert(0, "target", t.name)
    df.insert(0, "impact", t.impact)
    df["events"] = ev[:, 0].round().astype(int)
    df["n"] = n[:, 0].round().astype(int)
    df["n_years"] = ctx.n_years
    for name, arr in (("brier", brier), ("bss", bss), ("roc_auc", auc), ("rpss", rpss)):
        df[name] = arr[:, 0]
        df[f"{name}_lo"], df[f"{name}_hi"] = interval(arr)
        if name == "bss":
            df["log_loss"] = ll[:, 0] / n[:, 0]
        if name == "roc_auc":
            df["rps"] = rps[:, 0] / n[:, 0]
    df["calibration_slope"] = [r["calibration_slope"] for r in recs]

    is_base = df["model"].isin(["climatology", "seasonal", "persistence"]).to_numpy()
    df["rank"] = pd.array([pd.NA] * len(df), dtype="Int64")
    df["rank_overall"] = pd.array([pd.NA] * len(df), dtype="Int64")
    df["indistinguishable_from_best"] = pd.array([pd.NA] * len(df), dtype="boolean")
    cand = np.flatnonzero(~is_base)
    if cand.size:
        df.loc[cand, "rank_overall"] = (
            df.loc[cand, "rpss"].rank(ascending=False, method="min").astype(int).to_numpy())
    for _model, idx in df.iloc[cand].groupby("model").groups.items():
        idx = np.asarray(idx)
        df.loc[idx, "rank"] = df.loc[idx, "rpss"].rank(ascending=False,
                                                        method="min").astype(int).to_numpy()
        b = idx[np.nanargmax(df.loc[idx, "rpss"].to_numpy())]
        if has_boot:
            diff = rpss[b, 1:][None, :] - rpss[idx, 1:]
            df.loc[idx, "indistinguishable_from_best"] = _quantile(diff, lo_q) <= 0
        else:
            df.loc[idx, "indistinguishable_from_best"] = idx == b

    def beats(ref_row, rows_idx):
        if ref_row is None:
            return np.full(len(rows_idx), pd.NA)
        d = rpss[rows_idx] - rpss[ref_row][None, :]
        if has_boot:
            return _quantile(d[:, 1:], lo_q) > 0
        return d[:, 0] > 0

    seas = int(np.flatnonzero(df["model"].to_numpy() == "seasonal")[0])
    for col in ("beats_climatology", "beats_seasonal", "beats_persistence"):
        df[col] = pd.array([pd.NA] * len(df), dtype="boolean")
    allrows = np.arange(len(df))
    notclim = allrows[allrows != clim]
    df.loc[notclim, "beats_climatology"] = beats(clim, notclim)
    notseas = allrows[(allrows != seas) & (allrows != clim)]
    df.loc[notseas, "beats_seasonal"] = beats(seas, notseas)
    pers_rows = {int(df.at[i, "lag_weeks"]): i for i in allrows
                 if df.at[i, "model"] == "persistence"}
    for lag, pr in pers_rows.items():
        sel = np.flatnonzero((~is_base) & (df["lag_weeks"].to_numpy() == lag))
        if sel.size:
            df.loc[sel, "beats_persistence"] = beats(pr, sel)
    df = df[TABLE_COLUMNS].copy()
    for c in ("scale_weeks", "lag_weeks", "scale2_weeks"):
        df[c] = pd.array(df[c], dtype="Int64")
    return df, {"rpss": rpss, "records": recs}


def _quantile(a: np.ndarray, q: float) -> np.ndarray:
    """Row quantiles; the slow NaN-aware path only where a row has NaN (e.g. ROC area of a
    replicate without events)."""
    out = np.quantile(a, q, axis=1)
    bad = np.isnan(out)
    if bad.any():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            out[bad] = np.nanquantile(a[bad], q, axis=1)
    return out


def _best_single(table) -> int | None:
    """Row position of the best single candidate (the rule of :func:`best_candidate`)."""
    bc = best_candidate(table.reset_index(drop=True))
    return None if bc is None else bc.row


# --------------------------------------------------------------------------- challenger
def _challenger(ctx, units, best_rec, *, seed, jobs=1, dask_address=None) -> dict:
    """Monotone histogram gradient boosting on the best single candidate, same folds."""
    u = units[best_rec["unit"]]
    h = u.plain if u.plain is not None else u.hist  # the index only, no season classes
    K = ctx.layout.n_levels
    layout = ctx.layout
    N = h.N.sum(-1)
    z = h.S[..., 0] / np.maximum(N, 1e-12)  # (G, R) bin means
    Ntot = h.N.sum(0)
    Stot = h.S[..., 0].sum(0)
    # monotone direction from the pooled data: impacts rise as the index falls (dry) unless
    # the data say otherwise
    ev = (h.N[..., 1:].sum(-1)).sum(0)
    xm = Stot / np.maximum(Ntot.sum(-1), 1e-12)
    w = Ntot.sum(-1)
    rate = ev / np.maximum(w, 1e-12)
    cov = np.sum(w * (xm - np.average(xm, weights=w)) * (rate - np.average(rate, weights=w)))
    sign = -1 if cov <= 0 else 1
    from impactlink.execution import map_tasks

    tasks = []
    for f in range(layout.n_folds):
        m = layout.block_fold == f
        tasks.append((Ntot - h.N[m].sum(0), Stot - h.S[m, :, 0].sum(0), z[m], sign, seed, K))
    fold_P = map_tasks(_boost_fold, tasks, jobs=jobs, dask_address=dask_address,
                       label=f"challenger {ctx.target.name}")
    P = np.zeros(h.N.shape)
    for f, pf in enumerate(fold_P):
        P[layout.block_fold == f] = pf
    P = P / P.sum(-1, keepdims=True)
    rec = _score_oof(P, h.N, layout, ctx.boot_w)
    ix, sc, lg = u.key
    rec.update(model="boosted", index=ix, scale_weeks=sc, lag_weeks=lg, index2=None,
               scale2_weeks=None, unit=None)
    return rec



def _boost_fold(task) -> np.ndarray:
    """Worker: one fold of the boosted challenger; level probabilities of the held-out rows.

    One monotone classifier per exceedance ``P(Y >= k)`` on the training bins (rows weighted
    by their counts), made non-increasing in ``k``. Threads are limited to one: on a few
    hundred rows the thread start-up costs more than it saves (6x slower here).
    """
    from sklearn.ensemble import HistGradientBoostingClassifier
    from threadpoolctl import threadpool_limits

    tr_N, tr_S, z_test, sign, seed, K = task
    n_r = tr_N.sum(-1)
    keep = n_r > 0
    xr = tr_S[keep] / n_r[keep]
    exceed = np.ones(z_test.shape + (K,))
    with threadpool_limits(1):
        for k in range(1, K):
            pos = tr_N[keep, k:].sum(-1)
            neg = n_r[keep] - pos
            if pos.sum() == 0 or neg.sum() == 0:
                exceed[..., k] = pos.sum() / max(n_r.sum(), 1.0)
                continue
            X = np.r_[xr, xr][:, None]
            y = np.r_[np.ones(xr.size), np.zeros(xr.size)]
            sw = np.r_[pos, neg]
            clf = HistGradientBoostingClassifier(
                max_iter=30, learning_rate=0.2, max_leaf_nodes=8, min_samples_leaf=10,
                monotonic_cst=[sign], early_stopping=False, random_state=seed)
            clf.fit(X[sw > 0], y[sw > 0], sample_weight=sw[sw > 0])
            exceed[..., k] = clf.predict_proba(z_test.reshape(-1, 1))[:, 1].reshape(z_test.shape)
    exceed = np.minimum.accumulate(exceed, axis=-1)
    tail = np.concatenate([exceed, np.zeros(exceed.shape[:-1] + (1,))], -1)
    return np.maximum(-np.diff(tail, axis=-1), 1e-15)


# --------------------------------------------------------------------------- nested estimate
def _nested(ctx, records, base) -> dict:
    """Selection-aware skill: pick the best ``index`` candidate inside each outer fold."""
    singles = [r for r in records if r["model"] == "index" and "inner" in r]
    if not singles or ctx.layout.excl.shape[0] == ctx.layout.n_main:
        return {}
    inner = np.array([r["inner"] for r in singles])  # (S, F)
    chosen = np.argmin(inner, axis=0)  # (F,)
    lay = ctx.layout
    rps = np.array([r["rps_g"] for r in singles])
    pick = chosen[lay.block_fold]
    rps_nested = rps[pick, np.arange(lay.n_blocks)]
    W = ctx.boot_w
    num = rps_nested @ W.T
    den = base[0]["rps_g"] @ W.T
    skill = 1 - num / den
    lo_q, hi_q = (1 - ctx.ci) / 2, 1 - (1 - ctx.ci) / 2
    vals, counts = np.unique(chosen, return_counts=True)
    top = singles[int(vals[np.argmax(counts)])]
    return {
        "nested_rpss": float(skill[0]),
        "nested_rpss_lo": float(np.quantile(skill[1:], lo_q)) if W.shape[0] > 1 else np.nan,
        "nested_rpss_hi": float(np.quantile(skill[1:], hi_q)) if W.shape[0] > 1 else np.nan,
        "nested_distinct_picks": int(vals.size),
        "nested_most_picked": f"{top['index']} {top['scale_weeks']}w lag {top['lag_weeks']}w",
        "nested_most_picked_share": float(counts.max() / lay.n_folds),
    }


# --------------------------------------------------------------------------- persistence
def _persistence_gain(ctx, table, reps) -> pd.DataFrame:
    """Per lag: does the best index add skill beyond the level known at forecast time?"""
    rpss = reps["rpss"]
    lo_q, hi_q = (1 - ctx.ci) / 2, 1 - (1 - ctx.ci) / 2
    has_boot = rpss.shape[1] > 1
    model = table["model"].to_numpy()
    lag = table["lag_weeks"].to_numpy(dtype=float, na_value=np.nan)
    rows = []
    for pr in np.flatnonzero(model == "persistence"):
        L = lag[pr]
        ip = np.flatnonzero((model == "index_persistence") & (lag == L))
        io = np.flatnonzero((model == "index") & (lag == L))
        if ip.size == 0 or io.size == 0:
            continue
        b_ip = ip[np.nanargmax(rpss[ip, 0])]
        b_io = io[np.nanargmax(rpss[io, 0])]
        gain = rpss[b_ip] - rpss[pr]
        alone = rpss[b_io] - rpss[pr]
        g_lo = np.quantile(gain[1:], lo_q) if has_boot else np.nan
        g_hi = np.quantile(gain[1:], hi_q) if has_boot else np.nan
        a_lo = np.quantile(alone[1:], lo_q) if has_boot else np.nan
        adds = bool(g_lo > 0) if has_boot else bool(gain[0] > 0)
        rows.append({
            "impact": ctx.target.impact, "target": ctx.target.name, "lag_weeks": int(L),
            "persistence_rpss": rpss[pr, 0],
            "index": table.at[b_ip, "index"], "scale_weeks": table.at[b_ip, "scale_weeks"],
            "index_persistence_rpss": rpss[b_ip, 0],
            "best_index_alone": table.at[b_io, "index"],
            "best_index_alone_scale_weeks": table.at[b_io, "scale_weeks"],
            "index_alone_rpss": rpss[b_io, 0],
            "gain": gain[0], "gain_lo": g_lo, "gain_hi": g_hi, "index_adds_skill": adds,
            "index_alone_beats_persistence": bool(a_lo > 0) if has_boot else bool(alone[0] > 0),
        })
    cols = ["impact", "target", "lag_weeks", "persistence_rpss", "index", "scale_weeks",
            "index_persistence_rpss", "best_index_alone", "best_index_alone_scale_weeks",
            "index_alone_rpss", "gain", "gain_lo", "gain_hi", "index_adds_skill",
            "index_alone_beats_persistence"]
    return pd.DataFrame(rows, columns=cols)


# --------------------------------------------------------------------------- local + rows
def _row_probs(ctx, features, units, rec) -> np.ndarray:
    """Out-of-fold level probabilities (rows, K) of one single candidate, row by row."""
    u = units[rec["unit"]]
    lay = ctx.layout
    P_oof = E.predict_blocks(u.hist, rec["coef_main"], use_cells=u.use_cells,
                             n_levels=lay.n_levels, jobs=lay.block_fold,
                             blocks=np.arange(lay.n_blocks))
    x = _feature(features, u.key, len(ctx.target.frame))[ctx.rows]
    mu, sd = u.transform[0][:2]
    b = E.bin_codes((x - mu) / sd, u.n_bins)
    if u.n_season > 1:
        b = b * u.n_season + ctx.seasons.code
    cell = ctx.pers_cells[u.lag] if u.hist.n_cells > 1 else np.zeros_like(b)
    r = u.row_map[b * u.hist.n_cells + cell]
    return P_oof[ctx.block, r]


def _local_and_predictions(ctx, features, units, records, base, table, *, n_local, keep):
    fr = ctx.target.frame.iloc[ctx.rows]
    recs = base + records
    idx = np.flatnonzero(table["model"].to_numpy() == "index")
    order = idx[np.argsort(-table["rpss"].to_numpy()[idx], kind="stable")][:n_local]
    if order.size == 0:
        return pd.DataFrame(), pd.DataFrame(), pd.DataFrame()
    lvl = ctx.level
    clim_P = base[0]["P_oof"][ctx.block, 0]
    clim_loss = rps_per_row(clim_P, lvl)
    losses = []
    best_P = None
    for j, row in enumerate(order):
        P = _row_probs(ctx, features, units, recs[row])
        if j == 0:
            best_P = P
        losses.append(rps_per_row(P, lvl))
    losses = np.array(losses)
    event = (lvl >= 1).astype(float)
    parts = []
    for level_name, col in (("region", "region"), ("unit", "unit_id")):
        if col not in fr:
            continue
        codes, labels = pd.factorize(fr[col].astype(str))
        m = labels.size
        L = np.stack([np.bincount(codes, weights=lo, minlength=m) for lo in losses])
        Lc = np.bincount(codes, weights=clim_loss, minlength=m)
        with np.errstate(divide="ignore", invalid="ignore"):
            skill = np.where(Lc > 0, 1 - L / Lc, np.nan)
        filled = np.where(np.isfinite(skill), skill, -np.inf)
        best = np.argmax(filled, axis=0)
        sel = table.iloc[order[best]]
        parts.append(pd.DataFrame({
            "impact": ctx.target.impact, "target": ctx.target.name, "level": level_name,
            "unit": labels.to_numpy(), "index": sel["index"].to_numpy(),
            "scale_weeks": sel["scale_weeks"].to_numpy(),
            "lag_weeks": sel["lag_weeks"].to_numpy(),
            "rpss": skill[best, np.arange(m)],
            "events": np.bincount(codes, weights=event, minlength=m).astype(int),
            "n": np.bincount(codes, minlength=m),
        }))
    local = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
    brow = table.iloc[order[0]]
    q_best = 1 - best_P[:, 0]
    rel = reliability_table(event, np.clip(q_best, 0, 1), n_bins=10)
    rel.insert(0, "target", ctx.target.name)
    if not keep:
        return local, pd.DataFrame(), rel
    preds = pd.DataFrame({
        "target": ctx.target.name,
        "unit_id": fr["unit_id"].to_numpy(),
        "time": fr["time"].to_numpy() if "time" in fr else pd.NaT,
        "year": fr["year"].to_numpy(),
        "level": lvl,
        "event": event.astype(int),
        "p_event_best": q_best,
        "p_event_climatology": 1 - clim_P[:, 0],
        "p_event_seasonal": 1 - base[1]["P_oof"][ctx.block, base[1]["cat"], 0],
    })
    lag = int(brow["lag_weeks"])
    pb = [b for b in base if b["model"] == "persistence" and b["lag_weeks"] == lag]
    if pb:
        preds["p_event_persistence"] = 1 - pb[0]["P_oof"][ctx.block, pb[0]["cat"], 0]
    return local, preds, rel


# --------------------------------------------------------------------------- summary
def _paired_gain(rpss: np.ndarray, i: int, j: int, ci: float) -> tuple[float, float, float]:
    """Skill of row i minus row j, with the paired bootstrap interval (same replicates)."""
    d = rpss[i] - rpss[j]
    if d.size < 2:
        return float(d[0]), float("nan"), float("nan")
    lo, hi = np.quantile(d[1:], [(1 - ci) / 2, 1 - (1 - ci) / 2])
    return float(d[0]), float(lo), float(hi)


def _summary(ctx, table, nested, pers, reps) -> pd.DataFrame:
    t = ctx.target
    model = table["model"].to_numpy()
    singles = table[model == "index"]
    b = table.iloc[_best_single(table)]
    row = {
        "impact": t.impact, "target": t.name, "role": t.role, "kind": t.kind,
        "best_index": b["index"], "best_scale_weeks": b["scale_weeks"],
        "best_lag_weeks": b["lag_weeks"], "ranking_score": "rpss",
        "naive_rpss": b["rpss"], "naive_rpss_lo": b["rpss_lo"], "naive_rpss_hi": b["rpss_hi"],
        "best_bss": b["bss"], "best_roc_auc": b["roc_auc"],
        "n_candidates": int(len(singles)),
        "n_indistinguishable": int(singles["indistinguishable_from_best"].fillna(False).sum()),
        "events": int(b["events"]), "n": int(b["n"]), "n_years": ctx.n_years,
    }
    row.update({k: nested.get(k, np.nan) for k in
                ("nested_rpss", "nested_rpss_lo", "nested_rpss_hi", "nested_distinct_picks",
                 "nested_most_picked", "nested_most_picked_share")})
    pairs = table[model == "index_pair"]
    if len(pairs):
        p = pairs.loc[pairs["rpss"].idxmax()]
        row["best_pair"] = f"{p['index']} {p['scale_weeks']}w + {p['scale2_weeks']}w lag {p['lag_weeks']}w"
        row["best_pair_rpss"] = p["rpss"]
        g = _paired_gain(reps["rpss"], int(p.name), int(b.name), ctx.ci)
        row.update(best_pair_gain=g[0], best_pair_gain_lo=g[1], best_pair_gain_hi=g[2])
    boosted = table[model == "boosted"]
    if len(boosted):
        row["boosted_rpss"] = boosted["rpss"].iloc[0]
        g = _paired_gain(reps["rpss"], int(boosted.index[0]), int(b.name), ctx.ci)
        row.update(boosted_gain=g[0], boosted_gain_lo=g[1], boosted_gain_hi=g[2])
    if len(pers):
        p0 = pers.sort_values("lag_weeks").iloc[0]
        row.update(persistence_lag_weeks=p0["lag_weeks"], persistence_gain=p0["gain"],
                   persistence_gain_lo=p0["gain_lo"], persistence_gain_hi=p0["gain_hi"],
                   index_adds_skill=p0["index_adds_skill"])
    return pd.DataFrame([row])
