"""Memo sentences for trigger plans: the sentence of the issue, edge cases, and the sentence
built from a replayed plan's numbers."""

import numpy as np

from impactlink.report.words_plan import memo_sentence

ROW = {"stage_name": "conserve", "impact": "restrictions", "since_year": 1981, "onsets": 18,
       "onsets_matched": 14, "lead_weeks_median": 5.0, "entries_without_impact": 6,
       "matched_entries": 14, "top_driver_index": "spei", "top_driver_scale_weeks": 26,
       "top_driver_entries": 9}


def test_the_memo_sentence_reads_as_a_committee_would_write_it():
    assert memo_sentence(ROW) == (
        "Stage conserve would have been entered in 14 of the 18 restriction onsets since "
        "1981, a median 5 weeks before, with 6 entries that brought no restriction; driven by "
        "SPEI-26 in 9 of 14."
    )


def test_singular_counts_missing_lead_and_supplied_indicator():
    row = dict(ROW, onsets=1, onsets_matched=1, lead_weeks_median=1.0,
               entries_without_impact=1, matched_entries=1, top_driver_entries=1,
               top_driver_index="soil_moisture_pct", top_driver_scale_weeks=0)
    assert memo_sentence(row) == (
        "Stage conserve would have been entered in 1 of the 1 restriction onset since 1981, "
        "a median 1 week before, with 1 entry that brought no restriction; driven by "
        "soil-moisture percentile in 1 of 1."
    )
    none = dict(ROW, onsets_matched=0, lead_weeks_median=np.nan, matched_entries=0,
                top_driver_entries=0)
    assert memo_sentence(none) == (
        "Stage conserve would have been entered in 0 of the 18 restriction onsets since 1981, "
        "with 6 entries that brought no restriction."
    )
    quiet = dict(ROW, onsets=0, impact="hay_price_spikes")
    assert memo_sentence(quiet).startswith("No hay price spike onset was recorded since 1981")


def test_trigger_figures_draw_from_the_run_frames():
    import pandas as pd
    import pytest

    from impactlink.errors import ReportError
    from impactlink.report.fig_style import figure_png
    from impactlink.report.figures_plan import plan_timeline, tuning_tradeoff

    curve = pd.DataFrame({"threshold": [5.0, 10.0, 5.0, 10.0], "enter_weeks": [1, 1, 2, 2],
                          "hit_rate": [0.4, 0.6, 0.3, 0.5],
                          "false_alarm_ratio": [0.5, 0.7, 0.4, 0.6],
                          "weeks_in_stage_share": [0.1, 0.2, 0.08, 0.15],
                          "chosen": [False, True, False, False]})
    fig = tuning_tradeoff(curve)
    assert figure_png(fig)[:4] == b"\x89PNG"
    with pytest.raises(ReportError, match="no row has chosen = True"):
        tuning_tradeoff(curve.assign(chosen=False))
    weeks = pd.date_range("2001-01-01", periods=30, freq="7D")
    tl = pd.DataFrame({"unit": "90001", "week": weeks, "indicator": "spei26",
                       "value": np.sin(np.arange(30) / 4), "enter_threshold": -0.5,
                       "exit_threshold": 0.0, "stage": (np.sin(np.arange(30) / 4) < -0.5) * 1,
                       "impact_level": np.r_[np.full(5, np.nan), np.zeros(20), np.ones(5)]})
    fig = plan_timeline(tl, unit="90001", stage_names=["watch"])
    assert len(fig.axes) == 3 and figure_png(fig)[:4] == b"\x89PNG"
    with pytest.raises(ReportError, match="no rows for unit"):
        plan_timeline(tl, unit="x")
