"""An independent standard analysis of the real Iowa record, written without impactlink.

Used by the real-data tests as the outside reference for the tool's choice of index, time
scale and end month for corn yields. The method is the usual one of crop-climate studies
(common practice): detrend each county's yields with a trend fitted without the year being
predicted (leave-one-year-out), express the residual as a share of the trend, and rank
(index, time scale, end month) by the Pearson correlation of those shares with the index
value, pooled over county-years. SPI and SPEI come from the independent ``climate-indices``
package (gamma and Pearson III fits, Thornthwaite PET), not from impactlink.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

REALDATA = Path(os.environ.get("IMPACTLINK_REALDATA",
                               Path(__file__).resolve().parents[2].parent / "shared" / "realdata"))
IOWA = REALDATA / "iowa"


def county_yields() -> pd.DataFrame:
    """County corn yields (bu/acre) from the raw Quick Stats export, read with pandas only."""
    raw = pd.read_csv(IOWA / "nass_quickstats_corn_grain_yield_county_1926-2023.csv",
                      dtype=str, keep_default_na=False)
    raw = raw[raw["County ANSI"].str.strip() != ""]
    value = pd.to_numeric(raw["Value"].str.replace(",", ""), errors="coerce")
    out = pd.DataFrame({"county_id": raw["State ANSI"].str.zfill(2) + raw["County ANSI"].str.zfill(3),
                        "year": raw["Year"].astype(int), "yield": value})
    return out.dropna().reset_index(drop=True)


def loyo_shortfall_share(y: pd.DataFrame, *, degree: int = 2) -> pd.DataFrame:
    """Yield relative to a polynomial trend fitted on the county's other years."""
    rows = []
    for cid, g in y.groupby("county_id"):
        t = (g["year"].to_numpy() - 1975.0) / 50.0
        v = g["yield"].to_numpy()
        X = np.vander(t, degree + 1)
        pred = np.empty_like(v)
        for i in range(len(v)):
            keep = np.arange(len(v)) != i
            beta, *_ = np.linalg.lstsq(X[keep], v[keep], rcond=None)
            pred[i] = X[i] @ beta
        rows.append(pd.DataFrame({"county_id": cid, "year": g["year"].to_numpy(),
                                  "share": v / pred - 1.0}))
    return pd.concat(rows, ignore_index=True)


def division_indices(scales=(1, 2, 3, 6), latitude_deg: float = 42.0) -> pd.DataFrame:
    """SPI and SPEI per climate division and month from climate-indices (1895-2022)."""
    import logging

    logging.getLogger("climate_indices").setLevel(logging.WARNING)
    from climate_indices import compute, indices
    from climate_indices.eto import eto_thornthwaite

    clim = pd.read_csv(IOWA / "climdiv_monthly_precip_tavg_1895-2022.csv", dtype={"climdiv_id": str})
    frames = []
    for div, g in clim.sort_values(["climdiv_id", "year", "month"]).groupby("climdiv_id"):
        p = g["precip_in"].to_numpy() * 25.4
        tc = (g["tavg_f"].to_numpy() - 32.0) * 5.0 / 9.0
        pet = eto_thornthwaite(tc, latitude_deg, int(g["year"].iloc[0]))
        for s in scales:
            spi = indices.spi(p, s, indices.Distribution.gamma, 1895, 1895, 2022,
                              compute.Periodicity.monthly)
            spei = indices.spei(p, pet[: len(p)], s, indices.Distribution.pearson,
                                compute.Periodicity.monthly, 1895, 1895, 2022)
            eddi = _eddi(pet[: len(p)], s)
            for name, v in (("spi", spi), ("spei", spei), ("eddi", eddi)):
                frames.append(pd.DataFrame({"climdiv_id": div, "year": g["year"].to_numpy(),
                                            "month": g["month"].to_numpy(), "index": name,
                                            "scale_months": s, "value": v}))
    return pd.concat(frames, ignore_index=True)


def _eddi(pet: np.ndarray, scale: int) -> np.ndarray:
    """Evaporative demand drought index by Tukey plotting positions per calendar month
    (Hobbins et al. 2016, J. Hydrometeorol. 17, 1745-1761), with the sign turned so that
    negative = high demand = dry, as in impactlink's cube."""
    from scipy.stats import norm

    acc = pd.Series(pet).rolling(scale).sum().to_numpy()
    out = np.full_like(acc, np.nan)
    for m in range(12):
        sel = np.arange(m, len(acc), 12)
        v = acc[sel]
        ok = np.isfinite(v)
        rank = pd.Series(v[ok]).rank(method="average").to_numpy()
        prob = (rank - 0.33) / (ok.sum() + 0.33)
        z = np.full(v.shape, np.nan)
        z[ok] = -norm.ppf(prob)
        out[sel] = z
    return out


def ranked_candidates(months=(5, 6, 7, 8, 9)) -> pd.DataFrame:
    """(index, scale_months, end_month) ranked by Pearson r with detrended yield share."""
    share = loyo_shortfall_share(county_yields())
    zone = pd.read_csv(IOWA / "county_to_climdiv.csv", dtype=str)
    share = share.merge(zone.rename(columns={"postal_fips_id": "county_id"})[["county_id", "climdiv_id"]],
                        on="county_id")
    idx = division_indices()
    idx = idx[idx["month"].isin(months)]
    joined = share.merge(idx, on=["climdiv_id", "year"]).dropna(subset=["value", "share"])
    r = (joined.groupby(["index", "scale_months", "month"])
         .apply(lambda g: np.corrcoef(g["share"], g["value"])[0, 1], include_groups=False)
         .rename("pearson_r").reset_index()
         .sort_values("pearson_r", ascending=False, ignore_index=True))
    return r.rename(columns={"month": "end_month"})


if __name__ == "__main__":
    print(ranked_candidates().head(12).to_string())
