"""The contrast stage's national-scale numerics agree with general-purpose libraries.

- the trait model's Newton step by block elimination vs :func:`numpy.linalg.solve` on the
  full (p + J) x (p + J) system :func:`impactlink.contrast.traitmodel.penalised_fit` used
  to build;
- the row-blocked pairwise distances vs :func:`scipy.spatial.distance.cdist`;
- the leave-one-year-out Brier scores vs one statsmodels ``GLM`` fit per held-out year.
"""

import numpy as np
import pytest

from impactlink.contrast.traitmodel import _arrow_solve


def _dense(a, cross, d):
    p, J = a.shape[0], d.size
    h = np.zeros((p + J, p + J))
    h[:p, :p] = a
    h[p:, :p] = cross
    h[:p, p:] = cross.T
    h[p:, p:] = np.diag(d)
    return h


def test_arrow_solve_matches_dense_solve():
    rng = np.random.default_rng(7)
    n, p, J = 4000, 6, 150
    X = np.column_stack([np.ones(n), rng.normal(size=(n, p - 1))])
    codes = rng.integers(0, J, n)
    v = rng.uniform(0.01, 0.25, n)  # mu (1 - mu) weights of a logistic fit
    dv = X * v[:, None]
    a = dv.T @ X
    cross = np.column_stack([np.bincount(codes, weights=dv[:, c], minlength=J)
                             for c in range(p)])
    d = np.bincount(codes, weights=v, minlength=J) + 1.0 / 0.7**2
    g = rng.normal(size=p + J)
    want = np.linalg.solve(_dense(a, cross, d), g)
    got = _arrow_solve(a, cross, d, g[:p], g[p:])
    np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12)


def test_arrow_solve_singular_fixed_part_raises_like_dense():
    # two identical design columns: the Schur complement is singular, as the dense matrix is
    rng = np.random.default_rng(3)
    n, J = 500, 20
    x = rng.normal(size=n)
    X = np.column_stack([np.ones(n), x, x])
    codes = rng.integers(0, J, n)
    v = np.full(n, 0.2)
    dv = X * v[:, None]
    cross = np.column_stack([np.bincount(codes, weights=dv[:, c], minlength=J)
                             for c in range(3)])
    d = np.bincount(codes, weights=v, minlength=J) + 1.0
    try:
        _arrow_solve(dv.T @ X, cross, d, np.ones(3), np.ones(J))
    except np.linalg.LinAlgError:
        return
    raise AssertionError("a singular fixed part should raise LinAlgError")


def test_pairwise_mean_distance_matches_scipy_cdist_in_blocks():
    # reference: scipy.spatial.distance.cdist (cityblock and euclidean), scaled by 1/L and
    # 1/sqrt(L); a tiny block size forces many row blocks
    from scipy.spatial.distance import cdist

    from impactlink.contrast.pairwise import pairwise_mean_distance

    rng = np.random.default_rng(11)
    v = rng.normal(size=(57, 13))
    L = v.shape[1]
    for kind, metric, scale in (("abs", "cityblock", L), ("rms", "euclidean", np.sqrt(L))):
        got = pairwise_mean_distance(v, kind, block_bytes=8 * 57 * 13 * 5)
        np.testing.assert_allclose(got, cdist(v, v, metric) / scale, rtol=1e-12, atol=1e-14)
        one_shot = pairwise_mean_distance(v, kind, block_bytes=2**40)
        assert np.array_equal(got, one_shot)  # blocks change nothing, bit for bit


def test_leave_one_year_out_brier_matches_statsmodels_fold_fits():
    import statsmodels.api as sm

    from impactlink.contrast.compare import _brier_cv

    rng = np.random.default_rng(5)
    n_years, per = 12, 300
    years = np.repeat(np.arange(2000, 2000 + n_years), per)
    xv = rng.normal(size=years.size)
    z = rng.normal(size=(years.size, 2))
    eta = -1.5 - 1.0 * xv + 0.6 * z[:, 0]
    y = (rng.uniform(size=years.size) < 1 / (1 + np.exp(-eta))).astype(float)
    got = _brier_cv(y, xv, z, years, 0, 0.1, 0)
    d0 = np.column_stack([np.ones_like(xv), xv])
    d1 = np.column_stack([d0, z])
    p0, p1 = np.empty(y.size), np.empty(y.size)
    for yr in np.unique(years):
        te = years == yr
        for d, p in ((d0, p0), (d1, p1)):
            res = sm.GLM(y[~te], d[~te], family=sm.families.Binomial()).fit()
            p[te] = res.predict(d[te])
    assert got["brier_index"] == pytest.approx(np.mean((p0 - y) ** 2), rel=1e-9)
    assert got["brier_traits"] == pytest.approx(np.mean((p1 - y) ** 2), rel=1e-9)


def test_year_out_probabilities_match_statsmodels_per_fold():
    """The shared year-sorted design and the first step from per-year sums give each fold's
    maximum-likelihood fit (statsmodels ``GLM`` Binomial on the fold's training rows); a
    year whose training rows hold one outcome gets no fit (NaN). Years are unsorted and of
    unequal size."""
    import statsmodels.api as sm

    from impactlink.contrast.compare import _logit_fit
    from impactlink.contrast.foldlogit import year_out_probabilities

    rng = np.random.default_rng(11)
    years = rng.choice(np.arange(1990, 2000), size=2500, p=np.r_[[0.05] * 2, [0.1125] * 8])
    X = np.column_stack([np.ones(years.size), rng.normal(size=(years.size, 3))])
    y = (rng.uniform(size=years.size) < 1 / (1 + np.exp(-(-1.0 + X[:, 1:] @ [1.0, -0.5, 0.3])))
         ).astype(float)
    got = year_out_probabilities(y, X, years, _logit_fit(y, X))
    for yr in np.unique(years):
        te = years == yr
        ref = sm.GLM(y[~te], X[~te], family=sm.families.Binomial()).fit(tol=1e-12)
        np.testing.assert_allclose(got[te], ref.predict(X[te]), rtol=1e-9)
    # events only in 1995: without 1995 the training rows are all 0 -> no fit there
    y1 = np.where(years == 1995, y, 0.0)
    got1 = year_out_probabilities(y1, X, years, _logit_fit(y1, X), max_iter=20)
    assert np.isnan(got1[years == 1995]).all() and np.isfinite(got1[years != 1995]).all()
