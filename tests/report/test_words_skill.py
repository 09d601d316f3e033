"""Sentences about skill from numbers (impactlink.report.words_skill)."""

import math

from impactlink.report.words_skill import persistence_sentence, summary_sentence

PERS = {"target": "crop:state", "lag_weeks": 1, "index": "spei", "scale_weeks": 13,
        "gain": -0.0123, "gain_lo": -0.03, "gain_hi": 0.004, "index_adds_skill": False}


def test_persistence_sentence_words_the_numbers_and_the_verdict():
    s = persistence_sentence(PERS, ci=0.9)
    assert s.startswith("crop:state, 1 week(s) ahead: SPEI at 13 weeks changes")
    assert "-0.012 (90% interval -0.030 to +0.004)" in s
    assert "does not clearly add skill" in s
    s2 = persistence_sentence({**PERS, "index_adds_skill": True, "gain_lo": math.nan})
    assert "adds skill beyond knowing" in s2 and "interval" not in s2


def test_summary_sentence_has_counts_nested_and_caution():
    row = {"target": "crop:state", "best_index": "spi", "best_scale_weeks": 13,
           "best_lag_weeks": 1, "naive_rpss": 0.2, "naive_rpss_lo": 0.1, "naive_rpss_hi": 0.3,
           "events": 40, "n_years": 14, "n_candidates": 18, "n_indistinguishable": 3,
           "nested_rpss": 0.15, "boosted_gain": 0.01, "boosted_gain_lo": -0.01,
           "boosted_gain_hi": 0.02}
    s = summary_sentence(row, persistence=PERS)
    assert "SPI over 13 weeks, 1 week(s) ahead" in s
    assert "skill 0.200 (90% interval 0.100 to 0.300)" in s
    assert "2 of the other 17 candidates" in s
    assert "selection-aware estimate is 0.150" in s
    assert "boosted curve on the best candidate changes it by +0.010" in s
    assert "over persistence" in s
    assert s.endswith("This is a statistical association, not proof of cause.")
