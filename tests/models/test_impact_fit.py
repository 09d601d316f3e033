"""Fitting impact models: equivalences, failure modes, predictor sets, error messages."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from impact_targets import make_target, simulate_binary

from impactlink.errors import ModelError
from impactlink.models import ImpactModel, fit_impact_model


# ------------------------------------------------------------------ equivalences
@pytest.mark.parametrize("link", ["logit", "probit"])
@pytest.mark.parametrize("kind", ["binary", "ordinal"])
def test_binary_and_two_level_ordinal_match_statsmodels_glm(link, kind):
    # Reference: statsmodels GLM Binomial with the same link, fitted by Newton-Raphson
    # (method="newton"), so that its cov_params() is the inverse observed information
    # (IRLS would report the expected information, which for probit differs by ~1 %).
    # A cumulative link model with two levels is that GLM (McCullagh 1980): the threshold
    # is minus the intercept. Both solvers converge to ~1e-10: rtol 1e-7.
    import statsmodels.api as sm

    x, y = simulate_binary(600, seed=3)
    lk = sm.families.links.Logit() if link == "logit" else sm.families.links.Probit()
    ref = sm.GLM(y, sm.add_constant(x), family=sm.families.Binomial(link=lk)).fit(
        method="newton", maxiter=200, tol=1e-12)
    T = np.array([[0.0, 1.0], [-1.0, 0.0]])  # (const, slope) -> (slope, cut_1)
    m = fit_impact_model(make_target(y, kind=kind), x, link=link)
    assert m.method == ("glm_binomial" if kind == "binary" else "ordered_model")
    np.testing.assert_allclose(m.params.to_numpy(), T @ np.asarray(ref.params), rtol=1e-7)
    np.testing.assert_allclose(m.cov.to_numpy(), T @ np.asarray(ref.cov_params()) @ T.T,
                               rtol=1e-7)
    np.testing.assert_allclose(m.loglik, ref.llf, rtol=1e-10)


@pytest.mark.parametrize("case", ["binary", "ordinal"])
def test_ridge_refit_maximises_the_penalised_statsmodels_likelihood(case):
    # Cross-implementation of the separation fallback: it must maximise statsmodels'
    # OrderedModel log-likelihood minus the ridge 0.5 * prec * b^2, prec = (2 sd(x) / 2.5)^2,
    # here maximised by scipy BFGS (gtol 1e-9: atol 1e-5 on the parameters). Its covariance
    # is the inverse of minus the penalised Hessian: statsmodels' central-difference Hessian
    # (approx_hess3) of the same function, accurate to ~1e-6 relative: rtol 1e-4.
    from scipy import optimize
    from statsmodels.miscmodels.ordinal_model import OrderedModel
    from statsmodels.tools.numdiff import approx_hess3

    rng = np.random.default_rng(9 if case == "ordinal" else 4)
    x = rng.normal(size=300)
    y = np.digitize(-x, [0.0, 1.0]) if case == "ordinal" else (x < -0.5).astype(int)
    K = int(y.max())
    m = fit_impact_model(make_target(y), x)
    assert m.ok and m.method == "ridge_cumulative_link", m.reason
    mod = OrderedModel(y, x[:, None], distr="logit")
    prec = (2.0 * x.std() / 2.5) ** 2

    def penalised(z):  # z = (slope, cut_1..cut_K), our threshold form
        if K > 1 and np.any(np.diff(z[1:]) <= 0):
            return -np.inf
        sm_params = np.r_[z[0], z[1], np.log(np.diff(z[1:]))]
        return mod.loglike(sm_params) - 0.5 * prec * z[0] ** 2

    start = np.r_[0.0, np.arange(K, dtype=float)]
    res = optimize.minimize(lambda z: -penalised(z), start, method="BFGS",
                            options={"gtol": 1e-9, "maxiter": 5000})
    np.testing.assert_allclose(m.params.to_numpy(), res.x, atol=1e-5)
    H = approx_hess3(m.params.to_numpy(), penalised)
    np.testing.assert_allclose(m.cov.to_numpy(), np.linalg.inv(-H), rtol=1e-4)


def test_probabilities_are_ordered_and_hand_checked():
    # P(level >= 1) >= P(level >= 2) for every row, and the first row equals the formula
    # expit(x b - c_k) computed by hand from the fitted parameters.
    rng = np.random.default_rng(2)
    x = rng.normal(size=400)
    y = np.digitize(-1.0 * x + rng.logistic(size=400), [0.0, 1.5])
    m = fit_impact_model(make_target(y), x)
    p = m.predict(x)
    assert np.all(p[:, 0] >= p[:, 1])
    b, c = m.beta[0], m.cuts
    np.testing.assert_allclose(p[0], 1 / (1 + np.exp(-(b * x[0] - c))), rtol=1e-12)
    lo, hi = m.predict_interval(x, ci=0.9)
    assert np.all(lo <= p) and np.all(p <= hi)
    lo50, hi50 = m.predict_interval(x, ci=0.5)
    assert np.all(hi50 - lo50 < hi - lo)


# ------------------------------------------------------------------ failure modes
def _failure_cases():
    rng = np.random.default_rng(0)
    x = rng.normal(size=60)
    return {
        "no events": (np.zeros(60, int), x, "no events"),
        "all events": (np.ones(60, int), x, "every one"),
        "constant predictor": ((x > 0).astype(int), np.full(60, -1.2), "constant predictor"),
        "too few": (np.r_[np.ones(2, int), np.zeros(58, int)], x, "too few"),
    }


@pytest.mark.parametrize("case", list(_failure_cases()))
def test_failures_are_recorded_not_raised(case):
    y, x, words = _failure_cases()[case]
    m = fit_impact_model(make_target(y, levels=("none", "impact")), x)
    assert isinstance(m, ImpactModel)
    assert not m.ok and m.method == "none"
    assert words in m.reason
    assert np.all(np.isnan(m.predict(x[:3])))
    table = m.to_frame()
    assert bool(table["ok"].iloc[0]) is False and words in table["reason"].iloc[0]


def test_empty_ordinal_level_is_a_recorded_failure():
    x, y = simulate_binary(200, seed=1)
    y = y * 2  # levels 0 and 2 only; level 1 never occurs
    m = fit_impact_model(make_target(y, levels=("none", "watch", "severe")), x)
    assert not m.ok and "'watch'" in m.reason and "never occur" in m.reason


def test_complete_separation_falls_back_to_ridge():
    # Impact exactly when x < -0.5: the maximum-likelihood slope is infinite. The ridge
    # fallback (normal prior sd 2.5 per 2 sd of x) gives a finite, steep, negative slope.
    rng = np.random.default_rng(4)
    x = rng.normal(size=300)
    y = (x < -0.5).astype(int)
    m = fit_impact_model(make_target(y), x)
    assert m.ok and m.method == "ridge_cumulative_link"
    assert "separation" in m.reason and "ridge" in m.reason
    slope_per_sd = m.beta[0] * x.std()
    assert -12 < slope_per_sd < -2
    assert np.all(np.isfinite(m.cov.to_numpy()))
    p = m.predict(np.array([-2.0, 1.0]))[:, 0]
    assert p[0] > 0.95 and p[1] < 0.05


def test_quasi_separation_by_persistence_covariate_is_penalised():
    # Persistence perfectly predicts the state (every row in state had state known before):
    # a common case for restriction targets. Must not return an absurd coefficient.
    x, y = simulate_binary(400, seed=8)
    pers = y.copy()
    m = fit_impact_model(make_target(y, extra={"persistence_4": pers}), x,
                         covariates=("persistence_4",))
    assert m.ok and m.method == "ridge_cumulative_link"
    assert abs(m.params["persistence_4"] * pers.std()) < 12


def test_ordinal_separation_falls_back_to_ridge():
    rng = np.random.default_rng(9)
    x = rng.normal(size=300)
    y = np.digitize(-x, [0.0, 1.0])  # level fixed by x exactly
    m = fit_impact_model(make_target(y), x)
    assert m.ok and m.method == "ridge_cumulative_link"
    assert np.all(np.diff(m.cuts) > 0)


# ------------------------------------------------------------------ predictor sets
def test_index_persistence_and_both_are_predictor_sets():
    rng = np.random.default_rng(11)
    n = 800
    x = rng.normal(size=n)
    pers = (rng.uniform(size=n) < 0.3).astype(float)
    eta = -1.5 - 1.0 * x + 1.2 * pers
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-eta))).astype(int)
    t = make_target(y, extra={"persistence_4": pers})
    index_only = fit_impact_model(t, x)
    pers_only = fit_impact_model(t, {"persistence_4": pers})
    both = fit_impact_model(t, x, covariates=("persistence_4",))
    assert index_only.predictors == ("x",)
    assert pers_only.predictors == ("persistence_4",)
    assert both.predictors == ("x", "persistence_4")
    # planted effects recovered within about 3 standard errors
    se = np.sqrt(np.diag(both.cov.to_numpy()))
    assert abs(both.params["x"] + 1.0) < 3 * se[0]
    assert abs(both.params["persistence_4"] - 1.2) < 3 * se[1]
    assert both.loglik > index_only.loglik and both.loglik > pers_only.loglik
    # the model needs the covariate at prediction time, by name
    with pytest.raises(ModelError, match="persistence_4"):
        both.predict(x[:3], frame=pd.DataFrame({"other": [0, 0, 0]}))
    p = both.predict(x[:3], frame=pd.DataFrame({"persistence_4": [1.0, 1.0, 1.0]}))
    q = both.predict(x[:3], frame=pd.DataFrame({"persistence_4": [0.0, 0.0, 0.0]}))
    assert np.all(p > q)


def test_rows_with_missing_predictors_are_left_out():
    x, y = simulate_binary(300, seed=12)
    x[:40] = np.nan
    m = fit_impact_model(make_target(y), x)
    assert m.n == 260 and m.events == int(y[40:].sum())


def test_seasonal_harmonics_recover_planted_season():
    # Impacts more likely around ISO week 30 (late summer): cos term negative at the peak
    # is not assumed; we check the fitted seasonal curve peaks within 4 weeks of week 30.
    rng = np.random.default_rng(13)
    n = 52 * 40
    week = np.tile(np.arange(1, 53), 40)
    x = rng.normal(size=n)
    season_effect = 1.5 * np.cos(2 * np.pi * (week - 30) / (365.2425 / 7))
    eta = -2.0 - 1.0 * x + season_effect
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-eta))).astype(int)
    m = fit_impact_model(make_target(y, season=week), x, seasonal=True)
    assert m.predictors == ("x", "season_sin", "season_cos")
    frame = pd.DataFrame({"season": np.arange(1, 53)})
    p = m.predict(np.zeros(52), frame=frame)[:, 0]
    assert abs(int(np.argmax(p)) + 1 - 30) <= 4
    with pytest.raises(ModelError, match="season"):
        m.predict(np.zeros(3))


def test_seasonal_ignored_for_annual_targets():
    x, y = simulate_binary(200, seed=14)
    m = fit_impact_model(make_target(y, grain="county_year"), x, seasonal=True)
    assert m.ok and m.predictors == ("x",) and "seasonal terms ignored" in m.reason


def test_traits_are_merged_and_standardised():
    rng = np.random.default_rng(15)
    counties = np.array([f"c{i:02d}" for i in range(20)])
    irrigated = np.linspace(0, 80, 20)  # percent of cropland irrigated
    cid = np.repeat(counties, 60)
    x = rng.normal(size=cid.size)
    trait_z = np.repeat((irrigated - irrigated.mean()) / irrigated.std(), 60)
    eta = -1.0 - 1.2 * x - 0.8 * trait_z
    y = (rng.uniform(size=x.size) < 1 / (1 + np.exp(-eta))).astype(int)
    traits = pd.DataFrame({"county_id": counties, "irrigated_pct": irrigated,
                           "label": ["a"] * 20, "constant": 1.0})
    m = fit_impact_model(make_target(y, county_id=cid), x, traits=traits)
    assert m.predictors == ("x", "irrigated_pct")
    assert "non-numeric" in m.reason and "constant" in m.reason
    se = np.sqrt(m.cov.iloc[1, 1])
    assert abs(m.params["irrigated_pct"] + 0.8) < 3 * se
    with pytest.raises(ModelError, match="county_id"):
        fit_impact_model(make_target(y, county_id=cid), x, traits=traits.drop(columns="county_id"))


def test_to_frame_lists_parameters_with_metadata():
    x, y = simulate_binary(300, seed=16)
    m = fit_impact_model(make_target(y), x, meta={"index": "spi", "scale_weeks": 8,
                                                    "lag_weeks": 4})
    t = m.to_frame()
    assert list(t["term"]) == ["x", "cut_1"]
    assert set(t["index"]) == {"spi"} and set(t["lag_weeks"]) == {4}
    assert np.all(t["std_error"] > 0)


# ------------------------------------------------------------------ error messages
def test_error_messages_name_the_argument():
    x, y = simulate_binary(100, seed=17)
    t = make_target(y)
    with pytest.raises(TypeError, match="Target"):
        fit_impact_model(t.frame, x)
    with pytest.raises(ModelError, match="link must be one of"):
        fit_impact_model(t, x, link="cloglog")
    with pytest.raises(ModelError, match="pooling must be one of"):
        fit_impact_model(t, x, pooling="state")
    with pytest.raises(ModelError, match="99 values but the target frame has 100 rows"):
        fit_impact_model(t, x[:99])
    with pytest.raises(ModelError, match="covariates .*'persistence_2'.* not columns"):
        fit_impact_model(t, x, covariates=("persistence_2",))
    with pytest.raises(ModelError, match="1-D array"):
        fit_impact_model(t, np.ones((100, 2)))
    bad = make_target(np.r_[y[:-1], 3], levels=("none", "impact"))
    with pytest.raises(ModelError, match="outside 0..1"):
        fit_impact_model(bad, x)
    three = make_target(np.r_[y[:-1], 2], kind="binary", levels=("a", "b", "c"))
    with pytest.raises(ModelError, match="is binary but has 3 levels"):
        fit_impact_model(three, x)
    m = fit_impact_model(t, x)
    with pytest.raises(ModelError, match="ci must be strictly between 0 and 1"):
        m.predict_interval(x, ci=90)
    with pytest.raises(ModelError, match="lacks feature"):
        m.predict({"spi": x})


def test_monthly_targets_use_month_harmonics():
    # Region-month targets: season is the month 1..12, period 12.
    rng = np.random.default_rng(18)
    month = np.tile(np.arange(1, 13), 30)
    x = rng.normal(size=month.size)
    eta = -1.0 - x + 1.2 * np.sin(2 * np.pi * month / 12)
    y = (rng.uniform(size=x.size) < 1 / (1 + np.exp(-eta))).astype(int)
    m = fit_impact_model(make_target(y, season=month, grain="region_month"), x, seasonal=True)
    assert m.design.seasonal == "month"
    se = np.sqrt(m.cov.loc["season_sin", "season_sin"])
    assert abs(m.params["season_sin"] - 1.2) < 3 * se
