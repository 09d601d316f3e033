"""Threshold audit: expected vs observed class shares, bootstrap intervals, local thresholds."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from impactlink.indices import IndexCube, IndicesError, threshold_audit

STAGES = ["watch", "warning", "emergency"]


def _cube(values, start="1991-01-07"):
    values = np.asarray(values, dtype=float)
    weeks = pd.date_range(start, periods=values.shape[0], freq="7D")
    ids = tuple(f"C{i}" for i in range(values.shape[1]))
    return IndexCube(weeks=weeks, county_ids=ids, arrays={("spi", 13): values})


def test_expected_shares_are_wmo_class_probabilities():
    # WMO (2012) SPI User Guide / McKee et al. (1993) class probabilities of the standard
    # normal: moderately dry (-1.0 to -1.49) 9.2 %, severely dry (-1.5 to -1.99) 4.4 %,
    # extremely dry (<= -2.0) 2.3 %. Printed to 0.1 %, hence the tolerance of 0.05 %.
    rng = np.random.default_rng(0)
    res = threshold_audit(_cube(rng.normal(size=(520, 2))), index="spi", scale_weeks=13,
                          thresholds=[-1.0, -1.5, -2.0], stage_names=STAGES, n_boot=0)
    f = res.to_frame()
    exp = f[f["county_id"] == "C0"].set_index("stage")["expected_share"]
    assert exp["watch"] == pytest.approx(0.092, abs=5e-4)
    assert exp["warning"] == pytest.approx(0.044, abs=5e-4)
    assert exp["emergency"] == pytest.approx(0.023, abs=5e-4)


def test_hand_computed_counts_and_local_thresholds():
    # 10 weeks, one county. Stages: watch (-1, 0], warning (-inf, -1].
    x = np.array([-2.0, -1.5, -0.5, -0.2, 0.1, 0.3, 0.5, 1.0, 1.2, 2.0])[:, None]
    res = threshold_audit(_cube(x), index="spi", scale_weeks=13, thresholds=[0.0, -1.0],
                          stage_names=["watch", "warning"], n_boot=0)
    f = res.to_frame().set_index("stage")
    assert f.loc["watch", "observed_share"] == pytest.approx(0.2)
    assert f.loc["warning", "observed_share"] == pytest.approx(0.2)
    assert f.loc["warning", "ratio"] == pytest.approx(0.2 / stats.norm.cdf(-1.0))
    assert f.loc["watch", "weeks"] == 10
    # inverted-CDF quantile: smallest x with F_n(x) >= p. p = 0.5 -> 5th value = 0.1;
    # p = Phi(-1) = 0.1587 -> 2nd value = -1.5
    assert f.loc["watch", "local_threshold"] == pytest.approx(0.1)
    assert f.loc["warning", "local_threshold"] == pytest.approx(-1.5)


def test_planted_bias_is_recovered():
    # Planted signal: county C1 is shifted 0.5 towards dry. Its ratios for dry stages exceed 1
    # with intervals excluding 1, and its local thresholds sit ~0.5 below the nominal ones;
    # C0 (standard normal) has intervals containing 1.
    rng = np.random.default_rng(42)
    n = 52 * 40
    x = rng.normal(size=(n, 2))
    x[:, 1] -= 0.5
    res = threshold_audit(_cube(x), index="spi", scale_weeks=13,
                          thresholds=[-0.5, -1.0, -1.5], stage_names=STAGES, n_boot=300, seed=1)
    f = res.to_frame().set_index(["county_id", "stage"])
    for s, t in zip(STAGES, [-0.5, -1.0, -1.5]):
        assert f.loc[("C1", s), "ratio_lo"] > 1.0
        assert f.loc[("C0", s), "ratio_lo"] < 1.0 < f.loc[("C0", s), "ratio_hi"]
        assert f.loc[("C1", s), "local_threshold"] == pytest.approx(t - 0.5, abs=0.1)
        assert (f.loc[("C1", s), "local_threshold_lo"] <= f.loc[("C1", s), "local_threshold"]
                <= f.loc[("C1", s), "local_threshold_hi"])


def test_drift_between_early_and_late_periods():
    rng = np.random.default_rng(3)
    x = rng.normal(size=(52 * 30, 1))
    x[52 * 15:] -= 0.7  # the second half is drier
    res = threshold_audit(_cube(x), index="spi", scale_weeks=13, thresholds=[-1.0],
                          stage_names=["dry"], early=(1991, 2005), late=(2006, 2020), n_boot=200)
    f = res.to_frame().set_index("period")
    assert set(f.index) == {"full", "early", "late"}
    assert f.loc["late", "ratio_lo"] > f.loc["early", "ratio_hi"]
    cf = res.to_county_frame(period="late")
    assert list(cf.columns) == ["county_id", "observed_share_dry", "ratio_dry",
                                "local_threshold_dry"]


def test_percentile_kind_equals_value_kind():
    rng = np.random.default_rng(5)
    cube = _cube(rng.normal(size=(52 * 20, 3)))
    pct = threshold_audit(cube, index="spi", scale_weeks=13, thresholds=[30, 20, 10],
                          stage_names=STAGES, kind="percentile", n_boot=0).to_frame()
    val = threshold_audit(cube, index="spi", scale_weeks=13,
                          thresholds=list(stats.norm.ppf([0.3, 0.2, 0.1])), stage_names=STAGES,
                          n_boot=0).to_frame()
    np.testing.assert_allclose(pct["observed_share"], val["observed_share"])
    np.testing.assert_allclose(pct["expected_share"], [0.1, 0.1, 0.1] * 3, atol=1e-12)
    np.testing.assert_allclose(pct["local_threshold"], 100 * stats.norm.cdf(val["local_threshold"]))


def test_above_direction_mirrors_below():
    rng = np.random.default_rng(6)
    x = rng.normal(size=(52 * 10, 2))
    below = threshold_audit(_cube(-x), index="spi", scale_weeks=13, thresholds=[-1.0, -2.0],
                            stage_names=["a", "b"], n_boot=50, seed=2).to_frame()
    above = threshold_audit(_cube(x), index="spi", scale_weeks=13, thresholds=[1.0, 2.0],
                            stage_names=["a", "b"], direction="above", n_boot=50,
                            seed=2).to_frame()
    np.testing.assert_allclose(above["ratio"], below["ratio"])
    np.testing.assert_allclose(above["ratio_hi"], below["ratio_hi"])
    np.testing.assert_allclose(above["local_threshold"], -below["local_threshold"])
    np.testing.assert_allclose(above["local_threshold_lo"], -below["local_threshold_hi"])


def test_bootstrap_is_deterministic_with_seed():
    rng = np.random.default_rng(7)
    cube = _cube(rng.normal(size=(52 * 10, 2)))
    kw = dict(index="spi", scale_weeks=13, thresholds=[-1.0], stage_names=["dry"], n_boot=100)
    a = threshold_audit(cube, seed=3, **kw).to_frame()
    b = threshold_audit(cube, seed=3, **kw).to_frame()
    pd.testing.assert_frame_equal(a, b)


def test_bootstrap_on_two_threads_gives_the_same_table():
    # many small replicate chunks (max_cells forces several), filled on two threads
    from impactlink.indices import audit as A

    rng = np.random.default_rng(8)
    x = rng.normal(size=(52 * 12, 5))
    yidx = np.repeat(np.arange(12), 52)
    mult = rng.poisson(1.0, size=(40, 12)).astype(float)
    cum_p = np.array([0.1, 0.02])
    one = A._bootstrap_local_thresholds(x, yidx, 12, cum_p, mult, max_cells=5 * 256 * 3)
    two = A._bootstrap_local_thresholds(x, yidx, 12, cum_p, mult, max_cells=5 * 256 * 3,
                                        threads=2)
    np.testing.assert_array_equal(one, two)
    cube = _cube(x)
    kw = dict(index="spi", scale_weeks=13, thresholds=[-1.0], stage_names=["dry"], n_boot=60)
    pd.testing.assert_frame_equal(threshold_audit(cube, seed=3, **kw).to_frame(),
                                  threshold_audit(cube, seed=3, jobs=2, **kw).to_frame())


@pytest.mark.parametrize("kwargs,match", [
    (dict(thresholds=[-1.0, -2.0], stage_names=["a"]), "equal length"),
    (dict(thresholds=[-2.0, -1.0], stage_names=["a", "b"]), "strictly ordered"),
    (dict(thresholds=[0.0, 20.0], stage_names=["a", "b"], kind="percentile"), "percentiles"),
    (dict(thresholds=[-1.0], stage_names=["a"], index="spei"), "no index"),
    (dict(thresholds=[-1.0], stage_names=["a"], kind="zscore"), "kind"),
])
def test_audit_error_messages(kwargs, match):
    cube = _cube(np.zeros((60, 1)))
    args = dict(index="spi", scale_weeks=13, n_boot=0)
    args.update(kwargs)
    with pytest.raises(IndicesError, match=match):
        threshold_audit(cube, **args)


def test_histogram_bootstrap_quantiles_match_exact_weighted_quantiles():
    # The bootstrap local thresholds use per-year histograms (256 bins); they must agree
    # with exact weighted quantiles of the same replicates to within one bin width.
    from impactlink.indices.audit import _bootstrap_local_thresholds, _local_thresholds

    rng = np.random.default_rng(11)
    x = np.clip(rng.normal(size=(52 * 12, 4)), -3.09, 3.09)
    yidx = np.repeat(np.arange(12), 52)
    mult = np.zeros((40, 12))
    np.add.at(mult, (np.arange(40)[:, None], rng.integers(0, 12, (40, 12))), 1.0)
    cum_p = stats.norm.cdf([-0.5, -1.0, -1.5])
    exact = _local_thresholds(x, yidx, 12, cum_p, mult)
    approx = _bootstrap_local_thresholds(x, yidx, 12, cum_p, mult)
    width = (x.max() - x.min()) / 256
    assert np.max(np.abs(exact - approx)) <= width


def test_missing_weeks_are_left_out():
    # Spin-up weeks (NaN) count neither as weeks nor as stage weeks; no numpy warnings.
    import warnings

    rng = np.random.default_rng(9)
    x = rng.normal(size=(52 * 10, 2))
    x[:25] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        f = threshold_audit(_cube(x), index="spi", scale_weeks=13, thresholds=[-1.0],
                            stage_names=["dry"], n_boot=50).to_frame()
    assert f["weeks"].tolist() == [52 * 10 - 25] * 2
    expected = np.mean(x[25:] <= -1.0, axis=0)
    np.testing.assert_allclose(f["observed_share"], expected)
