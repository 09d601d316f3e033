"""The county-contrast section on a hand-made run folder holding one explained pair.

Invented numbers on the fake run of ``conftest.py``: these tests check what the section shows
(the paragraph, the parts table with county names and intervals, the ranked look-alikes in
real units, the odds ratios read from ``contrast_terms.csv``), not the science.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from _pageparse import SectionPage
from conftest import COUNTY_NAMES

from impactlink.report import words_contrast as W
from impactlink.report.common import FigureSink
from impactlink.report.runfolder import read_run_folder
from impactlink.report.sec_contrast import contrast_section
from impactlink.report.words_contrast import contrast_paragraph

TARGET = "crop_shortfall:class"
IDS = [f"9{k:04d}" for k in range(len(COUNTY_NAMES))]
A, B = IDS[0], IDS[2]
NAME_A, NAME_B = COUNTY_NAMES[0], COUNTY_NAMES[2]
# probability-scale parts (0-1): exposure + irrigation + soil water + unexplained = gap
PARTS = {"exposure": 0.03, "irrigated_share": 0.13, "soil_water_mm": 0.02, "unexplained": 0.04}


def _explained(folder) -> dict[str, pd.DataFrame]:
    meta = {"impact": "crop_shortfall", "target": TARGET, "index": "spei", "scale_weeks": 13,
            "lag_weeks": 0, "county_a": A, "county_name_a": NAME_A, "county_b": B,
            "county_name_b": NAME_B, "period_start": 2012, "period_end": 2012}
    sens = PARTS["irrigated_share"] + PARTS["soil_water_mm"]
    total = PARTS["exposure"] + sens + PARTS["unexplained"]
    recs = [("p_a", "", 0.35), ("p_b", "", 0.35 - total), ("total", "", total),
            ("exposure", "", PARTS["exposure"]), ("sensitivity", "", sens),
            ("sensitivity", "irrigated_share", PARTS["irrigated_share"]),
            ("sensitivity", "soil_water_mm", PARTS["soil_water_mm"]),
            ("unexplained", "", PARTS["unexplained"])]
    parts = pd.DataFrame([{**meta, "scale": "probability", "part": p, "trait": t, "term": "",
                           "estimate": e, "lo": e - 0.02, "hi": e + 0.02} for p, t, e in recs]
                         + [{**meta, "scale": "log_odds", "part": "total", "trait": "",
                             "term": "", "estimate": 1.1, "lo": 0.5, "hi": 1.7}])
    summary = pd.DataFrame([{
        **meta, "impact_unit": "pct_of_expected_yield_lost", "observed_a": 31.0,
        "observed_b": 9.0, "expected_a": 35.0, "expected_b": 100 * (0.35 - total),
        "event_label": "shortfall_25pct", "gap_pts": 100 * total,
        "exposure_pts": 100 * PARTS["exposure"], "sensitivity_pts": 100 * sens,
        "unexplained_pts": 100 * PARTS["unexplained"], "index_mean_a": -1.52,
        "index_mean_b": -1.44, "top_trait": "irrigated_share", "top_trait_pts": 13.0,
        "top_trait_label": "irrigated share of cropland", "top_trait_unit": "%",
        "top_trait_a": 6.0, "top_trait_b": 41.0}])
    looks = pd.DataFrame({
        "impact": "crop_shortfall", "target": TARGET, "rank": [1, 2], "year": [2012, 2002],
        "county_a": [A, IDS[3]], "county_name_a": [NAME_A, COUNTY_NAMES[3]],
        "region_a": "Upland", "county_b": [B, IDS[4]], "county_name_b": [NAME_B, COUNTY_NAMES[4]],
        "region_b": ["Upland", "Lowland"], "distance": [0.08, 0.12], "impact_a": [31.0, 20.0],
        "impact_b": [9.0, 4.0], "impact_gap": [22.0, 16.0], "irrigated_pct_a": [6.0, 10.0],
        "irrigated_pct_b": [41.0, 30.0], "soil_water_mm_a": [110.0, 90.0],
        "soil_water_mm_b": [150.0, 95.0]})
    traj = pd.DataFrame({"county_id": np.repeat([A, B], 5), "year": 2012,
                         "week_offset": np.tile(np.arange(-4, 1), 2),
                         "value": np.r_[np.linspace(-0.5, -1.6, 5), np.linspace(-0.4, -1.5, 5)]})
    traj.insert(0, "target", TARGET)
    traits = pd.DataFrame({"target": TARGET, "trait": ["irrigated_share", "soil_water_mm"],
                           "label": ["irrigated share of cropland", "soil water holding"],
                           "unit": ["%", "mm"], "value_a": [6.0, 110.0], "value_b": [41.0, 150.0],
                           "sensitivity_pts": [13.0, 2.0]})
    return {"contrast.csv": parts, "contrast_summary.csv": summary,
            "contrast_lookalikes.csv": looks, "contrast_trajectories.csv": traj,
            "contrast_traits.csv": traits}


@pytest.fixture
def pair_page(tmp_path, make_run):
    folder = make_run(tmp_path / "run")
    (folder / "contrast.csv").rename(folder / "contrast_terms.csv")  # the odds-ratio table
    frames = _explained(folder)
    for name, frame in frames.items():
        frame.to_csv(folder / name, index=False)
    sink = FigureSink()
    return SectionPage(contrast_section(read_run_folder(folder), sink)), sink, frames


def test_paragraph_names_both_counties_in_real_units(pair_page):
    page, _, frames = pair_page
    para = contrast_paragraph(frames["contrast_summary.csv"].iloc[0])
    assert para in page.text
    assert f"{NAME_A} ({A})" in para and f"{NAME_B} ({B})" in para
    assert "41 %" in para and "6 %" in para
    assert "not a verdict on anyone's management" in page.text


def test_parts_table_names_counties_and_adds_up(pair_page):
    page, _, _ = pair_page
    t = page.table(f"{NAME_A} ({A}) minus {NAME_B} ({B}), 2012")
    assert t["header"] == ["part", "points", "lo", "hi"]
    rows = {r[0]: [float(v) for v in r[1:]] for r in t["rows"]}
    assert rows["sensitivity: irrigated share of cropland"] == pytest.approx([13.0, 11.0, 15.0])
    assert rows["sensitivity: soil water holding"][0] == pytest.approx(2.0)
    assert f"modelled chance of an impact, {NAME_A}" in rows
    # the three parts add up to the gap (decomposition identity of the table itself)
    gap = rows["gap (first minus second)"][0]
    parts = (rows["exposure (different index values)"][0]
             + rows["sensitivity (different traits), all traits"][0]
             + rows["unexplained (remaining county effect)"][0])
    assert parts == pytest.approx(gap, abs=1e-6)
    assert len(t["rows"]) == 8  # probability scale only, log-odds rows left out


def test_lookalikes_ranked_with_names_and_real_units(pair_page):
    page, _, _ = pair_page
    t = page.table(W.lookalike_caption(TARGET))
    h = t["header"]
    assert {"irrigated_pct_a", "irrigated_pct_b", "soil_water_mm_a"} <= set(h)
    assert t["rows"][0][h.index("county_a")] == f"{NAME_A} ({A})"
    assert t["rows"][1][h.index("county_b")] == f"{COUNTY_NAMES[4]} ({IDS[4]})"
    assert [r[h.index("rank")] for r in t["rows"]] == ["1", "2"]


def test_pair_figure_and_odds_ratios_from_contrast_terms(pair_page):
    page, sink, _ = pair_page
    assert "contrast_pair_crop_shortfall_class.png" in sink.files
    assert "contrast_crop_shortfall_class.png" in sink.files
    alts = " ".join(page.alts)
    assert "irrigated_share 0.70 (0.50 to 0.95)" in alts
    assert f"{NAME_A} beside {NAME_B}" in alts


def test_paragraph_says_when_exposure_works_against_the_gap(pair_page):
    _, _, frames = pair_page
    row = frames["contrast_summary.csv"].iloc[0].copy()
    row["exposure_pts"], row["sensitivity_pts"] = -16.0, 44.0
    text = contrast_paragraph(row)
    assert f"exposure works the other way: -16 points, {NAME_B} was the more exposed" in text
    assert "exposure explains" not in text
