"""SPI: cross-implementation references and properties."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from impactlink.indices import (
    IndexCalibrationWarning,
    IndexFitWarning,
    IndicesError,
    compute_indices,
)
from impactlink.indices.standardize import (
    calibration_samples,
    fit_gamma,
    standardize_gamma,
)
from impactlink.indices.timegrid import accumulate

REF = Path(__file__).parents[1] / "reference" / "indices_monthly_reference.csv"


def _monthly_ref():
    df = pd.read_csv(REF, parse_dates=["date"])
    out = {}
    for cid, g in df.groupby("county_id"):
        t = pd.DatetimeIndex(g["date"])
        out[cid] = (g, (t.month - 1).to_numpy(), (t.year >= 1991) & (t.year <= 2020))
    return out


@pytest.mark.parametrize("county", ["wet", "dry"])
@pytest.mark.parametrize("zero_handling,column", [("mixture", "spi3_thom_mixture"),
                                                   ("center_of_mass", "spi3_thom_com")])
def test_spi_matches_climate_indices_monthly(county, zero_handling, column):
    # Reference: climate-indices 3.1.0 ci.spi(..., Distribution.gamma), monthly SPI-3,
    # calibration 1991-2020 (tests/reference/indices_make_reference.py). Both use Thom's
    # (1958) closed-form gamma estimator on the positive values, q = zero share, clip +-3.09;
    # "classic" there is our "mixture" (zeros at q), "center_of_mass" is the same in both.
    # The only difference left is floating-point rounding, hence the 1e-8 tolerance.
    g, period, calib = _monthly_ref()[county]
    acc = accumulate(g[["precip_mm"]].to_numpy(), 3, nonnegative=True)
    ours = standardize_gamma(acc, period, calib, n_periods=12, estimator="thom",
                             zero_handling=zero_handling)[:, 0]
    ref = g[column].to_numpy()
    assert np.array_equal(np.isnan(ours), np.isnan(ref))
    np.testing.assert_allclose(ours, ref, atol=1e-8, equal_nan=True)


def test_spi_mle_close_to_thom_reference():
    # Our default estimator is the exact gamma MLE; Thom's approximation of the MLE shape is
    # accurate to well under 1 % (Thom 1958), which moves SPI by at most a few hundredths.
    g, period, calib = _monthly_ref()["wet"]
    acc = accumulate(g[["precip_mm"]].to_numpy(), 3, nonnegative=True)
    ours = standardize_gamma(acc, period, calib, n_periods=12, estimator="mle",
                             zero_handling="mixture")[:, 0]
    ref = g["spi3_thom_mixture"].to_numpy()
    diff = np.abs(ours - ref)
    assert np.nanmax(diff) < 0.03
    assert np.nanmax(diff) > 1e-6  # they are really different estimators


def test_gamma_mle_matches_scipy_fit():
    # Reference: scipy.stats.gamma.fit(x, floc=0) (numerical MLE). Our Newton iteration
    # solves the same likelihood equation; tolerance 1e-5 relative covers scipy's optimiser.
    rng = np.random.default_rng(11)
    x = rng.gamma(2.3, 17.0, size=(1, 40, 3))
    alpha, beta = fit_gamma(x, estimator="mle")
    for c in range(3):
        a_ref, _, b_ref = stats.gamma.fit(x[0, :, c], floc=0)
        assert alpha[0, c] == pytest.approx(a_ref, rel=1e-5)
        assert beta[0, c] == pytest.approx(b_ref, rel=1e-5)


def test_hand_computed_thom_estimator():
    # Tiny case by hand: x = (1, 2, 4): mean 7/3, mean log = ln(8)/3,
    # A = ln(7/3) - ln(2) = 0.15415; alpha = (1 + sqrt(1 + 4A/3)) / (4A) = 3.4025.
    x = np.array([1.0, 2.0, 4.0]).reshape(1, 3, 1)
    alpha, beta = fit_gamma(x, estimator="thom")
    a = np.log(7 / 3) - np.log(2.0)
    assert alpha[0, 0] == pytest.approx((1 + np.sqrt(1 + 4 * a / 3)) / (4 * a), rel=1e-12)
    assert alpha[0, 0] == pytest.approx(3.4025, abs=1e-4)
    assert beta[0, 0] == pytest.approx((7 / 3) / alpha[0, 0], rel=1e-12)


def _panel(n_years=30, counties=200, shape=1.5, zero_share=0.0, seed=5):
    rng = np.random.default_rng(seed)
    t = n_years * 12
    x = rng.gamma(shape, 30.0, size=(t, counties))
    x[rng.random((t, counties)) < zero_share] = 0.0
    period = np.tile(np.arange(12), n_years)
    return x, period, np.ones(t, dtype=bool)


def test_gamma_input_gives_standard_normal_over_calibration():
    # Property (McKee et al. 1993): SPI of gamma-distributed input over the calibration
    # period is ~N(0, 1). 30 years x 12 months x 200 counties = 72,000 values: the sampling
    # error of the mean is ~0.004 and of the sd ~0.003, fit error adds a little.
    x, period, calib = _panel()
    z = standardize_gamma(x, period, calib, n_periods=12)
    assert abs(np.mean(z)) < 0.02
    assert abs(np.std(z) - 1.0) < 0.03
    # class probability below -1 (WMO 2012 table: 15.9 % is the normal value)
    assert np.mean(z <= -1.0) == pytest.approx(stats.norm.cdf(-1.0), abs=0.01)


def test_more_rain_never_lowers_spi():
    # Property: within each fitted distribution SPI is non-decreasing in precipitation,
    # and adding rain to a week outside calibration raises (never lowers) its SPI only.
    x, period, calib = _panel(counties=20, zero_share=0.3)
    calib = np.arange(len(period)) < 240  # first 20 years calibrate
    z = standardize_gamma(x, period, calib, n_periods=12)
    for g in range(12):
        rows = period == g
        order = np.argsort(x[rows], axis=0)
        zs = np.take_along_axis(z[rows], order, axis=0)
        assert np.all(np.diff(zs, axis=0) >= -1e-12)
    x2 = x.copy()
    x2[300, :] += 25.0
    z2 = standardize_gamma(x2, period, calib, n_periods=12)
    assert np.all(z2[300] >= z[300])
    assert np.any(z2[300] > z[300])
    np.testing.assert_array_equal(np.delete(z2, 300, axis=0), np.delete(z, 300, axis=0))


def test_spi_ignores_precipitation_units():
    # Property: SPI is unit-free: mm -> inches (/25.4) changes nothing (zeros stay zeros).
    x, period, calib = _panel(counties=10, zero_share=0.2)
    z_mm = standardize_gamma(x, period, calib, n_periods=12)
    z_in = standardize_gamma(x / 25.4, period, calib, n_periods=12)
    np.testing.assert_allclose(z_in, z_mm, atol=1e-9)


def test_dry_climate_many_zeros_is_finite_and_correct():
    # Arid case: 70 % zero months. Every value is finite, zeros are scored at the centre of
    # the zero mass Phi^-1(q/2) (Stagge et al. 2015) and positive values above Phi^-1(q).
    x, period, calib = _panel(counties=50, zero_share=0.7, seed=9)
    # with 30 years and 70 % zeros a few groups have < 3 positive values: they fall back to
    # the centre of the positive mass, and say so
    with pytest.warns(IndexFitWarning, match="fewer than 3 positive"):
        z, par = standardize_gamma(x, period, calib, n_periods=12, return_params=True)
    assert np.all(np.isfinite(z))
    q_t = par["q"][period]
    zero = x == 0
    np.testing.assert_allclose(z[zero], stats.norm.ppf(q_t[zero] / 2), atol=1e-12)
    assert np.all(z[~zero] >= np.clip(stats.norm.ppf(q_t[~zero]), -3.09, 3.09) - 1e-12)


def test_all_zero_accumulations_stay_exact_zero():
    # Cumulative sums must not turn a dry spell into tiny non-zero totals.
    x = np.array([5.3, 0.1, 0.0, 0.0, 0.0, 0.0, 7.7])[:, None]
    acc = accumulate(x, 3, nonnegative=True)
    assert acc[4, 0] == 0.0 and acc[5, 0] == 0.0
    assert acc[2, 0] == pytest.approx(5.4)
    assert np.isnan(acc[1, 0])


def test_calibration_samples_pool_groups():
    x = np.arange(8.0)[:, None]
    period = np.array([0, 1, 0, 1, 0, 1, 0, 1])
    calib = np.array([True] * 6 + [False] * 2)
    s, n = calibration_samples(x, period, calib, 2)
    assert n.tolist() == [[3], [3]]
    assert s[0, :, 0].tolist() == [0.0, 2.0, 4.0]


def test_compute_indices_error_short_record():
    weeks = pd.date_range("2010-01-04", periods=52 * 5, freq="7D")
    clim = pd.DataFrame({"county_id": "A", "date": weeks, "precip_mm": 1.0})
    with pytest.warns(IndexCalibrationWarning, match="full record"):
        with pytest.raises(IndicesError, match="min_calibration_years"):
            compute_indices(clim, latitude_deg=pd.Series({"A": 40.0}), indices=("spi",))


def test_weekly_spi_matches_scipy_per_week_fits():
    # Cross-implementation check of the weekly path on our own week grouping: per ISO week
    # of year (week 53 pooled with 52) fit scipy.stats.gamma.fit(positive, floc=0) over the
    # 1991-2020 calibration weeks, H = q + (1 - q) G, zeros at q / 2, clip +-3.09.
    # Same estimator (MLE) and definitions, so 1e-5 covers scipy's optimiser tolerance.
    rng = np.random.default_rng(21)
    weeks = pd.date_range("1988-01-04", "2022-12-26", freq="7D")
    p = rng.gamma(0.7, 15.0, len(weeks))
    p[rng.random(len(weeks)) < 0.3] = 0.0
    clim = pd.DataFrame({"county_id": "X", "date": weeks, "precip_mm": p})
    cube = compute_indices(clim, latitude_deg=pd.Series({"X": 35.0}), scales_weeks=(4,),
                           indices=("spi",))
    acc = pd.Series(p, index=weeks).rolling(4).sum().to_numpy().copy()
    acc[np.abs(acc) < 1e-9] = 0.0
    iso = weeks.isocalendar()
    woy = np.minimum(iso.week.to_numpy(), 52)
    cal = (iso.year.to_numpy() >= 1991) & (iso.year.to_numpy() <= 2020)
    ref = np.full(len(weeks), np.nan)
    for w in range(1, 53):
        sample = acc[(woy == w) & cal & np.isfinite(acc)]
        q = np.mean(sample == 0)
        a, _, scale = stats.gamma.fit(sample[sample > 0], floc=0)
        rows = (woy == w) & np.isfinite(acc)
        h = q + (1 - q) * stats.gamma.cdf(acc[rows], a, scale=scale)
        h = np.where(acc[rows] == 0, q / 2, h)
        ref[rows] = np.clip(stats.norm.ppf(h), -3.09, 3.09)
    np.testing.assert_allclose(cube.get("spi", 4)[:, 0], ref, atol=1e-5, equal_nan=True)
