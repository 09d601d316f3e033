"""Rank candidate (index, time scale, lag) predictors of one impact target out of sample.

:func:`rank_candidates` reads as a short sequence of steps, each in its own room of
``impactlink/skill/``: check the inputs and find the rows every candidate can score, build
the year-blocked fold layout and one histogram per candidate (``grid.py``), score the
baselines (``baselines.py``: climatological base rate, seasonal base rate, persistence), fit
every fold of every candidate in batches (``fitting.py``), build the ranking table with
intervals by a block bootstrap over years and paired comparisons with the best
(``ranking.py``), then the boosted challenger (``challenger.py``), the nested
selection-aware estimate (``nested.py``), the persistence comparison (``persistence.py``),
per-place best candidates and row predictions (``local.py``) and the one-row summary
(``summary.py``). Helpers several rooms share live in ``_shared.py``; the result container
and the table contract in ``result.py``.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence

import numpy as np

from impactlink.errors import SkillError, SkillWarning
from impactlink.link.target import Target
from impactlink.skill._shared import _as_float, _best_single, _feature
from impactlink.skill.baselines import _baselines
from impactlink.skill.challenger import _challenger
from impactlink.skill.fitting import _records
from impactlink.skill.grid import _check_options, _Context, _grid
from impactlink.skill.local import _local_and_predictions
from impactlink.skill.nested import _nested
from impactlink.skill.persistence import _persistence_gain
from impactlink.skill.ranking import _table
from impactlink.skill.result import TABLE_COLUMNS, SkillResult
from impactlink.skill.summary import _summary

__all__ = ["rank_candidates", "SkillResult", "SkillWarning", "TABLE_COLUMNS"]


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
        negative = dry. Usually :func:`impactlink.link.features.feature_reader` of the
        target and the cube: it pickles without the target frame (for Dask), and its
        ``defined_rows(candidates)`` finds the rows every candidate can score from the
        cube's spin-ups without reading the candidates.
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
        Passed to :func:`impactlink.execution.map_tasks`: one task per (index, lag) group
        reads its candidates, builds their histograms and fits them, in-process, on a
        local pool of ``jobs`` processes or on the Dask cluster (a
        :class:`~impactlink.link.features.FeatureReader` as ``features`` sends the cube
        once for every target). The same result on every engine. ``jobs`` also sets the
        threads of the row-level predictions of the leading candidates.
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
    remaining folds (Varma & Simon 2006) and scores that pick on the outer fold; with more
    than 10 outer folds they are first dealt into 10 interleaved selection groups, each
    pick made without its whole group (:func:`impactlink.skill._engine.make_layout`).

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
    defined = getattr(features, "defined_rows", None)  # a FeatureReader knows the spin-ups
    known = defined(cands) if defined is not None else None
    if known is not None:
        ok &= known
    elif jobs > 1 or dask_address:  # parallel tasks cannot stop at a gap: common rows first
        ok &= _all_defined(features, cands, len(frame))
    # in-process, assume every candidate is defined wherever the level is: the groups stop at
    # the first candidate with a gap, and then a first pass finds the rows all can score
    grid = None
    for attempt in range(2):
        rows = np.flatnonzero(ok)
        if rows.size == 0:
            raise SkillError(
                f"target {target.name!r}: no row where every candidate is defined; drop "
                "candidates whose time scale or lag runs past the index record"
            )
        ctx = _Context.build(target, rows, cv=cv, k_folds=k_folds, n_boot=n_boot, ci=ci,
                             seed=seed, k_inner=k_inner, seasonal=seasonal)
        grid = _grid(ctx, features, cands, n_bins=n_bins, pairs=pairs, pair_bins=pair_bins,
                     jobs=jobs, dask_address=dask_address, progress=progress)
        if grid is not None or attempt == 1:
            break
        ok &= _all_defined(features, cands, len(frame))
    if grid is None:  # pragma: no cover - the common rows have no gap by construction
        raise AssertionError("the candidate grid met a gap on the rows every candidate scores")
    units, scored = grid
    if rows.size < len(frame):
        warnings.warn(
            f"target {target.name!r}: {len(frame) - rows.size} of {len(frame)} rows dropped "
            "because the level or some candidate is undefined there (spin-up of long time "
            "scales or lags)",
            SkillWarning, stacklevel=2,
        )
    base = _baselines(ctx, cands)
    records = _records(ctx, units, scored)
    table, reps = _table(ctx, base, records)
    best = _best_single(table)
    if challenger and best is not None:
        rec = _challenger(ctx, units, (base + records)[best], seed=seed, jobs=jobs,
                          dask_address=dask_address)
        table, reps = _table(ctx, base, records + [rec])
    nested = _nested(ctx, records, base)
    pers = _persistence_gain(ctx, table, reps)
    local, preds, rel = _local_and_predictions(ctx, features, units, records, base, table,
                                               n_local=n_local, keep=keep_predictions,
                                               threads=max(1, int(jobs)))
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


def _all_defined(features, cands, n_rows) -> np.ndarray:
    """Rows where every candidate has a value (reads each candidate once)."""
    ok = np.ones(n_rows, dtype=bool)
    for c in cands:
        ok &= np.isfinite(_feature(features, c, n_rows))
    return ok
