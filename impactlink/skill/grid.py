"""The candidate grid: input checks, the context one target shares, one histogram per candidate.

:func:`_check_options` checks the inputs; :class:`_Context` holds what every candidate of one
target shares (scored rows, levels, the year-blocked fold layout, persistence cells, season
classes, bootstrap weights); :func:`_histograms` builds the :class:`_Unit` of every single
candidate, index-plus-persistence variant and two-scale pair (the histogram fast path of
:mod:`impactlink.skill._engine`).
"""

from __future__ import annotations

from dataclasses import dataclass

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


def _histograms(ctx, features, cands, *, n_bins, pairs, pair_bins, threads: int = 1
                ) -> list[_Unit] | None:
    """One histogram per candidate (and pair); None at the first candidate with a gap.

    ``threads`` > 1 builds the (index, lag) groups on that many threads
    (:func:`impactlink.execution.thread_map`; numpy's arithmetic on the rows releases the GIL,
    its gathers and ``bincount`` do not, so the gain is partial); the units come back in group
    order, so the result does not depend on it.
    """
    by_group: dict[tuple[str, int], list[int]] = {}
    for ix, sc, lg in cands:
        by_group.setdefault((ix, lg), []).append(sc)
    sea = ctx.seasons
    harm = ((sea.harmonics[sea.code, 0], sea.harmonics[sea.code, 1]) if sea is not None
            else ())  # the rows' seasonal terms, the same for every candidate

    def group(item):
        (ix, lg), scales = item
        return _group_units(ctx, features, ix, lg, scales, harm, n_bins=n_bins, pairs=pairs,
                            pair_bins=pair_bins)

    items = list(by_group.items())
    if threads > 1:
        from impactlink.execution import thread_map

        parts = thread_map(group, items, threads)
    else:  # in order, stopping at the first gap
        parts = []
        for item in items:
            parts.append(group(item))
            if parts[-1] is None:
                break
    if any(p is None for p in parts):
        return None
    return [u for p in parts for u in p]


def _group_units(ctx, features, ix, lg, scales, harm, *, n_bins, pairs, pair_bins
                 ) -> list[_Unit] | None:
    """The units of one (index, lag) group: every scale, its persistence variant, pairs."""
    units = []
    n_full = len(ctx.target.frame)
    K = ctx.layout.n_levels
    zero = np.zeros(ctx.rows.size, dtype=np.int64)
    sea = ctx.seasons
    n_sea = sea.n_classes if sea is not None else 1
    cell = ctx.pers_cells.get(lg)
    xs = {}
    for sc in sorted(set(scales)):
        x = _feature(features, (ix, sc, lg), n_full)[ctx.rows]
        if not np.isfinite(x).all():
            return None  # a gap: the caller finds the common rows first
        mu, sd = float(x.mean()), float(x.std())
        sd = sd if sd > 0 else 1.0
        z = x - mu
        z /= sd
        xs[sc] = (z, mu, sd, E.bin_codes(z, pair_bins) if pairs else None)
        b = E.bin_codes(z, n_bins)
        tr: tuple[tuple[float, float, float, float], ...] = (
            (mu, sd, float(z.min()), float(z.max())),)
        plain = None
        if sea is None:
            cols, bs = [z], b
        else:  # seasonal terms: rows by bin x season class, harmonics at class midpoints
            cols = [z, *harm]
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
