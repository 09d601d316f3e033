"""compute_indices end to end: cadences, missing data, calibration, indicators, errors."""

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from impactlink.indices import (
    IndexCalibrationWarning,
    IndicesError,
    IndicesWarning,
    compute_indices,
)
from impactlink.indices.standardize import standardize_empirical
from impactlink.indices.timegrid import build_grid, grid_values, period_of_year

REF = Path(__file__).parents[1] / "reference" / "indices_monthly_reference.csv"


def _weekly(n_years=32, counties=("01001", "01003", "01005"), seed=0, start="1989-01-02"):
    rng = np.random.default_rng(seed)
    weeks = pd.date_range(start, periods=52 * n_years, freq="7D")
    rows = []
    doy = weeks.day_of_year.to_numpy()
    for i, c in enumerate(counties):
        p = rng.gamma(0.9, 20.0 + 5 * i, len(weeks))
        p[rng.random(len(weeks)) < 0.15] = 0.0
        t = 12 + 10 * np.sin(2 * np.pi * (doy - 110) / 365) + rng.normal(0, 2, len(weeks))
        rows.append(pd.DataFrame({"county_id": c, "date": weeks, "precip_mm": p,
                                  "tmin_c": t - 6, "tmax_c": t + 6}))
    lat = pd.Series({c: 32.0 + 3 * i for i, c in enumerate(counties)})
    return pd.concat(rows, ignore_index=True), lat


def test_daily_to_weekly_missing_days():
    # A week with fewer than min_valid_days valid days is missing, not zero; a week with
    # 6 of 7 days is the mean of its valid days times 7.
    days = pd.date_range("2024-01-01", "2024-01-21", freq="D")  # three ISO weeks, Mondays
    p = np.ones(len(days))
    p[3] = np.nan  # week 1: 6 valid days
    p[8:10] = np.nan  # week 2: 5 valid days
    g, tpos, cpos = build_grid(pd.Series(["A"] * len(days)), pd.Series(days), "daily")
    arr, cnt = grid_values(p, tpos, cpos, g.shape, how="sum", min_count=6, scale_to=7.0)
    assert list(g.times.strftime("%Y-%m-%d")) == ["2024-01-01", "2024-01-08", "2024-01-15"]
    assert cnt[:, 0].tolist() == [6, 5, 7]
    assert arr[0, 0] == pytest.approx(7.0)
    assert np.isnan(arr[1, 0])
    assert arr[2, 0] == pytest.approx(7.0)


def test_iso_week_labels_and_week_53_pooling():
    # ISO 8601: 2020-12-28 (Monday) starts ISO week 53 of 2020; 2021-01-04 is week 1 of 2021.
    g, tpos, _ = build_grid(pd.Series(["A", "A"]), pd.Series(pd.to_datetime(["2020-12-31",
                                                                              "2021-01-10"])),
                            "weekly")
    assert g.times[0] == pd.Timestamp("2020-12-28")
    assert g.times[tpos[1]] == pd.Timestamp("2021-01-04")
    period, n = period_of_year(g.times, "weekly")
    assert n == 52
    assert period.tolist() == [51, 0]  # week 53 pooled with week 52 (index 51)


def test_monthly_input_keeps_monthly_cadence_and_matches_reference():
    # Through the full pipeline on monthly rows: SPI-3 and SPEI-3 (supplied pet_mm) equal the
    # climate-indices 3.1.0 references (tests/reference/indices_make_reference.py) to rounding.
    m = pd.read_csv(REF, parse_dates=["date"])
    lat = m.groupby("county_id")["latitude_deg"].first()
    cube = compute_indices(m[["county_id", "date", "precip_mm", "pet_mm"]], latitude_deg=lat,
                           scales_months=(3,), indices=("spi", "spei"), spi_estimator="thom",
                           min_calibration_years=20)
    assert cube.provenance["cadence"] == "monthly"
    assert cube.provenance["scale_unit"] == "months"
    assert cube.provenance["spei"]["pet"]["method"] == "supplied pet_mm"
    for col, key in (("spi3_thom_com", ("spi", 3)), ("spei3_loglogistic", ("spei", 3))):
        for j, cid in enumerate(cube.county_ids):
            ref = m.loc[m["county_id"] == cid, col].to_numpy()
            np.testing.assert_allclose(cube.get(*key)[:, j], ref, atol=1e-8, equal_nan=True)


def test_weekly_pipeline_shapes_and_provenance():
    clim, lat = _weekly()
    cube = compute_indices(clim, latitude_deg=lat, scales_weeks=(4, 13))
    assert cube.index_names == ["eddi", "spei", "spi"]
    assert cube.get("spi", 13).shape == (len(cube.weeks), 3)
    assert cube.weeks[0].day_of_week == 0
    for name in ("spi", "spei", "eddi"):
        prov = cube.provenance[name]
        assert {"method", "estimator", "zero_handling", "calibration", "clip"} <= set(prov)
        assert prov["calibration"] == [1991, 2020]
        z = cube.get(name, 13)
        assert np.nanmax(np.abs(z)) <= 3.09
        assert np.isnan(z[:12]).all() and np.isfinite(z[12:]).all()


def test_missing_week_propagates_to_windows():
    clim, lat = _weekly()
    week = pd.Timestamp("2000-06-05")
    clim.loc[(clim["county_id"] == "01001") & (clim["date"] == week), "precip_mm"] = np.nan
    cube = compute_indices(clim, latitude_deg=lat, scales_weeks=(4,), indices=("spi",))
    pos = cube.week_position([week])[0]
    z = cube.get("spi", 4)
    assert np.isnan(z[pos:pos + 4, 0]).all()
    assert np.isfinite(z[pos + 4, 0]) and np.isfinite(z[pos - 1, 0])
    assert np.isfinite(z[pos, 1])


def test_eddi_sign_convention():
    # Default: negative = high evaporative demand (the cube's dry-negative convention);
    # "dry_positive" keeps the published sign of Hobbins et al. (2016).
    clim, lat = _weekly()
    a = compute_indices(clim, latitude_deg=lat, scales_weeks=(4,), indices=("eddi",))
    b = compute_indices(clim, latitude_deg=lat, scales_weeks=(4,), indices=("eddi",),
                        eddi_sign="dry_positive")
    np.testing.assert_array_equal(a.get("eddi", 4), -b.get("eddi", 4))
    # warmer-than-usual 4-week spells (higher PET) get negative default EDDI
    tmax = clim.pivot(index="date", columns="county_id", values="tmax_c")
    woy = np.minimum(tmax.index.isocalendar().week.to_numpy(), 52)
    anom = tmax - tmax.groupby(woy).transform("mean")
    warm = anom.rolling(4).mean().to_numpy()[:, 0]
    z = a.get("eddi", 4)[:, 0]
    ok = np.isfinite(warm) & np.isfinite(z)
    assert np.corrcoef(warm[ok], z[ok])[0, 1] < -0.5


def test_indicator_standardized_by_week_of_year():
    clim, lat = _weekly()
    ind = clim[["county_id", "date"]].copy()
    rng = np.random.default_rng(4)
    ind["indicator"] = "soil moisture"
    ind["value"] = rng.uniform(0.1, 0.4, len(ind))
    cube = compute_indices(clim, latitude_deg=lat, indicators=ind, scales_weeks=(4,),
                           indices=("spi",), indicator_scales=(0, 4))
    assert ("soil_moisture", 0) in cube.arrays and ("soil_moisture", 4) in cube.arrays
    base = ind.pivot(index="date", columns="county_id", values="value").to_numpy()
    period, _ = period_of_year(cube.weeks, "weekly")
    years = cube.weeks.isocalendar().year.to_numpy()
    expected = standardize_empirical(base, period, (years >= 1991) & (years <= 2020),
                                     n_periods=52)
    np.testing.assert_allclose(cube.get("soil_moisture", 0), expected)


def test_calibration_falls_back_to_full_record_with_warning():
    clim, lat = _weekly(n_years=25, start="2000-01-03")
    with pytest.warns(IndexCalibrationWarning, match="full record"):
        cube = compute_indices(clim, latitude_deg=lat, scales_weeks=(4,), indices=("spi",))
    assert cube.provenance["calibration"] == [2000, 2024]


def test_no_temperature_skips_spei_with_warning():
    clim, lat = _weekly()
    with pytest.warns(IndicesWarning, match="skipped"):
        cube = compute_indices(clim.drop(columns=["tmin_c", "tmax_c"]), latitude_deg=lat,
                               scales_weeks=(4,))
    assert cube.index_names == ["spi"]


@pytest.mark.parametrize("mutate,match", [
    (lambda d: d.drop(columns=["precip_mm"]), "missing column"),
    (lambda d: d.assign(precip_mm=np.where(d.index == 5, -999.0, d["precip_mm"])), "sentinel"),
    (lambda d: pd.concat([d, d.iloc[:1]]), "duplicate"),
    (lambda d: d.drop(columns=["tmin_c"]).assign(tmean_c=10.0), "thornthwaite"),
])
def test_compute_indices_error_messages(mutate, match):
    clim, lat = _weekly(n_years=31)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(IndicesError, match=match):
            compute_indices(mutate(clim), latitude_deg=lat, scales_weeks=(4,))


def test_unknown_index_name():
    clim, lat = _weekly(n_years=31)
    with pytest.raises(IndicesError, match="unknown"):
        compute_indices(clim, latitude_deg=lat, indices=("spx",))


def test_threads_do_not_change_results():
    clim, lat = _weekly(n_years=33)
    a = compute_indices(clim, latitude_deg=lat, scales_weeks=(4, 26), n_threads=1)
    b = compute_indices(clim, latitude_deg=lat, scales_weeks=(4, 26), n_threads=3)
    for key in a.keys:  # equal up to floating-point summation order
        np.testing.assert_allclose(a.get(*key), b.get(*key), rtol=0, atol=1e-12)


def test_daily_input_end_to_end():
    # Daily rows: weekly totals are sums of the 7 days; PET is Hargreaves computed per day
    # (FAO-56 eq. 52) and summed. SPI-4 of the daily panel equals SPI-4 of its weekly sums.
    rng = np.random.default_rng(8)
    days = pd.date_range("1990-01-01", "2021-12-26", freq="D")  # whole ISO weeks
    p = rng.gamma(0.3, 8.0, len(days))
    t = 12 + 10 * np.sin(2 * np.pi * (days.day_of_year.to_numpy() - 110) / 365)
    daily = pd.DataFrame({"county_id": "A", "date": days, "precip_mm": p,
                          "tmin_c": t - 5, "tmax_c": t + 5})
    lat = pd.Series({"A": 41.0})
    cube_d = compute_indices(daily, latitude_deg=lat, scales_weeks=(4,), indices=("spi", "spei"))
    weekly = daily.assign(date=daily["date"] - pd.to_timedelta(daily["date"].dt.day_of_week,
                                                                unit="D"))
    weekly = weekly.groupby(["county_id", "date"], as_index=False)["precip_mm"].sum()
    cube_w = compute_indices(weekly, latitude_deg=lat, scales_weeks=(4,), indices=("spi",))
    assert cube_d.provenance["input_cadence"] == "daily"
    np.testing.assert_allclose(cube_d.get("spi", 4), cube_w.get("spi", 4), atol=1e-9)
    assert np.isfinite(cube_d.get("spei", 4)[3:]).all()


def test_county_without_precipitation_is_nan_without_numpy_warnings():
    clim, lat = _weekly(n_years=33)
    clim.loc[clim["county_id"] == "01003", "precip_mm"] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        cube = compute_indices(clim, latitude_deg=lat, scales_weeks=(4,),
                               pet_method="thornthwaite")
    j = cube.county_ids.index("01003")
    assert np.isnan(cube.get("spi", 4)[:, j]).all()
    assert np.isnan(cube.get("spei", 4)[:, j]).all()
    assert np.isfinite(cube.get("eddi", 4)[3:, j]).all()  # PET needs temperature only
    assert np.isfinite(cube.get("spi", 4)[3:, 0]).all()
