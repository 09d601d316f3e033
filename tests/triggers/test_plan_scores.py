"""Trigger-plan scores: episode matching by hand, exposure, and the weekly 2x2 table checked
against scikit-learn's confusion matrix."""

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix

from impactlink.errors import TriggerError
from impactlink.triggers import replay_plan, score_plan
from impactlink.triggers.plan_scores import match_onsets
from tests.triggers.plan_cases import counties_of, cube_of, one_indicator_plan

D, W = -2.0, 1.0
ONE_WEEK = dict(enter=-1.0, exit=-1.0, enter_weeks=1, exit_weeks=1)


def _score(x_cols, lev_cols, exposed=None, window=3, flip=4, regions=None):
    cube = cube_of(*x_cols)
    rep = replay_plan(one_indicator_plan(ONE_WEEK), cube=cube,
                      counties=counties_of(cube, regions))
    lev = np.column_stack([np.asarray(c, dtype=float) for c in lev_cols])
    return rep, score_plan(rep, lev, exposed=exposed, window_weeks=window, flip_weeks=flip)


def _all(scores):
    return scores.table[scores.table["by"] == "all"].iloc[0]


def test_early_warning_inside_the_window_is_a_hit_with_its_lead():
    #        0  1  2  3  4  5  6  7  8  9
    x = [W, W, D, D, D, D, W, W, W, W]
    lev = [0, 0, 0, 0, 1, 1, 0, 0, 0, 0]  # onset at week 4; the stage entered at week 2
    _, sc = _score([x], [lev])
    row = _all(sc)
    assert (row.onsets, row.onsets_matched) == (1, 1)
    assert sc.leads["lead_weeks"].tolist() == [2]
    assert (row.entries, row.entries_without_impact) == (1, 0)
    # exit timing: first week off (6) minus first week without impact after onset (6)
    assert sc.leads["exit_minus_recovery_weeks"].tolist() == [0.0]


def test_late_trigger_is_a_miss_and_an_entry_without_impact():
    x = [W, W, W, W, W, W, D, D, W, W, W, W]
    lev = [0, 0, 0, 1, 1, 1, 1, 1, 0, 0, 0, 0]  # onset at week 3; stage enters at week 6
    _, sc = _score([x], [lev])
    row = _all(sc)
    assert (row.onsets, row.onsets_matched) == (1, 0)
    assert (row.entries, row.entries_judged, row.entries_without_impact) == (1, 1, 1)
    # weekly table: on weeks 6,7 are hits (impact goes on); weeks 3-5 misses
    assert (row.hits, row.misses, row.false_alarms) == (2, 3, 0)


def test_warning_earlier_than_the_window_is_not_a_hit():
    x = [D, W, W, W, W, W, W, W]
    lev = [0, 0, 0, 0, 0, 1, 0, 0]  # stage on only at week 0; onset at 5 with window 3
    _, sc = _score([x], [lev])
    row = _all(sc)
    assert (row.onsets_matched, row.entries_without_impact) == (0, 1)


def test_unit_without_water_systems_contributes_no_false_alarms():
    x = [W, D, D, W, W, D, D, W, W, W, W, W]
    lev = [0] * 12  # both counties "record" no restriction, but county 2 has no water system
    _, both = _score([x, x], [lev, lev], window=2)
    _, exposed = _score([x, x], [lev, lev], exposed=np.array([True, False]), window=2,
                        regions=["a", "b"])
    assert _all(both).false_alarms == 2 * _all(exposed).false_alarms
    assert _all(both).entries_without_impact == 2 * _all(exposed).entries_without_impact
    region_b = exposed.table[(exposed.table["by"] == "region") & (exposed.table["group"] == "b")]
    cols = ["hits", "false_alarms", "misses", "correct_negatives", "entries",
            "entries_without_impact", "onsets"]
    assert (region_b[cols].to_numpy() == 0).all()
    assert exposed.settings["exposed_units"] == 1


def test_weeks_outside_coverage_are_not_counted():
    x = [D, D, W, W, D, D]
    lev = [np.nan, np.nan, 0, 0, 0, 0]
    _, sc = _score([x], [lev])
    row = _all(sc)
    assert row.hits + row.false_alarms + row.misses + row.correct_negatives == 4
    assert row.false_alarms == 2  # weeks 4, 5
    # entry at week 0 is not judged (weeks 0-3 not all covered); the one at week 4 runs past
    # the record end (window 3) -> not judged either
    assert row.entries_judged == 0


def test_weekly_table_equals_sklearn_confusion_matrix():
    rng = np.random.default_rng(0)
    x = np.cumsum(rng.standard_normal((300, 6)), axis=0) * 0.2
    lev = (rng.random((300, 6)) < 0.2).astype(float)
    lev[rng.random((300, 6)) < 0.1] = np.nan
    exposed = np.array([True, True, False, True, True, True])
    rep, sc = _score(list(x.T), list(lev.T), exposed=exposed)
    ok = np.isfinite(lev) & exposed
    tn, fp, fn, tp = confusion_matrix((lev[ok] >= 1).astype(int),
                                      (rep.stage[ok] >= 1).astype(int)).ravel()
    row = _all(sc)
    assert (row.hits, row.false_alarms, row.misses, row.correct_negatives) == (tp, fp, fn, tn)
    assert row.peirce_skill_score == pytest.approx(tp / (tp + fn) - fp / (fp + tn))
    assert row.false_alarm_ratio == pytest.approx(fp / (tp + fp))
    assert row.false_alarm_rate == pytest.approx(fp / (fp + tn))
    # season and region groups partition the weekly counts
    for by in ("season", "region"):
        g = sc.table[sc.table["by"] == by]
        assert g["hits"].sum() == tp and g["correct_negatives"].sum() == tn


def test_flip_flops_are_entries_soon_after_an_exit():
    x = [D, W, D, W, W, W, W, W, D, W]
    lev = [0] * 10
    _, sc = _score([x], [lev], flip=3)
    # exits at weeks 1 and 3 and 9; entries at 0, 2 (1 week after an exit: flip) and 8 (5 weeks
    # after the exit at 3: not a flip)
    assert _all(sc).flip_flops == 1


def test_match_onsets_docstring_case_and_decades():
    on = np.array([0, 1, 1, 1, 0, 0, 0, 0, 1], bool)[:, None]
    onset = np.array([0, 0, 0, 1, 0, 0, 0, 1, 0], bool)[:, None]
    m = match_onsets(on, onset, 2)
    # onset 7: last on-week is 3, four weeks earlier than 7 -> outside the window of 2
    assert m["hit"][:, 0].tolist() == [False] * 3 + [True] + [False] * 5
    _, sc = _score([[D] * 4 + [W] * 4], [[0] * 8])
    dec = sc.decades
    assert dec.groupby("decade")["weeks_share"].sum().tolist() == pytest.approx([1.0])


def test_impact_shape_error():
    cube = cube_of([0.0, 1.0])
    rep = replay_plan(one_indicator_plan(ONE_WEEK), cube=cube, counties=counties_of(cube))
    with pytest.raises(TriggerError, match=r"impact_level has shape \(3, 1\); expected"):
        score_plan(rep, np.zeros((3, 1)))
    with pytest.raises(TriggerError, match="exposed has shape"):
        score_plan(rep, np.zeros((2, 1)), exposed=np.ones(3, bool))


def test_unit_impacts_equal_the_dense_membership_product():
    """County units (identity membership) and units of several counties (a sparse product)
    give the dense 'any member county' counts: impact where some exposed member county had
    an impact, counted where some member county was covered."""
    from dataclasses import replace

    from impactlink.triggers.plan_scores import unit_impacts

    rng = np.random.default_rng(8)
    x = rng.normal(size=(60, 7))
    cube = cube_of(*x.T)
    rep = replay_plan(one_indicator_plan(dict(name="act", enter=-0.5, exit=-0.5)), cube=cube,
                      counties=counties_of(cube))
    lev = rng.integers(0, 3, size=x.shape).astype(float)
    lev[rng.random(x.shape) < 0.2] = np.nan
    exposed = rng.random(7) < 0.7
    mem = (rng.random((7, 3)) < 0.5).astype(float)
    for members in (rep.members, mem):
        r = replace(rep, members=members)
        imp, cnt = unit_impacts(r, lev, exposed=exposed, min_level=2)
        covered = np.isfinite(lev) & (lev >= 0) & exposed
        hit = covered & (np.where(covered, lev, 0) >= 2)
        m = members.astype(np.int64)
        want_cnt = (covered.astype(np.int64) @ m) > 0
        want_imp = ((hit.astype(np.int64) @ m) > 0) & want_cnt
        np.testing.assert_array_equal(cnt, want_cnt)
        np.testing.assert_array_equal(imp, want_imp)
