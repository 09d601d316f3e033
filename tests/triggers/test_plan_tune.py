"""Stage tuning: Richardson's economic value, planted thresholds, bootstrap and held-out skill,
uniform vs local thresholds."""

from dataclasses import replace

import numpy as np
import pytest

from impactlink.errors import TriggerError
from impactlink.triggers import relative_economic_value, replay_plan, tune_stage, uniform_vs_local
from impactlink.triggers.plan import PlanTuning
from tests.triggers.plan_cases import counties_of, cube_of, one_indicator_plan


def test_economic_value_worked_case_by_hand():
    # Richardson (2000, QJRMS 126, 649-667), eq. for V with alpha = C/L = 0.25, base rate 0.2,
    # H = 0.6, F = 0.1, by hand:
    #   min(alpha, o) = 0.2;  F alpha (1 - o) = 0.1 * 0.25 * 0.8 = 0.02
    #   H o (1 - alpha) = 0.6 * 0.2 * 0.75 = 0.09;  numerator 0.2 - 0.02 + 0.09 - 0.2 = 0.07
    #   denominator min(alpha, o) - o alpha = 0.2 - 0.05 = 0.15;  V = 0.07 / 0.15 = 0.4667
    assert float(relative_economic_value(0.6, 0.1, 0.2, 0.25)) == pytest.approx(0.07 / 0.15)
    # alpha above the base rate: min = 0.2, F a (1-o) = 0.1*0.5*0.8 = 0.04,
    # H o (1-a) = 0.6*0.2*0.5 = 0.06; V = (0.2 - 0.04 + 0.06 - 0.2) / (0.2 - 0.1) = 0.2
    assert float(relative_economic_value(0.6, 0.1, 0.2, 0.5)) == pytest.approx(0.2)


def test_economic_value_properties_stated_by_richardson():
    # Richardson (2000): the maximum of V over alpha is at alpha = base rate and equals H - F
    # (the Peirce skill score); a perfect forecast has V = 1; climatology-like yes-always /
    # no-always forecasts have V <= 0.
    alphas = np.linspace(0.01, 0.99, 981)
    v = relative_economic_value(0.7, 0.15, 0.3, alphas)
    assert alphas[np.nanargmax(v)] == pytest.approx(0.3, abs=1e-3)
    assert np.nanmax(v) == pytest.approx(0.7 - 0.15)
    assert np.allclose(relative_economic_value(1.0, 0.0, 0.3, alphas), 1.0)
    assert np.all(relative_economic_value(1.0, 1.0, 0.3, alphas) <= 1e-12)
    assert np.all(relative_economic_value(0.0, 0.0, 0.3, alphas) <= 1e-12)


def _ar1(n, k, seed, phi=0.9):
    rng = np.random.default_rng(seed)
    x = np.empty((n, k))
    x[0] = rng.standard_normal(k)
    for t in range(1, n):
        x[t] = phi * x[t - 1] + np.sqrt(1 - phi**2) * rng.standard_normal(k)
    return x


def _planted(seed=1, n_years=12, k=6):
    x = _ar1(52 * n_years, k, seed)
    lev = (x <= -1.0).astype(float)  # impacts exactly when the index is at or below -1.0
    cube = cube_of(*x.T)
    plan = one_indicator_plan(dict(name="act", enter=-0.5, exit=-0.5, enter_weeks=2,
                                   exit_weeks=1))
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube))
    tuning = PlanTuning(stage="act", rule="x", candidates=(-1.6, -1.4, -1.2, -1.0, -0.8, -0.6),
                        enter_weeks=(1, 2, 3), n_boot=50)
    return rep, lev, tuning


def test_tuning_recovers_a_planted_threshold_with_intervals_and_held_out_skill():
    rep, lev, tuning = _planted()
    res = tune_stage(rep, lev, tuning, seed=3)
    chosen = res.curve[res.curve["chosen"]].iloc[0]
    assert (chosen.threshold, chosen.enter_weeks) == (-1.0, 1)
    assert chosen.peirce_skill_score == pytest.approx(1.0)
    s = res.summary.set_index("quantity")
    assert s.loc["threshold", "lo"] == s.loc["threshold", "hi"] == -1.0
    assert s.loc["peirce_skill_score", "held_out"] == pytest.approx(1.0)
    assert len(res.folds) == 12 and (res.folds["threshold"] == -1.0).all()
    # same seed, same tables; another seed may move only the bootstrap columns
    again = tune_stage(rep, lev, tuning, seed=3)
    assert res.summary.equals(again.summary) and res.curve.equals(again.curve)


def test_curve_counts_equal_a_replay_of_each_candidate():
    rep, lev, tuning = _planted(seed=2)
    lev = np.where(np.random.default_rng(0).random(lev.shape) < 0.1, 1.0 - lev, lev)
    res = tune_stage(rep, lev, replace(tuning, n_boot=0))
    plan = rep.plan
    for row in res.curve.iloc[[0, 7, 16]].itertuples():
        rule = replace(plan.stages[0].rules[0], enter=row.threshold, exit=row.threshold)
        st = replace(plan.stages[0], rules=(rule,), enter_weeks=row.enter_weeks,
                     enter_window=row.enter_weeks)
        one = replay_plan(replace(plan, stages=(st,)), cube=_cube_of_rep(rep),
                          counties=counties_of(_cube_of_rep(rep)))
        on = one.stage >= 1
        assert row.hits == (on & (lev >= 1)).sum()
        assert row.false_alarms == (on & (lev < 1)).sum()


def test_units_in_blocks_give_the_counts_of_all_units_at_once(monkeypatch):
    """A block of one or four units at a time (of six) gives the same curve, summary and
    folds, bit for bit, as all units in one array: each unit's ladder is its own."""
    import impactlink.triggers.plan_tune as pt

    rep, lev, tuning = _planted(seed=4)
    lev = np.where(np.random.default_rng(1).random(lev.shape) < 0.1, 1.0 - lev, lev)
    whole = tune_stage(rep, lev, tuning, seed=5)
    n_cand = len(tuning.candidates) * len(tuning.enter_weeks)
    for units in (1, 4):
        monkeypatch.setattr(pt, "_MAX_CELLS", len(rep.weeks) * n_cand * units)
        part = tune_stage(rep, lev, tuning, seed=5)
        assert part.curve.equals(whole.curve) and part.summary.equals(whole.summary)
        assert part.folds.equals(whole.folds)


def _cube_of_rep(rep):
    return cube_of(*rep.values["x"].T)


def test_frequency_objective_hits_the_target_rate():
    rep, lev, tuning = _planted(seed=4)
    res = tune_stage(rep, lev, replace(tuning, objective="frequency", once_in_years=2.0,
                                       n_boot=0))
    gap = (res.curve["entries_per_unit_year"] - 0.5).abs()
    assert res.curve.loc[res.curve["chosen"], "entries_per_unit_year"].iloc[0] == pytest.approx(
        res.curve.loc[gap.idxmin(), "entries_per_unit_year"])
    ev = tune_stage(rep, lev, replace(tuning, objective="economic_value", n_boot=0))
    assert ev.curve.loc[ev.curve["chosen"], "economic_value"].iloc[0] == ev.curve[
        "economic_value"].max()


def test_tuning_errors():
    rep, lev, tuning = _planted()
    with pytest.raises(TriggerError, match="key tune.stage: 'nope' is not a stage"):
        tune_stage(rep, lev, replace(tuning, stage="nope"))
    with pytest.raises(TriggerError, match="key tune.rule: 'y' is not a rule"):
        tune_stage(rep, lev, replace(tuning, rule="y"))


def test_uniform_threshold_fires_unevenly_where_local_percentiles_fire_evenly():
    # counties whose index has different means: a statewide value fires far more often in the
    # dry-shifted county; a local percentile fires about equally (Steinemann et al. 2015)
    x = _ar1(52 * 20, 3, seed=5) + np.array([-0.8, 0.0, 0.8])
    cube = cube_of(*x.T)
    # a percentile rule with exit = enter: no hysteresis, so a one-week stage is "at or below"
    plan = one_indicator_plan(dict(name="act", enter_weeks=1, exit_weeks=1, rule=[{
        "indicator": "x", "kind": "percentile", "enter": 30.0, "exit": 30.0}]))
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube))
    lev = (x <= np.percentile(x, 15, axis=0)).astype(float)
    tuning = PlanTuning(stage="act", rule="x", candidates=(-1.0,), enter_weeks=(),
                        local_percentile=15.0)
    t = uniform_vs_local(rep, lev, tuning)
    loc = t[(t["plan"] == "local") & (t["county_id"] != "all")]
    uni = t[(t["plan"] == "uniform") & (t["county_id"] != "all")]
    np.testing.assert_allclose(loc["weeks_in_stage_share"], 0.15, atol=0.005)
    assert uni["weeks_in_stage_share"].iloc[0] > 2 * uni["weeks_in_stage_share"].iloc[2]
    assert uni["threshold_value"].nunique() == 1
    # impacts planted at the local 15th percentile: the local plan is perfect
    np.testing.assert_allclose(loc["peirce_skill_score"], 1.0)
    assert (uni["peirce_skill_score"] < 1.0).all()
