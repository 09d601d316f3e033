"""Figure functions: tiny hand-built frames whose pictures can be checked by eye and by data."""

from __future__ import annotations

import geopandas as gpd
import matplotlib.patches as mpatches
import numpy as np
import pandas as pd
import pytest
from matplotlib.image import AxesImage
from shapely.geometry import box

from impactlink.errors import ReportError
from impactlink.report import (
    fig_style,
    figures_audit,
    figures_contrast,
    figures_curves,
    figures_data,
    figures_skill,
    figures_triggers,
)
from impactlink.report import maps as M


def _skill() -> pd.DataFrame:
    rows = [
        # index, scale, lag, model, bss, tie
        ("spi", 4, 0, "logistic", 0.10, False),
        ("spi", 4, 2, "logistic", 0.20, True),
        ("spi", 13, 0, "logistic", 0.30, True),
        ("spi", 13, 0, "boosting", 0.25, False),  # worse model in the same cell
        ("spi", 13, 2, "logistic", -0.10, False),
        (None, None, None, "seasonal", 0.05, False),
        (None, None, None, "persistence", 0.12, False),
        (None, None, None, "climatology", 0.0, False),
    ]
    f = pd.DataFrame(rows, columns=["index", "scale_weeks", "lag_weeks", "model", "bss",
                                    "indistinguishable_from_best"])
    f["impact"], f["target"] = "restrictions", "state"
    f["bss_lo"], f["bss_hi"] = f["bss"] - 0.05, f["bss"] + 0.05
    return f


def test_heatmap_cells_hold_the_best_model_per_cell():
    fig = figures_skill.skill_heatmap(_skill(), impact="restrictions", target="state")
    ax = fig.axes[0]
    data = next(a for a in ax.get_children() if isinstance(a, AxesImage)).get_array()
    # rows = scales (4, 13), columns = lags (0, 2); the 13w/0 cell keeps 0.30, not 0.25;
    # negative skill is clipped to the bottom of the colour scale (0) but printed as is.
    np.testing.assert_allclose(np.ma.filled(data, np.nan), [[0.10, 0.20], [0.30, 0.0]])
    texts = sorted(t.get_text() for t in ax.texts)
    assert texts == ["-0.10", "0.10", "0.20\u2022", "0.30\u2022"]
    frames = [p for p in ax.patches if isinstance(p, mpatches.Rectangle) and not p.get_hatch()]
    assert [(p.get_x(), p.get_y()) for p in frames] == [(-0.5, 0.5)]  # lag 0, scale 13
    hatched = [p for p in ax.patches if p.get_hatch()]
    assert [(p.get_x(), p.get_y()) for p in hatched] == [(0.5, 0.5)]  # the -0.10 cell
    assert ax.get_xlabel() == "lag (weeks)" and ax.get_ylabel() == "time scale (weeks)"
    assert "Brier skill score" in fig.axes[-1].get_ylabel()


def test_candidate_intervals_orders_by_score_and_draws_baselines():
    fig = figures_skill.candidate_intervals(_skill(), impact="restrictions", target="state", top=2)
    ax = fig.axes[0]
    by_height = sorted(((t.get_position()[1], t.get_text()) for t in ax.get_yticklabels()),
                       reverse=True)
    # The two best scores are 0.30 (logistic) and 0.25 (boosting), best at the top.
    assert [text for _, text in by_height] == ["SPI over 13 weeks, same week (logistic)",
                                               "SPI over 13 weeks, same week (boosting)"]
    vlines = sorted(round(ln.get_xdata()[0], 3) for ln in ax.get_lines() if len(ln.get_xdata()) == 2
                    and ln.get_xdata()[0] == ln.get_xdata()[1])
    assert vlines == [0.0, 0.05, 0.12]
    assert "Brier skill score" in ax.get_xlabel()
    with pytest.raises(ReportError, match="top must be >= 1, got 0"):
        figures_skill.candidate_intervals(_skill(), impact="restrictions", target="state", top=0)


def test_figure_errors_name_the_missing_column_or_rows():
    bad = _skill().drop(columns="lag_weeks")
    with pytest.raises(ReportError, match=r"skill_heatmap: frame lacks column\(s\) \['lag_weeks'\]"):
        figures_skill.skill_heatmap(bad, impact="restrictions", target="state")
    with pytest.raises(ReportError, match="no rows with impact='yields'"):
        figures_skill.skill_heatmap(_skill(), impact="yields", target="state")
    with pytest.raises(ReportError, match="no persistence rows for 'restrictions'"):
        figures_skill.persistence_comparison(_skill()[lambda f: f["model"] != "persistence"],
                                 impact="restrictions")
    with pytest.raises(ReportError, match="reliability_diagram: frame lacks"):
        figures_skill.reliability_diagram(pd.DataFrame({"impact": []}), impact="a", target="b")
    with pytest.raises(ReportError, match="audit_shares: no rows with ladder='x'"):
        figures_audit.audit_shares(pd.DataFrame({"ladder": ["y"], "stage": ["s"], "period": ["record"],
                                     "expected_share": [0.1], "observed_share": [0.1]}),
                       ladder="x")
    with pytest.raises(ReportError, match="no input has both date_min and date_max"):
        figures_data.record_timeline(pd.DataFrame({"table": ["a"], "date_min": [None], "date_max": [None]}))
    with pytest.raises(ReportError, match="impact_curves: frame lacks"):
        figures_curves.impact_curves(pd.DataFrame({"impact": ["a"]}), impact="a", target="b")


def test_impact_curves_draw_each_level_with_axes_in_units():
    x = np.linspace(-2, 2, 5)
    rows = [dict(impact="crop", target="class", index="spi", scale_weeks=13, lag_weeks=4,
                 pooling="all", unit="all", level_k=k, level_label=lab, x=xi, prob=p,
                 prob_lo=p / 2, prob_hi=p)
            for k, lab in ((1, "minor"), (2, "major")) for xi, p in zip(x, np.linspace(0.9, 0.1, 5) / k, strict=True)]
    crossings = pd.DataFrame([dict(impact="crop", target="class", level_k=1, level_label="minor",
                                   prob_level=0.5, x_cross=0.0)])
    fig = figures_curves.impact_curves(pd.DataFrame(rows), crossings, impact="crop", target="class")
    ax = fig.axes[0]
    curves = [ln for ln in ax.get_lines() if len(ln.get_xdata()) == 5]
    np.testing.assert_allclose(curves[0].get_ydata(), np.linspace(0.9, 0.1, 5))
    np.testing.assert_allclose(curves[1].get_ydata(), np.linspace(0.9, 0.1, 5) / 2)
    assert ax.get_ylim() == (0, 1)
    assert "SPI, 13-week time scale, lag 4 weeks" in ax.get_xlabel()
    assert ax.get_ylabel() == "chance of impact (0\u20131)"
    assert [t.get_text() for t in ax.get_legend().get_texts()][:2] == ["at least 'minor'",
                                                                      "at least 'major'"]


def test_reliability_diagram_plots_the_given_points():
    rel = pd.DataFrame(dict(impact="a", target="b", model="logistic", bin=[0, 1],
                            mean_forecast=[0.2, 0.7], observed_frequency=[0.25, 0.6], n=[10, 5]))
    fig = figures_skill.reliability_diagram(rel, impact="a", target="b")
    ax, axc = fig.axes
    diag, pts = ax.get_lines()[:2]
    np.testing.assert_allclose(diag.get_xydata(), [[0, 0], [1, 1]])
    np.testing.assert_allclose(pts.get_xydata(), [[0.2, 0.25], [0.7, 0.6]])
    assert [p.get_height() for p in axc.patches] == [10, 5]
    assert axc.get_xlabel() == "forecast chance (0\u20131)"


def test_audit_median_marks_sit_at_hand_computed_medians():
    audit = pd.DataFrame(dict(
        county_id=["1", "2", "3"] * 2, ladder="lad", stage=["watch"] * 3 + ["alarm"] * 3,
        threshold=[-1.0] * 3 + [-2.0] * 3, period="record", expected_share=[0.2] * 3 + [0.05] * 3,
        observed_share=[0.1, 0.2, 0.4, 0.05, 0.05, 0.1]))
    fig = figures_audit.audit_shares(audit, ladder="lad")
    ax1 = fig.axes[0]
    meds = [ln.get_xdata()[0] for ln in ax1.get_lines() if len(ln.get_xdata()) == 2
            and ln.get_xdata()[0] == ln.get_xdata()[1] and ln.get_linewidth() == 2.5]
    # watch: ratios 0.5, 1, 2 -> median 1; alarm: 1, 1, 2 -> median 1 (stage order: watch, alarm)
    assert meds == [1.0, 1.0]
    assert [t.get_text() for t in ax1.get_yticklabels()] == ["watch", "alarm"]


def test_record_timeline_bar_spans_the_record_in_days():
    fig = figures_data.record_timeline(pd.DataFrame({"table": ["climate"], "date_min": ["2000-01-01"],
                                          "date_max": ["2000-12-31"]}))
    bar = fig.axes[0].patches[0]
    assert bar.get_width() == pytest.approx(365.0)  # 2000 is a leap year: Jan 1 -> Dec 31
    assert fig.axes[0].get_xlabel() == "date (year)"


def test_figure_png_is_a_png():
    png = fig_style.figure_png(figures_data.record_timeline(pd.DataFrame(
        {"table": ["a"], "date_min": ["2000-01-01"], "date_max": ["2001-01-01"]})))
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


# --------------------------------------------------------------------------------- maps
def _counties():
    return gpd.GeoDataFrame({"county_id": ["1", "2", "3"]},
                            geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1), box(2, 0, 3, 1)])


def test_categorical_map_legend_lists_categories_and_no_value():
    vals = pd.DataFrame({"county_id": ["1", "2"], "best": ["SPI 13w", "SPEI 4w"]})
    fig = M.county_map(_counties(), vals, "best", title="t", label="candidate", kind="categorical")
    legend = fig.axes[0].get_legend()
    assert [t.get_text() for t in legend.get_texts()] == ["SPEI 4w", "SPI 13w", "no value"]
    assert legend.get_title().get_text() == "candidate"


def test_sequential_map_has_a_labelled_colour_bar_with_given_limits():
    vals = pd.DataFrame({"county_id": ["1", "2", "3"], "p": [0.1, 0.5, 0.9]})
    fig = M.county_map(_counties(), vals, "p", title="t", label="chance (0\u20131)", vmin=0,
                       vmax=1)
    bar_ax = fig.axes[-1]
    assert bar_ax.get_xlabel() == "chance (0\u20131)"
    assert bar_ax.get_xlim() == (0.0, 1.0)


def test_map_errors_name_the_problem():
    vals = pd.DataFrame({"county_id": ["1"], "p": [0.1]})
    with pytest.raises(ReportError, match="kind must be 'sequential' or 'categorical'"):
        M.MapPanel(vals, "p", title="t", label="l", kind="diverging")
    with pytest.raises(ReportError, match="values lack column 'q'"):
        M.MapPanel(vals, "q", title="t", label="l")
    with pytest.raises(ReportError, match="panels is empty"):
        M.county_panels(_counties(), [])
    with pytest.raises(ReportError, match="must be a GeoDataFrame with 'county_id'"):
        M.county_map(None, vals, "p", title="t", label="l")


def test_trigger_timeline_marks_plans_and_names_counties():
    weeks = pd.date_range("2020-01-06", periods=6, freq="7D")
    rows = [pd.DataFrame(dict(week=weeks, county_id="7", scope=scope, threshold=thr,
                              index_value=[0.0, -1.5, -2.0, -0.5, 0.5, 1.0],
                              trigger_on=[False, True, True, False, False, False],
                              impact_level=[0, 0, 1, 1, 0, 0]))
            for scope, thr in (("uniform", -1.0), ("local", -1.4))]
    fig = figures_triggers.trigger_timeline(pd.concat(rows), county_names={"7": "Fenrow"})
    ax = fig.axes[0]
    assert ax.get_title(loc="left") == "Fenrow (7)"
    horizontal = sorted(ln.get_ydata()[0] for ln in ax.get_lines() if len(ln.get_ydata()) == 2)
    assert horizontal == [-1.4, -1.0]
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert labels == ["index value", "uniform threshold -1.00", "uniform plan on",
                      "local threshold -1.40", "local plan on", "impact recorded"]
    with pytest.raises(ReportError, match="last_years must be >= 1 or None, got 0"):
        figures_triggers.trigger_timeline(pd.concat(rows), last_years=0)


def test_odds_ratio_chart_uses_a_log_axis_centred_on_one():
    con = pd.DataFrame(dict(term=["a", "b"], odds_ratio_per_sd=[2.0, 0.5], or_lo=[1.5, 0.3],
                            or_hi=[2.6, 0.9]))
    ax = figures_contrast.odds_ratio_chart(con).axes[0]
    assert ax.get_xscale() == "log"
    vertical = [ln.get_xdata()[0] for ln in ax.get_lines() if list(ln.get_ydata()) == [0, 1]]
    assert vertical == [1]
    with pytest.raises(ReportError, match=r"odds_ratio_chart: frame lacks column\(s\) \['or_lo'\]"):
        figures_contrast.odds_ratio_chart(con.drop(columns="or_lo"))


def test_many_map_panels_wrap_onto_rows():
    vals = pd.DataFrame({"county_id": ["1", "2", "3"], "p": [0.1, 0.5, 0.9]})
    panels = [M.MapPanel(vals, "p", title=f"h{k}", label="chance") for k in range(4)]
    fig = M.county_panels(_counties(), panels, max_columns=3)
    maps = [ax for ax in fig.axes if ax.get_title().startswith("h")]
    assert [ax.get_title() for ax in maps] == ["h0", "h1", "h2", "h3"]
    rows = {round(ax.get_position().y0, 3) for ax in maps}
    assert len(rows) == 2
    with pytest.raises(ReportError, match="max_columns must be >= 1, got 0"):
        M.county_panels(_counties(), panels, max_columns=0)


def test_supplied_indicators_share_one_heatmap_panel():
    f = _skill()
    extra = pd.DataFrame(dict(index=["soil_moisture", "streamflow"], scale_weeks=[0, 0],
                              lag_weeks=[0, 2], model="index", bss=[0.05, 0.15],
                              indistinguishable_from_best=False, impact="restrictions",
                              target="state"))
    fig = figures_skill.skill_heatmap(pd.concat([f, extra], ignore_index=True), impact="restrictions",
                          target="state")
    titles = [ax.get_title() for ax in fig.axes if ax.get_visible() and ax.get_title()]
    assert titles == ["SPI", "supplied indicators"]
    spi, sup = fig.axes[0], fig.axes[1]
    assert [t.get_text() for t in spi.get_yticklabels()] == ["4", "13"]  # no 0 row
    assert [t.get_text() for t in sup.get_yticklabels()] == ["soil moisture", "streamflow"]
    assert sorted(t.get_text() for t in sup.texts) == ["0.05", "0.15"]


def test_persistence_comparison_is_made_at_one_shared_lag():
    rows = pd.DataFrame([
        ("spi", 13, 0, "index", 0.30), ("spi", 13, 2, "index", 0.20), ("spei", 4, 2, "index", 0.25),
        (None, None, 2, "persistence", 0.70), (None, None, 8, "persistence", 0.20),
        ("spi", 13, 2, "index_persistence", 0.72), ("spi", 13, 8, "index_persistence", 0.30),
    ], columns=["index", "scale_weeks", "lag_weeks", "model", "bss"])
    lag, (single, pers, combo) = figures_skill.persistence_picks(rows, "bss")
    # lag 2 is the shortest lag with both persistence and index + persistence; the best
    # single index there is SPEI 4w (0.25), not the overall best SPI 13w lag 0 (0.30).
    assert lag == 2
    assert (single["index"], single["bss"]) == ("spei", 0.25)
    assert pers["bss"] == 0.70 and combo["bss"] == 0.72
    lag, picks = figures_skill.persistence_picks(rows[rows["model"] != "index_persistence"], "bss")
    assert lag is None and picks[2] is None and picks[0]["bss"] == 0.30
