"""Impact curves and crossings: hand-computed cases, planted-signal coverage, errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from impact_targets import make_target, simulate_binary
from scipy import special

from impactlink.errors import ModelError
from impactlink.models import crossings, fit_impact_model, impact_curves, plot_impact_curves
from impactlink.models._design import DesignSpec
from impactlink.models.curves import CROSSING_COLUMNS, CURVE_COLUMNS
from impactlink.models.fit import ImpactModel


def _hand_model(beta=-2.0, cuts=(1.0,), cov=None, levels=("none", "impact")):
    names = ["x"] + [f"cut_{k + 1}" for k in range(len(cuts))]
    m = len(names)
    cov = np.eye(m) * 0.01 if cov is None else cov
    return ImpactModel(
        ok=True, reason="", method="hand", params=pd.Series([beta, *cuts], index=names),
        cov=pd.DataFrame(cov, index=names, columns=names), n=100, events=30,
        levels=levels, link="logit", predictors=("x",), kind="binary",
        target="t", impact="t", design=DesignSpec(features=("x",), columns=("x",),
                                                   reference={"x": 0.0}),
        x_range=(-3.0, 3.0),
    )


def test_curve_and_interval_by_hand():
    # P = expit(-2 x - 1); var(eta) = 0.01 x^2 + 0.01 (independent x and cut);
    # 90 % interval expit(eta -+ 1.6449 sd). Hand formula, so tolerance 1e-12.
    m = _hand_model()
    c = impact_curves(m, grid=np.array([-1.0, 0.0, 0.5]), meta={"index": "spi",
                                                                 "scale_weeks": 13})
    assert list(c.columns) == list(CURVE_COLUMNS)
    eta = -2.0 * c["x"] - 1.0
    sd = np.sqrt(0.01 * c["x"] ** 2 + 0.01)
    z = special.ndtri(0.95)
    np.testing.assert_allclose(c["prob"], special.expit(eta), rtol=1e-12)
    np.testing.assert_allclose(c["prob_lo"], special.expit(eta - z * sd), rtol=1e-12)
    np.testing.assert_allclose(c["prob_hi"], special.expit(eta + z * sd), rtol=1e-12)
    assert set(c["index"]) == {"spi"} and set(c["scale_weeks"]) == {13}


def test_crossings_by_hand():
    # expit(-2 x - 1) = p  <=>  x = -(logit(p) + 1) / 2: 0.5 -> -0.5, 0.25 -> 0.0493,
    # 0.10 -> 0.5986. The 2001-point grid with linear interpolation of the linear
    # predictor is exact for a linear model (1e-9).
    m = _hand_model()
    cr = crossings(m)
    assert list(cr.columns) == list(CROSSING_COLUMNS)
    expect = -(special.logit(np.array([0.10, 0.25, 0.50])) + 1.0) / 2.0
    np.testing.assert_allclose(cr["x_cross"], expect, atol=1e-9)
    assert np.all(cr["x_lo"] < cr["x_cross"]) and np.all(cr["x_cross"] < cr["x_hi"])
    # the interval ends are where the band edges cross p
    z = special.ndtri(0.95)
    for row in cr.itertuples():
        for xe in (row.x_lo, row.x_hi):
            eta, sd = -2 * xe - 1, np.sqrt(0.01 * xe**2 + 0.01)
            edges = special.expit([eta - z * sd, eta + z * sd])
            assert np.min(np.abs(edges - row.prob_level)) < 1e-5


def test_crossing_outside_data_range_is_nan_with_note():
    m = _hand_model(beta=-0.2, cuts=(4.0,))  # P <= expit(0.6 - 4) ~ 0.03 on [-3, 3]
    cr = crossings(m, probs=(0.5,))
    assert np.isnan(cr["x_cross"].iloc[0]) and np.isnan(cr["x_lo"].iloc[0])
    assert "stays below 0.5" in cr["note"].iloc[0]


def test_ordinal_curves_are_nested_and_rise_as_index_falls():
    rng = np.random.default_rng(21)
    x = rng.normal(size=800)
    y = np.digitize(-1.3 * x + rng.logistic(size=800), [0.5, 2.0])
    m = fit_impact_model(make_target(y, levels=("none", "watch", "severe")), x)
    c = impact_curves(m)
    assert len(c) == 2 * 101 and set(c["level_label"]) == {"watch", "severe"}
    p1 = c[c["level_k"] == 1]["prob"].to_numpy()
    p2 = c[c["level_k"] == 2]["prob"].to_numpy()
    assert np.all(p1 >= p2) and np.all(np.diff(p1) < 0)
    cr = crossings(m)
    # for every probability the worse level is crossed at a drier (lower) index value
    w = cr.pivot(index="prob_level", columns="level_k", values="x_cross")
    assert np.all(w[2] < w[1])


def test_curve_interval_covers_true_curve_over_seeds():
    # Planted signal: P(impact | x) = expit(-1 - 1.5 x), x ~ N(0, 1), 300 rows per seed.
    # Over 20 seeds x 13 grid points in [-2, 1] the pointwise 90 % intervals should cover the
    # true curve about 90 % of the time. Points within one seed are strongly correlated, so
    # the effective number of independent checks is nearer 20-40 than 260; with 20 seeds the
    # coverage estimate has a standard error of roughly 0.05-0.07, and 0.75 is about 2-3 of
    # those below nominal. Coverage 1.0 with absurdly wide bands is excluded by the width check.
    grid = np.linspace(-2.0, 1.0, 13)
    truth = special.expit(-1.0 - 1.5 * grid)
    covered, widths = [], []
    for seed in range(20):
        x, y = simulate_binary(300, slope=-1.5, intercept=-1.0, seed=100 + seed)
        m = fit_impact_model(make_target(y), x)
        c = impact_curves(m, grid=grid)
        covered.append((c["prob_lo"] <= truth) & (truth <= c["prob_hi"]))
        widths.append(c["prob_hi"] - c["prob_lo"])
    coverage = float(np.mean(np.concatenate(covered)))
    assert 0.75 <= coverage <= 0.99
    assert float(np.mean(np.concatenate(widths))) < 0.2


def test_curves_per_region_and_county():
    rng = np.random.default_rng(22)
    cid = np.repeat([f"c{i}" for i in range(9)], 100)
    region = np.repeat(["east", "west", "south"] * 3, 100)
    x = rng.normal(size=cid.size)
    y = (rng.uniform(size=x.size) < special.expit(-1 - 1.5 * x)).astype(int)
    m = fit_impact_model(make_target(y, county_id=cid, region=region), x, pooling="county")
    c = impact_curves(m)
    assert set(c["unit"]) == {"east", "west", "south"}
    c2 = impact_curves(m, counties=True)
    assert set(c2["unit"]) == {"east", "west", "south"} | set(cid)
    fig = plot_impact_curves(c, title="pooled")
    assert len([a for a in fig.axes if a.get_visible()]) == 3


def test_failed_model_gives_empty_frames():
    x = np.linspace(-2, 2, 50)
    m = fit_impact_model(make_target(np.zeros(50, int), levels=("none", "impact")), x)
    assert impact_curves(m).empty and crossings(m).empty
    assert list(impact_curves(m).columns) == list(CURVE_COLUMNS)


def test_curve_error_messages():
    m = _hand_model()
    with pytest.raises(ModelError, match="ci must be strictly between 0 and 1"):
        impact_curves(m, ci=1.5)
    with pytest.raises(ModelError, match="probs must be probabilities"):
        crossings(m, probs=(10, 25))
    with pytest.raises(ModelError, match="grid must be a non-empty array"):
        impact_curves(m, grid=np.array([np.nan]))
    with pytest.raises(TypeError, match="ImpactModel"):
        impact_curves("model")
    with pytest.raises(ModelError, match="curves lacks column"):
        plot_impact_curves(pd.DataFrame({"x": [0.0]}))
    x, y = simulate_binary(100, seed=1)
    assert fit_impact_model(make_target(y), x).ok


def test_ordinal_probit_interval_covers_true_curves_over_seeds():
    # Planted ordinal probit: P(level >= k) = Phi(-1.2 x - c_k), c = (0.3, 1.3), 400 rows.
    # Same reasoning as the binary coverage test: 10 seeds x 2 levels x 9 points, nominal
    # 0.90 pointwise, strongly correlated within a seed; 0.7 is about 3 standard errors low.
    grid = np.linspace(-2.0, 1.0, 9)
    cuts = np.array([0.3, 1.3])
    truth = special.ndtr(-1.2 * grid[None, :] - cuts[:, None]).ravel()  # level-major
    covered = []
    for seed in range(10):
        rng = np.random.default_rng(300 + seed)
        x = rng.normal(size=400)
        y = np.digitize(-1.2 * x + rng.normal(size=400), cuts)
        m = fit_impact_model(make_target(y), x, link="probit")
        c = impact_curves(m, grid=grid).sort_values(["level_k", "x"])
        covered.append((c["prob_lo"].to_numpy() <= truth) & (truth <= c["prob_hi"].to_numpy()))
    assert 0.7 <= float(np.mean(np.concatenate(covered))) <= 0.995


hypothesis = pytest.importorskip("hypothesis")
st = hypothesis.strategies


@hypothesis.settings(max_examples=40, deadline=None)
@hypothesis.given(
    beta=st.floats(-4, 4).filter(lambda b: abs(b) > 0.05),
    c1=st.floats(-3, 3),
    gap=st.floats(0.05, 3),
    var=st.floats(1e-4, 0.5),
    rho=st.floats(-0.9, 0.9),
)
def test_curve_properties_hold_for_any_parameters(beta, c1, gap, var, rho):
    # Properties (no reference needed): the interval holds the point estimate, a worse
    # level is never more likely than a milder one, curves are monotone in x with the sign
    # of the slope, and a crossing found lies inside its own interval.
    cov = np.array([[var, rho * var, 0.0], [rho * var, var, 0.5 * var], [0.0, 0.5 * var, var]])
    m = _hand_model(beta=beta, cuts=(c1, c1 + gap), cov=cov,
                    levels=("none", "watch", "severe"))
    c = impact_curves(m, grid=np.linspace(-3, 3, 31))
    assert np.all(c["prob_lo"] <= c["prob"] + 1e-12) and np.all(c["prob"] <= c["prob_hi"] + 1e-12)
    p1 = c[c["level_k"] == 1]["prob"].to_numpy()
    p2 = c[c["level_k"] == 2]["prob"].to_numpy()
    assert np.all(p2 <= p1 + 1e-12)
    assert np.all(np.sign(np.diff(p1)) * np.sign(beta) >= 0)
    cr = crossings(m, n_grid=301).dropna(subset=["x_cross", "x_lo", "x_hi"])
    assert np.all(cr["x_lo"] <= cr["x_cross"] + 1e-9) and np.all(cr["x_cross"] <= cr["x_hi"] + 1e-9)
