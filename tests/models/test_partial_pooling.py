"""Partial pooling: county deviations shrunk toward the region model, tau estimated."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from impact_targets import make_target
from scipy import integrate, optimize, special

from impactlink.errors import ModelError
from impactlink.models import fit_impact_model
from impactlink.models.pooling import estimate_county_deviations


def _panel(tau, *, n_counties=30, rows=120, seed=0, sparse=None):
    """Counties in 3 regions; county intercepts u_j ~ N(0, tau^2); optional sparse county."""
    rng = np.random.default_rng(seed)
    counties = [f"c{i:02d}" for i in range(n_counties)]
    u = rng.normal(0, tau, n_counties)
    sizes = np.full(n_counties, rows)
    if sparse is not None:
        sizes[0] = sparse
    cid = np.repeat(counties, sizes)
    region = np.repeat([f"r{i % 3}" for i in range(n_counties)], sizes)
    x = rng.normal(size=cid.size)
    eta = -1.5 - 1.2 * x + np.repeat(u, sizes)
    y = (rng.uniform(size=x.size) < special.expit(eta)).astype(int)
    return make_target(y, county_id=cid, region=region), x, u


def test_tau_recovered_and_deviations_track_truth():
    t, x, u = _panel(0.8, seed=1)
    m = fit_impact_model(t, x, pooling="county")
    assert m.ok and m.method.endswith("county_random_intercept")
    # 30 counties: the ML estimate of tau has a standard error of roughly
    # tau / sqrt(2 * 30) ~ 0.1 plus the noise of the county estimates; 0.5..1.2 is ~3 se.
    assert 0.5 < m.tau < 1.2
    g = m.groups.set_index("county_id")
    # deviations are relative to the region model (which absorbs the region mean of u)
    assert np.corrcoef(g["deviation"], u)[0, 1] > 0.8
    assert set(g.columns) >= {"region", "n", "events", "deviation", "deviation_sd",
                              "shrinkage_weight", "parent"}
    table = m.to_frame()
    assert set(table.loc[table["term"] == "x", "unit"]) == {"r0", "r1", "r2"}
    dev = table[table["term"] == "county_deviation"].set_index("unit")["estimate"]
    np.testing.assert_allclose(dev.loc[g.index], g["deviation"])


def test_no_county_variation_gives_small_tau_and_strong_shrinkage():
    t, x, _ = _panel(0.0, seed=2)
    m = fit_impact_model(t, x, pooling="county")
    assert m.tau < 0.3
    assert m.groups["shrinkage_weight"].median() < 0.5


def test_sparse_county_borrows_strength():
    # County c00 has 12 rows (a few events); others 120. Its own-data weight must be the
    # smallest and its deviation must lie between 0 (the region) and its own
    # unpooled estimate (same sign, smaller magnitude): the Efron-Morris shrinkage property.
    t, x, _ = _panel(0.6, seed=3, sparse=12)
    m = fit_impact_model(t, x, pooling="county")
    g = m.groups.set_index("county_id")
    assert g.loc["c00", "n"] == 12
    assert g.loc["c00", "events"] == int(t.frame["level"][t.frame["county_id"] == "c00"].sum())
    assert g["shrinkage_weight"].idxmin() == "c00"
    assert g.loc["c00", "deviation_sd"] == g["deviation_sd"].max()
    # unpooled estimate: tau -> large (no shrinkage)
    fr = t.frame
    parent = m.members[g.loc["c00", "region"]]
    rows = (fr["county_id"] == "c00").to_numpy()
    eta = parent.beta[0] * x[rows]
    cuts = np.tile(parent.cuts, (rows.sum(), 1))
    y = fr["level"].to_numpy()[rows]
    own = estimate_county_deviations(eta, cuts, y, np.zeros(rows.sum(), int), "logit",
                                     tau_bounds=(50.0, 50.0 + 1e-9))["deviation"][0]
    pooled = g.loc["c00", "deviation"]
    assert np.sign(pooled) == np.sign(own) and abs(pooled) < abs(own)


def test_county_without_events_gets_a_finite_estimate():
    t, x, _ = _panel(0.5, seed=4)
    fr = t.frame.copy()
    fr.loc[fr["county_id"] == "c05", "level"] = 0
    t2 = make_target(fr["level"].to_numpy(), county_id=fr["county_id"].to_numpy(),
                     region=fr["region"].to_numpy())
    m = fit_impact_model(t2, x, pooling="county")
    g = m.groups.set_index("county_id")
    assert g.loc["c05", "events"] == 0
    assert np.isfinite(g.loc["c05", "deviation"]) and g.loc["c05", "deviation"] < 0
    p = m.predict(np.array([-1.0, -1.0]), frame=pd.DataFrame(
        {"county_id": ["c05", "c06"], "region": [g.loc["c05", "region"]] * 2}))
    assert np.all(np.isfinite(p))


def test_unseen_county_gets_region_curve_with_tau_in_interval():
    t, x, _ = _panel(0.8, seed=5)
    m = fit_impact_model(t, x, pooling="county")
    frame = pd.DataFrame({"county_id": ["new", "c00"], "region": ["r0", "r0"]})
    p = m.predict(np.zeros(2), frame=frame)
    lo, hi = m.predict_interval(np.zeros(2), frame=frame)
    region_p = m.members["r0"].predict(np.zeros(1))
    np.testing.assert_allclose(p[0], region_p[0])
    assert (hi[0] - lo[0]) > (hi[1] - lo[1])  # an unseen county is less certain


def test_marginal_likelihood_matches_numerical_integration():
    # Cross-implementation: the tau maximising our adaptive Gauss-Hermite marginal
    # likelihood equals the tau maximising the same likelihood computed with scipy's adaptive
    # quadrature (integrate.quad) county by county, to 1 %.
    rng = np.random.default_rng(6)
    J, n = 8, 25
    codes = np.repeat(np.arange(J), n)
    eta = rng.normal(-1, 1, J * n)
    y = (rng.uniform(size=J * n) < special.expit(eta + rng.normal(0, 1, J)[codes])).astype(int)
    cuts = np.zeros((J * n, 1))
    ours = estimate_county_deviations(eta, cuts, y, codes, "logit")["tau"]

    def neg_marginal(log_tau):
        tau = np.exp(log_tau)
        total = 0.0
        for j in range(J):
            e, yy = eta[codes == j], y[codes == j]

            def f(u, e=e, yy=yy):
                p = special.expit(e + u)
                return np.exp(np.sum(yy * np.log(p) + (1 - yy) * np.log1p(-p))) * \
                    np.exp(-0.5 * u**2 / tau**2) / np.sqrt(2 * np.pi * tau**2)
            total += np.log(integrate.quad(f, -12 * tau - 5, 12 * tau + 5, limit=200)[0])
        return -total

    ref = np.exp(optimize.minimize_scalar(neg_marginal, bounds=(np.log(1e-3), np.log(5)),
                                          method="bounded", options={"xatol": 1e-5}).x)
    assert ours == pytest.approx(ref, rel=0.01)


def test_region_pooling_keeps_failed_regions_as_reasons():
    t, x, _ = _panel(0.3, seed=7)
    fr = t.frame.copy()
    fr.loc[fr["region"] == "r2", "level"] = 0
    t2 = make_target(fr["level"].to_numpy(), county_id=fr["county_id"].to_numpy(),
                     region=fr["region"].to_numpy())
    m = fit_impact_model(t2, x, pooling="region")
    assert m.ok and set(m.members) == {"r0", "r1", "r2"}
    assert not m.members["r2"].ok and "r2" in m.reason and "no events" in m.reason
    p = m.predict(np.zeros(2), frame=pd.DataFrame({"region": ["r0", "r2"]}))
    assert np.isfinite(p[0, 0]) and np.isnan(p[1, 0])
    assert set(m.to_frame()["unit"]) == {"r0", "r1", "r2"}
    # county pooling falls back to the all-county model as the parent of r2
    mc = fit_impact_model(t2, x, pooling="county")
    assert mc.ok and "r2" in mc.reason
    assert set(mc.groups.loc[mc.groups["region"] == "r2", "parent"]) == {"all"}


def test_pooling_errors_name_the_missing_column():
    t, x, _ = _panel(0.3, seed=8, n_counties=6, rows=30)
    frame = t.frame.drop(columns="region")
    t_nr = make_target(frame["level"].to_numpy(), county_id=frame["county_id"].to_numpy())
    object.__setattr__(t_nr, "frame", t_nr.frame.drop(columns="region"))
    with pytest.raises(ModelError, match="'region' column"):
        fit_impact_model(t_nr, x, pooling="region")
    m = fit_impact_model(t, x, pooling="county")
    with pytest.raises(ModelError, match="'region' column"):
        m.predict(np.zeros(1), frame=pd.DataFrame({"county_id": ["c01"]}))
