"""Look-alike finder: planted pair first, RMS distance by hand, traits in real units."""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from contrast_world import make_cube, make_world

from impactlink.contrast import lookalike_pairs, season_trajectories, trait_display
from impactlink.contrast.lookalike import county_year_impacts
from impactlink.errors import ContrastError
from impactlink.link.features import feature_values
from impactlink.link.target import FeatureRule


def _hand_world():
    # 5 counties, 2 years, 3-week trajectories. In 2012, p1 and p2 are 0.05 apart every week
    # and lost 40 % vs 2 %; q1/q2 lost 45 % vs 0 % but are 2.0 apart and at least 0.8 from
    # everyone else (never look-alikes);
    # in 2013 nobody had an impact.
    keys = pd.DataFrame({"county_id": ["p1", "p2", "q1", "q2", "r1"] * 2,
                         "year": [2012] * 5 + [2013] * 5})
    base = np.array([-1.5, -1.8, -2.0])
    values = np.vstack([base, base + 0.05, base - 1.0, base + 1.0, base + 0.2,
                        *([np.zeros(3)] * 5)])
    impacts = pd.DataFrame({"county_id": keys["county_id"], "year": keys["year"],
                            "impact": [40.0, 2.0, 45.0, 0.0, 30.0] + [1.0] * 5,
                            "hit": [1, 0, 1, 0, 1] + [0] * 5})
    traits = pd.DataFrame({"county_id": ["p1", "p2", "q1", "q2", "r1"],
                           "irrigated_share": [0.06, 0.41, 0.1, 0.1, 0.2],
                           "soil_whc_mm": [90.0, 150.0, 120.0, 120.0, 130.0],
                           "cattle_per_km2": [12.5, 3.0, 5.0, 5.0, 7.0]})
    counties = pd.DataFrame({"county_id": ["p1", "p2", "q1", "q2", "r1"],
                             "county_name": ["Brambeth", "Tovova", "Q one", "Q two", "R"],
                             "region": ["west", "west", "east", "east", "east"]})
    return keys, values, impacts, traits, counties


def test_planted_pair_comes_first_with_traits_in_real_units():
    # reference-week values: 2012 -2.0, -1.95, -3.0, -1.0, -1.8; 2013 all 0. With
    # drought_quantile 0.5 the cut is the median of the ten, -0.5: every 2012 pair is a drought
    pairs = lookalike_pairs(*_hand_world(), max_distance=0.25, drought_quantile=0.5)
    top = pairs.iloc[0]
    assert (top["county_a"], top["county_b"], top["year"]) == ("p1", "p2", 2012)
    assert top["county_name_a"] == "Brambeth" and top["county_name_b"] == "Tovova"
    assert top["distance"] == pytest.approx(0.05)  # RMS of (0.05, 0.05, 0.05)
    assert top["impact_gap"] == pytest.approx(38.0)
    # shares in percent, millimetres and head per km2 as given
    assert top["irrigated_pct_a"] == pytest.approx(6.0)
    assert top["irrigated_pct_b"] == pytest.approx(41.0)
    assert top["soil_whc_mm_b"] == pytest.approx(150.0)
    assert top["cattle_per_km2_a"] == pytest.approx(12.5)
    # q1 and q2 never qualify; 2013 had no impact
    assert not (pairs["county_a"].isin(["q1", "q2"]) | pairs["county_b"].isin(["q1", "q2"])).any()
    assert (pairs["year"] == 2012).all()
    # then r1 (30 %) with p2 (2 %), RMS distance 0.15 -> gap 28; then p1 (40 %) with r1 at 0.2
    assert list(zip(pairs["county_a"], pairs["county_b"])) == [("p1", "p2"), ("r1", "p2"),
                                                          ("p1", "r1")]
    assert pairs["rank"].tolist() == list(range(1, len(pairs) + 1))


def test_distance_is_rms_over_the_weeks():
    keys, values, impacts, traits, counties = _hand_world()
    values = values.copy()
    values[1] = values[0] + np.array([0.0, 0.1, 0.2])  # RMS = sqrt((0 + 0.01 + 0.04) / 3)
    top = lookalike_pairs(keys, values, impacts, traits, counties,
                          drought_quantile=0.5).set_index(
        ["county_a", "county_b"]).loc[("p1", "p2")]
    assert top["distance"] == pytest.approx(np.sqrt(0.05 / 3))


def test_drought_filter_and_dry_side():
    keys, values, impacts, traits, counties = _hand_world()
    # the driest 10 %: cut at -2.1 (linear interpolation between -3.0 and -2.0); the planted
    # pair's mean reference value is -1.975, so it is not in that drought
    assert lookalike_pairs(keys, values, impacts, traits, counties,
                           drought_quantile=0.1).empty
    # with high = dry (as for EDDI) 2012 is the wet year: no pair
    assert lookalike_pairs(keys, values, impacts, traits, counties, dry_side="high",
                           drought_quantile=0.5).empty


def test_trajectories_end_at_the_feature_of_the_reference_week():
    target, x, traits, counties, truth = make_world(0, n_counties=6, years=(2001, 2010))
    target = replace(target, rule=FeatureRule(reference="season_week", season_week=34))
    cube = make_cube(truth)
    keys, traj = season_trajectories(target, cube, "spei", 4, 0)
    assert traj.shape == (len(target.frame), 4)
    np.testing.assert_array_equal(traj[:, -1], feature_values(target, cube, "spei", 4, 0))
    np.testing.assert_array_equal(traj[:, 0], feature_values(target, cube, "spei", 4, 3))
    keys13, traj13 = season_trajectories(target, cube, "spei", 4, 2, window_weeks=13)
    assert traj13.shape[1] == 13
    np.testing.assert_array_equal(traj13[:, -1], feature_values(target, cube, "spei", 4, 2))
    imp, unit = county_year_impacts(target)
    assert unit == "pct_of_expected_yield_lost"
    # losses only: a yield above its expectation counts as 0 % lost
    np.testing.assert_allclose(imp["impact"].sum(),
                               np.maximum(-target.frame["departure_pct"], 0).sum())


def test_trait_display_rules():
    assert trait_display("irrigated_share").column == "irrigated_pct"
    assert trait_display("irrigated_share").format(0.41) == "41 %"
    assert trait_display("soil_whc_mm").format(118.4) == "118 mm"
    assert trait_display("cattle_per_km2").format(12.46) == "12.5 head/km²"
    assert trait_display("groundwater_reliance").unit == "%"


def test_errors():
    keys, values, impacts, traits, counties = _hand_world()
    with pytest.raises(ContrastError, match="trajectories have 3 rows"):
        lookalike_pairs(keys, values[:3], impacts, traits, counties)
    with pytest.raises(ContrastError, match="dry_side must be"):
        lookalike_pairs(keys, values, impacts, traits, counties, dry_side="wet")
    with pytest.raises(ContrastError, match="max_distance must be > 0"):
        lookalike_pairs(keys, values, impacts, traits, counties, max_distance=0)
