"""The histogram fast path against the exact unbinned fit (statsmodels as reference)."""

from __future__ import annotations

import numpy as np
import pytest

from impactlink.skill import _engine as E
from impactlink.skill import scores as S


def _data(seed=0, n=20000, n_years=10, discrete=False, K=2):
    rng = np.random.default_rng(seed)
    years = rng.integers(0, n_years, n)
    x = rng.normal(size=n)
    if discrete:
        x = np.round(x * 2) / 2  # 0.5 steps: few distinct values, each alone in a bin
    if K == 2:
        y = (rng.random(n) < 1 / (1 + np.exp(1.0 + 1.3 * x))).astype(int)
    else:
        y = np.searchsorted(np.array([0.5, 1.5, 2.5]), -1.3 * x + rng.logistic(size=n))
    layout = E.make_layout(np.arange(n_years), np.arange(n_years), n_years, K, k_inner=0,
                           n_boot=0, seed=0)
    return years, x, y, layout


def _fit(years, x, y, layout, n_bins, K):
    b = E.bin_codes(x, n_bins)
    h = E.build_hist(years, y, [x], b, np.zeros(x.size, int), n_blocks=layout.n_blocks,
                     n_bins_total=n_bins, n_cells=1, n_levels=K)
    coef, conv = E.fit_chunk([h], layout, use_cells=False, jobs_subset="main", prior=0.0,
                             ridge=0.0, max_iter=100, tol=1e-10)
    assert conv.all()
    return h, coef[0]


@pytest.mark.parametrize("discrete,n_bins,rtol", [(True, 200, 1e-7), (False, 200, 1e-3)])
def test_binned_fold_fits_match_exact_logistic(discrete, n_bins, rtol):
    # reference: statsmodels Logit on the unbinned training rows of each fold. With a
    # discrete index every value has its own bin, so the fits are the same likelihood
    # (agreement to solver precision). With a continuous index and 200 bins the bin means
    # stand in for the values: observed relative differences are ~5e-5, so 1e-3 is a
    # tolerance far below the sampling error of the slope (~2e-2 here).
    import statsmodels.api as sm

    years, x, y, layout = _data(discrete=discrete)
    _, coef = _fit(years, x, y, layout, n_bins, 2)
    for f in (0, 4, 9):
        m = years != f
        ref = sm.Logit(y[m], sm.add_constant(x[m])).fit(disp=0, tol=1e-12)
        # cumulative logit with K = 2: intercept = -theta_0
        np.testing.assert_allclose([-coef[f, 0], coef[f, 1]], ref.params, rtol=rtol)


def test_binned_ordinal_fold_fit_matches_exact_orderedmodel():
    # reference: statsmodels OrderedModel on the unbinned rows; tolerance as above
    from statsmodels.miscmodels.ordinal_model import OrderedModel

    years, x, y, layout = _data(n=6000, K=4, discrete=True)
    _, coef = _fit(years, x, y, layout, 200, 4)
    m = years != 2
    ref = OrderedModel(y[m], x[m, None], distr="logit").fit(method="newton", disp=False,
                                                             maxiter=200, tol=1e-12)
    cuts = np.cumsum(np.r_[ref.params[1], np.exp(ref.params[2:])])
    np.testing.assert_allclose(coef[2, :3], cuts, atol=1e-5)
    np.testing.assert_allclose(coef[2, 3], ref.params[0], atol=1e-5)


def test_out_of_fold_scores_match_row_by_row_scores():
    # the per-block losses of the fast path equal the scores module applied to the held-out
    # rows predicted at their own bin's mean value (tiny hand-checkable identity)
    years, x, y, layout = _data(n=3000, discrete=True)
    h, coef = _fit(years, x, y, layout, 200, 2)
    P_oof = E.predict_blocks(h, coef, use_cells=False, n_levels=2, jobs=layout.block_fold,
                             blocks=np.arange(layout.n_blocks))
    loss = E.block_losses(P_oof, h.N)
    b = E.bin_codes(x, 200)
    rmap = np.cumsum(np.bincount(b, minlength=200) > 0) - 1
    q = 1 - P_oof[years, rmap[b], 0]
    assert loss["sse"].sum() / x.size == pytest.approx(S.brier_score(y, q), rel=1e-10)
    assert loss["rps"].sum() == pytest.approx(loss["sse"].sum(), rel=1e-12)  # K = 2
    assert loss["ll"].sum() / x.size == pytest.approx(S.log_loss(y, q), rel=1e-9)


def test_weighted_auc_replicates_match_sklearn():
    from sklearn.metrics import roc_auc_score

    rng = np.random.default_rng(2)
    m = 300
    q = np.round(rng.random(m), 2)  # ties on purpose
    n1 = rng.integers(0, 4, m).astype(float)
    n0 = rng.integers(0, 6, m).astype(float)
    block = rng.integers(0, 7, m)
    W = np.vstack([np.ones(7), rng.integers(0, 3, 7)])
    got = E.auc_replicates(q, n1, n0, block, W)
    for r in range(2):
        yy = np.r_[np.ones(m), np.zeros(m)]
        ww = np.r_[n1, n0] * np.r_[W[r, block], W[r, block]]
        ref = roc_auc_score(yy, np.r_[q, q], sample_weight=ww)
        assert got[r] == pytest.approx(ref, rel=1e-12)


def test_rate_predictions_hand_case():
    # two folds (years); category counts per block: year 0 has 3 non-events + 1 event,
    # year 1 has 1 non-event + 1 event. Predicting year 0 from year 1 with no shrinkage:
    # base rate 1/2; year 1 from year 0: 1/4.
    N = np.array([[[3.0, 1.0]], [[1.0, 1.0]]])
    layout = E.make_layout(np.arange(2), np.arange(2), 2, 2, k_inner=0, n_boot=0, seed=0)
    P = E.rate_predictions(N, layout, shrink=0.0)
    np.testing.assert_allclose(P[:, 0, 1], [0.5, 0.25])


def test_block_rps_equals_scores_module_for_ordinal():
    # per-block RPS sums of the fast path (closed form) against ranked_probability_score
    # applied row by row (tiny hand-checkable case: 2 blocks, 3 rows, 4 levels)
    rng = np.random.default_rng(4)
    P = rng.dirichlet(np.ones(4), size=(2, 3))
    N = rng.integers(0, 3, size=(2, 3, 4)).astype(float)
    got = E.block_losses(P, N)["rps"]
    for g in range(2):
        y = np.repeat(np.tile(np.arange(4), 3), N[g].ravel().astype(int))
        rows = np.repeat(np.repeat(np.arange(3), 4), N[g].ravel().astype(int))
        ref = S.ranked_probability_score(y, P[g][rows]) * y.size
        assert got[g] == pytest.approx(ref, rel=1e-12)


def test_affine_sums_match_sums_of_standardized_rows():
    # reference: numpy's own bincount of (x - mean) / sd and of the counts, row by row; the
    # histogram is built from raw sums and the cell counts instead (build_hist, affine)
    years, x, y, layout = _data(seed=3, n=5000)
    x = 40.0 + 12.0 * x  # a percentile-like index: far from standardized
    mu, sd = x.mean(), x.std()
    z = (x - mu) / sd
    b = E.bin_codes(x, 50)
    cell = np.random.default_rng(1).integers(0, 3, x.size)
    kw = dict(n_blocks=layout.n_blocks, n_bins_total=50, n_cells=3, n_levels=2)
    hz = E.build_hist(years, y, [z], b, cell, **kw)
    hx = E.build_hist(years, y, [x], b, cell, affine=[(mu, sd)], **kw)
    np.testing.assert_array_equal(hx.N, hz.N)
    np.testing.assert_allclose(hx.S, hz.S, rtol=1e-9, atol=1e-9)
    row = (years * 50 + b) * 3 + cell
    ref = np.bincount(row, weights=z, minlength=layout.n_blocks * 150)
    np.testing.assert_allclose(hx.S[..., 0], ref.reshape(layout.n_blocks, 150)[:, hx.keep],
                               rtol=1e-9, atol=1e-9)


def test_bins_of_a_fixed_range_match_the_sample_range_and_clip_outside():
    x = np.random.default_rng(4).normal(size=1000)
    np.testing.assert_array_equal(E.bin_codes(x, 20), E.bin_codes(x, 20, x.min(), x.max()))
    # values beyond the range fall in the edge bins (predicting new rows)
    out = E.bin_codes(np.array([x.min() - 1, x.max() + 1]), 20, x.min(), x.max())
    assert out.tolist() == [0, 19]
    # floor of the scaled position (common practice: equal-width binning)
    np.testing.assert_array_equal(E.bin_codes(np.array([0.0, 0.49, 0.5, 1.0]), 2, 0.0, 1.0),
                                  [0, 0, 1, 1])
