"""The candidate grid: input checks, the context one target shares, one task per group.

:func:`_check_options` checks the inputs; :class:`_Context` holds what every candidate of one
target shares (scored rows, levels, the year-blocked fold layout, persistence cells, season
classes, bootstrap weights); :func:`_grid` builds the :class:`_Unit` of every single
candidate, index-plus-persistence variant and two-scale pair (the histogram fast path of
:mod:`impactlink.skill._engine`) and scores it, one (index, lag) group per task.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from impactlink.errors import SkillError
from impactlink.link.target import Target
from impactlink.skill import _engine as E
from impactlink.skill._shared import _as_float, _feature
from impactlink.skill.folds import CV_CHOICES, year_folds

PERSISTENCE_ROLES = ("state", "onset", "escalation")
SHORT_MAX_WEEKS = 13  # a "short" scale of a two-predictor pair (<= 13 weeks)
LONG_MIN_WEEKS = 26  # a "long" scale (>= 26 weeks)


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


# --------------------------------------------------------------------------- context
@dataclass(eq=False)
class _RowsIn:
    """What the candidates' histograms need of one target's scored rows, without its frame
    (sent once to each worker when the histograms are built there).

    ``rows`` are the scored positions of the frame (None: every row, in order); ``n_full``
    the frame's length; ``block`` and ``level`` per scored row; ``pers_cells`` and
    ``seasons`` as in :class:`_Context`.
    """

    rows: np.ndarray | None
    n_full: int
    block: np.ndarray
    level: np.ndarray
    n_blocks: int
    n_levels: int
    pers_cells: dict
    seasons: E.SeasonClasses | None
    _bases: dict = field(default_factory=dict)  # cached per process: bases, harmonics

    def bases(self, n_bins_total: int) -> tuple[np.ndarray, np.ndarray]:
        """The rows' :func:`impactlink.skill._engine.hist_bases` without cells (shared by
        every candidate of the target with ``n_bins_total`` bins)."""
        hit = self._bases.get(n_bins_total)
        if hit is None:
            hit = E.hist_bases(self.block, self.level, None, n_bins_total=n_bins_total,
                               n_cells=1, n_levels=self.n_levels)
            self._bases[n_bins_total] = hit
        return hit

    def harmonics(self) -> tuple[np.ndarray, ...]:
        """The rows' seasonal terms (sin, cos at their class midpoints), () without seasons."""
        if self.seasons is None:
            return ()
        if "harm" not in self._bases:
            sea = self.seasons
            self._bases["harm"] = (sea.harmonics[sea.code, 0], sea.harmonics[sea.code, 1])
        return self._bases["harm"]


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
    rows_in: _RowsIn | None = None  # the rows as the histograms read them

    def __post_init__(self) -> None:
        if self.rows_in is None:
            all_rows = self.rows.size == len(self.target.frame)  # distinct positions: all
            self.rows_in = _RowsIn(None if all_rows else self.rows, len(self.target.frame),
                                   self.block, self.level, self.layout.n_blocks,
                                   self.layout.n_levels, self.pers_cells, self.seasons)

    def compact_rows(self) -> _RowsIn:
        """:attr:`rows_in` in the smallest integer types that hold them, to send to workers
        (:func:`impactlink.skill._engine.hist_bases` widens them; the histograms are the
        same)."""
        ri = self.rows_in
        assert ri is not None
        seasons = ri.seasons
        if seasons is not None:
            seasons = dataclasses.replace(seasons, code=_small(seasons.code))
        return _RowsIn(ri.rows, ri.n_full, _small(ri.block),
                       _small(ri.level), ri.n_blocks, ri.n_levels,
                       {lag: _small(c) for lag, c in ri.pers_cells.items()}, seasons)


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


def _small(a: np.ndarray) -> np.ndarray:
    """Non-negative integers in the smallest unsigned type that holds their maximum."""
    if a.size == 0 or a.min() < 0:
        return a
    return a.astype(np.min_scalar_type(int(a.max())), copy=False)


# --------------------------------------------------------------------------- histograms
@dataclass
class _Unit:
    kind: str  # "single" | "single_pers" | "pair"
    key: tuple  # (index, scale, lag) or (index, short, long, lag)
    hist: E.Hist
    lag: int
    use_cells: bool
    transform: tuple  # per predictor (mean, sd, lo, hi), index units: rows -> bins
    row_map: np.ndarray  # (NB * C,) compressed row of each (bin, cell), -1 if empty
    n_bins: int
    n_season: int = 1  # season classes crossed with the bins (bin * n_season + class)
    plain: E.Hist | None = None  # the index-only histogram without seasons (challenger)


def _grid(ctx, features, cands, *, n_bins, pairs, pair_bins, jobs: int = 1,
          dask_address: str | None = None, progress=None
          ) -> tuple[list[_Unit], list[list[dict]]] | None:
    """Every candidate's histogram (and pair's), fitted and scored: the units and the
    records of each; None at the first candidate with a gap.

    One task per (index, lag) group (:func:`_group_task`): read the group's scales, build
    its histograms, fit and score them (:func:`impactlink.skill.fitting._score_units`).
    In-process the groups run one by one, longest lag first (the spin-up gaps of long
    scales and lags show there) and stop at the first gap; the caller then finds the rows
    all candidates can score and starts again. With ``jobs`` > 1 (a local process pool) or
    ``dask_address`` the tasks run on the workers (:func:`impactlink.execution.map_tasks`),
    which cannot stop one another, so the caller finds the common rows first; the groups
    with most scales go first, so the last task to finish is a short one. There the
    target's rows (:class:`_RowsIn`, in compact integer types), the fold layout and the
    features travel once per worker (``shared``; a
    :class:`~impactlink.link.features.FeatureReader` as its cube arrays, which every target
    shares, and its row positions). The units come back in group order; the numbers do not
    depend on where they were made.
    """
    from impactlink.execution import map_tasks

    by_group: dict[tuple[str, int], list[int]] = {}
    for ix, sc, lg in cands:
        by_group.setdefault((ix, lg), []).append(sc)
    items = list(by_group.items())
    parallel = jobs > 1 or bool(dask_address)
    if parallel:  # largest groups first, so no worker is left with a long task at the end
        order = sorted(range(len(items)), key=lambda i: (-len(items[i][1]), -items[i][0][1]))
    else:  # longest lag first (stable: ties in order)
        order = sorted(range(len(items)), key=lambda i: -items[i][0][1])
    opts = dict(n_bins=n_bins, pairs=pairs, pair_bins=pair_bins)
    tasks = [(items[i], opts) for i in order]
    rows_in = ctx.compact_rows() if parallel else ctx.rows_in
    shared = (*_feature_parts(features), rows_in, ctx.layout, ctx.boot_w, parallel)
    label = f"skill {ctx.target.name}"
    if parallel:
        done = map_tasks(_group_task, tasks, jobs=jobs, dask_address=dask_address,
                         shared=shared, progress=progress, label=label)
    else:  # one by one, stopping at the first gap
        done = []
        step = max(1, len(tasks) // 10)
        for i, t in enumerate(tasks, 1):
            done.append(_group_task(t, *shared))
            if done[-1] is None:
                break
            if progress is not None and (i % step == 0 or i == len(tasks)):
                progress(f"{label}: {i}/{len(tasks)}")
    if len(done) < len(items) or any(p is None for p in done):
        return None
    parts: list[Any] = [None] * len(items)
    for i, p in zip(order, done, strict=True):
        parts[i] = p
    units = [u for p in parts for u in p[0]]
    scored = [r for p in parts for r in p[1]]
    return units, scored


def _feature_parts(features) -> tuple:
    """``features`` as the two objects a task receives: a FeatureReader's cube arrays and
    row positions (so the arrays, shared by every target, travel once), or the callable
    and None."""
    from impactlink.link.features import FeatureReader

    if isinstance(features, FeatureReader):
        return features.arrays, features.rows
    return features, None


def _group_task(task, features, row_positions, rows_in: _RowsIn, layout, boot_w, parallel
                ) -> tuple[list[_Unit], list[list[dict]]] | None:
    """Worker: the units of one (index, lag) group and their scores (None at a gap).

    ``features`` is the cube's arrays when ``row_positions`` is given (the two parts of a
    :class:`~impactlink.link.features.FeatureReader`), else the callable itself.
    """
    from impactlink.execution import blas_threads
    from impactlink.skill.fitting import _score_units

    if row_positions is not None:
        from impactlink.link.features import FeatureReader

        features = FeatureReader(features, row_positions)
    item, opts = task
    # on workers, one BLAS thread each: the workers fill the cores, and idle BLAS threads
    # would spin on them
    with blas_threads(1 if parallel else None):
        units = _group_units(rows_in, features, item, **opts)
        return None if units is None else (units, _score_units(units, layout, boot_w))


def _mean_sd(x: np.ndarray) -> tuple[float, float]:
    """Mean and standard deviation (ddof 0) of the rows; 1.0 for a constant column.

    One pass (the sum and the dot product, BLAS) unless the variance is tiny against the
    mean square, where the two-pass formula avoids the cancellation of the one-pass one.
    """
    n = x.size
    mu = float(x.sum()) / n
    ms = float(np.dot(x, x)) / n
    var = ms - mu * mu
    if var <= 1e-6 * ms:
        d = x - mu
        var = float(np.dot(d, d)) / n
    sd = float(np.sqrt(var)) if var > 0 else 0.0
    return mu, sd if sd > 0 else 1.0


def _group_units(ri: _RowsIn, features, item, *, n_bins, pairs, pair_bins
                 ) -> list[_Unit] | None:
    """The units of one (index, lag) group: every scale, its persistence variant, pairs.

    Every scale's values are read first, so a gap stops the group before any histogram.
    The histograms hold sums of the standardized values, made from sums of the raw values
    (:func:`impactlink.skill._engine.build_hist`, ``affine``).
    """
    (ix, lg), scales = item
    xs = {}
    for sc in sorted(set(scales)):
        x = _feature(features, (ix, sc, lg), ri.n_full)
        x = x if ri.rows is None else x[ri.rows]
        lo, hi = float(x.min()), float(x.max())  # NaN when any value is
        if not (np.isfinite(lo) and np.isfinite(hi)):
            return None  # a gap: the caller finds the common rows first
        xs[sc] = (x, lo, hi, *_mean_sd(x))
    units = []
    K = ri.n_levels
    sea = ri.seasons
    n_sea = sea.n_classes if sea is not None else 1
    harm = ri.harmonics()  # the same for every candidate
    cell = ri.pers_cells.get(lg)
    base = ri.bases(n_bins * n_sea)
    base_cell = (None if cell is None else E.hist_bases(
        ri.block, ri.level, cell, n_bins_total=n_bins * n_sea, n_cells=K + 1, n_levels=K))
    codes = {}
    for sc, (x, lo, hi, mu, sd) in xs.items():
        b = E.bin_codes(x, n_bins, lo, hi)
        if pairs:
            codes[sc] = E.bin_codes(x, pair_bins, lo, hi).astype(np.uint8)
        tr: tuple[tuple[float, float, float, float], ...] = ((mu, sd, lo, hi),)
        plain = None
        aff = [(mu, sd)] + [None] * len(harm)
        if sea is None:
            cols, bs = [x], b
        else:  # seasonal terms: rows by bin x season class, harmonics at class midpoints
            cols = [x, *harm]
            plain = _hist(ri, [x], b, None, n_bins, 1, bases=ri.bases(n_bins),
                          affine=aff[:1])
            bs = b * n_sea
            bs += sea.code
        if cell is None:
            h = _hist(ri, cols, bs, None, n_bins * n_sea, 1, bases=base, affine=aff)
        else:  # the index-plus-persistence variant: rows by bin x level known
            hc, h = _hist(ri, cols, bs, cell, n_bins * n_sea, K + 1, marginal=True,
                          bases=base_cell, affine=aff)
            units.append(_Unit("single_pers", (ix, sc, lg), hc, lg, True, tr,
                               _row_map(hc), n_bins, n_sea))
        units.append(_Unit("single", (ix, sc, lg), h, lg, False, tr, _row_map(h), n_bins,
                           n_sea, plain))
    if pairs:
        shorts = [s for s in xs if s <= SHORT_MAX_WEEKS]
        longs = [s for s in xs if s >= LONG_MIN_WEEKS]
        pbase = ri.bases(pair_bins**2)
        for s1 in shorts:
            for s2 in longs:
                b = codes[s1].astype(np.int64)
                b *= pair_bins
                b += codes[s2]
                h = _hist(ri, [xs[s1][0], xs[s2][0]], b, None, pair_bins**2, 1, bases=pbase,
                          affine=[xs[s1][3:5], xs[s2][3:5]])
                tr = tuple((xs[s][3], xs[s][4], xs[s][1], xs[s][2]) for s in (s1, s2))
                units.append(_Unit("pair", (ix, s1, s2, lg), h, lg, False, tr, _row_map(h),
                                   pair_bins))
    return units


def _hist(ri, xs, bins, cell, n_bins_total, C, *, marginal=False, bases=None, affine=None):
    return E.build_hist(ri.block, ri.level, xs, bins, cell, n_blocks=ri.n_blocks,
                        n_bins_total=n_bins_total, n_cells=C, n_levels=ri.n_levels,
                        marginal=marginal, bases=bases, affine=affine)


def _row_map(h: E.Hist) -> np.ndarray:
    """The compressed row of every (bin, cell), -1 where empty (data rows -> predictions)."""
    rmap = np.full(h.keep.size, -1, dtype=np.int64)
    rmap[h.keep] = np.arange(int(h.keep.sum()))
    return rmap
