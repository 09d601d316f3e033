"""Array kernels of the trigger modules against plain references, and jobs-independence.

Each fast kernel is checked against a straightforward week-by-week / county-by-county Python
loop written here from the documented rule (the rule is the source named beside each check),
or against numpy's own ``nanpercentile``.
"""

import warnings
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from impactlink.triggers import audit_triggers, kernels, run_trigger_plan, tune_thresholds
from impactlink.triggers import plan_tune as plan_tune_mod
from impactlink.triggers import tune as tune_mod
from impactlink.triggers.plan_replay import persistence_met, walk_stages
from impactlink.triggers.replay import replay_trigger
from impactlink.triggers.tune import _tune_scopes
from tests.triggers.test_plan_run import _world
from tests.triggers.test_trigger_audit import IDS, WEEKS, _data


def _walk_reference(ready, exit_cond, exit_weeks, min_weeks):
    """Per unit, per week, the stage walk as replay_plan's Notes state it: move up to the
    highest ready stage if higher; else move down one stage once the stage's exit condition
    has held in exit_weeks consecutive weeks after its entry week and the stage has lasted
    min_weeks."""
    n_s, n_t = ready.shape[:2]
    flat_r = ready.reshape(n_s, n_t, -1)
    flat_x = exit_cond.reshape(n_s, n_t, -1)
    out = np.zeros((n_t, flat_r.shape[2]), dtype=np.int8)
    for u in range(flat_r.shape[2]):
        stage, entered, run = 0, 0, 0
        for t in range(n_t):
            hi = max([s + 1 for s in range(n_s) if flat_r[s, t, u]], default=0)
            if stage > 0:
                run = run + 1 if flat_x[stage - 1, t, u] else 0
            new = stage
            if hi > stage:
                new = hi
            elif (stage > 0 and run >= exit_weeks[stage - 1]
                  and t - entered >= min_weeks[stage - 1]):
                new = stage - 1
            if new != stage:
                stage, entered, run = new, t, 0
            out[t, u] = stage
    return out.reshape((n_t,) + ready.shape[2:])


@pytest.mark.parametrize("n_s", [1, 3, 9, 40])  # 40 stages: more than the bits of one word
def test_walk_matches_the_week_by_week_reference_for_any_jobs(n_s, monkeypatch):
    monkeypatch.setattr(kernels, "_MIN_BLOCK", 4)  # small blocks, so threads really split
    rng = np.random.default_rng(n_s)
    ready = rng.random((n_s, 150, 3, 7)) < 0.08
    exit_cond = rng.random((n_s, 150, 3, 7)) < 0.7
    ew, mw = rng.integers(1, 5, n_s), rng.integers(0, 7, n_s)
    ref = _walk_reference(ready, exit_cond, ew, mw)  # replay_plan Notes (the documented rule)
    for jobs in (1, 2, 3):
        got = walk_stages(ready, exit_cond, ew, mw, jobs=jobs)
        assert got.dtype == np.int8
        np.testing.assert_array_equal(got, ref)


def test_column_percentiles_equal_numpy_nanpercentile():
    rng = np.random.default_rng(3)
    for trial in range(12):
        x = rng.normal(size=(int(rng.integers(1, 300)), int(rng.integers(1, 150))))
        x[rng.random(x.shape) < 0.2] = np.nan
        x[: int(rng.integers(0, 20))] = np.nan  # a record that starts late
        x[:, :2] = np.nan if trial % 2 else x[:, :2]  # all-NaN columns
        if trial % 3 == 0:
            x = np.round(x, 1)  # ties
        if trial % 4 == 0:
            x[rng.random(x.shape) < 0.01] = np.inf
        q = np.array([0.0, 7.5, 10.0, 33.3, 50.0, 100.0])
        ref = _nanpercentile(x, q)  # reference library: numpy.nanpercentile
        for jobs in (1, 2):
            with warnings.catch_warnings():  # all-NaN units stay NaN, silently, on threads too
                warnings.simplefilter("error")
                got = kernels.col_percentiles(x, q, jobs=jobs)
            np.testing.assert_array_equal(got, ref)
        np.testing.assert_array_equal(kernels.ColumnPercentiles(x)(q), ref)


def _nanpercentile(x, q):
    with warnings.catch_warnings(), np.errstate(invalid="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN columns, inf - inf
        return np.nanpercentile(x, q, axis=0)


def test_window_count_and_persistence_match_direct_counts():
    rng = np.random.default_rng(4)
    for shape in [(0, 5), (1, 3), (37, 300), (60, 2, 150), (25,)]:
        x = rng.random(shape) < 0.4
        n = shape[0]
        for back, ahead in [(0, 0), (3, 0), (0, 5), (8, 2), (100, 100)]:
            # direct count of True in rows t-back .. t+ahead, clipped (the documented window)
            ref = np.array([x[max(0, t - back):min(n, t + ahead + 1)].sum(axis=0)
                            for t in range(n)]).reshape(x.shape)
            np.testing.assert_array_equal(kernels.window_count(x, back=back, ahead=ahead), ref)
        for length in (1, 2, 7, 9, 64, 1000):
            ref = np.array([x[max(0, t - length + 1):t + 1].sum(axis=0)
                            for t in range(n)]).reshape(x.shape)
            np.testing.assert_array_equal(kernels.trailing_sum(x, length), ref)
        if n:
            # persistence_met docstring: held in at least n of the last m weeks, this one included
            for k, m in [(1, 1), (2, 2), (3, 4), (2, 9)]:
                ref = np.array([x[max(0, t - m + 1):t + 1].sum(axis=0) >= k
                                for t in range(n)]).reshape(x.shape)
                np.testing.assert_array_equal(persistence_met(x, k, m), ref)


def test_year_sums_equal_segment_sums():
    rng = np.random.default_rng(5)
    x = rng.random((400, 3, 6)) < 0.5
    for lengths in ([52, 53, 52, 243], [400], [1] * 400, [300, 100]):
        lengths = np.array(lengths)
        starts = np.concatenate([[0], np.cumsum(lengths)[:-1]])
        ref = np.stack([x[a:a + k].sum(axis=0) for a, k in zip(starts, lengths)])
        got = kernels.year_sums(x, starts, lengths)
        assert got.dtype == np.int64
        np.testing.assert_array_equal(got, ref)


def test_replay_matches_a_county_by_county_state_machine():
    rng = np.random.default_rng(6)
    x = rng.normal(size=(200, 5))
    x[rng.random(x.shape) < 0.05] = np.nan
    thr, leave, m_in, m_out = -0.5, -0.2, 2, 3
    got = replay_trigger(x, threshold=thr, exit_threshold=leave, entry_weeks=m_in,
                         exit_weeks=m_out)
    # replay_trigger Notes: on after m_in weeks in a row at or below the entry threshold, off
    # after m_out weeks in a row above the exit threshold; NaN breaks both runs
    ref = np.zeros(x.shape, dtype=bool)
    for c in range(x.shape[1]):
        on, below, above = False, 0, 0
        for t in range(x.shape[0]):
            v = x[t, c]
            below = below + 1 if v <= thr else 0
            above = above + 1 if v > leave else 0
            on = above < m_out if on else below >= m_in
            ref[t, c] = on
    np.testing.assert_array_equal(got, ref)


def test_tuning_and_audit_do_not_depend_on_jobs(monkeypatch):
    monkeypatch.setattr(tune_mod, "_MAX_CELLS", 52 * 8 * 26)  # one county per chunk
    x, lev = _data()
    regions = ["n", "n", "s", "s"]
    one = tune_thresholds(x, lev, weeks=WEEKS, scope="county", regions=regions, jobs=1)
    two = tune_thresholds(x, lev, weeks=WEEKS, scope="county", regions=regions, jobs=2)
    pd.testing.assert_frame_equal(one.scores, two.scores, check_exact=True)
    pd.testing.assert_frame_equal(one.cv_scores, two.cv_scores, check_exact=True)
    np.testing.assert_array_equal(one.thresholds, two.thresholds)
    # counting once for two scopes gives what two separate searches give
    both = _tune_scopes(x, lev, ("uniform", "county"), weeks=WEEKS, regions=regions)
    uni = tune_thresholds(x, lev, weeks=WEEKS, scope="uniform", regions=regions)
    pd.testing.assert_frame_equal(both[0].cv_scores, uni.cv_scores, check_exact=True)
    pd.testing.assert_frame_equal(both[1].curve, one.curve, check_exact=True)
    pd.testing.assert_frame_equal(both[1].fold_thresholds, one.fold_thresholds)
    a = audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, regions=regions, jobs=1)
    b = audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, regions=regions, jobs=2)
    pd.testing.assert_frame_equal(a.to_frame(), b.to_frame(), check_exact=True)
    pd.testing.assert_frame_equal(a.timeline_frame(), b.timeline_frame(), check_exact=True)


def test_trigger_plan_does_not_depend_on_jobs(monkeypatch):
    monkeypatch.setattr(plan_tune_mod, "_MAX_CELLS", 52 * 8 * 4)  # one unit per block
    monkeypatch.setattr(kernels, "_MIN_BLOCK", 1)
    plan, cube, targets, counties, systems = _world()
    plan = replace(plan, tuning=replace(plan.tuning, local_percentile=15.0))
    runs = [run_trigger_plan(plan, cube=cube, targets=targets, counties=counties,
                             water_systems=systems, seed=5, jobs=j).frames() for j in (1, 2)]
    assert set(runs[0]) == set(runs[1])
    for name in runs[0]:
        pd.testing.assert_frame_equal(runs[0][name], runs[1][name], check_exact=True)


def test_combinations_match_a_cell_by_cell_reading_of_the_rules():
    from types import SimpleNamespace

    from impactlink.triggers.plan_replay import combine_rules

    rng = np.random.default_rng(7)
    beyond = rng.random((4, 30, 5)) < 0.5
    w = [0.7, 1.1, 0.3, 2.0]
    rules = [SimpleNamespace(weight=x) for x in w]
    # combine_rules docstring: "all", "any", at least k rules, or weights summing to min_weight
    cases = {"all": lambda h: all(h), "any": lambda h: any(h), "k_of_n": lambda h: sum(h) >= 3,
             "weights": lambda h: sum(x for x, on in zip(w, h) if on) >= 1.8 - 1e-12}
    for combine, rule in cases.items():
        stage = SimpleNamespace(combine=combine, rules=rules, k=3, min_weight=1.8)
        got = combine_rules(beyond, stage)
        ref = np.array([[rule(beyond[:, t, u].tolist()) for u in range(5)] for t in range(30)])
        np.testing.assert_array_equal(got, ref)
