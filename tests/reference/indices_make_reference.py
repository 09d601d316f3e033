"""Produce the cross-implementation reference values used by tests/indices.

Reference library: climate-indices 3.1.0 (PyPI ``climate-indices``; test-only dependency).
Run from the repository root with the test extra installed:

    python tests/reference/indices_make_reference.py

Inputs are synthetic (seeded) series written beside the outputs, so the tests need only
the CSV files. What each column is, and how the library was called:

indices_monthly_reference.csv (two series, 1981-2020 monthly, calibration 1991-2020)
    county ``wet``: gamma-distributed precipitation with ~10 % zero months;
    county ``dry``: ~55 % zero months (arid case).
    spi3_thom_mixture   ci.spi(P, 3, Distribution.gamma, ..., zero_handling="classic")
                        (Thom 1958 estimator; zeros scored at q)
    spi3_thom_com       same with zero_handling="center_of_mass" (zeros at q/2)
    spei3_loglogistic   ci.spei(P, PET, 3, Distribution.loglogistic, ...) (L-moments / PWMs)
    eddi3               ci.eddi(PET, 3, ...) (Tukey plotting positions, Hastings inverse normal)
    pet_thornthwaite_mm eto.eto_thornthwaite(tmean, latitude_degrees, 1981)

indices_hargreaves_reference.csv (one leap year, 2000, daily; 366 days as the library wants)
    et0_mm  eto.eto_hargreaves(tmin, tmax, tmean, latitude_degrees)
"""

from __future__ import annotations

import logging
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).parent


def _quiet():
    logging.disable(logging.CRITICAL)
    try:
        import structlog

        structlog.configure(wrapper_class=structlog.make_filtering_bound_logger(logging.CRITICAL))
    except ImportError:  # pragma: no cover
        pass
    np.seterr(all="ignore")


def monthly_inputs() -> pd.DataFrame:
    rng = np.random.default_rng(20240601)
    times = pd.date_range("1981-01-01", "2020-12-01", freq="MS")
    n = len(times)
    m = times.month.to_numpy()
    rows = []
    for cid, zero_share, lat in (("wet", 0.10, 38.5), ("dry", 0.55, 31.2)):
        season = 1.0 + 0.5 * np.sin(2 * np.pi * (m - 4) / 12)
        p = rng.gamma(1.6, 35.0, n) * season
        p[rng.random(n) < zero_share] = 0.0
        tmean = 14.0 + 9.0 * np.sin(2 * np.pi * (m - 4.5) / 12) + rng.normal(0, 1.0, n)
        tmean = np.maximum(tmean, 1.0)  # keep temperatures positive (see tests: heat index)
        pet = np.maximum(70.0 + 50.0 * np.sin(2 * np.pi * (m - 4) / 12) + rng.normal(0, 8.0, n), 1.0)
        rows.append(pd.DataFrame({"county_id": cid, "date": times, "latitude_deg": lat,
                                  "precip_mm": np.round(p, 3), "tmean_c": np.round(tmean, 3),
                                  "pet_mm": np.round(pet, 3)}))
    return pd.concat(rows, ignore_index=True)


def main() -> None:
    _quiet()
    from climate_indices import compute as cc
    from climate_indices import eto
    from climate_indices import indices as ci

    df = monthly_inputs()
    out = []
    for _cid, g in df.groupby("county_id", sort=False):
        p = g["precip_mm"].to_numpy()
        pet = g["pet_mm"].to_numpy()
        t = g["tmean_c"].to_numpy()
        lat = float(g["latitude_deg"].iloc[0])
        common = (1981, 1991, 2020, cc.Periodicity.monthly)
        g = g.copy()
        g["spi3_thom_mixture"] = ci.spi(p, 3, ci.Distribution.gamma, *common,
                                        zero_handling="classic")
        g["spi3_thom_com"] = ci.spi(p, 3, ci.Distribution.gamma, *common,
                                    zero_handling="center_of_mass")
        g["spei3_loglogistic"] = ci.spei(p, pet, 3, ci.Distribution.loglogistic,
                                         cc.Periodicity.monthly, 1981, 1991, 2020)
        g["eddi3"] = ci.eddi(pet, 3, *common)
        g["pet_thornthwaite_mm"] = eto.eto_thornthwaite(t, lat, 1981)
        out.append(g)
    res = pd.concat(out, ignore_index=True)
    res.to_csv(HERE / "indices_monthly_reference.csv", index=False, float_format="%.10g")

    rng = np.random.default_rng(7)
    days = pd.date_range("2000-01-01", "2000-12-31", freq="D")
    doy = days.day_of_year.to_numpy()
    tmean = 15.0 + 10.0 * np.sin(2 * np.pi * (doy - 110) / 366) + rng.normal(0, 2, len(days))
    rngd = rng.uniform(6.0, 16.0, len(days))
    tmin, tmax = tmean - rngd / 2, tmean + rngd / 2
    lat = 35.0
    et0 = eto.eto_hargreaves(tmin, tmax, tmean, lat)
    pd.DataFrame({"date": days, "latitude_deg": lat, "tmin_c": tmin, "tmax_c": tmax,
                  "tmean_c": tmean, "et0_mm": et0}).to_csv(
        HERE / "indices_hargreaves_reference.csv", index=False, float_format="%.10g")


if __name__ == "__main__":
    main()
