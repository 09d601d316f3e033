"""Plain-language sentences: tiny hand-built rows."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.report._select import SummarySkill, summary_skill
from impactlink.report.text import (
    answer_card,
    candidate_label,
    fmt_interval,
    fmt_num,
    index_name,
    persistence_sentence,
    score_label,
    target_label,
    verdict,
)


def test_labels_and_numbers():
    assert candidate_label("spi", 13, 4) == "SPI, 13-week time scale, 4-week lag"
    assert candidate_label("spei", 26.0, 0.0, short=True) == "SPEI over 26 weeks, same week"
    assert candidate_label("spei", 26, 8, short=True, cadence="monthly") == (
        "SPEI over 6 months, 2 months ahead")  # 26 weeks = 6 months, 8 weeks = 2 months
    assert candidate_label("my_gauge", np.nan, 2) == "my gauge, 2-week lag"
    assert candidate_label("soil_moisture", 0, 4) == "soil moisture, as supplied, 4-week lag"
    assert candidate_label("soil_moisture", 0, 4, short=True) == (
        "soil moisture, as supplied, 4 weeks ahead")
    assert index_name(None) == "no index" and index_name("EDDI") == "EDDI"
    assert score_label("rpss") == "ranked probability skill score"
    assert fmt_num(0.2049) == "0.20" and fmt_num(None) == "n/a" and fmt_num(pd.NA) == "n/a"
    assert fmt_num(-0.0008) == "0.00" and fmt_num(-0.006) == "-0.01"
    assert target_label("restrictions", "restrictions:onset:4w") == "onset:4w"
    assert target_label("crop", "crop:") == "crop:" and target_label("a", "b") == "b"
    assert fmt_interval(0.214, 0.12, 0.3) == "0.21 (0.12 to 0.30)"
    assert fmt_interval(0.214, np.nan, 0.3) == "0.21"


def test_verdict_branches():
    assert verdict(0.2, 0.05, beats_seasonal=True, beats_persistence=True).startswith("Clear")
    assert verdict(0.2, 0.05, beats_seasonal=True, beats_persistence=False).startswith("Real")
    assert verdict(0.03, 0.01, beats_seasonal=True, beats_persistence=True).startswith(
        "Clear but small")
    assert verdict(0.03, 0.01, beats_seasonal=False).startswith("Small signal")
    assert verdict(0.1, -0.02).startswith("Weak")
    assert verdict(-0.1, -0.3).startswith("No usable signal")
    assert verdict(np.nan, np.nan) == "Not scored in this run."


def _rows():
    summary = pd.Series(dict(
        impact="restrictions", target="onset", best_index="spi", best_scale_weeks=13,
        best_lag_weeks=4, best_model="logistic", ranking_score="bss", naive_bss=0.31,
        nested_bss=0.22, nested_bss_lo=0.08, nested_bss_hi=0.35, n_candidates=42,
        n_indistinguishable=3, events=27, n=900,
        persistence_gain=0.04, persistence_gain_lo=-0.01, persistence_gain_hi=0.09))
    skill = pd.DataFrame([
        ("spi", 13, 4, "logistic", 0.31, True, True, True, False),
        ("spei", 13, 4, "logistic", 0.29, True, True, True, False),
        ("spi", 26, 8, "logistic", 0.28, True, True, True, False),
        ("eddi", 4, 0, "logistic", 0.02, False, True, False, False),
        (None, None, None, "seasonal", 0.10, False, None, None, None),
        (None, None, None, "persistence", 0.33, False, None, None, None),
    ], columns=["index", "scale_weeks", "lag_weeks", "model", "bss",
                "indistinguishable_from_best", "beats_climatology", "beats_seasonal",
                "beats_persistence"])
    skill["impact"], skill["target"] = "restrictions", "onset"
    return summary, skill


def test_answer_card_reads_best_baselines_ties_and_evidence():
    summary, skill = _rows()
    a = answer_card(summary, skill)
    assert a.which == "SPI, 13-week time scale, 4-week lag (logistic model)"
    assert a.how_good.startswith("Brier skill score 0.22 (0.08 to 0.35)")
    assert "42 candidates" in a.how_good and "own score 0.31" in a.how_good
    assert a.baselines == ("Baseline scores: seasonal 0.10, persistence 0.33. Beats climatology, "
                           "seasonal. Does not beat persistence.")
    assert a.how_sure == ("2 other candidates are statistically as good as the best: "
                          "SPEI over 13 weeks, 4 weeks ahead; SPI over 26 weeks, 8 weeks ahead.")
    assert a.rests_on == "Rests on 27 events among 900 scored cases."
    assert a.verdict.startswith("Real signal")
    assert a.persistence == "Gain over persistence: 0.04 (-0.01 to 0.09)."


def test_answer_card_without_skill_table_still_answers():
    summary, _ = _rows()
    a = answer_card(summary.drop(labels=["n_indistinguishable"]))
    assert a.baselines == ""
    assert a.how_sure == "No other candidate is statistically as good as the best."
    a3 = answer_card(pd.concat([summary, pd.Series(dict(
        nested_most_picked_share=0.6, nested_distinct_picks=4, n_years=31))]))
    assert a3.how_sure.endswith("picked the same candidate 60 % of the time (4 different "
                                "candidates were picked).")
    assert a3.rests_on == "Rests on 27 events among 900 scored cases in 31 years."
    a2 = answer_card(summary.drop(labels=["events", "n"]))
    assert a2.rests_on == "Rests on an unknown number of events among an unknown number of scored cases."


def test_summary_is_read_under_the_skill_stage_column_names():
    # skill_summary.csv as impactlink/skill/rank.py writes it: the score is named in
    # ranking_score and its columns carry that name.
    raw = pd.Series(dict(impact="r", target="r:onset", ranking_score="rpss", naive_rpss=0.3,
                         nested_rpss=0.2, nested_rpss_lo=0.1, nested_rpss_hi=0.28,
                         index_adds_skill=False, persistence_gain=0.01,
                         persistence_gain_lo=-0.02, persistence_gain_hi=0.04))
    assert summary_skill(raw) == SummarySkill("rpss", 0.3, 0.2, 0.1, 0.28)
    a = answer_card(raw)
    assert a.how_good.startswith("Ranked probability skill score 0.20 (0.10 to 0.28)")
    assert "own score 0.30" in a.how_good
    assert a.persistence == persistence_sentence(raw) == (
        "For a new restriction episode starting, the index does not clearly add warning beyond persistence (knowing the "
        "current impact level): skill gain 0.01 (-0.02 to 0.04).")
    missing = summary_skill(raw.drop(labels=["ranking_score", "nested_rpss"]))
    assert missing.score == "bss" and np.isnan(missing.nested)


def test_baselines_quote_persistence_at_the_best_lag():
    summary, skill = _rows()
    per_lag = pd.DataFrame(dict(impact="restrictions", target="onset", model="persistence",
                                lag_weeks=[0, 4, 8], bss=[0.40, 0.20, 0.10]))
    skill = pd.concat([skill[skill["model"] != "persistence"], per_lag], ignore_index=True)
    a = answer_card(summary, skill)
    assert "persistence 0.20" in a.baselines  # the best candidate's lag is 4 weeks


def test_ties_are_single_candidates_listed_once_and_flags_come_from_the_index_model():
    # The skill stage scores several models on the same index, time scale and lag
    # ("index", "boosted", "index_persistence"): ties are listed once, the combination with
    # persistence is not a candidate, and the flags are those of the plain index model.
    summary, _ = _rows()
    summary = summary.drop(labels=["best_model"])
    skill = pd.DataFrame([
        ("spi", 13, 4, "index", 0.31, True, True, True, False),
        ("spi", 13, 4, "index_persistence", 0.40, False, False, False, False),
        ("spi", 13, 4, "boosted", 0.32, True, True, True, False),
        ("spei", 8, 0, "index", 0.30, True, True, True, False),
        ("spei", 8, 0, "boosted", 0.30, True, True, True, False),
    ], columns=["index", "scale_weeks", "lag_weeks", "model", "bss",
                "indistinguishable_from_best", "beats_climatology", "beats_seasonal",
                "beats_persistence"])
    skill["impact"], skill["target"] = "restrictions", "onset"
    summary["n_indistinguishable"] = 2
    a = answer_card(summary, skill)
    assert a.how_sure == "1 other candidate is statistically as good as the best: SPEI over 8 weeks, same week."
    assert a.baselines.endswith("Beats climatology, seasonal. Does not beat persistence.")


def test_binary_target_scored_by_rpss_is_called_a_brier_skill_score():
    summary, _ = _rows()
    summary = summary.rename(lambda k: k.replace("_bss", "_rpss"))
    summary["ranking_score"], summary["kind"] = "rpss", "binary"
    assert answer_card(summary).how_good.startswith("Brier skill score 0.22")
    summary["kind"] = "ordinal"
    assert answer_card(summary).how_good.startswith("Ranked probability skill score 0.22")
