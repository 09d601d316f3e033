"""Contrast paragraph: its numbers are the summary row's; the figure draws from the frames."""

import re

import pandas as pd
import pytest

from impactlink.errors import ReportError
from impactlink.report.figures_contrast_pair import contrast_figure
from impactlink.report.words_contrast import CAUTION, contrast_paragraph

# a hand-made summary row in the columns of impactlink.contrast.explain.summary_row
ROW = {
    "target": "maize_shortfall:maize:rainfed", "impact": "maize_shortfall", "index": "spei",
    "scale_weeks": 13, "lag_weeks": 0, "county_a": "90001", "county_name_a": "Brambeth",
    "county_b": "90003", "county_name_b": "Tovova", "period_start": 2012, "period_end": 2012,
    "impact_unit": "pct_of_expected_yield_lost", "observed_a": 31.2, "observed_b": 9.4,
    "expected_a": 64.6, "expected_b": 42.3, "event_label": "shortfall_10pct",
    "gap_pts": 22.3, "exposure_pts": 3.2, "sensitivity_pts": 15.4, "unexplained_pts": 3.7,
    "index_mean_a": -1.62, "index_mean_b": -1.55, "top_trait": "irrigated_share",
    "top_trait_pts": 15.0, "top_trait_label": "irrigated share of cropland",
    "top_trait_unit": "%", "top_trait_a": 6.0, "top_trait_b": 41.0,
}


def test_paragraph_numbers_equal_the_row():
    text = contrast_paragraph(ROW)
    assert text.startswith("In 2012 Brambeth (90001) lost 31 % of its expected maize yield "
                           "and Tovova (90003) 9 %.")
    assert "at 65 % in Brambeth and 42 % in Tovova: a gap of 22 points" in text
    assert "13-week SPEI differed little (exposure explains 3 points of the gap)" in text
    assert "Tovova's irrigated share of cropland is 41 % against Brambeth's 6 %" in text
    assert "(sensitivity: 15 points)" in text and "4 points are not explained" in text
    assert text.endswith(CAUTION)
    # every number in the sentence comes from the row, rounded
    numbers = {int(n) for n in re.findall(r"(?<![\w.-])-?\d+(?![\w.])", text)}
    expected = {2012, 90001, 90003, 31, 9, 65, 42, 22, 3, 41, 6, 15, 4, 13, 10}
    assert numbers == expected


def test_paragraph_with_a_gain_and_an_exposure_difference():
    row = dict(ROW, observed_b=-7.0, index_mean_a=-2.0, index_mean_b=-1.2, gap_pts=-5.0)
    text = contrast_paragraph(pd.Series(row))
    assert "Tovova (90003) lost nothing (its yield was 7 % above expected)" in text
    assert "differed by 0.80 (mean -2.00 against -1.20)" in text
    assert "5 points more in Tovova" in text


def test_paragraph_error_names_missing_columns():
    with pytest.raises(ReportError, match=r"lacks \['gap_pts'\]"):
        contrast_paragraph({k: v for k, v in ROW.items() if k != "gap_pts"})


def test_figure_has_three_panels_and_checks_columns():
    summary = pd.DataFrame([ROW])
    traj = pd.DataFrame({"county_id": ["90001"] * 3 + ["90003"] * 3, "year": 2012,
                         "week_offset": [-2, -1, 0] * 2,
                         "value": [-1.2, -1.5, -1.6, -1.1, -1.4, -1.55]})
    traits = pd.DataFrame({"label": ["irrigated share of cropland"], "unit": ["%"],
                           "value_a": [6.0], "value_b": [41.0]})
    fig = contrast_figure(summary, traj, traits)
    assert len(fig.axes) == 3
    assert "Brambeth" in [t.get_text() for t in fig.axes[1].get_xticklabels()]
    with pytest.raises(ReportError, match="trajectories lacks"):
        contrast_figure(summary, traj.drop(columns="value"), traits)
    with pytest.raises(ReportError, match="2 rows"):
        contrast_figure(pd.concat([summary, summary]), traj, traits)
