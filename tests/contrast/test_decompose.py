"""Trait-aware model and decomposition: planted twins, exact sums, definitions, references."""

import itertools
import math
import warnings

import numpy as np
import pandas as pd
import pytest
from contrast_world import TWINS, make_world, true_model

from impactlink.contrast import decompose_pair, decomposition_table, fit_trait_model
from impactlink.contrast.decompose import GROUPS, county_side, region_side
from impactlink.contrast.traitmodel import penalised_fit
from impactlink.errors import ContrastError, ContrastWarning


@pytest.fixture(scope="module")
def worlds():
    out = []
    for seed in (0, 1, 2):
        target, x, traits, counties, truth = make_world(seed)
        out.append((fit_trait_model(target, x, traits, counties), truth))
    return out


def test_each_twin_difference_lands_in_its_own_part(worlds):
    # planted rule (contrast_world.py): tirr differs from t0 only by irrigation, texp only by
    # exposure, tunx only by its county effect. The generator's own rule, run through the same
    # decomposition, gives the true parts; the estimated 90 % interval of the planted part must
    # cover it, and the two other groups are exactly 0 (identical inputs) or cover 0.
    covered = {twin: 0 for twin in TWINS}
    for model, truth in worlds:
        tm = true_model(model, truth)
        b = county_side(model, "t0", None)
        for twin, part in TWINS.items():
            a = county_side(model, twin, None)
            table, _ = decomposition_table(model, a, b, period=None, n_boot=60, seed=3)
            prob = table[(table["scale"] == "probability") & (table["trait"] == "")]
            prob = prob.set_index("part")
            true = decompose_pair(tm, county_side(tm, twin, None), county_side(tm, "t0", None))
            lo, hi = prob.loc[part, "lo"], prob.loc[part, "hi"]
            covered[twin] += lo <= true[part] <= hi
            assert abs(prob.loc[part, "estimate"]) > 0.1  # the planted part is large
            assert lo * hi > 0  # and its interval excludes 0
            for other in GROUPS:
                if other in (part, "unexplained"):
                    continue
                assert prob.loc[other, "estimate"] == 0.0  # identical inputs: exactly 0
            if part != "unexplained":
                assert prob.loc["unexplained", "lo"] <= 0 <= prob.loc["unexplained", "hi"]
    # 90 % intervals over three seeds: at least two of three cover the truth for each twin
    assert all(v >= 2 for v in covered.values()), covered


def test_parts_add_up_exactly(worlds):
    model, _ = worlds[0]
    for a_id, b_id in [("c01", "c07"), ("tirr", "c30"), ("texp", "tunx")]:
        d = decompose_pair(model, county_side(model, a_id, (1970, 1990)),
                           county_side(model, b_id, (1970, 1990)))
        assert abs(d["exposure"] + d["sensitivity"] + d["unexplained"] - d["total"]) < 1e-12
        assert abs(d["total"] - (d["p_a"] - d["p_b"])) < 1e-15
        per_trait = sum(d[f"sensitivity:{t}"] for t in model.traits)
        assert abs(per_trait - d["sensitivity"]) < 1e-12
        lp = d["lp_exposure"] + d["lp_sensitivity"] + d["lp_unexplained"]
        assert abs(lp - d["lp_total"]) < 1e-12
        terms = sum(d[f"lp_sensitivity:{t}:{k}"] for t in model.traits
                    for k in ("level", "interaction"))
        assert abs(terms - d["lp_sensitivity"]) < 1e-12


def test_shapley_equals_average_over_the_six_orderings(worlds):
    # definition (Shapley 1953): the mean marginal contribution over all 3! orderings,
    # computed here by brute force from the model's own probabilities
    model, _ = worlds[1]
    a, b = county_side(model, "c03", None), county_side(model, "c11", None)
    d = decompose_pair(model, a, b)
    za, zb = a.z(model), b.z(model)

    def v(members):
        x = a.x if "exposure" in members else b.x
        z = za if "sensitivity" in members else zb
        u = a.u(model) if "unexplained" in members else b.u(model)
        return float(np.mean(1 / (1 + np.exp(-model.linear_predictor(x, z, u)))))

    phi = dict.fromkeys(GROUPS, 0.0)
    for order in itertools.permutations(GROUPS):
        done = set()
        for g in order:
            phi[g] += (v(done | {g}) - v(done)) / math.factorial(3)
            done.add(g)
    for g in GROUPS:
        assert d[g] == pytest.approx(phi[g], abs=1e-14)


def test_oaxaca_split_of_a_linear_predictor_by_hand():
    # tiny hand case: b1 = -1, one trait with g = 0.5, d = 0.2, u_a - u_b = 0.3;
    # x_a = -2, x_b = -1, z_a = 1, z_b = 0 -> exposure = (-1 + 0.2 * 0.5) * (-1) = 0.9,
    # level = 0.5 * 1 = 0.5, interaction = 0.2 * (-1.5) * 1 = -0.3, total 1.4
    from dataclasses import replace

    target, x, traits, counties, truth = make_world(0, n_counties=8, years=(1991, 2020))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ContrastWarning)
        m = fit_trait_model(target, x, traits[["county_id", "irrigated_share"]], counties)
    m = replace(m, b0=0.0, b1=-1.0, gamma=np.array([0.5]), delta=np.array([0.2]),
                x_center=0.0, trait_mean=np.array([0.0]), trait_sd=np.array([1.0]),
                county_effect=pd.Series({"A": 0.3, "B": 0.0}))
    from impactlink.contrast.decompose import Side

    a = Side("A", "A", np.array([-2.0]), np.array([2000]), np.array([1.0]), ("A",))
    b = Side("B", "B", np.array([-1.0]), np.array([2000]), np.array([0.0]), ("B",))
    d = decompose_pair(m, a, b)
    assert d["lp_exposure"] == pytest.approx(0.9)
    assert d["lp_sensitivity:irrigated_share:level"] == pytest.approx(0.5)
    assert d["lp_sensitivity:irrigated_share:interaction"] == pytest.approx(-0.3)
    assert d["lp_unexplained"] == pytest.approx(0.3)
    assert d["lp_total"] == pytest.approx(1.4)
    assert d["p_a"] == pytest.approx(1 / (1 + np.exp(-(2.0 + 0.5 - 0.4 + 0.3))))


def test_penalised_fit_matches_statsmodels_glm_when_counties_are_pooled_out():
    # with tau -> 0 the county effects vanish and the fixed part is the ordinary logistic
    # maximum-likelihood fit (statsmodels GLM Binomial, a different implementation)
    import statsmodels.api as sm

    target, x, traits, counties, truth = make_world(5)
    model = fit_trait_model(target, x, traits, counties)
    rows = model.rows
    codes = pd.factorize(rows["county_id"], sort=True)[0]
    z = model.standardize(model.county_traits.set_index("county_id").loc[
        rows["county_id"], list(model.traits)].to_numpy())
    xc = rows["x"].to_numpy() - model.x_center
    design = np.column_stack([np.ones_like(xc), xc, z, z * xc[:, None]])
    theta = penalised_fit(design, codes, rows["y"].to_numpy(), np.ones(len(rows)), 1e-6)
    ref = sm.GLM(rows["y"].to_numpy(), design, family=sm.families.Binomial()).fit()
    np.testing.assert_allclose(theta[: design.shape[1]], ref.params, rtol=1e-6, atol=1e-8)
    # frequency weights: the same as repeating rows (statsmodels freq_weights)
    w = np.random.default_rng(0).integers(0, 3, len(rows)).astype(float)
    theta_w = penalised_fit(design, codes, rows["y"].to_numpy(), w, 1e-6)
    ref_w = sm.GLM(rows["y"].to_numpy(), design, family=sm.families.Binomial(),
                   freq_weights=w).fit()
    np.testing.assert_allclose(theta_w[: design.shape[1]], ref_w.params, rtol=1e-6, atol=1e-8)


def test_estimated_spread_and_planted_county_effect(worlds):
    # planted u ~ N(0, 0.8) for 40 counties plus the twin with u = 2
    for model, _truth in worlds:
        assert 0.5 < model.tau < 1.3
        assert model.county_effect["tunx"] - model.county_effect["t0"] > 1.0
        np.testing.assert_allclose(model.gamma[0] / model.trait_sd[0], -4.0, atol=1.5)
        assert model.b1 == pytest.approx(-1.5, abs=0.3)


def test_region_side_and_bootstrap_is_deterministic(worlds):
    model, _ = worlds[0]
    a = county_side(model, "tirr", (1990, 2000))
    b = region_side(model, "tirr", (1990, 2000))
    assert "tirr" not in b.members and b.county_id == "region:west"
    t1, _ = decomposition_table(model, a, b, period=(1990, 2000), n_boot=10, seed=4)
    t2, _ = decomposition_table(model, a, b, period=(1990, 2000), n_boot=10, seed=4)
    pd.testing.assert_frame_equal(t1, t2)
    assert t1["lo"].notna().all() and (t1["lo"] <= t1["hi"]).all()


def test_errors(worlds):
    model, _ = worlds[0]
    with pytest.raises(ContrastError, match="no modelled rows in 1800"):
        county_side(model, "c01", (1800, 1800))
    target, x, traits, counties, truth = make_world(0, n_counties=4)
    with pytest.raises(ContrastError, match="x has shape"):
        fit_trait_model(target, x[:5], traits)
    with pytest.raises(ContrastError, match="county grain"):
        from dataclasses import replace

        fit_trait_model(replace(target, grain="region_month"), x, traits)
    with pytest.raises(ContrastError, match="level_at_least=2 is not a level"):
        fit_trait_model(target, x, traits, level_at_least=2)
    with pytest.raises(ContrastError, match="repeated county_id"):
        fit_trait_model(target, x, pd.concat([traits, traits.iloc[:1]]))
    with pytest.raises(ContrastError, match="no numeric column that varies"), \
            pytest.warns(ContrastWarning, match="traits constant across counties"):
        fit_trait_model(target, x, traits.assign(irrigated_share=0.2, soil_whc_mm=100.0))


def test_level_at_least_models_the_higher_class():
    # an ordinal copy of the world (levels 0, 1, 2 with 2 = every second event): the model of
    # level >= 2 is the binary model of that event
    from dataclasses import replace

    target, x, traits, counties, truth = make_world(0, n_counties=20)
    lev = target.frame["level"].to_numpy() * np.where(np.arange(len(target.frame)) % 2, 2, 1)
    ordinal = replace(target, kind="ordinal", levels=("none", "some", "severe"),
                      frame=target.frame.assign(level=lev))
    binary = replace(target, frame=target.frame.assign(level=(lev >= 2).astype(int)))
    m2 = fit_trait_model(ordinal, x, traits, counties, level_at_least=2)
    mb = fit_trait_model(binary, x, traits, counties)
    assert m2.b1 == pytest.approx(mb.b1, rel=1e-10)
    assert m2.provenance["level_at_least"] == 2
