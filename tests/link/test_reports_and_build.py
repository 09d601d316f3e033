"""Field reports, the build_targets dispatch, the panel and circularity flags."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from link_fixtures import mondays

from impactlink.link import (
    PANEL_COLUMNS,
    CircularityWarning,
    LinkError,
    ReportingEffortWarning,
    build_targets,
    circularity_flags,
    panel_frame,
)
from impactlink.project import ImpactSpec


def _reports():
    return pd.DataFrame({
        "county_id": ["a", "a", "a", "b", "c", "zz"],
        "date": pd.to_datetime(["2030-01-08", "2030-01-10", "2030-01-22", "2030-01-09",
                                "2030-02-20", "2030-01-08"]),
        "sector": ["livestock", "livestock", "crops", "livestock", "livestock", "crops"],
        "severity": [1, 3, 2, 1, 2, 1],
    })


def test_counts_and_highest_severity_per_county_week(counties):
    weeks = mondays("2030-01-07", 4)
    res = build_targets(ImpactSpec("fr", "field_reports", {}), {"field_reports": _reports()},
                        counties=counties, weeks=weeks)
    fr = res.targets[0].frame.set_index(["county_id", "time"])
    assert fr.loc[("a", pd.Timestamp("2030-01-07")), ["report_count", "level"]].tolist() == [2, 3]
    assert fr.loc[("a", pd.Timestamp("2030-01-21")), ["report_count", "level"]].tolist() == [1, 2]
    assert fr.loc[("b", pd.Timestamp("2030-01-07")), "level"] == 1
    assert len(fr) == 16  # one row per county-week in coverage
    rec = res.reconciliation.iloc[0]
    # c's report (2030-02-20) is after the record: outside coverage; zz rejected
    assert (rec["records"], rec["used"], rec["rejected"], rec["outside_coverage"]) == (6, 4, 1, 1)


def test_sector_filter_min_severity_and_coverage_gap(counties):
    weeks = mondays("2030-01-07", 4)
    cov = pd.DataFrame({"source": "field_reports", "county_id": ["a", "b", "c", "d"],
                        "start_date": pd.to_datetime("2030-01-14"),
                        "end_date": pd.to_datetime("2030-02-02")})
    res = build_targets(ImpactSpec("fr", "field_reports", {"sector": "livestock",
                                                           "min_severity": 2}),
                        {"field_reports": _reports(), "coverage": cov}, counties=counties,
                        weeks=weeks)
    fr = res.targets[0].frame
    assert fr["time"].min() == pd.Timestamp("2030-01-14")  # the first week is unknown
    assert len(fr) == 4 * 3
    rec = res.reconciliation.iloc[0]
    assert rec["not_selected"] == 2
    assert rec["records"] == 4 == rec["used"] + rec["rejected"] + rec["outside_coverage"]
    assert rec["used"] == 0


def test_reporting_effort_trend_warns(counties):
    weeks = mondays("2000-01-03", 52 * 20)
    rng = np.random.default_rng(0)
    rows = []
    for i, yr in enumerate(range(2000, 2020)):
        n = 5 + 10 * i  # effort grows every year
        days = rng.integers(0, 360, n)
        rows.append(pd.DataFrame({"county_id": rng.choice(["a", "b", "c", "d"], n),
                                  "date": pd.Timestamp(f"{yr}-01-05") + pd.to_timedelta(days, "D"),
                                  "sector": "crops"}))
    with pytest.warns(ReportingEffortWarning, match="Kendall tau"):
        res = build_targets(ImpactSpec("fr", "field_reports", {}),
                            {"field_reports": pd.concat(rows, ignore_index=True)},
                            counties=counties, weeks=weeks)
    t = res.targets[0]
    assert t.kind == "binary" and t.levels == ("none", "reported")
    assert "effort_trend" in t.provenance["flags"]


def _notice_tables():
    return {"notices": pd.DataFrame({
        "notice_id": ["n1"], "issuer": ["Varrick Water"], "county_id": ["a"],
        "start_date": pd.to_datetime(["2030-01-15"]), "end_date": pd.to_datetime(["2030-01-30"]),
        "level": [1], "level_label": ["SPI below -1.5 for 3 months"]})}


def test_panel_frame_columns_and_circularity(counties):
    weeks = mondays("2030-01-07", 8)
    spec = ImpactSpec("relief", "notices", {"defined_by": "spi", "horizon_weeks": [2]})
    res = build_targets(spec, _notice_tables(), counties=counties, weeks=weeks,
                        lags_weeks=(0, 2))
    panel = panel_frame(res.targets)
    assert list(panel.columns[: len(PANEL_COLUMNS)]) == PANEL_COLUMNS
    # a one-level ladder has no escalation target
    assert set(panel["target"]) == {"relief:state", "relief:onset:2w"}
    assert len(panel) == sum(len(t.frame) for t in res.targets)
    flags = circularity_flags(res.targets, candidates=["spi", "spei"])
    assert set(flags["kind"]) == {"declared"} and set(flags["index"]) == {"spi"}
    assert flags["in_candidates"].all()
    assert res.summary["flags"].str.contains("circular:spi").all()


def test_possible_circularity_from_the_records_words(counties):
    weeks = mondays("2030-01-07", 8)
    with pytest.warns(CircularityWarning, match="spi"):
        res = build_targets(ImpactSpec("relief", "notices", {}), _notice_tables(),
                            counties=counties, weeks=weeks)
    flags = circularity_flags(res.targets)
    assert set(flags["kind"]) == {"possible"}


def test_reconciliation_identity_for_every_source(counties):
    weeks = mondays("2030-01-07", 8)
    res = build_targets(ImpactSpec("fr", "field_reports", {}), {"field_reports": _reports()},
                        counties=counties, weeks=weeks)
    r = res.reconciliation
    assert (r["records"] == r["used"] + r["rejected"] + r["outside_coverage"]).all()
    assert len(res.rejected) == r["rejected"].sum()
    assert list(res.rejected.columns) == ["table", "file", "row", "column", "value", "reason"]


def test_errors(counties):
    weeks = mondays("2030-01-07", 4)
    with pytest.raises(LinkError, match="source must be one of"):
        build_targets(ImpactSpec("x", "tweets", {}), {}, counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="no county_id column"):
        build_targets(ImpactSpec("x", "notices", {}), {}, counties=pd.DataFrame(), weeks=weeks)
    with pytest.raises(LinkError, match="needs a field_reports table"):
        build_targets(ImpactSpec("x", "field_reports", {}), {}, counties=counties, weeks=weeks)
    assert panel_frame([]).columns.tolist() == PANEL_COLUMNS


def test_field_reports_marked_episodic_get_onset_targets(counties):
    weeks = mondays("2030-01-07", 6)
    rep = pd.DataFrame({"county_id": ["a", "a"], "sector": "crops", "severity": [1, 2],
                        "date": pd.to_datetime(["2030-01-23", "2030-01-30"])})
    res = build_targets(ImpactSpec("fr", "field_reports", {"episodic": True,
                                                           "horizon_weeks": [1]}),
                        {"field_reports": rep}, counties=counties, weeks=weeks, lags_weeks=(1,))
    names = [t.name for t in res.targets]
    assert names == ["fr:count", "fr:onset:1w", "fr:escalation:1w"]
    on = res.targets[1].frame
    a = on[on["county_id"] == "a"].set_index("time")
    # weeks 01-07 and 01-14 at risk; the report in week 01-21 is the onset for week 01-14
    assert a["level"].to_dict() == {pd.Timestamp("2030-01-07"): 0,
                                    pd.Timestamp("2030-01-14"): 1,
                                    pd.Timestamp("2030-02-04"): 0}
    esc = res.targets[2].frame
    assert esc[["county_id", "time", "level"]].values.tolist() == [
        ["a", pd.Timestamp("2030-01-21"), 1]]
    assert res.targets[0].frame["persistence_1"].notna().sum() == 4 * 5


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_effort_trend_matches_scipy_kendalltau_asymptotic(seed):
    """Cross-implementation: scipy.stats.kendalltau (tau-b, asymptotic p-value), with ties."""
    from scipy.stats import kendalltau

    from impactlink.link.reports import effort_trend

    rng = np.random.default_rng(seed)
    years = np.arange(1990, 2020)
    rate = np.round(rng.normal(size=30) + 0.03 * seed * np.arange(30), 1)  # rounding makes ties
    tau, p = effort_trend(years, rate)
    ref = kendalltau(years, rate, method="asymptotic")
    assert tau == pytest.approx(ref.statistic, rel=1e-12)
    assert p == pytest.approx(ref.pvalue, rel=1e-9)


def test_rejected_rows_carry_the_file_row_when_known(counties):
    rep = _reports()
    rep["source_row"] = np.arange(2, 8)
    res = build_targets(ImpactSpec("fr", "field_reports", {}), {"field_reports": rep},
                        counties=counties, weeks=mondays("2030-01-07", 4))
    # county zz (sixth data row); the report of 2030-02-20 falls after the 4-week record
    assert sorted(zip(res.rejected["row"], res.rejected["reason"])) == [
        (6, "outside the source's coverage"), (7, "county_id not in the counties layer")]


def test_compact_frame_keeps_every_value():
    """32-bit columns only where exact (IEEE 754 binary32 holds whole numbers below 2**24)."""
    import numpy as np

    from impactlink.link.target import compact_frame

    f = pd.DataFrame({"level": np.array([0, 3, 1], np.int64), "year": [1981, 2020, 2024],
                      "big": np.array([0, 2**40, 1], np.int64),
                      "persistence_4": [np.nan, 2.0, 0.0], "weeks_since_end": [1.0, np.nan, 7.0],
                      "departure_pct": [-12.5, 3.25, 0.0], "county_id": ["a", "b", "c"]})
    c = compact_frame(f)
    assert c["level"].dtype == np.int32 and c["year"].dtype == np.int32
    assert c["big"].dtype == np.int64  # does not fit 32 bits
    assert c["persistence_4"].dtype == np.float32 and c["weeks_since_end"].dtype == np.float32
    assert c["departure_pct"].dtype == np.float64 and c["county_id"].equals(f["county_id"])
    for col in f.columns:
        assert c[col].astype(object).where(c[col].notna(), None).tolist() == \
            f[col].astype(object).where(f[col].notna(), None).tolist(), col
