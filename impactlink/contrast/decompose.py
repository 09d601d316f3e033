"""Split the difference in expected impact of two counties into exposure, sensitivity and the
unexplained county effect, with year-block bootstrap intervals.

Three groups of inputs separate county a from county b in the trait-aware model
(:mod:`impactlink.contrast.traitmodel`): their index values over the period (exposure), their
traits (sensitivity, one player per trait) and their county effects (unexplained). The
expected impact of a side is the mean modelled probability over its rows in the period; a
"coalition" takes the inputs of its groups from a and the rest from b.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from itertools import combinations
from math import factorial

import numpy as np
import pandas as pd
from scipy import special

from impactlink.contrast.traitmodel import TraitModel, refit, refit_rows
from impactlink.errors import ContrastError, ContrastWarning
from impactlink.execution import blas_threads, thread_map
from impactlink.schema import COUNTY, REGION, YEAR
from impactlink.skill.folds import year_bootstrap_weights

__all__ = ["Side", "county_side", "region_side", "decompose_pair", "decomposition_table",
           "GROUPS", "REGION_PARTNER"]

#: The three groups of the probability-scale Shapley decomposition.
GROUPS = ("exposure", "sensitivity", "unexplained")

#: Partner name that compares a county with the other counties of its region.
REGION_PARTNER = "region"


@dataclass(frozen=True)
class Side:
    """One side of a contrast: index values over the period, traits and county effect.

    Attributes
    ----------
    county_id, label : str
        County id (or ``"region:<name>"``) and display name.
    x : ndarray (n,)
        Index feature of each row in the period [index units].
    years : ndarray (n,)
        Year of each row.
    trait_raw : ndarray (K,)
        Traits in their own units (region: mean of the region's other counties).
    members : tuple of str
        The county ids the side stands for (one county, or the region's other counties).
    """

    county_id: str
    label: str
    x: np.ndarray
    years: np.ndarray
    trait_raw: np.ndarray
    members: tuple[str, ...]

    def z(self, model: TraitModel) -> np.ndarray:
        return model.standardize(self.trait_raw)

    def u(self, model: TraitModel) -> float:
        return float(model.county_effect.reindex(list(self.members)).fillna(0.0).mean())


def county_side(model: TraitModel, county: str, period: tuple[int, int] | None,
                label: str = "") -> Side:
    """The side of one county: its rows in ``period`` (inclusive years; None = all)."""
    rows = _in_period(model.rows, period)
    mine = rows[rows[COUNTY] == str(county)]
    if mine.empty:
        raise ContrastError(
            f"county {county!r} has no modelled rows{_period_text(period)}; pick a county and "
            "period with impact records and index values.")
    ct = model.county_traits.set_index(COUNTY)
    return Side(str(county), label or str(county), mine["x"].to_numpy(float),
                mine[YEAR].to_numpy(), ct.loc[str(county), list(model.traits)].to_numpy(float),
                (str(county),))


def region_side(model: TraitModel, county: str, period: tuple[int, int] | None) -> Side:
    """The region of ``county`` without it: per time step the mean index of its other counties,
    their mean traits and mean county effect."""
    ct = model.county_traits.set_index(COUNTY)
    if str(county) not in ct.index:
        raise ContrastError(f"county {county!r} is not among the modelled counties.")
    region = ct.loc[str(county), REGION]
    others = [c for c in ct.index[ct[REGION] == region] if c != str(county)]
    if not others:
        raise ContrastError(f"county {county!r} is the only modelled county of region "
                            f"{region!r}; compare it with another county instead.")
    rows = _in_period(model.rows, period)
    rows = rows[rows[COUNTY].isin(others)]
    if rows.empty:
        raise ContrastError(f"region {region!r} has no modelled rows{_period_text(period)}.")
    step = rows.groupby([YEAR, "season"], sort=True)["x"].mean().reset_index()
    return Side(f"region:{region}", f"the rest of {region}", step["x"].to_numpy(float),
                step[YEAR].to_numpy(), ct.loc[others, list(model.traits)].to_numpy(float)
                .mean(axis=0), tuple(others))


def decompose_pair(model: TraitModel, a: Side, b: Side) -> dict[str, float]:
    """Exact decomposition of the gap in expected impact between side a and side b.

    Parameters
    ----------
    model : TraitModel
    a, b : Side
        The two sides (a minus b).

    Returns
    -------
    dict
        Probability scale: ``p_a, p_b, total, exposure, sensitivity, unexplained`` and
        ``sensitivity:<trait>`` (probability units, 0-1). Linear predictor: ``lp_a, lp_b,
        lp_total, lp_exposure, lp_sensitivity, lp_unexplained, lp_sensitivity:<trait>``,
        ``lp_sensitivity:<trait>:level`` and ``lp_sensitivity:<trait>:interaction`` (log-odds).

    Notes
    -----
    *Probability scale (Shapley).* With the value function
    :math:`v(S)` = mean modelled probability when the groups in S take side a's inputs and the
    others side b's, the part of group g is its Shapley value (Shapley 1953)

    .. math:: \\phi_g = \\sum_{S \\subseteq N \\setminus g} \\frac{|S|!\\,(n-|S|-1)!}{n!}
              [v(S \\cup g) - v(S)],

    an exact average over the 3! orderings of exposure, sensitivity and unexplained, so the
    three parts add up to :math:`v(N) - v(\\emptyset) = p_a - p_b` (Shorrocks 2013). The
    sensitivity part is split over the traits by the Owen value (Owen 1977): the same formula
    over the other groups outside and over the other traits inside the sensitivity group,
    which adds up to the group's Shapley value.

    *Linear predictor (Oaxaca-Blinder).* The mean log-odds
    :math:`\\bar\\eta = b_0 + b_1 \\bar x + \\sum_k (g_k + d_k \\bar x) z_k + u` differ by

    .. math:: \\Delta\\bar\\eta = (b_1 + \\textstyle\\sum_k d_k \\tilde z_k) \\Delta \\bar x
              + \\sum_k (g_k \\Delta z_k + d_k \\tilde x\\, \\Delta z_k) + \\Delta u,

    with :math:`\\tilde z, \\tilde x` the midpoints of the two sides: the Oaxaca (1973) /
    Blinder (1973) split with equal weights on both sides (Reimers 1983), which for this
    bilinear predictor is also its Shapley value; it adds up exactly. ``:level`` is
    :math:`g_k \\Delta z_k` and ``:interaction`` :math:`d_k \\tilde x \\Delta z_k`. Review:
    Fortin, Lemieux & Firpo (2011).

    References
    ----------
    Blinder, A. S. (1973). Wage discrimination: reduced form and structural estimates. Journal
    of Human Resources, 8(4), 436-455. https://doi.org/10.2307/144855
    Fortin, N., Lemieux, T., & Firpo, S. (2011). Decomposition methods in economics. Handbook
    of Labor Economics 4A, 1-102. https://doi.org/10.1016/S0169-7218(11)00407-2
    Oaxaca, R. (1973). Male-female wage differentials in urban labor markets. International
    Economic Review, 14(3), 693-709. https://doi.org/10.2307/2525981
    Owen, G. (1977). Values of games with a priori unions. In Essays in Mathematical
    Economics and Game Theory, 76-88. Springer. https://doi.org/10.1007/978-3-642-45494-3_7
    Reimers, C. W. (1983). Labor market discrimination against Hispanic and black men. Review
    of Economics and Statistics, 65(4), 570-579. https://doi.org/10.2307/1935925
    Shapley, L. S. (1953). A value for n-person games. In Contributions to the Theory of
    Games II, Annals of Mathematics Studies 28, 307-317.
    Shorrocks, A. F. (2013). Decomposition procedures for distributional analysis: a unified
    framework based on the Shapley value. Journal of Economic Inequality, 11(1), 99-126.
    https://doi.org/10.1007/s10888-011-9214-z
    """
    za, zb, ua, ub = a.z(model), b.z(model), a.u(model), b.u(model)
    K = len(model.traits)
    xs = (b.x, a.x)

    def value(sx: bool, sz: np.ndarray, su: bool) -> float:
        z = np.where(sz, za, zb)
        return float(special.expit(model.linear_predictor(xs[int(sx)], z, ua if su else ub))
                     .mean())

    cache: dict[tuple, float] = {}

    def v(sx: bool, sz: tuple[bool, ...], su: bool) -> float:
        key = (sx, sz, su)
        if key not in cache:
            cache[key] = value(sx, np.asarray(sz, dtype=bool), su)
        return cache[key]

    none, all_t = (False,) * K, (True,) * K
    out: dict[str, float] = {"p_a": v(True, all_t, True), "p_b": v(False, none, False)}
    out["total"] = out["p_a"] - out["p_b"]
    w3 = {0: 1 / 3, 1: 1 / 6}  # |S|!(3-|S|-1)!/3! for |S| = 0, 1; |S| = 2 gives 1/3
    w3[2] = 1 / 3
    # group Shapley values: players exposure (x), sensitivity (all traits), unexplained (u)
    for g in GROUPS:
        others = [h for h in GROUPS if h != g]
        phi = 0.0
        for r in range(3):
            for s in combinations(others, r):
                on = set(s)

                def val(extra: set, _on=on) -> float:
                    members = _on | extra
                    return v("exposure" in members, all_t if "sensitivity" in members
                             else none, "unexplained" in members)

                phi += w3[r] * (val({g}) - val(set()))
        out[g] = phi
    # Owen value of each trait inside the sensitivity group
    outer = [("exposure",), ("unexplained",)]
    for k, name in enumerate(model.traits):
        rest = [j for j in range(K) if j != k]
        phi = 0.0
        for r_out in range(3):
            for t in combinations([o[0] for o in outer], r_out):
                sx, su = "exposure" in t, "unexplained" in t
                w_out = w3[r_out]
                for r_in in range(K):
                    w_in = factorial(r_in) * factorial(K - r_in - 1) / factorial(K)
                    for inside in combinations(rest, r_in):
                        base = np.zeros(K, dtype=bool)
                        base[list(inside)] = True
                        with_k = base.copy()
                        with_k[k] = True
                        phi += w_out * w_in * (v(sx, tuple(with_k), su) - v(sx, tuple(base), su))
        out[f"sensitivity:{name}"] = phi
    out.update(_oaxaca(model, a, b, za, zb, ua, ub))
    return out


def _oaxaca(model: TraitModel, a: Side, b: Side, za, zb, ua, ub) -> dict[str, float]:
    xa = float(np.mean(a.x)) - model.x_center
    xb = float(np.mean(b.x)) - model.x_center
    dx, dz = xa - xb, za - zb
    zm, xm = 0.5 * (za + zb), 0.5 * (xa + xb)
    lp_a = model.b0 + model.b1 * xa + za @ model.gamma + (za @ model.delta) * xa + ua
    lp_b = model.b0 + model.b1 * xb + zb @ model.gamma + (zb @ model.delta) * xb + ub
    level = model.gamma * dz
    inter = model.delta * xm * dz
    out = {"lp_a": float(lp_a), "lp_b": float(lp_b), "lp_total": float(lp_a - lp_b),
           "lp_exposure": float((model.b1 + zm @ model.delta) * dx),
           "lp_sensitivity": float(level.sum() + inter.sum()),
           "lp_unexplained": float(ua - ub)}
    for k, name in enumerate(model.traits):
        out[f"lp_sensitivity:{name}"] = float(level[k] + inter[k])
        out[f"lp_sensitivity:{name}:level"] = float(level[k])
        out[f"lp_sensitivity:{name}:interaction"] = float(inter[k])
    return out


def decomposition_table(model: TraitModel, a: Side, b: Side, *, period, n_boot: int = 200,
                        ci: float = 0.90, seed: int = 0, jobs: int = 1
                        ) -> tuple[pd.DataFrame, dict]:
    """Point decomposition with year-block bootstrap percentile intervals.

    Parameters
    ----------
    model : TraitModel
    a, b : Side
    period : tuple of int or None
        Years (inclusive) the sides were built on, to rebuild region sides per replicate.
    n_boot : int, default 200
        Replicates of the year-block bootstrap
        (:func:`impactlink.skill.folds.year_bootstrap_weights`): whole years of the model's
        rows are resampled, crossed with a resampling of the other counties (the same
        multinomial block weights, one block per county; the two compared counties keep
        weight 1), the model refitted with tau held at its estimate, and the decomposition
        recomputed (0 = no intervals). Trait coefficients are learnt between counties, so
        resampling years alone would understate their uncertainty; the crossed weights are
        the pigeonhole bootstrap of Owen (2007) with year blocks (Kunsch 1989).

        References: Owen, A. B. (2007). The pigeonhole bootstrap. Annals of Applied
        Statistics, 1(2), 386-411. https://doi.org/10.1214/07-AOAS122. Kunsch, H. R. (1989).
        The jackknife and the bootstrap for general stationary observations. Annals of
        Statistics, 17(3), 1217-1241.
    ci : float, default 0.90
    seed : int, default 0
    jobs : int, default 1
        Threads for the replicates (:func:`impactlink.execution.thread_map`); each
        replicate's refit is the same on any thread, so the intervals do not depend on
        ``jobs``.

    Returns
    -------
    (table, point)
        ``table``: ``scale`` ("probability" or "log_odds"), ``part`` (exposure,
        sensitivity, unexplained, total, p_a, p_b), ``trait`` (empty for a whole group),
        ``term`` ("" , "level" or "interaction"), ``estimate``, ``lo``, ``hi``.
        ``point``: the dict of :func:`decompose_pair`.
    """
    point = decompose_pair(model, a, b)
    keys = list(point)
    boot = np.full((int(n_boot), len(keys)), np.nan)
    if n_boot > 0:
        years, codes = np.unique(model.rows[YEAR].to_numpy(), return_inverse=True)
        weights = year_bootstrap_weights(len(years), int(n_boot), seed=seed)
        cids, ccodes = np.unique(model.rows[COUNTY].to_numpy(), return_inverse=True)
        cweights = year_bootstrap_weights(len(cids), int(n_boot), seed=seed + 1)
        cweights[:, np.isin(cids, a.members + b.members)] = 1.0  # the pair is given
        prepared = refit_rows(model)  # the sorted design, once for every replicate

        def replicate(i: int) -> list[float] | None:
            try:  # a few Newton steps from the estimate
                m = refit(model, weights[i][codes] * cweights[i][ccodes], prepared=prepared)
            except ContrastError:
                return None  # a separated replicate: left out of the intervals, counted below
            bb = b if not b.county_id.startswith("region:") else region_side(
                m, a.county_id, period)
            d = decompose_pair(m, a, bb)
            return [d[k] for k in keys]

        with blas_threads(1):  # the same rounding whatever jobs
            for i, row in enumerate(thread_map(replicate, list(range(int(n_boot))), jobs)):
                if row is not None:
                    boot[i] = row
    alpha = 1.0 - ci
    failed = int(np.isnan(boot[:, 0]).sum()) if n_boot > 0 else 0
    point["n_boot_failed"] = float(failed)
    if failed:
        warnings.warn(f"{failed} of {n_boot} bootstrap replicates did not converge (separated "
                      "resamples) and are left out of the intervals.", ContrastWarning,
                      stacklevel=2)
    if n_boot > 0:
        lo, hi = np.nanquantile(boot, [alpha / 2, 1 - alpha / 2], axis=0)
    else:
        lo = hi = np.full(len(keys), np.nan)
    recs = []
    for j, key in enumerate(keys):  # keys of the point decomposition, n_boot_failed excluded
        scale = "log_odds" if key.startswith("lp_") else "probability"
        bits = key.removeprefix("lp_").split(":")
        part = {"a": "p_a", "b": "p_b"}.get(bits[0], bits[0])
        recs.append({"scale": scale, "part": part, "trait": bits[1] if len(bits) > 1 else "",
                     "term": bits[2] if len(bits) > 2 else "", "estimate": point[key],
                     "lo": lo[j], "hi": hi[j]})
    return pd.DataFrame(recs), point


def _in_period(rows: pd.DataFrame, period: tuple[int, int] | None) -> pd.DataFrame:
    if period is None:
        return rows
    y = rows[YEAR].to_numpy()
    return rows[(y >= int(period[0])) & (y <= int(period[1]))]


def _period_text(period) -> str:
    if period is None:
        return ""
    return f" in {period[0]}" if period[0] == period[1] else f" in {period[0]}-{period[1]}"
