"""The contrast stage's threads and its leaner numerics.

- the same numbers with ``jobs=1`` and ``jobs=2`` (county contrasts, leave-one-year-out
  folds, pair distances, bootstrap refits of the decomposition);
- the cluster-robust logistic fit vs statsmodels' ``GLM(...).fit(cov_type="cluster")``;
- the folds on two threads vs one statsmodels ``GLM`` fit per held-out year;
- the RMS pair distances by the norm identity vs :func:`scipy.spatial.distance.cdist`;
- the county-sorted refit (segment sums) vs statsmodels ``GLM`` with frequency weights.
"""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from contrast_world import make_cube, make_world

from impactlink.contrast import contrast_counties, county_contrast, fit_trait_model
from impactlink.contrast.foldlogit import year_out_probabilities
from impactlink.contrast.logitfit import cluster_robust_fit, logit_fit
from impactlink.contrast.pairwise import RMS_BLOCK_ROWS, pairwise_mean_distance
from impactlink.contrast.traitmodel import penalised_fit, refit_rows
from impactlink.link.target import FeatureRule, Target


def _weekly_world(seed=0, n_counties=30, n_years=12, weeks=20):
    """County-week rows, years unsorted in the frame (county-major), three traits."""
    rng = np.random.default_rng(seed)
    ids = [f"k{i:02d}" for i in range(n_counties)]
    yrs = np.arange(2001, 2001 + n_years)
    cid = np.repeat(ids, n_years * weeks)
    year = np.tile(np.repeat(yrs, weeks), n_counties)
    season = np.tile(np.arange(weeks), n_counties * n_years) + 20
    traits = pd.DataFrame({"county_id": ids, "storage_days": rng.gamma(4.0, 20.0, n_counties),
                           "irrigated_share": rng.uniform(0, 0.6, n_counties),
                           "soil_whc_mm": rng.uniform(80, 200, n_counties)})
    z = ((traits["storage_days"] - traits["storage_days"].mean())
         / traits["storage_days"].std()).to_numpy()
    x = rng.standard_normal(cid.size)
    eta = -1.2 - 0.9 * x + 0.5 * np.repeat(z, n_years * weeks)
    level = (rng.random(cid.size) < 1 / (1 + np.exp(-eta))).astype(int)
    frame = pd.DataFrame({"unit_id": cid, "county_id": cid, "region": "north", "year": year,
                          "season": season, "level": level})
    frame["time"] = pd.to_datetime(frame["year"].astype(str) + "-06-01")
    target = Target(name="restrictions:state", impact="restrictions", kind="binary",
                    grain="county_week", role="state", frame=frame, levels=("no", "yes"))
    return target, x, traits


def _assert_same_frames(a: pd.DataFrame, b: pd.DataFrame):
    assert list(a.columns) == list(b.columns) and a.shape == b.shape
    for c in a.columns:
        if pd.api.types.is_numeric_dtype(a[c]) and not pd.api.types.is_bool_dtype(a[c]):
            np.testing.assert_allclose(a[c].to_numpy(float), b[c].to_numpy(float),
                                       rtol=1e-10, atol=0)
        else:
            assert (a[c].astype(str).to_numpy() == b[c].astype(str).to_numpy()).all()


def test_county_contrast_same_numbers_on_one_and_two_threads():
    target, x, traits = _weekly_world(1)
    one = county_contrast(target, x, traits, n_boot=50, seed=4, jobs=1)
    two = county_contrast(target, x, traits, n_boot=50, seed=4, jobs=2)
    for a, b in ((one.terms, two.terms), (one.county_excess, two.county_excess),
                 (one.pairs, two.pairs), (one.to_frame(), two.to_frame())):
        _assert_same_frames(a, b)
    assert one.skill == pytest.approx(two.skill, rel=1e-10)


def test_contrast_counties_same_numbers_on_one_and_two_threads():
    target, x, traits, counties, truth = make_world(0)
    target = replace(target, rule=FeatureRule(reference="season_week", season_week=34))
    cube = make_cube(truth)
    one = contrast_counties(target, cube, ("spei", 4, 0), traits, counties, n_boot=40, seed=2,
                            jobs=1)
    two = contrast_counties(target, cube, ("spei", 4, 0), traits, counties, n_boot=40, seed=2,
                            jobs=2)
    for a, b in ((one.parts, two.parts), (one.lookalikes, two.lookalikes),
                 (one.summary, two.summary)):
        _assert_same_frames(a, b)
    # a region partner: the region side is rebuilt from each replicate's model on its thread
    kw = dict(pair=("t0", "region"), period=(1990, 1999), n_boot=30, seed=5)
    r1 = contrast_counties(target, cube, ("spei", 4, 0), traits, counties, jobs=1, **kw)
    r2 = contrast_counties(target, cube, ("spei", 4, 0), traits, counties, jobs=2, **kw)
    _assert_same_frames(r1.parts, r2.parts)


def test_cluster_robust_fit_matches_statsmodels_glm_cluster():
    # reference: statsmodels GLM Binomial, fit(cov_type="cluster", use_correction=True,
    # use_t=True): CRV1 with the G/(G-1) (n-1)/(n-k) correction and t with G - 1 df
    import statsmodels.api as sm

    rng = np.random.default_rng(8)
    n, G = 6000, 40
    groups = rng.integers(0, G, n)
    u = rng.normal(0, 0.5, G)[groups]  # shared risk within a cluster
    X = np.column_stack([np.ones(n), rng.normal(size=(n, 3))])
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-(-1.0 + X[:, 1:] @ [0.8, -0.4, 0.2] + u)))
         ).astype(float)
    got = cluster_robust_fit(y, np.asfortranarray(X), logit_fit(y, X), groups, G)
    ref = sm.GLM(y, X, family=sm.families.Binomial()).fit(
        cov_type="cluster", cov_kwds={"groups": groups, "use_correction": True}, use_t=True,
        tol=1e-12)
    np.testing.assert_allclose(got.params, ref.params, rtol=1e-9)
    np.testing.assert_allclose(got.bse, ref.bse, rtol=1e-9)
    np.testing.assert_allclose(got.pvalues, ref.pvalues, rtol=1e-7, atol=1e-14)


def test_year_out_folds_on_two_threads_match_statsmodels_and_one_thread():
    # reference: one statsmodels GLM Binomial fit per held-out year on its training rows
    import statsmodels.api as sm

    rng = np.random.default_rng(12)
    years = rng.choice(np.arange(1990, 2002), size=3000)
    X = np.column_stack([np.ones(years.size), rng.normal(size=(years.size, 2))])
    y = (rng.uniform(size=years.size) < 1 / (1 + np.exp(-(-0.8 + X[:, 1:] @ [1.0, -0.5])))
         ).astype(float)
    start = logit_fit(y, X)
    one = year_out_probabilities(y, X, years, start, jobs=1)
    two = year_out_probabilities(y, X, years, start, jobs=2)
    assert np.array_equal(one, two)  # bit for bit: a fold's arithmetic is thread-free
    for yr in np.unique(years):
        te = years == yr
        ref = sm.GLM(y[~te], X[~te], family=sm.families.Binomial()).fit(tol=1e-12)
        np.testing.assert_allclose(two[te], ref.predict(X[te]), rtol=1e-9)


def test_rms_distances_by_norm_identity_match_cdist_across_blocks():
    # reference: scipy.spatial.distance.cdist(euclidean) / sqrt(L); more rows than one block,
    # an offset far from 0 (the centring keeps the cancellation small) and repeated rows
    from scipy.spatial.distance import cdist

    rng = np.random.default_rng(21)
    n, L = RMS_BLOCK_ROWS * 2 + 37, 13
    v = rng.normal(size=(n, L)) + 50.0
    v[5] = v[700]  # an identical pair: distance 0 up to rounding
    want = cdist(v, v, "euclidean") / np.sqrt(L)
    one = pairwise_mean_distance(v, "rms", jobs=1)
    two = pairwise_mean_distance(v, "rms", jobs=2)
    assert np.array_equal(one, two)
    far = want > 0.1
    np.testing.assert_allclose(one[far], want[far], rtol=1e-12)
    # near zero the identity's absolute error is ~sqrt(eps) times the centred norm (docstring)
    np.testing.assert_allclose(one, want, rtol=0, atol=1e-7)
    assert (np.diag(one) == 0).all() and (one >= 0).all() and one[5, 700] < 1e-7
    # the abs path is exact and thread-free as well
    a1 = pairwise_mean_distance(v[:300], "abs", jobs=1, block_bytes=8 * 300 * L * 7)
    a2 = pairwise_mean_distance(v[:300], "abs", jobs=2, block_bytes=8 * 300 * L * 7)
    assert np.array_equal(a1, a2)
    np.testing.assert_allclose(a1, cdist(v[:300], v[:300], "cityblock") / L, rtol=1e-12,
                               atol=1e-13)


def test_county_sorted_refit_rows_match_statsmodels_with_frequency_weights():
    # with tau -> 0 the county effects vanish: the weighted fixed part is the ordinary
    # logistic fit with frequency weights (statsmodels GLM Binomial, freq_weights); the
    # sorted rows take the segment-sum path of penalised_fit
    import statsmodels.api as sm

    target, x, traits, counties, _ = make_world(5)
    model = fit_trait_model(target, x, traits, counties)
    prep = refit_rows(model)
    assert (np.diff(prep.codes) >= 0).all()
    w = np.random.default_rng(0).integers(0, 3, len(model.rows)).astype(float)
    theta = penalised_fit(prep.design, prep.codes, prep.y, w[prep.order], 1e-6)
    ref = sm.GLM(prep.y, prep.design, family=sm.families.Binomial(),
                 freq_weights=w[prep.order]).fit()
    p = prep.design.shape[1]
    np.testing.assert_allclose(theta[:p], ref.params, rtol=1e-6, atol=1e-8)
    # and the same step as the bincount path on the unsorted rows
    shuffled = np.random.default_rng(1).permutation(len(prep.y))
    theta_u = penalised_fit(prep.design[shuffled], prep.codes[shuffled], prep.y[shuffled],
                            w[prep.order][shuffled], 1e-6)
    np.testing.assert_allclose(theta, theta_u, rtol=1e-9, atol=1e-12)


def test_group_quantiles_are_numpy_quantile_per_group():
    # reference: numpy.quantile (default "linear" method) on each group's values, bit for bit;
    # unequal group sizes (one row included), ties, groups not contiguous
    from impactlink.contrast.pairwise import group_quantiles

    rng = np.random.default_rng(30)
    q = np.linspace(0.05, 0.95, 19)
    sizes = np.array([1, 2, 3, 17, 40, 5])
    groups = rng.permutation(np.repeat(np.arange(sizes.size), sizes))
    v = np.round(rng.normal(size=groups.size), 1)  # rounded: many ties
    got = group_quantiles(v, groups, sizes, q)
    want = np.vstack([np.quantile(v[groups == g], q) for g in range(sizes.size)])
    assert np.array_equal(got, want)
