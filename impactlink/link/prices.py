"""Regional monthly prices -> real-price anomaly against a seasonal baseline."""

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
    interval_covered,
)
from impactlink.link._keys import forms, norm_lookup, selector_values, spelling
from impactlink.link.notices import summarize
from impactlink.link.spatial import area_weights
from impactlink.link.target import FeatureRule, Target
from impactlink.link.yields import shortfall_level
from impactlink.schema import COUNTY, EQUAL_AREA_CRS

__all__ = ["link_prices", "deflate", "seasonal_anomaly", "PRICE_OPTIONS"]

PRICE_OPTIONS = {
    "commodity", "base_years", "baseline_years", "min_baseline_years", "class_pct",
    "binary_pct", "weight_trait", "window_weeks", "window_stat", "defined_by",
}


def link_prices(spec, tables, *, counties, weeks=None, lags_weeks=(),
                equal_area_crs=EQUAL_AREA_CRS) -> LinkResult:
    """Region-month real-price anomaly targets, one per commodity.

    Parameters
    ----------
    spec : impactlink.project.ImpactSpec
        ``source="prices"``. Options (all optional):

        - ``commodity`` (str or list, default every commodity);
        - ``base_years`` ([first, last], default the whole price-index record): the price
          index is rescaled so that its mean over these years is 1;
        - ``baseline_years`` (int, default 5): the baseline of month m in year y is the mean
          real price of month m over years y-N .. y-1;
        - ``min_baseline_years`` (int, default 3): fewer earlier years with a price -> rejected;
        - ``class_pct`` (list, default [10, 25, 50]): spike class edges [% above baseline];
        - ``binary_pct`` (float, optional): also a binary target, anomaly >= this [%];
        - ``weight_trait`` (str, optional): trait column (e.g. acreage) used as county weight
          within a region instead of land area;
        - ``window_weeks`` (int, default 4), ``window_stat`` (default "mean"): feature window
          ending at the last week that starts in the month, minus the lag;
        - ``defined_by`` (str, optional): circularity flag.
    tables : dict
        ``prices`` (region, date, commodity, price); ``price_index`` (date, price_index);
        optional ``traits`` and ``coverage`` (source "prices" or the impact name, by region).

    Returns
    -------
    LinkResult

    Notes
    -----
    Real price :math:`p^{real}_t = p_t \\, \\bar I_{base} / I_t` with :math:`I_t` the price
    index of the month (deflation to base-period money, common practice); several prices in
    one month are averaged first. Anomaly :math:`a = 100 (p^{real} - b)/b` [%], where *b* is
    the seasonal baseline above.
    """
    opts = dict(spec.options)
    check_options(opts, PRICE_OPTIONS, impact=spec.name, source="prices")
    pr = tables.get("prices")
    pidx = tables.get("price_index")
    if pr is None or pidx is None:
        raise LinkError(f"[impacts.{spec.name}] source 'prices' needs the prices and price_index "
                        "tables; add both to [tables]")
    ledger = Ledger(spec.name)
    edges = sorted(float(x) for x in opts.get("class_pct", (10, 25, 50)))
    n_base = int(opts.get("baseline_years", 5))
    n_min = int(opts.get("min_baseline_years", 3))
    trait = None
    if opts.get("weight_trait"):
        tr = tables.get("traits")
        col = opts["weight_trait"]
        if tr is None or col not in tr.columns:
            raise LinkError(f"[impacts.{spec.name}] weight_trait {col!r} needs a traits table "
                            f"with that column")
        trait = pd.Series(tr[col].to_numpy(float), index=tr[COUNTY].astype(str), name=col)
    weights = area_weights(counties, crs=equal_area_crs, trait=trait)
    rule = FeatureRule(reference="month_end", window_weeks=int(opts.get("window_weeks", 4)),
                       window_stat=opts.get("window_stat", "mean"), weights=weights)

    p = pr.copy()
    # text keys matched by normal form (case, surrounding space, Unicode; see link._keys):
    # the commodity takes the project's spelling, the region the counties layer's
    respelt, sel = spelling(p["commodity"].astype(str), selector_values(opts.get("commodity")),
                            key="commodity")
    p["commodity"] = respelt.astype(str).to_numpy()
    regions = norm_lookup(weights["region"], weights["region"])
    p["region"] = forms(p["region"].astype(str)).map(regions).fillna(p["region"]).to_numpy()
    not_selected = int((~sel).sum())
    p = p.loc[sel]
    ok = np.ones(len(p), dtype=bool)
    price = pd.to_numeric(p["price"], errors="coerce")
    miss = price.isna().to_numpy()
    ledger.reject("prices", p, miss, "price missing", column="price")
    ok &= ~miss
    bad = ~p["region"].astype(str).isin(set(weights["region"])).to_numpy()
    ledger.reject("prices", p, bad & ok, "region has no counties in the counties layer",
                  column="region")
    ok &= ~bad
    month = pd.to_datetime(p["date"]).dt.to_period("M").dt.to_timestamp()
    real, factor = deflate(price.to_numpy(float), month, pidx,
                           base_years=opts.get("base_years"))
    noidx = ~np.isfinite(factor)
    ledger.reject("prices", p, noidx & ok, "no price index for the month", column="date")
    ok &= ~noidx
    outside = np.zeros(len(p), dtype=bool)
    cov = coverage_rows(tables, {spec.name, "prices"})
    if cov is not None and "region" in cov.columns:
        c = cov[cov["region"].notna()]
        outside = ~interval_covered(forms(p["region"].astype(str)), month,
                                    month + pd.offsets.MonthEnd(0), forms(c["region"]),
                                    c["start_date"], c["end_date"]) & ok
        ledger.reject("prices", p, outside, OUTSIDE, column="date")
    ok &= ~outside
    d = pd.DataFrame({"region": p["region"].astype(str).to_numpy()[ok],
                      "commodity": p["commodity"].to_numpy()[ok],
                      "time": month.to_numpy()[ok], "real_price": real[ok],
                      "row": p.index[ok]})
    m = d.groupby(["region", "commodity", "time"], as_index=False).agg(
        real_price=("real_price", "mean"), n=("row", "size"))
    m["baseline"], m["baseline_n"] = seasonal_anomaly(m, n_years=n_base)
    short = (m["baseline_n"] < n_min).to_numpy()
    bad_rows = d.merge(m.loc[short, ["region", "commodity", "time"]], how="inner")["row"]
    mask = p.index.isin(bad_rows)
    ledger.reject("prices", p, mask, f"fewer than {n_min} of the {n_base} earlier years have a "
                  "price for this month (no seasonal baseline)", column="date")
    m = m.loc[~short]
    ledger.count("prices", records=len(p), used=int(m["n"].sum()), outside=int(outside.sum()),
                 not_selected=not_selected)
    m["anomaly_pct"] = 100.0 * (m["real_price"] - m["baseline"]) / m["baseline"]
    flags = [f"circular:{opts['defined_by']}"] if opts.get("defined_by") else []
    targets = []
    for com, g in m.groupby("commodity", sort=True):
        t = pd.DatetimeIndex(g["time"])
        fr = pd.DataFrame({
            "unit_id": g["region"].to_numpy(), "region": g["region"].to_numpy(),
            "time": t, "year": t.year.to_numpy(), "season": t.month.to_numpy(),
            "level": shortfall_level(g["anomaly_pct"].to_numpy(), edges),
            "commodity": com, "real_price": g["real_price"].to_numpy(),
            "baseline_price": g["baseline"].to_numpy(),
            "anomaly_pct": g["anomaly_pct"].to_numpy(),
        }).sort_values(["time", "region"], ignore_index=True)
        prov = {"base_years": opts.get("base_years"), "baseline_years": n_base,
                "class_pct": edges, "rows": len(fr), "flags": flags,
                "weights": "trait:" + opts["weight_trait"] if trait is not None else "area"}
        labels = ("none", *[f"spike_{e:g}pct" for e in edges])
        ordinal = Target(name=f"{spec.name}:{com}", impact=spec.name, kind="ordinal",
                         grain="region_month", role="monthly", frame=fr, levels=labels,
                         rule=rule, provenance=prov)
        targets.append(ordinal)
        if opts.get("binary_pct") is not None:
            b = float(opts["binary_pct"])
            targets.append(binary_variant(ordinal, f"spike_{b:g}pct",
                                          fr["anomaly_pct"].to_numpy() >= b))
    return ledger.result(targets, summarize(targets))


def deflate(price: np.ndarray, month, price_index: pd.DataFrame, *, base_years=None
            ) -> tuple[np.ndarray, np.ndarray]:
    """Prices in base-period money.

    Parameters
    ----------
    price : array of float
        Nominal prices.
    month : datetime-like
        First day of each price's month.
    price_index : pandas.DataFrame
        ``date``, ``price_index`` (monthly; several values in a month are averaged).
    base_years : (int, int), optional
        Base period; the index is divided by its mean over these years. Default: the whole
        index record.

    Returns
    -------
    real, factor : ndarray
        ``real = price * factor`` with ``factor = mean(I_base) / I_month``; NaN where the month
        has no index value.

    Raises
    ------
    LinkError
        The base period holds no index values.

    Examples
    --------
    >>> pi = pd.DataFrame({"date": pd.to_datetime(["2030-01-01", "2031-01-01"]),
    ...                    "price_index": [100.0, 120.0]})
    >>> deflate(np.array([150.0]), pd.to_datetime(["2031-01-01"]), pi,
    ...         base_years=(2030, 2030))[0].tolist()
    [125.0]
    """
    pi = price_index.copy()
    pi["m"] = pd.to_datetime(pi["date"]).dt.to_period("M").dt.to_timestamp()
    by_m = pi.groupby("m")["price_index"].mean()
    if base_years is None:
        base = by_m
    else:
        a, b = (int(x) for x in base_years)
        base = by_m[(by_m.index.year >= a) & (by_m.index.year <= b)]
    if len(base) == 0 or not np.isfinite(base.mean()) or base.mean() <= 0:
        raise LinkError(f"price_index: no positive values in base_years {base_years}; choose base "
                        "years inside the price-index record")
    idx = by_m.reindex(pd.DatetimeIndex(pd.to_datetime(month))).to_numpy(float)
    factor = np.where(idx > 0, base.mean() / idx, np.nan)
    return np.asarray(price, dtype=float) * factor, factor


def seasonal_anomaly(m: pd.DataFrame, *, n_years: int = 5) -> tuple[np.ndarray, np.ndarray]:
    """Baseline of each region-commodity-month: mean real price of the same calendar month in
    the ``n_years`` preceding years, and how many of those years had a price.

    Vectorised with a self-merge on (region, commodity, calendar month).
    """
    t = pd.DatetimeIndex(m["time"])
    left = pd.DataFrame({"i": np.arange(len(m)), "region": m["region"].to_numpy(),
                         "commodity": m["commodity"].to_numpy(), "mo": t.month, "yr": t.year})
    right = pd.DataFrame({"region": m["region"].to_numpy(), "commodity": m["commodity"].to_numpy(),
                          "mo": t.month, "yr2": t.year, "v": m["real_price"].to_numpy(float)})
    j = left.merge(right, on=["region", "commodity", "mo"])
    j = j[(j["yr2"] < j["yr"]) & (j["yr2"] >= j["yr"] - n_years)]
    agg = j.groupby("i")["v"].agg(["mean", "size"])
    base = agg["mean"].reindex(np.arange(len(m))).to_numpy()
    n = agg["size"].reindex(np.arange(len(m))).fillna(0).to_numpy().astype(int)
    return base, n
