"""Trigger scores: contingency-table scores and episode matching."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from impactlink.errors import TriggerError
from impactlink.skill.scores import ContingencyScores
from impactlink.triggers import evaluate_trigger

REF = Path(__file__).resolve().parents[1] / "reference"


def test_finley_table_through_the_vectorised_contingency_scores():
    # Finley's tornado forecasts (1884): a=28, b=72, c=23, d=2680, as tabulated in Wilks,
    # Statistical Methods in the Atmospheric Sciences, 3rd ed., section 8.2 (values from memory,
    # tests/reference/skill_finley_tornado.csv). The trigger stage computes its 2x2 scores with
    # ContingencyScores.frame_from_counts (arrays); it must match the published values to half a
    # unit of the last printed decimal, in every row of a batch.
    ref = pd.read_csv(REF / "skill_finley_tornado.csv")
    got = ContingencyScores.frame_from_counts([28, 28], [72, 72], [23, 23], [2680, 2680])
    for row in ref.itertuples():
        np.testing.assert_allclose(got[row.score], row.value, atol=0.5 * 10.0 ** -row.decimals)
    # exact arithmetic: Peirce = hit rate - false alarm RATE = 28/51 - 72/2752
    assert got["peirce_skill_score"][0] == pytest.approx(28 / 51 - 72 / 2752, abs=1e-15)
    assert got["false_alarm_ratio"][0] == pytest.approx(72 / 100, abs=1e-15)
    assert got["false_alarm_rate"][0] == pytest.approx(72 / 2752, abs=1e-15)


def test_scores_of_perfect_and_constant_forecasts():
    # Common practice: perfect -> 1; a forecast that is always "yes" has Peirce 0; no events ->
    # undefined (NaN), not 0.
    f = ContingencyScores.frame_from_counts([10, 10, 0], [0, 90, 0], [0, 0, 0], [90, 0, 10])
    assert f["peirce_skill_score"][0] == 1.0 and f["critical_success_index"][0] == 1.0
    assert f["peirce_skill_score"][1] == 0.0
    assert np.isnan(f["peirce_skill_score"][2])


WEEKS = pd.date_range("2001-01-01", periods=20, freq="7D")
N = np.nan
ON_A = [0, 0, 1, 1, 1, 0, 0, 0, 0, 0, 1, 1, 0, 0, 0, 0, 0, 0, 1, 1]
IMP_A = [0, 0, 0, 0, 1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 1, 1, N, N, 0, 0]
# county B: impact already under way when coverage starts (no known onset), trigger never on
ON_B = [0] * 20
IMP_B = [N, N, 1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0]


def _hand_case():
    on = np.array([ON_A, ON_B], dtype=bool).T
    lev = np.array([IMP_A, IMP_B], dtype=float).T
    return evaluate_trigger(on, lev, weeks=WEEKS, window_weeks=2, county_ids=["A", "B"])


def test_hand_counted_county():
    t = _hand_case().table.set_index("county")
    a = t.loc["A"]
    # weekly table over the 18 known weeks: hit week 4; false alarms 2,3,10,11,18,19;
    # misses 5,14,15; correct negatives 0,1,6,7,8,9,12,13.
    assert (a.hits, a.false_alarms, a.misses, a.correct_negatives) == (1, 6, 3, 8)
    assert a.peirce_skill == pytest.approx(1 / 4 - 6 / 14)
    assert a.csi == pytest.approx(1 / 10)
    # onsets at weeks 4 (trigger on since week 2: hit, lead 2) and 14 (nothing on in 12-14)
    assert (a.episodes, a.episodes_hit, a.hit_rate) == (2, 1, 0.5)
    assert a.lead_weeks_median == 2
    # activations at 2 (impact at 4: true), 10 (10-12 known, no impact: false), 18 (window runs
    # past the record: not judged)
    assert (a.activations, a.activations_judged, a.false_activations) == (3, 2, 1)
    assert a.false_alarm_ratio == 0.5
    assert a.weeks_on_share == pytest.approx(7 / 20)
    assert a.known_weeks == 18


def test_unknown_weeks_are_not_no_impact():
    t = _hand_case().table.set_index("county")
    b = t.loc["B"]
    assert b.known_weeks == 18
    assert b.episodes == 0  # the onset before coverage is not counted
    assert (b.misses, b.correct_negatives) == (2, 16)


def test_pooled_row_sums_counts():
    t = _hand_case().table
    pooled = t.iloc[-1]
    assert pooled.county == "all"
    for col in ["hits", "false_alarms", "misses", "correct_negatives", "episodes",
                "activations", "false_activations"]:
        assert pooled[col] == t.iloc[:-1][col].sum()
    assert pooled.peirce_skill == pytest.approx(1 / 6 - 6 / 30)


def test_county_order_does_not_change_scores():
    rng = np.random.default_rng(0)
    on = rng.random((150, 6)) < 0.2
    lev = (rng.random((150, 6)) < 0.15).astype(float)
    lev[rng.random((150, 6)) < 0.1] = np.nan
    weeks = pd.date_range("2001-01-01", periods=150, freq="7D")
    perm = rng.permutation(6)
    a = evaluate_trigger(on, lev, weeks=weeks).table
    b = evaluate_trigger(on[:, perm], lev[:, perm], weeks=weeks).table
    pd.testing.assert_frame_equal(
        a.iloc[:-1].iloc[perm].drop(columns="county").reset_index(drop=True),
        b.iloc[:-1].drop(columns="county").reset_index(drop=True),
    )
    pd.testing.assert_series_equal(a.iloc[-1], b.iloc[-1], check_names=False)


def test_integer_levels_with_minus_one_unknown():
    on = np.array(ON_A, dtype=bool)[:, None]
    as_int = np.nan_to_num(np.array(IMP_A, dtype=float), nan=-1).astype(int)[:, None]
    as_float = np.array(IMP_A, dtype=float)[:, None]
    a = evaluate_trigger(on, as_int, weeks=WEEKS, window_weeks=2).table
    b = evaluate_trigger(on, as_float, weeks=WEEKS, window_weeks=2).table
    pd.testing.assert_frame_equal(a, b)


@pytest.mark.parametrize(
    "on, lev, weeks, kwargs, match",
    [
        (np.zeros(20, bool), np.zeros(20), WEEKS, {}, "2-D boolean array"),
        (np.zeros((20, 2)), np.zeros((20, 2)), WEEKS, {}, "must be boolean"),
        (np.zeros((20, 2), bool), np.zeros((20, 3)), WEEKS, {}, "impact_level has shape"),
        (np.zeros((19, 2), bool), np.zeros((19, 2)), WEEKS, {}, "weeks has 20 entries"),
        (np.zeros((20, 2), bool), np.zeros((20, 2)), WEEKS, {"min_level": 0}, "min_level"),
        (np.zeros((20, 2), bool), np.zeros((20, 2)), WEEKS, {"window_weeks": -1},
         "window_weeks"),
    ],
)
def test_errors(on, lev, weeks, kwargs, match):
    with pytest.raises(TriggerError, match=match):
        evaluate_trigger(on, lev, weeks=weeks, **kwargs)
