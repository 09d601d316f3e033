"""Field reports (presence-only) -> county-week counts and highest severity."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from impactlink.link._common import (
    OUTSIDE,
    Ledger,
    LinkError,
    LinkResult,
    ReportingEffortWarning,
    check_options,
    check_weeks,
    coverage_rows,
    iso_year,
    week_coverage,
    week_pos,
)
from impactlink.link._keys import selector_values, spelling
from impactlink.link.notices import (
    _grid_columns,
    _regions,
    _target_from_grid,
    episodic_targets,
    summarize,
)
from impactlink.schema import COUNTY, EQUAL_AREA_CRS

__all__ = ["link_field_reports", "effort_trend", "REPORT_OPTIONS"]

REPORT_OPTIONS = {"sector", "min_severity", "effort_alpha", "defined_by", "episodic",
                  "horizon_weeks", "onset_level", "severity_range"}


def link_field_reports(spec, tables, *, counties, weeks, lags_weeks=(0,),
                       equal_area_crs=EQUAL_AREA_CRS) -> LinkResult:
    """County-week field-report target: highest severity reported (0 = no report).

    Parameters
    ----------
    spec : impactlink.project.ImpactSpec
        ``source="field_reports"``. Options (all optional):

        - ``sector`` (str or list, default every sector);
        - ``min_severity`` (int, optional): reports below this severity are not counted
          (rejected with a reason); reports without a severity count as severity 1;
        - ``severity_range`` ([low, high]): read by the inputs stage; ignored here;
        - ``effort_alpha`` (float, default 0.05): significance level of the reporting-effort
          trend test;
        - ``defined_by`` (str, optional): circularity flag;
        - ``episodic`` (bool, default False): also build onset and escalation targets from the
          weekly level (options ``horizon_weeks``, default [4, 13], and ``onset_level``,
          default 1, as for notices).
    tables : dict
        ``field_reports`` (county_id, date, sector, optional severity); optional ``coverage``
        (source "field_reports" or the impact name).

    Returns
    -------
    LinkResult
        One target (role "count"): ``level`` = highest severity that week, ``report_count``
        the number of reports. Weeks outside coverage are absent (unknown), not zero.
    """
    opts = dict(spec.options)
    check_options(opts, REPORT_OPTIONS, impact=spec.name, source="field_reports")
    weeks = check_weeks(weeks)
    fr = tables.get("field_reports")
    if fr is None:
        raise LinkError(f"[impacts.{spec.name}] source 'field_reports' needs a field_reports "
                        "table; add it to [tables]")
    ledger = Ledger(spec.name)
    county_ids = tuple(sorted(counties[COUNTY].astype(str)))
    region_of = _regions(counties)
    nw, nc = len(weeks), len(county_ids)
    # sectors matched by normal form (case, surrounding space, Unicode; see link._keys)
    _, sel = spelling(fr["sector"].astype(str), selector_values(opts.get("sector")), key="sector")
    r = fr.loc[sel]
    ok = np.ones(len(r), dtype=bool)
    sev = (pd.to_numeric(r["severity"], errors="coerce") if "severity" in r.columns
           else pd.Series(np.nan, index=r.index))
    has_sev = "severity" in r.columns
    sev = sev.fillna(1).to_numpy(float)
    if opts.get("min_severity") is not None:
        low = sev < float(opts["min_severity"])
        ledger.reject("field_reports", r, low, f"severity below min_severity "
                      f"{opts['min_severity']}", column="severity")
        ok &= ~low
    cpos = pd.Index(county_ids).get_indexer(r[COUNTY].astype(str))
    bad = cpos < 0
    ledger.reject("field_reports", r, bad & ok, "county_id not in the counties layer",
                  column=COUNTY)
    ok &= ~bad
    wp = week_pos(weeks, r["date"])
    mask = week_coverage(coverage_rows(tables, {spec.name, "field_reports"}), weeks, county_ids,
                         counties)
    on = (wp >= 0) & (wp < nw) & ok
    inside = np.zeros(len(r), dtype=bool)
    inside[on] = mask[wp[on], cpos[on]]
    outside = ok & ~inside
    ledger.reject("field_reports", r, outside, OUTSIDE, column="date")
    ok &= inside
    ledger.count("field_reports", records=len(r), used=int(ok.sum()), outside=int(outside.sum()),
                 not_selected=int((~sel).sum()))
    count = np.zeros((nw, nc), dtype=np.int64)
    np.add.at(count, (wp[ok], cpos[ok]), 1)
    top = np.zeros((nw, nc), dtype=np.int64)
    np.maximum.at(top, (wp[ok], cpos[ok]), np.rint(sev[ok]).astype(np.int64))

    # effort: reports per covered county-year
    yrs = iso_year(weeks)
    per_year = pd.DataFrame({"y": yrs, "n": count.sum(axis=1), "cov": mask.sum(axis=1)}).groupby(
        "y").sum()
    per_year = per_year[per_year["cov"] > 0]
    tau, pval = effort_trend(per_year.index.to_numpy(), (per_year["n"] / per_year["cov"]).to_numpy())
    alpha = float(opts.get("effort_alpha", 0.05))
    if np.isfinite(pval) and pval < alpha:
        ledger.warn(f"[impacts.{spec.name}] reports per covered county-week trend over the record "
                    f"(Kendall tau {tau:+.2f}, p = {pval:.3g}); changing reporting effort can look "
                    "like changing impacts (presence-only source)", ReportingEffortWarning)

    kmax = max(int(top.max()), 1)
    if has_sev:
        labels = ("none", *[f"severity_{k}" for k in range(1, kmax + 1)])
    else:
        top = np.minimum(top, 1)
        labels = ("none", "reported")
    flags = [f"circular:{opts['defined_by']}"] if opts.get("defined_by") else []
    flags += ["effort_trend"] if np.isfinite(pval) and pval < alpha else []
    lags = tuple(sorted({int(x) for x in lags_weeks}))
    base = _grid_columns(weeks, county_ids, region_of, top, mask, lags)
    t = _target_from_grid(
        spec.name, f"{spec.name}:count", "count", "ordinal" if has_sev else "binary", labels,
        base, mask, values=top, extra={"report_count": count},
        lags=[x for x in lags if x >= 1], horizon=0,
        provenance={"presence_only": True, "effort_tau": tau, "effort_p": pval,
                    "flags": flags})
    targets = [t]
    if bool(opts.get("episodic", False)):
        targets += episodic_targets(spec.name, top, mask, base, opts=opts,
                                    top_level=len(labels) - 1, lags=lags, flags=flags)
    return ledger.result(targets, summarize(targets))


def effort_trend(years: np.ndarray, rate: np.ndarray) -> tuple[float, float]:
    """Kendall's tau-b between year and reporting rate, and its two-sided p-value.

    A monotone trend test without a distributional assumption (the Mann-Kendall test).
    Returns (nan, nan) with fewer than 4 years or a constant rate.

    Notes
    -----
    :math:`S = \\sum_{i<j} \\operatorname{sign}(x_j-x_i)\\operatorname{sign}(y_j-y_i)`,
    :math:`\\tau_b = S / \\sqrt{(n_0-n_1)(n_0-n_2)}` with :math:`n_0 = n(n-1)/2` and
    :math:`n_1, n_2` the tied pairs; the p-value uses the normal approximation of *S* with
    the tie-corrected variance (Kendall 1970, eq. 4.3; the same as
    ``scipy.stats.kendalltau(method="asymptotic")``). Written out here so that the linking
    stage does not import scipy.stats (about 3 s).

    References
    ----------
    Kendall, M. G. (1938). A new measure of rank correlation. Biometrika 30(1-2), 81-93.
    https://doi.org/10.1093/biomet/30.1-2.81

    Kendall, M. G. (1970). Rank Correlation Methods, 4th ed. Griffin, London.

    Mann, H. B. (1945). Nonparametric tests against trend. Econometrica 13(3), 245-259.
    https://doi.org/10.2307/1907187
    """
    x = np.asarray(years, dtype=float)
    y = np.asarray(rate, dtype=float)
    n = len(x)
    if n < 4 or np.nanstd(y) == 0 or np.nanstd(x) == 0:
        return float("nan"), float("nan")
    i, j = np.triu_indices(n, k=1)
    S = float((np.sign(x[j] - x[i]) * np.sign(y[j] - y[i])).sum())

    def ties(v):
        _, t = np.unique(v, return_counts=True)
        return t.astype(float)

    t, u = ties(x), ties(y)
    n0 = n * (n - 1) / 2
    n1 = (t * (t - 1) / 2).sum()
    n2 = (u * (u - 1) / 2).sum()
    tau = S / np.sqrt((n0 - n1) * (n0 - n2))
    var = ((n * (n - 1) * (2 * n + 5) - (t * (t - 1) * (2 * t + 5)).sum()
            - (u * (u - 1) * (2 * u + 5)).sum()) / 18
           + (t * (t - 1) * (t - 2)).sum() * (u * (u - 1) * (u - 2)).sum()
           / (9 * n * (n - 1) * (n - 2))
           + (t * (t - 1)).sum() * (u * (u - 1)).sum() / (2 * n * (n - 1)))
    p = math.erfc(abs(S) / math.sqrt(2 * var)) if var > 0 else float("nan")
    return float(tau), float(p)
