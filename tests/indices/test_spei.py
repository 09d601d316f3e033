"""SPEI: log-logistic by unbiased PWMs, GEV alternative; cross-implementation references."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from impactlink.indices import compute_indices
from impactlink.indices.standardize import (
    fit_gev,
    fit_glo,
    sample_pwms,
    standardize_gev,
    standardize_loglogistic,
)
from impactlink.indices.timegrid import accumulate

REF = Path(__file__).parents[1] / "reference" / "indices_monthly_reference.csv"


@pytest.mark.parametrize("county", ["wet", "dry"])
def test_spei_matches_climate_indices_loglogistic(county):
    # Reference: climate-indices 3.1.0 ci.spei(P, PET, 3, Distribution.loglogistic, monthly,
    # calibration 1991-2020) (tests/reference/indices_make_reference.py). It fits the
    # generalized logistic by unbiased L-moments, which are linear in the unbiased PWMs of
    # Begueria et al. (2014), so the fitted distribution is identical; clip +-3.09 in both.
    # Remaining difference: floating-point rounding -> tolerance 1e-8.
    df = pd.read_csv(REF, parse_dates=["date"])
    g = df[df["county_id"] == county]
    t = pd.DatetimeIndex(g["date"])
    period = (t.month - 1).to_numpy()
    calib = (t.year >= 1991) & (t.year <= 2020)
    bal = (g["precip_mm"] - g["pet_mm"]).to_numpy()[:, None]
    ours = standardize_loglogistic(accumulate(bal, 3), period, calib, n_periods=12)[:, 0]
    ref = g["spei3_loglogistic"].to_numpy()
    assert np.array_equal(np.isnan(ours), np.isnan(ref))
    np.testing.assert_allclose(ours, ref, atol=1e-8, equal_nan=True)


def _sorted_sample(x):
    s = np.sort(x).reshape(1, -1, 1)
    return s, np.array([[x.size]])


def test_glo_fit_matches_lmoments3():
    # Reference: lmoments3 1.0.8 distr.glo.lmom_fit (Hosking's PELGLO port). Same L-moment
    # equations, so parameters agree to rounding (1e-9).
    lm = pytest.importorskip("lmoments3.distr")
    x = np.random.default_rng(3).gamma(2.0, 12.0, 45) - 25.0
    xi, alpha, k = fit_glo(*sample_pwms(*_sorted_sample(x)))
    ref = lm.glo.lmom_fit(x)
    assert xi[0, 0] == pytest.approx(ref["loc"], abs=1e-9)
    assert alpha[0, 0] == pytest.approx(ref["scale"], abs=1e-9)
    assert k[0, 0] == pytest.approx(ref["k"], abs=1e-9)


def test_glo_equals_vicente_serrano_loglogistic():
    # Vicente-Serrano et al. (2010), eqs 4-6: beta = (2w1 - w0) / (6w1 - w0 - 6w2),
    # alpha = (w0 - 2w1) beta / (G(1+1/beta) G(1-1/beta)), gamma = w0 - alpha G(1+1/b)G(1-1/b),
    # with w_s = E[x (1-F)^s] from unbiased PWMs. F(x) = 1/(1 + (alpha/(x-gamma))^beta).
    from scipy.special import gamma as G

    from impactlink.indices.standardize import _glo_cdf

    x = np.random.default_rng(8).gamma(3.0, 10.0, 40) - 20.0
    s, n = _sorted_sample(x)
    b0, b1, b2 = sample_pwms(s, n)
    w0, w1, w2 = b0, b0 - b1, b0 - 2 * b1 + b2
    beta = (2 * w1 - w0) / (6 * w1 - w0 - 6 * w2)
    alpha = (w0 - 2 * w1) * beta / (G(1 + 1 / beta) * G(1 - 1 / beta))
    gam = w0 - alpha * G(1 + 1 / beta) * G(1 - 1 / beta)
    grid = np.linspace(np.min(x), np.max(x), 15)
    f_vs = 1.0 / (1.0 + (alpha[0, 0] / (grid - gam[0, 0])) ** beta[0, 0])
    xi, a, k = fit_glo(b0, b1, b2)
    np.testing.assert_allclose(_glo_cdf(grid, xi[0, 0], a[0, 0], k[0, 0]), f_vs, atol=1e-12)


def test_gev_fit_close_to_lmoments3():
    # Reference: lmoments3 distr.gev.lmom_fit (Hosking's PELGEV, rational approximations
    # accurate to ~1e-9). Ours uses the Hosking et al. (1985) formula k = 7.8590c + 2.9554c^2,
    # accurate to ~9e-4 in k for |k| < 0.5 (Hosking et al. 1985), hence the tolerances.
    lm = pytest.importorskip("lmoments3.distr")
    x = np.random.default_rng(4).gamma(2.0, 12.0, 45) - 25.0
    xi, alpha, k = fit_gev(*sample_pwms(*_sorted_sample(x)))
    ref = lm.gev.lmom_fit(x)
    assert k[0, 0] == pytest.approx(ref["c"], abs=2e-3)
    grid = np.quantile(x, [0.05, 0.25, 0.5, 0.75, 0.95])
    z_ours = standardize_gev(
        np.concatenate([x, grid])[:, None], np.zeros(50, dtype=int),
        np.r_[np.ones(45, bool), np.zeros(5, bool)], n_periods=1)[45:, 0]
    z_ref = stats.norm.ppf(stats.genextreme.cdf(grid, ref["c"], ref["loc"], ref["scale"]))
    np.testing.assert_allclose(z_ours, z_ref, atol=0.01)


def test_loglogistic_input_gives_standard_normal():
    # Property: log-logistic input -> SPEI ~ N(0, 1) over the calibration period
    # (sampling error of mean ~0.004, sd ~0.003 with 60,000 values).
    rng = np.random.default_rng(12)
    t, c = 30 * 12, 170
    x = stats.fisk.rvs(6.0, loc=-60.0, scale=70.0, size=(t, c), random_state=rng)
    z = standardize_loglogistic(x, np.tile(np.arange(12), 30), np.ones(t, bool), n_periods=12)
    assert abs(np.nanmean(z)) < 0.02
    assert abs(np.nanstd(z) - 1.0) < 0.03
    assert np.all(np.isfinite(z))


def test_spei_monotone_in_balance():
    rng = np.random.default_rng(2)
    x = rng.normal(0, 50, (240, 5))
    period = np.tile(np.arange(12), 20)
    z = standardize_loglogistic(x, period, np.ones(240, bool), n_periods=12)
    for g in range(12):
        rows = period == g
        order = np.argsort(x[rows], axis=0)
        assert np.all(np.diff(np.take_along_axis(z[rows], order, axis=0), axis=0) >= -1e-12)


def test_weekly_spei_matches_lmoments3_per_week_fits():
    # Weekly path on our own week grouping (week 53 pooled with 52, calibration 1991-2020):
    # per week of year, lmoments3 distr.glo.lmom_fit on the calibration values of the
    # accumulated P - PET (supplied pet_mm), then Phi^-1(F), clip +-3.09. Same L-moment
    # (= unbiased PWM) fit, so the difference is rounding of the accumulation: 1e-8.
    lm = pytest.importorskip("lmoments3.distr")
    rng = np.random.default_rng(22)
    weeks = pd.date_range("1988-01-04", "2022-12-26", freq="7D")
    p = rng.gamma(0.8, 20.0, len(weeks))
    pet = rng.uniform(5.0, 40.0, len(weeks))
    clim = pd.DataFrame({"county_id": "X", "date": weeks, "precip_mm": p, "pet_mm": pet})
    cube = compute_indices(clim, latitude_deg=pd.Series({"X": 35.0}), scales_weeks=(8,),
                           indices=("spei",))
    acc = pd.Series(p - pet, index=weeks).rolling(8).sum().to_numpy()
    iso = weeks.isocalendar()
    woy = np.minimum(iso.week.to_numpy(), 52)
    cal = (iso.year.to_numpy() >= 1991) & (iso.year.to_numpy() <= 2020)
    ref = np.full(len(weeks), np.nan)
    for w in range(1, 53):
        par = lm.glo.lmom_fit(acc[(woy == w) & cal & np.isfinite(acc)])
        rows = (woy == w) & np.isfinite(acc)
        ref[rows] = np.clip(stats.norm.ppf(lm.glo.cdf(acc[rows], **par)), -3.09, 3.09)
    np.testing.assert_allclose(cube.get("spei", 8)[:, 0], ref, atol=1e-8, equal_nan=True)
