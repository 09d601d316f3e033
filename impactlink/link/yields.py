"""County-year yields -> shortfall against a trend fitted without the target year."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.link._common import (
    OUTSIDE,
    Ledger,
    LinkError,
    LinkResult,
    binary_variant,
    check_options,
    coverage_rows,
    expand_to_counties,
    interval_covered,
)
from impactlink.link._keys import selector_values, spelling
from impactlink.link.features import season_end_weeks
from impactlink.link.notices import _regions, summarize
from impactlink.link.target import FeatureRule, Target
from impactlink.link.trend import DEFAULT_TRENDS, TrendSpec, choose_trend
from impactlink.schema import EQUAL_AREA_CRS

__all__ = ["link_yields", "loo_trend", "shortfall_level", "YIELD_OPTIONS", "AUTO_TRENDS"]

#: Candidates of ``trend = "auto"``: linear, quadratic and LOWESS at spans 0.3, 0.5 and 0.7,
#: without the robust variants, which cost about 1.5-5 s each on a 99-county, 98-year record
#: (iteratively reweighted fits per fold) against well under 0.1 s for these; ``robust =
#: true`` with ``trend = "auto"`` compares all of :data:`impactlink.link.trend.DEFAULT_TRENDS`.
AUTO_TRENDS: tuple[TrendSpec, ...] = tuple(t for t in DEFAULT_TRENDS if t.robust == "none")

YIELD_OPTIONS = {
    "crop", "practice", "trend", "robust", "lowess_frac", "min_years", "class_pct",
    "binary_pct", "season_week", "season_weeks", "season_step_weeks", "window_weeks",
    "window_stat", "defined_by",
}

#: Season searched for the end of the accumulation window when no season_week is fixed:
#: ISO weeks 22-40 (June to early October), every 2 weeks: the growing season of summer
#: crops in the temperate northern hemisphere, flowering and grain fill included (common
#: practice).
DEFAULT_SEASON_WEEKS = (22, 40)
DEFAULT_SEASON_STEP_WEEKS = 2


def link_yields(spec, tables, *, counties, weeks=None, lags_weeks=(), equal_area_crs=EQUAL_AREA_CRS
                ) -> LinkResult:
    """County-year yield shortfall targets, one ordinal and one binary per crop and practice.

    Parameters
    ----------
    spec : impactlink.project.ImpactSpec
        ``source="yields"``. Options (all optional):

        - ``crop`` (str or list, default every crop in the table);
        - ``practice`` (str or list, default every practice, blank included);
        - ``trend`` ("auto" | "linear" | "quadratic" | "lowess", default "linear"; ``impactlink
          init`` writes "auto"): "auto" compares :data:`AUTO_TRENDS` by leave-one-year-out
          prediction error per crop and practice and uses the best
          (:func:`impactlink.link.trend.choose_trend`); the choice and every candidate's
          error go into the target provenance (``trend``, ``trend_errors``);
        - ``robust`` (bool, default False): Huber M-estimation (statsmodels RLM) for the
          polynomial trends, robustifying iterations (``it=3``) for LOWESS; with "auto",
          the robust variants join the candidates;
        - ``lowess_frac`` (float, default 0.6): LOWESS span as a share of the years;
        - ``min_years`` (int, default 10): other years needed to fit a trend;
        - ``class_pct`` (list of float, default [10, 20, 30]): shortfall class edges [%];
          level k = shortfall at least the k-th edge;
        - ``binary_pct`` (float, default 20): the binary target is shortfall >= this [%];
        - ``season_week`` (int, default 31), ``window_weeks`` (int, default 1),
          ``window_stat`` ("value" | "min" | "mean", default "value"): the feature is the index
          at ISO week ``season_week`` (or the window statistic over the ``window_weeks`` weeks
          ending there), minus the lag;
        - ``defined_by`` (str, optional): index the impact is keyed to (circularity flag).
    tables : dict
        ``yields`` (county_id, year, crop, yield, optional practice, unit); optional
        ``coverage`` rows with source "yields" or the impact name.

    Returns
    -------
    LinkResult

    Notes
    -----
    Expected yield :math:`\\hat y_{-t}` is the trend fitted to the county's other years and
    evaluated at year *t* (leave-one-out, so a year's own shortfall cannot bend its own trend);
    departure :math:`d_t = 100\\,(y_t - \\hat y_{-t}) / \\hat y_{-t}` [%]; shortfall
    :math:`s_t = -d_t`. Missing or withheld yields are rejected with a reason, never imputed.
    """
    opts = dict(spec.options)
    check_options(opts, YIELD_OPTIONS, impact=spec.name, source="yields")
    ys = tables.get("yields")
    if ys is None:
        raise LinkError(f"[impacts.{spec.name}] source 'yields' needs a yields table; add one "
                        "to [tables]")
    trend = opts.get("trend", "linear")
    if trend not in ("auto", "linear", "quadratic", "lowess"):
        raise LinkError(f"[impacts.{spec.name}] trend must be auto, linear, quadratic or "
                        f"lowess, got {trend!r}")
    robust = bool(opts.get("robust", False))
    frac = float(opts.get("lowess_frac", 0.6))
    min_years = int(opts.get("min_years", 10))
    edges = sorted(float(x) for x in opts.get("class_pct", (10, 20, 30)))
    bin_pct = float(opts.get("binary_pct", 20))
    rule = FeatureRule(reference="season_week", **_season(opts),
                       window_weeks=int(opts.get("window_weeks", 1)),
                       window_stat=opts.get("window_stat", "value"))
    ledger = Ledger(spec.name)
    region_of = _regions(counties)

    y = ys.copy()
    if "practice" not in y.columns:
        y["practice"] = ""
    y["practice"] = y["practice"].astype("string").fillna("").astype(str)
    y["crop"] = y["crop"].astype(str)
    sel = np.ones(len(y), dtype=bool)
    for col in ("crop", "practice"):
        # matched by normal form (case, surrounding space, Unicode), so "Maize " and "MAIZE"
        # are the project's "maize"; the project's spelling is kept (see link._keys)
        respelt, hit = spelling(y[col], selector_values(opts.get(col)), key=col)
        y[col] = respelt.fillna("").astype(str).to_numpy()
        sel &= hit
    not_selected = int((~sel).sum())
    y = y.loc[sel]
    if len(y) == 0:
        where = ys.attrs.get("file") or "the yields table"
        raise LinkError(f"{where}: no row has [impacts.{spec.name}] crop = "
                        f"{opts.get('crop')!r} and practice = {opts.get('practice')!r} (crops "
                        f"in the table: {sorted(set(ys['crop'].astype(str)))[:8]}); write the "
                        "crop and practice as the table names them")

    ok = np.ones(len(y), dtype=bool)
    val = pd.to_numeric(y["yield"], errors="coerce")
    miss = val.isna().to_numpy()
    ledger.reject("yields", y, miss, "yield missing or withheld (not imputed)", column="yield")
    ok &= ~miss
    unknown = ~y["county_id"].astype(str).isin(region_of.index).to_numpy()
    ledger.reject("yields", y, unknown & ok, "county_id not in the counties layer",
                  column="county_id")
    ok &= ~unknown
    cov = coverage_rows(tables, {spec.name, "yields"})
    outside = np.zeros(len(y), dtype=bool)
    if cov is not None:
        per = expand_to_counties(cov, counties)
        yr = y["year"].astype(int)
        outside = ~interval_covered(y["county_id"].astype(str), pd.to_datetime(
            yr.astype(str) + "-01-01"), pd.to_datetime(yr.astype(str) + "-12-31"),
            per["county_id"], per["start_date"], per["end_date"]) & ok
        ledger.reject("yields", y, outside, OUTSIDE, column="year")
    ok_cov = ok & ~outside

    d = y.loc[ok_cov, ["county_id", "year", "crop", "practice"]].copy()
    d["county_id"] = d["county_id"].astype(str)
    d["year"] = d["year"].astype(int)
    d["yield"] = val[ok_cov].to_numpy(float)
    d["expected_yield"] = np.nan
    chosen: dict[tuple[str, str], dict] = {}
    if trend == "auto":
        chosen = _auto_trend(d, min_years=min_years, robust=robust)
    else:  # one small fit per series (county x crop x practice; a few hundred at most)
        for _, g in d.groupby(["county_id", "crop", "practice"], sort=False):
            if len(g) - 1 < min_years:
                continue
            d.loc[g.index, "expected_yield"] = loo_trend(
                g["year"].to_numpy(float), g["yield"].to_numpy(float), trend=trend,
                robust=robust, frac=frac)
    short = d["expected_yield"].isna() | (d["expected_yield"] <= 0)
    few = d["expected_yield"].isna()
    idx_map = pd.Series(np.flatnonzero(ok_cov), index=d.index)
    m = np.zeros(len(y), dtype=bool)
    m[idx_map[few].to_numpy()] = True
    ledger.reject("yields", y, m, f"fewer than {min_years} other years to fit a trend",
                  column="year")
    m = np.zeros(len(y), dtype=bool)
    m[idx_map[short & ~few].to_numpy()] = True
    ledger.reject("yields", y, m, "expected yield from the trend is not positive",
                  column="yield")
    d = d.loc[~short]
    ledger.count("yields", records=len(y), used=len(d), outside=int(outside.sum()),
                 not_selected=not_selected)

    d["departure_pct"] = 100.0 * (d["yield"] - d["expected_yield"]) / d["expected_yield"]
    d["shortfall_pct"] = -d["departure_pct"]
    gaps, listed = _gap_years(d, y)
    if gaps:
        ledger.warn(f"[impacts.{spec.name}] {gaps} county-crop years inside the record have no "
                    f"usable yield ({listed} rejected with their reason in rejected_rows.csv, "
                    f"{gaps - listed} with no row for the crop and practice); they are left "
                    "out, not imputed")
    flags = [f"circular:{opts['defined_by']}"] if opts.get("defined_by") else []
    targets = []
    for (crop, practice), g in d.groupby(["crop", "practice"], sort=True):
        base = f"{spec.name}:{crop}" + (f":{practice}" if practice else "")
        fr = pd.DataFrame({
            "unit_id": g["county_id"].to_numpy(), "county_id": g["county_id"].to_numpy(),
            "region": region_of.reindex(g["county_id"]).to_numpy(),
            "time": pd.to_datetime(g["year"].astype(str) + "-01-01").to_numpy(),
            "year": g["year"].to_numpy(), "season": rule.season_week,
            "level": shortfall_level(g["shortfall_pct"].to_numpy(), edges),
            "crop": crop, "practice": practice, "yield": g["yield"].to_numpy(),
            "expected_yield": g["expected_yield"].to_numpy(),
            "departure_pct": g["departure_pct"].to_numpy(),
        }).sort_values(["year", "county_id"], ignore_index=True)
        prov = {"trend": trend, "robust": robust, "class_pct": edges, "binary_pct": bin_pct,
                "rows": len(fr), "missing_years": gaps, "flags": flags}
        if trend == "auto":
            prov.update(trend_requested="auto", **chosen.get((str(crop), str(practice)), {}))
        labels = ("none", *[f"shortfall_{e:g}pct" for e in edges])
        ordinal = Target(name=base, impact=spec.name, kind="ordinal", grain="county_year",
                         role="annual", frame=fr, levels=labels, rule=rule, provenance=prov)
        targets.append(ordinal)
        targets.append(binary_variant(ordinal, f"shortfall_{bin_pct:g}pct",
                                      -fr["departure_pct"].to_numpy() >= bin_pct))
    return ledger.result(targets, summarize(targets))


def loo_trend(years: np.ndarray, values: np.ndarray, *, trend: str = "linear",
              robust: bool = False, frac: float = 0.6) -> np.ndarray:
    """Expected value of each year from a trend fitted to all *other* years.

    Parameters
    ----------
    years : array of float
    values : array of float
        Same length, no NaN.
    trend : {"linear", "quadratic", "lowess"}
    robust : bool
        Huber M-estimator (statsmodels ``RLM``, ``HuberT``) for polynomials; LOWESS
        robustifying iterations (``it=3``, Cleveland 1979) otherwise ``it=0``.
    frac : float
        LOWESS span (share of the points used for each local fit).

    Returns
    -------
    ndarray
        Leave-one-out prediction for each year.

    Notes
    -----
    For ordinary least squares the leave-one-out prediction needs one fit:
    :math:`\\hat y_{-i} = y_i - e_i/(1-h_{ii})` with :math:`e_i` the residual and
    :math:`h_{ii}` the leverage (the PRESS identity; Cook and Weisberg 1982, sec. 2.2).

    References
    ----------
    Cleveland, W. S. (1979). Robust locally weighted regression and smoothing scatterplots.
    Journal of the American Statistical Association 74(368), 829-836.
    https://doi.org/10.1080/01621459.1979.10481038

    Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression. Chapman and Hall.
    """
    x = np.asarray(years, dtype=float)
    v = np.asarray(values, dtype=float)
    n = len(x)
    if trend not in ("linear", "quadratic", "lowess"):
        raise LinkError(f"loo_trend: trend must be linear, quadratic or lowess, got {trend!r}")
    if n < 3:
        raise LinkError(f"loo_trend: need at least 3 years, got {n}")
    xc = x - x.mean()
    if trend == "lowess":
        from statsmodels.nonparametric.smoothers_lowess import lowess

        out = np.empty(n)
        for i in range(n):  # one local fit per held-out year; series are short (<~60 years)
            keep = np.arange(n) != i
            out[i] = lowess(v[keep], x[keep], frac=frac, it=3 if robust else 0,
                            xvals=x[i:i + 1])[0]
        return out
    X = np.column_stack([np.ones(n), xc] + ([xc**2] if trend == "quadratic" else []))
    if not robust:
        beta, *_ = np.linalg.lstsq(X, v, rcond=None)
        e = v - X @ beta
        h = np.einsum("ij,ji->i", X, np.linalg.pinv(X.T @ X) @ X.T)
        return v - e / (1.0 - h)
    import statsmodels.api as sm

    out = np.empty(n)
    for i in range(n):  # one M-estimation per held-out year
        keep = np.arange(n) != i
        fit = sm.RLM(v[keep], X[keep], M=sm.robust.norms.HuberT()).fit()
        out[i] = X[i] @ fit.params
    return out


def shortfall_level(shortfall_pct: np.ndarray, edges) -> np.ndarray:
    """Ordinal class: the number of edges [%] the shortfall reaches (0 = below the first).

    Examples
    --------
    >>> shortfall_level(np.array([-5.0, 10.0, 19.9, 35.0]), [10, 20, 30]).tolist()
    [0, 1, 1, 3]
    """
    s = np.asarray(shortfall_pct, dtype=float)
    return (s[:, None] >= np.asarray(edges, dtype=float)[None, :]).sum(axis=1).astype(np.int64)


def _auto_trend(d: pd.DataFrame, *, min_years: int, robust: bool
                ) -> dict[tuple[str, str], dict]:
    """Fill ``d["expected_yield"]`` with the chosen trend per crop and practice.

    Only series with more than ``min_years`` years take part (the others stay NaN and are
    rejected by the caller). Returns (crop, practice) -> ``{"trend": chosen name,
    "trend_errors": one dict per candidate (trend, n, rmse, mae, rmse_pct, rank, chosen)}``.
    """
    size = d.groupby(["county_id", "crop", "practice"])["year"].transform("size")
    fit = d.loc[(size - 1 >= min_years).to_numpy()]
    if fit.empty:
        return {}
    sel = choose_trend(fit, candidates=DEFAULT_TRENDS if robust else AUTO_TRENDS,
                       min_years=min_years)
    d.loc[fit.index, "expected_yield"] = sel.expected.to_numpy()
    cols = ["trend", "n", "rmse", "mae", "rmse_pct", "rank", "chosen"]
    out = {}
    for key, spec in sel.chosen.items():
        crop, practice = key
        e = sel.errors[(sel.errors["crop"] == crop) & (sel.errors["practice"] == practice)]
        rows = [{c: (v.item() if hasattr(v, "item") else v) for c, v in r.items()}
                for r in e[cols].to_dict("records")]
        out[(crop, practice)] = {"trend": spec.name, "trend_errors": rows}
    return out


def _gap_years(d: pd.DataFrame, rows: pd.DataFrame) -> tuple[int, int]:
    """Years inside each county-crop-practice series with no used yield, and how many of
    them have a row of the table (rejected with its reason) rather than none."""
    keys = ["county_id", "crop", "practice"]
    g = d.groupby(keys)["year"].agg(["min", "max", "count"])
    gaps = int((g["max"] - g["min"] + 1 - g["count"]).sum())
    if not gaps:
        return 0, 0
    r = pd.DataFrame({"county_id": rows["county_id"].astype(str).to_numpy(),
                      "crop": rows["crop"].to_numpy(), "practice": rows["practice"].to_numpy(),
                      "year": pd.to_numeric(rows["year"], errors="coerce").to_numpy()}
                     ).drop_duplicates()
    r = r.merge(g[["min", "max"]].reset_index(), on=keys)
    r = r[(r["year"] >= r["min"]) & (r["year"] <= r["max"])]
    used = d[keys + ["year"]].drop_duplicates().assign(_used=True)
    r = r.merge(used, on=keys + ["year"], how="left")
    return gaps, int(r["_used"].isna().sum())


def _season(opts: dict) -> dict:
    """``season_week`` fixed by the user, else the searched end weeks (:data:`DEFAULT_SEASON_WEEKS`)."""
    if "season_week" in opts and "season_weeks" not in opts:
        return {"season_week": int(opts["season_week"])}
    weeks = list(opts.get("season_weeks", DEFAULT_SEASON_WEEKS))
    if len(weeks) != 2:
        raise LinkError(f"season_weeks: give the first and last ISO week of the season, e.g. "
                        f"[22, 40]; got {weeks}")
    first, last = (int(w) for w in weeks)
    ends = season_end_weeks(first, last, int(opts.get("season_step_weeks",
                                                       DEFAULT_SEASON_STEP_WEEKS)))
    return {"season_week": max(ends), "season_end_weeks": ends}
