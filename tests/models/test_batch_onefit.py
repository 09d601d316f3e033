"""One large cumulative link fit (rows sorted by level) agrees with the batched path.

Reference: statsmodels ``OrderedModel`` / ``GLM`` are the references of the batched path
(tests/models); here the single-fit path (B = 1, :mod:`impactlink.models._onefit`) is checked
against the batched path on the same rows (the fit stacked twice runs the batched code).
"""

import numpy as np
import pytest

from impactlink.models.batch import fit_cumlogit_batch


@pytest.mark.parametrize("K,link", [(2, "logit"), (4, "logit"), (3, "probit")])
def test_single_fit_equals_batched_fit(K, link):
    rng = np.random.default_rng(K)
    n = 3000
    X = rng.normal(size=(n, 2))
    eta = 0.8 * X[:, 0] - 0.5 * X[:, 1] + rng.logistic(size=n)
    y = (eta[:, None] > np.linspace(-0.5, 1.5, K - 1)[None]).sum(1).astype(float)
    w = rng.integers(1, 4, n).astype(float)
    one = fit_cumlogit_batch(X[None], y[None], w[None], n_levels=K, link=link, ridge=0.0,
                             max_iter=100, tol=1e-10, covariance=True)
    two = fit_cumlogit_batch(np.stack([X, X]), np.stack([y, y]), np.stack([w, w]),
                             n_levels=K, link=link, ridge=0.0, max_iter=100, tol=1e-10,
                             covariance=True)
    np.testing.assert_allclose(one.coef[0], two.coef[0], rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(one.cov[0], two.cov[0], rtol=1e-7, atol=1e-12)
    assert one.loglik[0] == pytest.approx(two.loglik[0], rel=1e-12)
