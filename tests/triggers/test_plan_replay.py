"""Trigger-plan replay on hand-made week series with known stage timelines."""

from dataclasses import replace

import numpy as np
import pytest

from impactlink.errors import TriggerError
from impactlink.triggers import parse_trigger_plan, replay_plan, replay_trigger
from impactlink.triggers.plan_replay import combine_rules, persistence_met
from tests.triggers.plan_cases import counties_of, cube_of, one_indicator_plan

D, W = -2.0, 1.0  # a dry week (below every threshold below) and a wet week


def _stages(series, *stages, **kw):
    cube = cube_of(series)
    rep = replay_plan(one_indicator_plan(*stages, **kw), cube=cube, counties=counties_of(cube))
    return rep, rep.stage[:, 0].tolist()


def test_entry_after_exactly_k_consecutive_weeks():
    x = [W, D, D, W, D, D, D, D, W]
    _, s = _stages(x, dict(enter=-1.0, exit=-1.0, enter_weeks=3, exit_weeks=9))
    # weeks 1-2 are a run of 2 (no entry); the run 4,5,6 completes 3 weeks -> stage 1 at week 6
    assert s == [0, 0, 0, 0, 0, 0, 1, 1, 1]


def test_entry_on_n_of_the_last_m_weeks():
    x = [D, W, D, W, W, D, D]
    _, s = _stages(x, dict(enter=-1.0, exit=-1.0, enter_weeks=2, enter_window=3, exit_weeks=9))
    # weeks 0 and 2 are 2 dry weeks within the 3 weeks 0-2 -> stage 1 at week 2
    assert s == [0, 0, 1, 1, 1, 1, 1]


def test_one_wet_week_does_not_end_a_stage():
    x = [D, D, D, W, D, D, W, W, W, D]
    _, s = _stages(x, dict(enter=-1.0, exit=-0.5, enter_weeks=2, exit_weeks=3))
    # entry at week 1; single wet week 3 and the pair 6-7 are shorter than 3 -> stays; the
    # third wet week in a row (week 8) ends it
    assert s == [0, 1, 1, 1, 1, 1, 1, 1, 0, 0]


def test_descent_is_one_stage_at_a_time():
    # a deep drought enters stage 3 directly; recovery steps 3 -> 2 -> 1 -> 0, each after
    # exit_weeks (2) wet weeks counted from entering that stage
    x = [-3.0, -3.0, -3.0, W, W, W, W, W, W, W, W]
    stages = [dict(enter=-1.0, exit=-1.0, enter_weeks=1, exit_weeks=2),
              dict(enter=-2.0, exit=-2.0, enter_weeks=1, exit_weeks=2),
              dict(enter=-2.5, exit=-2.5, enter_weeks=1, exit_weeks=2)]
    rep, s = _stages(x, *stages)
    assert s == [3, 3, 3, 3, 2, 2, 1, 1, 0, 0, 0]
    ch = rep.changes
    assert ch["change"].tolist() == ["enter", "exit", "exit", "exit"]
    assert ch["from_stage"].tolist() == [0, 3, 2, 1] and ch["to_stage"].tolist() == [3, 2, 1, 0]


def test_minimum_weeks_in_stage():
    x = [D, W, W, W, W, W, W, W, W]
    _, s = _stages(x, dict(enter=-1.0, exit=-1.0, enter_weeks=1, exit_weeks=1, min_weeks=5))
    # entered at week 0; wet from week 1 but the stage must last 5 weeks -> leaves at week 5
    assert s == [1, 1, 1, 1, 1, 0, 0, 0, 0]


def test_single_stage_plan_equals_the_single_threshold_replay():
    # cross-check against replay_trigger (the older two-state machine): same rules, same state
    rng = np.random.default_rng(7)
    x = np.cumsum(rng.standard_normal((400, 4)), axis=0) * 0.2
    x[rng.random(x.shape) < 0.03] = np.nan
    cube = cube_of(*x.T)
    plan = one_indicator_plan(dict(enter=-0.8, exit=-0.3, enter_weeks=3, exit_weeks=4))
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube))
    ref = replay_trigger(x, threshold=-0.8, exit_threshold=-0.3, entry_weeks=3, exit_weeks=4)
    np.testing.assert_array_equal(rep.stage == 1, ref)


def test_units_are_independent_vectorised_equals_one_at_a_time():
    rng = np.random.default_rng(8)
    x = np.cumsum(rng.standard_normal((300, 5)), axis=0) * 0.3
    stages = [dict(enter=-0.5, exit=0.0, enter_weeks=2, exit_weeks=3, min_weeks=4),
              dict(enter=-1.5, exit=-1.0, enter_weeks=2, enter_window=3, exit_weeks=2)]
    cube = cube_of(*x.T)
    all_units = replay_plan(one_indicator_plan(*stages), cube=cube, counties=counties_of(cube))
    for j in range(5):
        one = cube_of(x[:, j])
        r = replay_plan(one_indicator_plan(*stages), cube=one, counties=counties_of(one))
        np.testing.assert_array_equal(all_units.stage[:, j], r.stage[:, 0])


def test_k_of_n_all_any_and_weights_on_hand_made_indicator_sets():
    # three indicators over four weeks: which hold in each week
    b = np.array([[1, 1, 0, 0],
                  [1, 0, 1, 0],
                  [1, 0, 0, 0]], dtype=bool)
    plan = one_indicator_plan(dict(rule=[{"indicator": "x", "enter": -1, "exit": -1,
                                          "weight": w} for w in (2.0, 1.0, 1.0)],
                                   combine="k_of_n", k=2))
    st = plan.stages[0]
    assert combine_rules(b, st).tolist() == [True, False, False, False]
    assert combine_rules(b, replace(st, combine="all")).tolist() == [True, False, False, False]
    assert combine_rules(b, replace(st, combine="any")).tolist() == [True, True, True, False]
    assert combine_rules(b, replace(st, combine="k_of_n", k=1)).tolist() == [True, True, True,
                                                                              False]
    # weights 2, 1, 1 with at least 2: week 0 (4), week 1 (2) yes; week 2 (1) no
    assert combine_rules(b, replace(st, combine="weights", min_weight=2.0)).tolist() == [
        True, True, False, False]


def test_persistence_counts_weeks_before_the_record_as_not_held():
    c = np.array([1, 1, 0, 1, 1, 1], dtype=bool)
    assert persistence_met(c, 2, 2).tolist() == [False, True, False, False, True, True]
    assert persistence_met(c, 2, 3).tolist() == [False, True, True, True, True, True]


def test_two_indicators_k_of_n_and_the_driving_indicators():
    x = [D, D, D, D, W, W, W]
    y = [W, W, D, D, D, W, W]
    cube = cube_of(x, extra={("spei", 26): y})
    plan = parse_trigger_plan({
        "indicators": {"spi13": {"index": "spi", "scale_weeks": 13},
                       "spei26": {"index": "spei", "scale_weeks": 26}},
        "stage": [
            {"name": "watch", "combine": "any", "enter_weeks": 1, "exit_weeks": 1,
             "rule": [{"indicator": "spi13", "enter": -1, "exit": -1},
                      {"indicator": "spei26", "enter": -1, "exit": -1}]},
            {"name": "act", "combine": "all", "enter_weeks": 1, "exit_weeks": 1,
             "rule": [{"indicator": "spi13", "enter": -1, "exit": -1},
                      {"indicator": "spei26", "enter": -1, "exit": -1}]}],
    })
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube))
    assert rep.stage[:, 0].tolist() == [1, 1, 2, 2, 1, 0, 0]
    frame = rep.to_frame()
    changed = frame[frame["change"] != ""]
    # entries name the rules beyond their entry thresholds; exits the rules back across their
    # exit thresholds (week 4: spi13 recovered, spei26 still dry; week 5: both recovered)
    assert changed["driving_indicators"].tolist() == ["spi13", "spi13+spei26", "spi13",
                                                      "spi13+spei26"]
    assert changed["stage_name"].tolist() == ["watch", "act", "watch", ""]


def test_percentile_and_percent_of_normal_thresholds_in_index_units():
    rng = np.random.default_rng(3)
    x = rng.gamma(2.0, 10.0, (520, 2))
    cube = cube_of(*x.T)
    plan = one_indicator_plan(
        dict(rule=[{"indicator": "x", "kind": "percentile", "enter": 20.0, "exit": 30.0}]),
        dict(rule=[{"indicator": "x", "kind": "percent_of_normal", "enter": 50.0,
                    "exit": 70.0}]))
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube))
    # percentile of each county's own record: numpy's default (linear, Hyndman-Fan type 7)
    np.testing.assert_allclose(rep.enter_thresholds[(0, 0)][0], np.percentile(x, 20, axis=0))
    np.testing.assert_allclose(rep.exit_thresholds[(0, 0)][5], np.percentile(x, 30, axis=0))
    # percent of normal: 50 % of the mean of the same ISO week of the year (10 years here)
    woy = np.minimum(cube.weeks.isocalendar().week.to_numpy(), 52)
    normal_w5 = x[woy == woy[5]].mean(axis=0)
    np.testing.assert_allclose(rep.enter_thresholds[(1, 0)][5], 0.5 * normal_w5)


def test_region_unit_reads_the_mean_of_its_counties_and_region_overrides():
    x1, x2 = [-1.0, -2.0, -2.0, 0.0], [-2.0, -1.0, 0.0, 0.0]
    cube = cube_of(x1, x2)
    plan = one_indicator_plan(dict(rule=[{"indicator": "x", "enter": -1.4, "exit": -1.4,
                                          "override": [{"region": "south", "enter": -1.6}]}],
                                   enter_weeks=1, exit_weeks=1), unit="region")
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube, ["south", "south"]))
    assert rep.unit_ids == ("south",)
    np.testing.assert_allclose(rep.values["x"][:, 0], [-1.5, -1.5, -1.0, 0.0])
    # the override (-1.6) applies in region south: -1.5 is not at or below it
    assert rep.stage[:, 0].tolist() == [0, 0, 0, 0]


def test_errors_name_the_plan_key():
    cube = cube_of([0.0, 1.0])
    plan = one_indicator_plan(dict(enter=-1.0, exit=-1.0))
    other = cube_of([0.0, 1.0], index="spei")
    with pytest.raises(TriggerError, match=r"test.toml: key indicators.x: no index 'spi' at 13"):
        replay_plan(plan, cube=other, counties=counties_of(other))
    area = one_indicator_plan(dict(enter=-1.0, exit=-1.0), unit="counties", counties=["1"])
    with pytest.raises(TriggerError, match=r"key plan.counties: \['1'\] are not counties"):
        replay_plan(area, cube=cube, counties=counties_of(cube))
    pon = one_indicator_plan(dict(rule=[{"indicator": "x", "kind": "percent_of_normal",
                                         "enter": 50.0, "exit": 60.0}]))
    neg = cube_of([-1.0, -2.0])
    with pytest.raises(TriggerError, match="percent_of_normal needs an indicator whose normal"):
        replay_plan(pon, cube=neg, counties=counties_of(neg))


def test_unknown_override_region_is_an_error():
    cube = cube_of([0.0, 1.0])
    plan = one_indicator_plan(dict(rule=[{"indicator": "x", "enter": -1.0, "exit": -1.0,
                                          "override": [{"region": "Nowhere", "enter": -1.2}]}]))
    with pytest.raises(TriggerError, match=r'key stage\[1\] \("s1"\).rule\[1\].override\[1\]'
                       r".region: 'Nowhere' is not a region"):
        replay_plan(plan, cube=cube, counties=counties_of(cube))
