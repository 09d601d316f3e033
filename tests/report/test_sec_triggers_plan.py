"""The trigger section on a hand-made run folder with a replayed, scored and tuned plan.

Invented numbers on the fake run of ``conftest.py``: these tests check what the section shows
(memo sentence per stage, tuned thresholds with intervals, the statewide-vs-local map, units
that cannot record the impact left unscored), not the science behind the tables.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from _pageparse import SectionPage
from conftest import COUNTY_NAMES

from impactlink.report import maps as M
from impactlink.report import words_triggers as W
from impactlink.report.common import FigureSink
from impactlink.report.runfolder import read_run_folder
from impactlink.report.sec_triggers import triggers_section
from impactlink.report.text import fmt_interval
from impactlink.report.words_plan import memo_sentence

STAGES = ("watch", "conserve", "ration")
IDS = [f"9{k:04d}" for k in range(len(COUNTY_NAMES))]
DRY = IDS[5]  # the county without a water system: nothing can be recorded there


def _plan_tables(folder) -> dict[str, pd.DataFrame]:
    memo = pd.DataFrame({
        "stage": [1, 2, 3], "stage_name": list(STAGES), "impact": "restrictions",
        "since_year": 1981, "exposed_units": 5, "onsets": [18, 18, 18],
        "onsets_matched": [16, 14, 6], "lead_weeks_median": [8.0, 5.0, 1.0],
        "entries": [40, 22, 8], "entries_without_impact": [24, 8, 2],
        "matched_entries": [16, 14, 6], "top_driver": ["spi_13", "spei_26", "spei_26"],
        "top_driver_index": ["spi", "spei", "spei"], "top_driver_scale_weeks": [13, 26, 26],
        "top_driver_entries": [10, 9, 6], "driver_counts": "x", "flip_flops": [5, 2, 0]})
    a, b, c, d = np.array([300, 220, 90]), np.array([500, 200, 40]), \
        np.array([100, 180, 310]), np.array([6000, 6300, 6460])
    scores = pd.DataFrame({
        "stage": [1, 2, 3], "stage_name": list(STAGES), "by": "all", "group": "all",
        "hits": a, "false_alarms": b, "misses": c, "correct_negatives": d,
        "hit_rate": a / (a + c), "false_alarm_ratio": b / (a + b),
        "false_alarm_rate": b / (b + d), "peirce_skill_score": a / (a + c) - b / (b + d),
        "heidke_skill_score": 0.3, "onsets": 18, "onsets_matched": [16, 14, 6],
        "entries": [40, 22, 8], "entries_without_impact": [24, 8, 2], "flip_flops": [5, 2, 0],
        "weeks_in_stage_share": [0.12, 0.06, 0.02], "lead_weeks_median": [8.0, 5.0, 1.0]})
    thr = np.repeat([5.0, 10.0, 20.0, 30.0], 2)
    curve = pd.DataFrame({"threshold": thr, "enter_weeks": np.tile([1, 2], 4),
                          "hit_rate": thr / 40, "false_alarm_ratio": thr / 50,
                          "weeks_in_stage_share": thr / 100,
                          "chosen": [False, False, False, True, False, False, False, False]})
    tuned = pd.DataFrame({
        "quantity": ["threshold", "enter_weeks", "peirce_skill_score", "economic_value",
                     "entries_per_unit_year"],
        "estimate": [10.0, 2.0, 0.41, 0.22, 0.31], "lo": [5.0, 1.0, 0.30, 0.10, 0.2],
        "hi": [20.0, 3.0, 0.50, 0.33, 0.4], "held_out": [np.nan, np.nan, 0.35, 0.18, 0.3],
        "ci": 0.9, "n_boot": 200})
    weeks = pd.date_range("2000-01-03", periods=104, freq="7D")
    rows = []
    for unit in IDS[:2]:
        for ind in ("spi_13", "spei_26"):
            rows.append(pd.DataFrame({
                "unit": unit, "week": weeks, "indicator": ind,
                "value": np.sin(np.arange(104) / 8.0), "enter_threshold": -0.8,
                "exit_threshold": -0.4, "stage": (np.sin(np.arange(104) / 8.0) < -0.8) * 2,
                "impact_level": np.where(unit == DRY, np.nan, 0.0)}))
    timeline = pd.concat(rows, ignore_index=True)
    per = []
    for plan, freq in (("uniform", [4.0, 3.0, 1.0, 0.5, 0.2, 2.5]), ("local", [1.5] * 6)):
        for k, cid in enumerate(IDS + ["all"]):
            scored = cid != DRY
            per.append({"plan": plan, "county_id": cid, "region": "", "percentile": 10.0,
                        "threshold_value": -1.28 if plan == "uniform" else np.nan,
                        "weeks_in_stage_share": 0.1,
                        "entries_per_decade": freq[k] if k < 6 else float(np.mean(freq)),
                        "hits": 30 * scored, "false_alarms": 12 * scored,
                        "misses": 20 * scored, "correct_negatives": 900 * scored,
                        "hit_rate": 0.6 if scored else np.nan,
                        "false_alarm_ratio": 12 / 42 if scored else np.nan,
                        "peirce_skill_score": 0.59 if scored else np.nan})
    return {"trigger_plan_memo.csv": memo, "trigger_plan_scores.csv": scores,
            "trigger_plan_tuning.csv": curve, "trigger_plan_tuned.csv": tuned,
            "trigger_plan_timeline.csv": timeline,
            "trigger_plan_uniform_local.csv": pd.DataFrame(per)}


@pytest.fixture
def plan_page(tmp_path, make_run, monkeypatch):
    folder = make_run(tmp_path / "run")
    frames = _plan_tables(folder)
    for name, frame in frames.items():
        frame.to_csv(folder / name, index=False)
    drawn: list = []
    real = M.county_panels

    def spy(counties, panels, **kw):
        drawn.append(panels)
        return real(counties, panels, **kw)

    monkeypatch.setattr(M, "county_panels", spy)
    sink = FigureSink()
    page = SectionPage(triggers_section(read_run_folder(folder), sink))
    return page, sink, frames, drawn


def test_one_memo_sentence_per_stage(plan_page):
    page, _, frames, _ = plan_page
    memo = frames["trigger_plan_memo.csv"]
    for _, row in memo.iterrows():
        assert memo_sentence(row) in page.items
    assert sum(item.startswith("Stage ") for item in page.items) == len(STAGES)


def test_tuned_threshold_table_has_intervals_and_held_out_skill(plan_page):
    page, sink, frames, _ = plan_page
    t = page.table_with("held_out")
    assert t["header"][:2] == ["quantity", "what"]
    for col in ("estimate", "lo", "hi", "held_out"):
        assert col in t["header"]
    rows = {r[0]: dict(zip(t["header"], r, strict=True)) for r in t["rows"]}
    assert (rows["threshold"]["estimate"], rows["threshold"]["lo"], rows["threshold"]["hi"]) \
        == ("10", "5", "20")
    assert rows["peirce_skill_score"]["held_out"] == "0.350"
    assert f"enters at {fmt_interval(10.0, 5.0, 20.0)} (in the rule" in page.text
    assert "after 2 weeks; 90 % year-block bootstrap interval" in page.text
    assert "0.35 on years held out of the tuning" in page.text
    assert "trigger_plan_tradeoff.png" in sink.files
    assert "chosen threshold 10.00 with 2 entry weeks" in " ".join(page.alts)


def test_two_unit_timelines_named(plan_page):
    page, sink, _, _ = plan_page
    assert {f"trigger_plan_timeline_{u}.png" for u in IDS[:2]} <= set(sink.files)
    alts = " ".join(page.alts)
    assert f"{COUNTY_NAMES[0]} ({IDS[0]})" in alts and f"{COUNTY_NAMES[1]} ({IDS[1]})" in alts


def test_uniform_and_local_map_share_one_scale_and_cover_every_county(plan_page):
    page, sink, _, drawn = plan_page
    assert "trigger_plan_uniform_local.png" in sink.files
    panels = drawn[-1]
    assert [p.title for p in panels] == list(W.map_panel_titles(10.0))
    assert all(p.kind == "sequential" for p in panels)
    assert len({(p.vmin, p.vmax) for p in panels}) == 1  # ONE shared colour scale
    assert panels[0].vmax == pytest.approx(4.0) and panels[0].vmin == 0.0
    for p in panels:  # every county has a value in each panel, pooled row left out
        assert sorted(p.values["county_id"].astype(str)) == IDS
    assert "(from 0.2 to 4.0 by unit), against 1.5 entries per decade (from 1.5 to 1.5" \
        in page.text
    t = page.table_with("scored")
    names = {r[t["header"].index("county_name")] for r in t["rows"]}
    assert names == set(COUNTY_NAMES)


def test_county_without_water_system_is_never_a_false_alarm(plan_page):
    page, _, _, _ = plan_page
    t = page.table_with("scored")
    h = t["header"]
    dry = [r for r in t["rows"] if r[h.index("county_id")] == DRY]
    assert len(dry) == 2  # uniform and local
    for r in dry:
        assert r[h.index("scored")] == "not scored: no water system"
        assert r[h.index("false_alarms")] == "" and r[h.index("hits")] == ""
    wet = [r for r in t["rows"] if r[h.index("county_id")] != DRY]
    assert all(r[h.index("false_alarms")] == "12" for r in wet)
    assert "5 of the 6 units could record restrictions" in page.text
    assert "not scored for restrictions" in page.text


def test_peirce_explained_with_the_false_alarm_rate_and_the_ratio_kept_apart(plan_page):
    page, _, _, _ = plan_page
    assert "Peirce skill score is hit rate minus false-alarm RATE" in page.text
    t = page.table(W.SCORES_CAPTION)
    assert {"false_alarm_ratio", "false_alarm_rate", "peirce_skill_score"} <= set(t["header"])
    # Peirce (1884) = H - F with F = b / (b + d) (Wilks 2011, section 8.2): first stage
    h = t["header"]
    r = t["rows"][0]
    assert float(r[h.index("peirce_skill_score")]) == pytest.approx(
        float(r[h.index("hit_rate")]) - float(r[h.index("false_alarm_rate")]), abs=2e-3)


def test_single_index_check_is_collapsed_once_a_plan_is_replayed(plan_page):
    page, sink, _, _ = plan_page
    assert W.OLD_AUDIT_HEAD in page.summaries
    assert not any(name.startswith("trigger_timeline") for name in sink.files)
    assert "not causes" in page.text
