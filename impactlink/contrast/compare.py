"""County contrasts: why counties with similar index values had different impacts."""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from functools import partial
from typing import Literal

import numpy as np
import pandas as pd
from scipy.stats import chi2

from impactlink.contrast.foldlogit import year_out_probabilities
from impactlink.contrast.logitfit import cluster_robust_fit as _cluster_fit
from impactlink.contrast.logitfit import design_matrix as _design
from impactlink.contrast.logitfit import fitted_chances as _fitted_chances
from impactlink.contrast.logitfit import logit_fit as _logit_fit
from impactlink.contrast.pairwise import group_quantiles, pairwise_mean_distance
from impactlink.errors import ContrastError, ContrastWarning
from impactlink.execution import blas_threads, thread_map
from impactlink.link.target import Target
from impactlink.schema import COUNTY
from impactlink.skill.folds import year_bootstrap_weights
from impactlink.words import counted

__all__ = ["ContrastResult", "ContrastWarning", "county_contrast", "poisson_ratio_interval"]

#: Quantile levels summarising each county's exposure (the index values in impact seasons).
_EXPOSURE_Q = np.linspace(0.05, 0.95, 19)


@dataclass(frozen=True)
class ContrastResult:
    """County contrasts for one target and one index feature.

    Attributes
    ----------
    terms : pandas.DataFrame
        ``term, odds_ratio_per_sd, or_lo, or_hi, p_value, sd`` for the index (``term`` =
        "index") and each trait (``sd``: one standard deviation in the trait's own units; the
        index per-SD odds ratio uses the SD of the feature over the rows used).
    county_excess : pandas.DataFrame
        ``county_id, rows, events, expected_events, ratio, ratio_lo, ratio_hi``: observed vs
        expected events given the index alone.
    pairs : pandas.DataFrame
        ``county_a, county_b, exposure_gap, rate_a, rate_b, events_a, events_b, rows_a,
        rows_b, largest_trait_gap`` and ``gap_<trait>_sd`` (trait of a minus b in SD units);
        ``a`` is the county with the higher impact rate.
    skill : dict
        ``brier_index``, ``brier_traits``, ``brier_change`` (traits minus index; negative = the
        traits help out of sample), ``brier_change_lo``/``_hi`` (year-block bootstrap interval),
        ``n_years``.
    provenance : dict
        Rows used and dropped, counties, clusters, settings, warnings.
    """

    terms: pd.DataFrame
    county_excess: pd.DataFrame
    pairs: pd.DataFrame
    skill: dict
    provenance: dict = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        """Rows of ``contrast.csv``: one per model term, with the target and skill attached."""
        out = self.terms.copy()
        out.insert(0, "target", self.provenance.get("target", ""))
        for key in ("brier_index", "brier_traits", "brier_change", "brier_change_lo",
                    "brier_change_hi"):
            out[key] = self.skill.get(key, np.nan)
        return out


def county_contrast(
    target: Target,
    x: np.ndarray,
    traits: pd.DataFrame,
    *,
    link: Literal["logit"] = "logit",
    cluster: Literal["county", "year"] = "county",
    ci: float = 0.90,
    n_pairs: int = 10,
    n_boot: int = 200,
    seed: int = 0,
    jobs: int = 1,
) -> ContrastResult:
    """Explain county differences in impacts at similar index values from county traits.

    Parameters
    ----------
    target : Target
        A county-grain target (``county_week`` or ``county_year``; its frame has
        ``county_id``, ``year``, ``level`` and, if present, ``season``). The outcome is
        binary: level >= 1 (any impact) for both binary and ordinal targets.
    x : ndarray, shape (rows,)
        The feature of the chosen candidate (index, scale, lag) for each row of
        ``target.frame`` (index units); NaN rows are left out.
    traits : pandas.DataFrame
        ``county_id`` plus numeric trait columns (e.g. ``irrigated_share``,
        ``storage_days``); one row per county.
    link : {"logit"}
        Link of the binomial GLM (odds ratios need the logit link).
    cluster : {"county", "year"}, default "county"
        Grouping of the cluster-robust standard errors. Traits are constant within a county,
        so rows of one county share its unexplained risk: clustering by county is the default
        (Cameron & Miller 2015, section II); "year" guards against statewide drought years
        instead.
    ci : float, default 0.90
        Confidence level of the odds-ratio and excess-ratio intervals.
    n_pairs : int, default 10
        Rows of the matched-pairs table.
    n_boot : int, default 200
        Year-block bootstrap replicates for the Brier-change interval (0 = none).
    seed : int, default 0
        Seed of the bootstrap.
    jobs : int, default 1
        Threads for the two models' all-years fits and their leave-one-year-out folds
        (:func:`impactlink.execution.thread_map`); the numbers do not depend on ``jobs``.

    Returns
    -------
    ContrastResult

    Raises
    ------
    ContrastError
        If the target is not on a county grain, ``x`` does not match its rows, the traits table
        has no ``county_id`` or no usable numeric column, an option is unknown, or too few rows
        or events remain to fit.

    Warns
    -----
    ContrastWarning
        When rows without a feature value or without traits, constant traits or non-numeric
        columns are left out, or when there are fewer than 10 clusters (cluster-robust
        standard errors are then unreliable even with the small-sample correction).

    Notes
    -----
    (a) Excess: the index-only model :math:`\\text{logit}\\,p_i = \\beta_0 + \\beta_1 x_i` is
    fitted to all rows; county c's expected events are :math:`E_c = \\sum_{i\\in c}\\hat p_i`
    and its ratio :math:`O_c/E_c` (as a standardized incidence ratio; Breslow & Day 1987,
    chapter 2) with the exact Poisson interval for :math:`O_c` (Garwood 1936) divided by
    :math:`E_c` (the uncertainty of :math:`E_c` is ignored, as is usual).

    (b) Traits: :math:`\\text{logit}\\,p_i = \\beta_0 + \\beta_1 x_i + \\sum_k \\gamma_k z_{ck}`
    with traits standardized across counties (each county once, SD with ddof = 1), so
    :math:`e^{\\gamma_k}` is the odds ratio per one SD of trait k at a given index value.
    Cluster-robust (sandwich) covariance with the small-sample correction and t intervals
    with G - 1 degrees of freedom (Cameron & Miller 2015): the CRV1 estimator
    :math:`\frac{G}{G-1}\frac{n-1}{n-k} H^{-1} (\\sum_g s_g s_g^T) H^{-1}` with H the
    information matrix and :math:`s_g` the score summed over cluster g, as statsmodels'
    ``GLM(...).fit(cov_type="cluster", use_t=True)`` computes it, here from the
    maximum-likelihood fit in a few passes over the rows. The out-of-sample value of the
    traits is the change in Brier score (lower is better; Brier 1950) between the two models
    under leave-one-year-out cross-validation, with a percentile interval from resampling
    whole years.

    (c) Matched pairs: each county's exposure is the distribution of ``x`` over its rows in
    impact seasons (the ``season`` values in which any event occurred); the exposure gap of
    two counties is the mean absolute difference of their 5th..95th percentiles (a discrete
    1-Wasserstein distance, in index units). Among pairs whose gap is in the lowest quarter
    of all pairs, those with the largest difference in impact rate are listed with their trait
    differences.

    All of this is statistical association in past records, not cause: a trait that stands
    out may stand for something unmeasured.

    References
    ----------
    Breslow, N. E., & Day, N. E. (1987). Statistical Methods in Cancer Research, Vol. II: The
    Design and Analysis of Cohort Studies. IARC Scientific Publications 82.
    Brier, G. W. (1950). Verification of forecasts expressed in terms of probability. Monthly
    Weather Review, 78(1), 1-3. https://doi.org/10.1175/1520-0493(1950)078<0001:VOFEIT>2.0.CO;2
    Cameron, A. C., & Miller, D. L. (2015). A practitioner's guide to cluster-robust inference.
    Journal of Human Resources, 50(2), 317-372. https://doi.org/10.3368/jhr.50.2.317
    Garwood, F. (1936). Fiducial limits for the Poisson distribution. Biometrika, 28(3/4),
    437-442. https://doi.org/10.1093/biomet/28.3-4.437
    """
    data, z_c, trait_names, trait_sd, prov = _prepare(target, x, traits, link, cluster, ci,
                                                      n_pairs, n_boot)
    alpha = 1.0 - ci
    y = data["y"].to_numpy()
    xv = data["x"].to_numpy()
    codes = data[COUNTY].cat.codes.to_numpy()
    # one design in column order; the index-only model is its first two columns (a view)
    design = _design(xv, z_c, codes)
    d0 = design[:, :2]
    # the package's Newton fits on all rows: the estimates, and the start of every Brier fold
    with blas_threads(1):  # the same rounding whatever jobs
        b0, b1 = thread_map(partial(_logit_fit, y), [d0, design], jobs)
    groups = codes if cluster == "county" else data["year"].to_numpy()
    gcodes, guniq = pd.factorize(groups)
    n_groups = len(guniq)
    if n_groups < 10:
        warnings.warn(
            f"only {n_groups} {cluster} clusters; cluster-robust intervals are unreliable with "
            "fewer than about 10 clusters (Cameron & Miller 2015). Read the odds ratios as "
            "rough.",
            ContrastWarning,
            stacklevel=2,
        )
        prov["warnings"].append(f"few clusters: {n_groups}")
    base_p = _fitted_chances(y, d0, b0)
    excess = _county_excess(data, base_p, alpha)
    del base_p
    full = _cluster_fit(y, design, b1, gcodes, n_groups)
    del gcodes, groups
    terms = _terms(full, ["index"] + trait_names, alpha, np.append(np.std(xv, ddof=1), trait_sd),
                   n_groups)
    skill = _brier_cv(y, xv, None, data["year"].to_numpy(), n_boot, alpha, seed, starts=(b0, b1),
                      designs=(d0, design), jobs=jobs)
    del design, d0
    pairs = _pairs(data, z_c, trait_names, n_pairs)
    prov.update({"clusters": int(n_groups), "cluster": cluster, "link": link, "ci": ci,
                 "seed": int(seed), "n_boot": int(n_boot)})
    return ContrastResult(terms=terms, county_excess=excess, pairs=pairs, skill=skill,
                          provenance=prov)


def poisson_ratio_interval(
    observed: np.ndarray, expected: np.ndarray, *, ci: float = 0.90
) -> tuple[np.ndarray, np.ndarray]:
    """Exact (Garwood) interval of the ratio observed / expected for Poisson counts.

    Parameters
    ----------
    observed : array of int
        Observed events O >= 0.
    expected : array of float
        Expected events E > 0 (treated as known).
    ci : float
        Confidence level.

    Returns
    -------
    (lo, hi) : arrays
        :math:`\\chi^2_{\\alpha/2}(2O)/(2E)` and :math:`\\chi^2_{1-\\alpha/2}(2O+2)/(2E)`; lo = 0
        when O = 0.

    References
    ----------
    Garwood, F. (1936). Fiducial limits for the Poisson distribution. Biometrika, 28(3/4),
    437-442. https://doi.org/10.1093/biomet/28.3-4.437
    """
    o = np.asarray(observed, dtype=np.float64)
    e = np.asarray(expected, dtype=np.float64)
    a = 1.0 - ci
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = np.where(o > 0, chi2.ppf(a / 2, 2 * np.maximum(o, 1e-300)) / 2, 0.0) / e
        hi = chi2.ppf(1 - a / 2, 2 * o + 2) / 2 / e
    return lo, hi


# --------------------------------------------------------------------------- private steps
def _prepare(target, x, traits, link, cluster, ci, n_pairs, n_boot
             ) -> tuple[pd.DataFrame, np.ndarray, list[str], np.ndarray, dict]:
    """The rows used (``county_id`` categorical on the sorted ids, ``year, season, y, x``)
    and the standardized traits of each county (C, K), in the order of the categories."""
    if link != "logit":
        raise ContrastError(
            f"link must be 'logit' (odds ratios per SD need it); got {link!r}."
        )
    if cluster not in ("county", "year"):
        raise ContrastError(f"cluster must be 'county' or 'year'; got {cluster!r}.")
    if not 0.5 <= float(ci) < 1.0:
        raise ContrastError(f"ci must be a confidence level in [0.5, 1); got {ci!r}.")
    if int(n_pairs) < 0 or int(n_boot) < 0:
        raise ContrastError(f"n_pairs and n_boot must be >= 0; got {n_pairs!r}, {n_boot!r}.")
    frame = target.frame
    if target.grain not in ("county_week", "county_year") or COUNTY not in frame.columns:
        raise ContrastError(
            f"target {target.name!r} is on the {target.grain!r} grain; county contrasts need a "
            "county grain (county_week or county_year) with a county_id column."
        )
    for col in ("year", "level"):
        if col not in frame.columns:
            raise ContrastError(f"target {target.name!r} frame lacks the {col!r} column.")
    xv = np.asarray(x, dtype=np.float64)
    if xv.shape != (len(frame),):
        raise ContrastError(
            f"x has shape {xv.shape}; expected ({len(frame)},), one feature value per row of "
            f"target {target.name!r}."
        )
    if not isinstance(traits, pd.DataFrame) or COUNTY not in traits.columns:
        raise ContrastError(
            "traits must be a DataFrame with a county_id column and numeric trait columns."
        )
    if traits[COUNTY].astype(str).duplicated().any():
        dup = traits.loc[traits[COUNTY].astype(str).duplicated(), COUNTY].tolist()[:5]
        raise ContrastError(f"traits has repeated county_id values {dup}; one row per county.")
    prov: dict = {"target": target.name, "warnings": [], "rows_in": int(len(frame))}
    numeric = [c for c in traits.columns
               if c != COUNTY and pd.api.types.is_numeric_dtype(traits[c])
               and not pd.api.types.is_bool_dtype(traits[c])]
    other = [c for c in traits.columns if c != COUNTY and c not in numeric]
    if other:
        _warn(prov, f"non-numeric trait columns left out: {other}")
    if not numeric:
        raise ContrastError(
            "traits has no numeric column besides county_id; add county characteristics such as "
            "irrigated_share or storage_days."
        )
    tr_ids = traits[COUNTY].astype(str).to_numpy()
    tr_vals = traits[numeric].to_numpy(dtype=np.float64, na_value=np.nan)  # (counties, K)
    # traits reach the rows through county codes (no merge of the row table)
    codes_all, ids_all = pd.factorize(frame[COUNTY].astype(str), sort=True)
    ids_all = np.asarray(ids_all, dtype=object)
    pos = pd.Index(tr_ids).get_indexer(ids_all)  # trait row of each county, -1 = none
    complete = pos >= 0
    complete[complete] = ~np.isnan(tr_vals[pos[complete]]).any(axis=1)
    ok = np.isfinite(xv) & frame["level"].notna().to_numpy()
    if (~ok).any():
        _warn(prov, f"{int((~ok).sum())} rows without a feature value or level left out")
    no_trait = ok & ~complete[codes_all]
    if no_trait.any():
        missing = sorted(ids_all[np.unique(codes_all[no_trait])])
        _warn(prov, f"{counted(int(no_trait.sum()), 'row', 'rows')} of "
                    f"{counted(len(missing), 'county', 'counties')} without complete "
                    f"traits left out (e.g. {missing[:3]})")
    use = ok & ~no_trait
    del ok, no_trait
    present, ccodes = np.unique(codes_all[use], return_inverse=True)
    county_traits = tr_vals[pos[present]]  # (C, K): each county with rows once
    with np.errstate(invalid="ignore", divide="ignore"):
        sd = (county_traits.std(axis=0, ddof=1) if len(present) > 1
              else np.full(len(numeric), np.nan))
    keep_idx = [k for k, v in enumerate(sd) if np.isfinite(v) and v > 0]
    keep = [numeric[k] for k in keep_idx]
    if len(keep) < len(numeric):
        _warn(prov, f"traits constant across counties left out: "
                    f"{[c for c in numeric if c not in keep]}")
    if not keep:
        raise ContrastError("no trait varies across the counties with data; nothing to contrast.")
    kept = county_traits[:, keep_idx]
    mean = kept.mean(axis=0)
    sd_keep = kept.std(axis=0, ddof=1)
    z_c = (kept - mean) / sd_keep
    level = frame["level"].to_numpy(dtype=np.float64)[use]
    data = pd.DataFrame(
        {
            COUNTY: pd.Categorical.from_codes(ccodes.astype(np.int32),
                                              pd.Index(ids_all[present], dtype=object)),
            "year": frame["year"].to_numpy()[use],
            "season": frame["season"].to_numpy()[use] if "season" in frame.columns else 0,
            "y": (level >= 1).astype(np.float64),
            "x": xv[use],
        }
    )
    n_events = int(data["y"].sum())
    if len(data) < 20 or n_events < 5 or n_events > len(data) - 5:
        raise ContrastError(
            f"{len(data)} usable rows with {n_events} events: too few rows, events or non-events "
            "to fit a county contrast (need >= 20 rows and >= 5 of each outcome)."
        )
    prov.update({"rows_used": int(len(data)), "events": n_events,
                 "counties": int(len(present)), "traits": keep})
    return data, z_c, keep, sd_keep, prov


def _warn(prov: dict, message: str) -> None:
    prov["warnings"].append(message)
    warnings.warn(message, ContrastWarning, stacklevel=3)


def _terms(fit, names, alpha, sd, n_groups) -> pd.DataFrame:
    from scipy.stats import t as t_dist

    params = np.asarray(fit.params)[1:]
    se = np.asarray(fit.bse)[1:]
    dfree = max(n_groups - 1, 1)
    q = t_dist.ppf(1 - alpha / 2, dfree)
    pvals = np.asarray(fit.pvalues)[1:]
    # the index coefficient is per index unit; rescale to per SD of the feature like the traits
    scale = np.ones_like(params)
    scale[0] = sd[0]
    beta = params * scale
    half = q * se * scale
    return pd.DataFrame(
        {
            "term": names,
            "odds_ratio_per_sd": np.exp(beta),
            "or_lo": np.exp(beta - half),
            "or_hi": np.exp(beta + half),
            "p_value": pvals,
            "sd": sd,
        }
    )


def _county_excess(data: pd.DataFrame, p_hat: np.ndarray, alpha: float) -> pd.DataFrame:
    codes = data[COUNTY].cat.codes.to_numpy()
    ids = np.asarray(data[COUNTY].cat.categories, dtype=object)  # sorted; all have rows
    agg = pd.DataFrame({COUNTY: ids,
                        "rows": np.bincount(codes, minlength=ids.size).astype(np.int64),
                        "events": np.bincount(codes, data["y"].to_numpy(), ids.size)
                        .astype(np.int64),
                        "expected_events": np.bincount(codes, p_hat, ids.size)})
    lo, hi = poisson_ratio_interval(agg["events"], agg["expected_events"], ci=1 - alpha)
    agg["ratio"] = agg["events"] / agg["expected_events"]
    agg["ratio_lo"] = lo
    agg["ratio_hi"] = hi
    return agg


def _brier_cv(y, xv, z, years, n_boot, alpha, seed, starts=None, *, designs=None,
              jobs=1) -> dict:
    """Leave-one-year-out Brier scores of index-only and index+traits models (``starts``:
    the two models' fits on all years, when already made; ``designs``: the two designs,
    when already built; ``jobs``: threads for the folds)."""
    uniq = np.unique(years)
    if len(uniq) < 3:
        return {"brier_index": np.nan, "brier_traits": np.nan, "brier_change": np.nan,
                "brier_change_lo": np.nan, "brier_change_hi": np.nan, "n_years": len(uniq)}
    if designs is None:
        d0 = np.column_stack([np.ones_like(xv), xv])
        d1 = np.column_stack([d0, z])
    else:
        d0, d1 = designs
    # every fold starts from the fit on all years (a fold lacks one year of data, so Newton
    # needs two or three steps); the folds share one year-sorted design
    # (impactlink.contrast.foldlogit: no per-fold copy, first step from per-year sums)
    b0, b1 = starts if starts is not None else (_logit_fit(y, d0), _logit_fit(y, d1))
    p0 = year_out_probabilities(y, d0, years, b0, jobs=jobs)
    p1 = year_out_probabilities(y, d1, years, b1, jobs=jobs)
    ok = np.isfinite(p0) & np.isfinite(p1)
    e0 = (p0 - y) ** 2
    e1 = (p1 - y) ** 2
    codes = np.unique(years[ok], return_inverse=True)[1]
    n_y = codes.max() + 1
    s0 = np.bincount(codes, e0[ok], n_y)
    s1 = np.bincount(codes, e1[ok], n_y)
    cnt = np.bincount(codes, minlength=n_y).astype(float)
    change = (s1.sum() - s0.sum()) / cnt.sum()
    lo = hi = np.nan
    if n_boot > 0:
        w = year_bootstrap_weights(int(n_y), n_boot, seed=seed)  # the one year-block bootstrap
        boot = (w @ s1 - w @ s0) / (w @ cnt)
        lo, hi = np.quantile(boot, [alpha / 2, 1 - alpha / 2])
    return {"brier_index": float(s0.sum() / cnt.sum()), "brier_traits": float(s1.sum() / cnt.sum()),
            "brier_change": float(change), "brier_change_lo": float(lo),
            "brier_change_hi": float(hi), "n_years": int(n_y)}


def _pairs(data: pd.DataFrame, z_c: np.ndarray, trait_names: list[str], n_pairs: int
           ) -> pd.DataFrame:
    y_all = data["y"].to_numpy()
    season = data["season"].to_numpy()
    sel = np.isin(season, np.unique(season[y_all == 1]))
    codes = data[COUNTY].cat.codes.to_numpy()[sel]
    present, inv = np.unique(codes, return_inverse=True)
    counties = np.asarray(data[COUNTY].cat.categories, dtype=object)[present]  # sorted ids
    cols = (["county_a", "county_b", "exposure_gap", "rate_a", "rate_b", "events_a", "events_b",
             "rows_a", "rows_b", "largest_trait_gap"] + [f"gap_{t}_sd" for t in trait_names])
    if len(counties) < 2 or n_pairs == 0:
        return pd.DataFrame(columns=cols)
    rows = np.bincount(inv, minlength=present.size)
    q = group_quantiles(data["x"].to_numpy()[sel], inv, rows, _EXPOSURE_Q)
    events_f = np.bincount(inv, y_all[sel], present.size)  # 0/1 sums: exact
    rate = events_f / rows
    events = events_f.astype(np.int64)
    tz = z_c[present]
    gap = pairwise_mean_distance(q, "abs")  # (C, C), in row blocks
    i, j = np.triu_indices(len(counties), k=1)
    g_ij = gap[i, j]
    close = g_ij <= np.quantile(g_ij, 0.25)
    i, j, g_ij = i[close], j[close], g_ij[close]
    diff = np.abs(rate[i] - rate[j])
    order = np.lexsort((g_ij, -diff))[:n_pairs]
    i, j, g_ij = i[order], j[order], g_ij[order]
    swap = rate[j] > rate[i]
    a = np.where(swap, j, i)
    b = np.where(swap, i, j)
    tgap = tz[a] - tz[b]
    out = pd.DataFrame(
        {
            "county_a": counties[a],
            "county_b": counties[b],
            "exposure_gap": g_ij,
            "rate_a": rate[a],
            "rate_b": rate[b],
            "events_a": events[a],
            "events_b": events[b],
            "rows_a": rows[a],
            "rows_b": rows[b],
            "largest_trait_gap": np.asarray(trait_names)[np.abs(tgap).argmax(axis=1)],
        }
    )
    for k, t in enumerate(trait_names):
        out[f"gap_{t}_sd"] = tgap[:, k]
    return out[cols]
