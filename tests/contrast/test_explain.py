"""contrast_counties end to end on the planted world: default pair, named pairs, errors."""

from dataclasses import replace

import numpy as np
import pytest
from contrast_world import make_cube, make_world

from impactlink.contrast import contrast_counties, parse_period
from impactlink.errors import ContrastError
from impactlink.link.target import FeatureRule


@pytest.fixture(scope="module")
def world():
    target, x, traits, counties, truth = make_world(0)
    target = replace(target, rule=FeatureRule(reference="season_week", season_week=34))
    return target, make_cube(truth), traits, counties


def test_default_pair_is_the_top_lookalike_in_its_year(world):
    target, cube, traits, counties = world
    res = contrast_counties(target, cube, ("spei", 4, 0), traits, counties, n_boot=20, seed=2)
    top = res.lookalikes.iloc[0]
    s = res.summary.iloc[0]
    assert (s["county_a"], s["county_b"]) == (top["county_a"], top["county_b"])
    assert s["period_start"] == s["period_end"] == top["year"]
    assert s["county_name_a"] == top["county_name_a"]
    # summary numbers are the parts table's, in points
    prob = res.parts[(res.parts["scale"] == "probability") & (res.parts["trait"] == "")]
    prob = prob.set_index("part")
    for part, col in [("total", "gap_pts"), ("exposure", "exposure_pts"),
                      ("sensitivity", "sensitivity_pts"), ("unexplained", "unexplained_pts")]:
        assert s[col] == pytest.approx(100 * prob.loc[part, "estimate"], abs=1e-12)
    assert s["observed_a"] == pytest.approx(top["impact_a"])
    assert set(res.trajectories["county_id"]) == {s["county_a"], s["county_b"]}
    assert len(res.traits_side) == 2


def test_named_pair_by_name_and_against_region(world):
    target, cube, traits, counties = world
    res = contrast_counties(target, cube, ("spei", 4, 0), traits, counties,
                            pair=("Name tirr", "t0"), period=(1961, 2020), n_boot=0)
    s = res.summary.iloc[0]
    assert (s["county_a"], s["county_b"]) == ("tirr", "t0")
    assert s["top_trait"] == "irrigated_share"
    assert s["top_trait_a"] == pytest.approx(55.0) and s["top_trait_b"] == pytest.approx(10.0)
    assert np.isnan(res.parts["lo"]).all()  # n_boot = 0: no intervals
    reg = contrast_counties(target, cube, ("spei", 4, 0), traits, counties,
                            pair=("tirr", "region"), n_boot=0)
    assert reg.summary.iloc[0]["county_b"] == "region:west"


@pytest.mark.parametrize("kwargs, match", [
    ({"pair": ("nowhere", "t0")}, "neither a modelled county_id nor a county_name"),
    ({"pair": ("t0", "Name t0")}, "same county twice"),
    ({"pair": ("t0", "tirr"), "period": (2010, 2001)}, "ends before it starts"),
    ({"ci": 1.2}, "ci must be"),
    ({"n_boot": -1}, "n_boot must be"),
])
def test_errors(world, kwargs, match):
    target, cube, traits, counties = world
    with pytest.raises(ContrastError, match=match):
        contrast_counties(target, cube, ("spei", 4, 0), traits, counties, **kwargs)


def test_no_lookalike_to_default_to(world):
    target, cube, traits, counties = world
    # without the twins (identical trajectories) no two counties are within 1e-9
    frame = target.frame[~target.frame["county_id"].isin(["tirr", "texp", "tunx"])]
    with pytest.raises(ContrastError, match="no look-alike pair"):
        contrast_counties(replace(target, frame=frame), cube, ("spei", 4, 0), traits,
                          counties, max_distance=1e-9, n_boot=0)


def test_parse_period():
    assert parse_period("2011-2013") == (2011, 2013)
    assert parse_period(" 2012 ") == (2012, 2012)
    with pytest.raises(ContrastError, match="not a year or a range"):
        parse_period("2011/2013")
    with pytest.raises(ContrastError, match="ends before it starts"):
        parse_period("2013-2011")
