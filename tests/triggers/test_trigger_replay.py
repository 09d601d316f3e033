"""Trigger replay: entry/exit persistence rules on hand-built week series."""

import numpy as np
import pytest

from impactlink.errors import TriggerError
from impactlink.triggers import replay_trigger


def test_entry_and_exit_rules_hand_counted():
    # threshold -1.0, enter after 2 weeks at or below, leave after 3 weeks above.
    x = np.array([0.5, -1.0, 0.2, -1.1, -1.3, -0.2, -0.1, -1.2, 0.1, 0.3, 0.4, 0.0, -1.0])
    on = replay_trigger(x[:, None], threshold=-1.0, entry_weeks=2, exit_weeks=3)
    # week 1 alone (-1.0, at the threshold) is a run of 1: no entry; weeks 3-4 complete the
    # entry run -> on at week 4; weeks 5,6 above (2 < 3), week 7 below resets the exit run;
    # weeks 8,9,10 above -> off at week 10; week 12 is a single week at the threshold.
    expected = [0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 0, 0, 0]
    assert on.ravel().astype(int).tolist() == expected
    assert on.sum() == 6


def test_hysteresis_keeps_state_between_thresholds():
    x = np.array([-1.6, -1.7, -1.2, -1.1, -1.3, -0.9, -0.8, -1.4, -1.5])
    on = replay_trigger(x[:, None], threshold=-1.5, exit_threshold=-1.0, entry_weeks=2,
                        exit_weeks=2)
    # on at week 1; weeks 2-4 sit between -1.5 and -1.0 (neither rule moves); weeks 5,6 are
    # above -1.0 -> off at week 6; weeks 7,8 are a new entry run only from week 7 (-1.4 is
    # above -1.5), so week 8 (-1.5) is a run of 1 -> stays off.
    assert on.ravel().astype(int).tolist() == [0, 1, 1, 1, 1, 1, 0, 0, 0]


def test_nan_breaks_runs_and_holds_state():
    x = np.array([-2.0, np.nan, -2.0, -2.0, 1.0, np.nan, 1.0, 1.0])
    on = replay_trigger(x[:, None], threshold=-1.0, entry_weeks=2, exit_weeks=2)
    # the NaN at week 1 breaks the entry run; weeks 2-3 enter; the NaN at week 5 breaks the exit
    # run, so exit is completed only at week 7.
    assert on.ravel().astype(int).tolist() == [0, 0, 0, 1, 1, 1, 1, 0]


def test_one_week_rules_equal_simple_exceedance():
    # property: with entry = exit = 1 and no hysteresis the state is x <= threshold.
    rng = np.random.default_rng(3)
    x = rng.standard_normal((300, 7))
    thr = rng.uniform(-1.5, 0.0, 7)
    on = replay_trigger(x, threshold=thr, entry_weeks=1, exit_weeks=1)
    np.testing.assert_array_equal(on, x <= thr)


def test_per_county_thresholds_match_one_county_at_a_time():
    rng = np.random.default_rng(4)
    x = np.cumsum(rng.standard_normal((200, 5)), axis=0) * 0.3
    thr = np.array([-1.0, -0.5, -1.5, 0.0, -0.8])
    on = replay_trigger(x, threshold=thr, entry_weeks=3, exit_weeks=2, exit_threshold=thr + 0.3)
    for j in range(5):
        one = replay_trigger(x[:, [j]], threshold=thr[j], entry_weeks=3, exit_weeks=2,
                             exit_threshold=thr[j] + 0.3)
        np.testing.assert_array_equal(on[:, j], one[:, 0])


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"index_values": np.zeros(5), "threshold": -1.0}, "2-D array shaped"),
        ({"index_values": np.zeros((5, 2)), "threshold": np.zeros(3)}, r"shape \(2,\)"),
        ({"index_values": np.zeros((5, 2)), "threshold": -1.0, "exit_threshold": -2.0},
         "exit_threshold is below threshold"),
        ({"index_values": np.zeros((5, 2)), "threshold": -1.0, "entry_weeks": 0},
         "entry_weeks must be a whole number"),
        ({"index_values": np.zeros((5, 2)), "threshold": np.nan}, "finite"),
    ],
)
def test_errors_name_the_argument(kwargs, match):
    values = kwargs.pop("index_values")
    with pytest.raises(TriggerError, match=match):
        replay_trigger(values, **kwargs)
