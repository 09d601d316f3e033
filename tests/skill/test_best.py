"""The one rule for the best candidate (best_candidate)."""

import numpy as np
import pandas as pd

from impactlink.skill import BestCandidate, best_candidate


def _table():
    # hand-made skill rows: baselines and combinations must never be chosen even with
    # higher rpss; two index rows tie on rpss and are split by rank (common practice)
    return pd.DataFrame({
        "target": ["a"] * 7 + ["b"],
        "model": ["climatology", "persistence", "index_persistence", "boosted", "index",
                  "index", "index", "index"],
        "index": [None, None, "spi", "spi", "spei", "spi", "soil", "spi"],
        "scale_weeks": [None, None, 4, 4, 13, 26, 4, 4],
        "lag_weeks": [None, 1, 1, 1, 1, 1, 4, 1],
        "rpss": [0.0, 0.9, 0.8, 0.7, 0.30, 0.30, np.nan, 0.95],
        "rpss_lo": [0.0, 0.8, 0.7, 0.6, 0.2, 0.1, np.nan, 0.9],
        "rpss_hi": [0.0, 1.0, 0.9, 0.8, 0.4, 0.5, np.nan, 1.0],
        "rank": [np.nan, np.nan, 1, 1, 2, 1, 3, 1],
    })


def test_highest_rpss_among_index_rows_ties_by_rank():
    b = best_candidate(_table(), "a")
    assert b == BestCandidate(index="spi", scale=26, lag=1, model="index", row=5, rpss=0.30,
                              rpss_lo=0.1, rpss_hi=0.5, rank=1.0)


def test_ties_on_rpss_and_rank_fall_to_index_name():
    t = _table()
    t.loc[4, "rank"] = 1
    assert best_candidate(t, "a").index == "spei"  # "spei" < "spi"


def test_target_filter_and_none_when_nothing_qualifies():
    assert best_candidate(_table(), "b").rpss == 0.95
    assert best_candidate(_table()).rpss == 0.95  # no target: all rows
    t = _table()
    assert best_candidate(t[t["model"] != "index"], "a") is None
    assert best_candidate(t.iloc[:0]) is None
