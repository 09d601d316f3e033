"""Batched Newton-Raphson solvers against statsmodels (the cross-implementation reference)."""

from __future__ import annotations

import numpy as np
import pytest

from impactlink.errors import ModelError
from impactlink.models.batch import (
    fit_cumlogit_batch,
    fit_logistic_batch,
    predict_cumlogit,
    predict_logistic,
)


def _logit_data(seed, n=300, p=2):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, p - 1))
    X = np.column_stack([np.ones(n), x])
    beta = rng.normal(scale=1.0, size=p)
    y = (rng.random(n) < 1 / (1 + np.exp(-X @ beta))).astype(float)
    w = rng.integers(1, 4, size=n).astype(float)
    return X, y, w


def test_logistic_matches_statsmodels_glm():
    # reference: statsmodels GLM(Binomial) with freq_weights; both maximise the same
    # weighted likelihood, so coefficients agree to solver precision (1e-6 with ridge=0).
    import statsmodels.api as sm

    fits = [_logit_data(s, p=3) for s in range(4)]
    X = np.stack([f[0] for f in fits])
    y = np.stack([f[1] for f in fits])
    w = np.stack([f[2] for f in fits])
    res = fit_logistic_batch(X, y, w, ridge=0.0)
    assert res.converged.all()
    for b, (Xb, yb, wb) in enumerate(fits):
        ref = sm.GLM(yb, Xb, family=sm.families.Binomial(), freq_weights=wb).fit(tol=1e-12)
        np.testing.assert_allclose(res.coef[b], ref.params, rtol=1e-6, atol=1e-8)
        np.testing.assert_allclose(res.loglik[b], ref.llf, rtol=1e-9)


def test_logistic_proportions_equal_expanded_rows():
    # a binomial row (proportion y of w trials) equals w Bernoulli rows: same likelihood
    X, y, w = _logit_data(1, n=40)
    k = np.round(y * w)  # y is 0/1 here; build proportions by grouping pairs of rows
    Xg = X[::2]
    wg = w[::2] + w[1::2]
    Xg = Xg.copy()
    Xg[:, 1] = 0.5 * (X[::2, 1] + X[1::2, 1])
    Xe = np.repeat(Xg, 2, axis=0)
    we = np.column_stack([w[::2], w[1::2]]).ravel()
    ye = np.column_stack([y[::2], y[1::2]]).ravel()
    yg = (k[::2] + k[1::2]) / wg
    a = fit_logistic_batch(Xg[None], yg[None], wg[None], ridge=0.0)
    b = fit_logistic_batch(Xe[None], ye[None], we[None], ridge=0.0)
    np.testing.assert_allclose(a.coef, b.coef, rtol=1e-8)


def test_logistic_zero_weight_rows_are_padding():
    X, y, w = _logit_data(2)
    w2 = w.copy()
    w2[250:] = 0.0
    a = fit_logistic_batch(X[None], y[None], w2[None], ridge=0.0)
    b = fit_logistic_batch(X[None, :250], y[None, :250], w[None, :250], ridge=0.0)
    np.testing.assert_allclose(a.coef, b.coef, rtol=1e-9)


def test_logistic_separation_stays_finite():
    x = np.array([-2.0, -1.0, 1.0, 2.0])
    X = np.column_stack([np.ones(4), x])[None]
    y = np.array([[0, 0, 1, 1.0]])
    res = fit_logistic_batch(X, y, np.ones((1, 4)), ridge=1e-3, max_iter=200)
    assert np.isfinite(res.coef).all()
    p = predict_logistic(X, res.coef)
    assert p[0, 0] < 0.01 and p[0, 3] > 0.99


def test_logistic_errors_name_the_problem():
    X = np.ones((2, 5, 2))
    with pytest.raises(ModelError, match=r"y and w must have shape \(B, n\)"):
        fit_logistic_batch(X, np.zeros((2, 4)), np.ones((2, 4)))
    with pytest.raises(ModelError, match=r"\[0, 1\]"):
        fit_logistic_batch(X, np.full((2, 5), 2.0), np.ones((2, 5)))
    with pytest.raises(ModelError, match="must have shape \\(B, n, p\\)"):
        fit_logistic_batch(np.ones((5, 2)), np.zeros(5), np.ones(5))


def _ordinal_data(seed, n=400, K=4):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    cuts = np.sort(rng.normal(scale=1.0, size=K - 1)) + np.arange(K - 1) * 0.5
    latent = 1.2 * x + rng.logistic(size=n)
    y = np.searchsorted(cuts, latent)
    w = rng.integers(1, 3, size=n).astype(float)
    return x[:, None], y, w


@pytest.mark.parametrize("link", ["logit", "probit"])
def test_cumlogit_matches_statsmodels_orderedmodel(link):
    # reference: statsmodels OrderedModel(distr=link), P(Y<=k) = F(theta_k - x b); its
    # thresholds are parametrised as theta_0, log(theta_k - theta_{k-1}). OrderedModel has
    # no frequency weights, so rows are expanded by their integer weights. Tolerance 1e-5:
    # statsmodels stops its Newton at about that precision. Covariance: OrderedModel's
    # cov_params() (inverse of its finite-difference Hessian, mapped to the thresholds by
    # the Jacobian) against our analytic observed information; the finite differences are
    # good to a few 1e-5 relative, hence rtol 1e-4.
    from statsmodels.miscmodels.ordinal_model import OrderedModel

    K = 4
    data = [_ordinal_data(s, K=K) for s in range(3)]
    X = np.stack([d[0] for d in data])
    y = np.stack([d[1] for d in data])
    w = np.stack([d[2] for d in data])
    res = fit_cumlogit_batch(X, y, w, n_levels=K, link=link, ridge=0.0, covariance=True)
    assert res.converged.all() and res.cov is not None
    for b, (xb, yb, wb) in enumerate(data):
        reps = wb.astype(int)
        xe, ye = np.repeat(xb, reps, axis=0), np.repeat(yb, reps)
        ref = OrderedModel(ye, xe, distr=link).fit(method="newton", disp=False,
                                                    maxiter=200, tol=1e-9)
        slope = ref.params[0]
        th = ref.params[1:]
        cuts = np.cumsum(np.r_[th[0], np.exp(th[1:])])
        np.testing.assert_allclose(res.coef[b, : K - 1], cuts, atol=1e-5)
        np.testing.assert_allclose(res.coef[b, K - 1], slope, atol=1e-5)
        np.testing.assert_allclose(res.loglik[b], ref.llf, rtol=1e-8)
        # Jacobian of (theta_0, log increments, slope) -> (cut-points, slope), our order
        J = np.zeros((K, K))
        for k in range(K - 1):
            J[k, 1] = 1.0
            J[k, 2: k + 2] = np.exp(th[1: k + 1])
        J[K - 1, 0] = 1.0
        np.testing.assert_allclose(res.cov[b], J @ np.asarray(ref.cov_params()) @ J.T,
                                   rtol=1e-4)


def test_per_slope_ridge_is_a_normal_prior_on_each_slope():
    # A ridge of precision r_j on slope j maximises loglik - sum r_j b_j^2 / 2; a huge ridge
    # on one slope pins it near 0 while the other is left free: with r = (0, 1e12) the fit
    # equals the one-predictor fit without the pinned column (reference: that fit, 1e-6).
    X, y, w = _ordinal_data(7, K=3)
    rng = np.random.default_rng(7)
    X2 = np.concatenate([X, rng.normal(size=X.shape)], axis=1)
    pinned = fit_cumlogit_batch(X2[None], y[None], w[None], n_levels=3,
                                ridge=np.array([0.0, 1e12]))
    alone = fit_cumlogit_batch(X[None], y[None], w[None], n_levels=3, ridge=0.0)
    np.testing.assert_allclose(pinned.coef[0, :3], alone.coef[0], atol=1e-6)
    assert abs(pinned.coef[0, 3]) < 1e-6
    with pytest.raises(ModelError, match=r"ridge must be a number or have shape \(p,\)"):
        fit_cumlogit_batch(X2[None], y[None], w[None], ridge=np.ones(3))
    with pytest.raises(ModelError, match="ridge must be finite and >= 0"):
        fit_cumlogit_batch(X2[None], y[None], w[None], ridge=-1.0)
    with pytest.raises(ModelError, match="link must be one of"):
        fit_cumlogit_batch(X2[None], y[None], w[None], link="cloglog")


def test_cumlogit_two_levels_equals_logistic():
    # with K = 2 the cumulative logit is a logistic regression of P(Y = 1) with
    # intercept -theta_0 and the same slope (statsmodels' ordinal tests check the same).
    X, y, w = _logit_data(3)
    c = fit_cumlogit_batch(X[None, :, 1:], y[None], w[None], n_levels=2, ridge=0.0)
    lg = fit_logistic_batch(X[None], y[None], w[None], ridge=0.0)
    np.testing.assert_allclose(-c.coef[0, 0], lg.coef[0, 0], rtol=1e-7)
    np.testing.assert_allclose(c.coef[0, 1], lg.coef[0, 1], rtol=1e-7)


def test_cumlogit_probabilities_sum_to_one_and_are_ordered():
    K = 4
    x, y, w = _ordinal_data(5, K=K)
    res = fit_cumlogit_batch(x[None], y[None], w[None], n_levels=K)
    grid = np.linspace(-3, 3, 7)[None, :, None]
    pr = predict_cumlogit(grid, res.coef, K)
    np.testing.assert_allclose(pr.sum(-1), 1.0, rtol=1e-12)
    # positive slope: the chance of the top level rises with x
    assert np.all(np.diff(pr[0, :, K - 1]) > 0)
    assert np.all(np.diff(res.coef[0, : K - 1]) > 0)


def test_cumlogit_errors_name_the_problem():
    with pytest.raises(ModelError, match="integer levels"):
        fit_cumlogit_batch(np.ones((1, 3, 1)), np.array([[0.5, 1, 0]]), np.ones((1, 3)))
    with pytest.raises(ModelError, match="at least 2 levels"):
        fit_cumlogit_batch(np.ones((1, 3, 1)), np.zeros((1, 3)), np.ones((1, 3)))
    with pytest.raises(ModelError, match="n_levels=2"):
        fit_cumlogit_batch(np.ones((1, 3, 1)), np.array([[0, 1, 2]]), np.ones((1, 3)),
                           n_levels=2)


def test_warm_start_gives_the_same_fit_and_bad_start_is_named():
    X, y, w = _logit_data(4)
    cold = fit_logistic_batch(X[None], y[None], w[None], ridge=0.0)
    warm = fit_logistic_batch(X[None], y[None], w[None], ridge=0.0, start=cold.coef + 0.3)
    np.testing.assert_allclose(warm.coef, cold.coef, rtol=1e-7)
    with pytest.raises(ModelError, match=r"start must be finite with shape \(1, 2\)"):
        fit_logistic_batch(X[None], y[None], w[None], start=np.zeros((1, 3)))
    with pytest.raises(ModelError, match="start cut-points must be increasing"):
        fit_cumlogit_batch(np.ones((1, 3, 1)), np.array([[0, 1, 2]]), np.ones((1, 3)),
                           start=np.array([[1.0, 0.0, 0.0]]))


@pytest.mark.parametrize("link, cuts", [("logit", (40.0, 41.0)), ("probit", (8.0, 9.0))])
def test_loglik_keeps_its_precision_in_the_upper_tail(link, cuts):
    # P(Y = 1) = F(c_2) - F(c_1) with both far in the upper tail is a difference of two
    # numbers that round to 1 (it would come out 0, log -inf); the solver evaluates
    # F(-c_1) - F(-c_2) instead (F symmetric). Reference: scipy's expit / ndtr of the
    # negated arguments (e.g. the normal tail beyond 8 sd, 6.22e-16), rtol 1e-12.
    # max_iter=0 evaluates the log-likelihood at the start values.
    from scipy import special

    F = special.expit if link == "logit" else special.ndtr
    res = fit_cumlogit_batch(np.zeros((1, 2, 1)), np.array([[1, 1]]), None, n_levels=3,
                             link=link, start=np.array([[cuts[0], cuts[1], 0.0]]), max_iter=0)
    expected = 2.0 * np.log(F(-cuts[0]) - F(-cuts[1]))
    np.testing.assert_allclose(res.loglik[0], expected, rtol=1e-12)
