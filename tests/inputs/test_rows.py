"""Row-level problems: each bad row is rejected with its reason, file, row number and column.

The tables are tiny invented examples (input handling, not science). Row numbers are 1-based
data rows with the header excluded, as documented in :class:`impactlink.inputs.InputBundle`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from inputs_fixtures import climate_frame, make_project, write_csv, write_text

from impactlink.inputs import read_inputs


def _only(bundle, table):
    r = bundle.rejected
    return r[r["table"] == table].reset_index(drop=True)


def _reconciles(bundle):
    """rows read = rows used + distinct rows rejected, for every table."""
    for rec in bundle.counts.itertuples():
        rej = bundle.rejected[bundle.rejected.table == rec.table]
        assert rec.rows_read == rec.rows_used + rec.rows_rejected
        assert rec.rows_rejected == rej["row"].nunique()
        assert len(bundle.tables[rec.table]) == rec.rows_used


def _assert_one(bundle, table, *, row, column, reason, value=None, file=None):
    _reconciles(bundle)
    r = _only(bundle, table)
    hit = r[(r["row"] == row) & (r["column"] == column)]
    assert len(hit) == 1, f"no single rejection at row {row} column {column}:\n{r}"
    assert hit["reason"].iloc[0] == reason
    if value is not None:
        assert hit["value"].iloc[0] == value
    if file is not None:
        assert hit["file"].iloc[0] == str(file)


def _climate_with(folder, edits):
    c = climate_frame().astype(str)
    for (i, col), v in edits.items():
        c.loc[i, col] = v
    return write_csv(folder, "climate", c)


@pytest.mark.parametrize(
    ("column", "text", "reason"),
    [
        ("date", "2001-13-45", "unparseable date"),
        ("date", "05/03/2001", "unparseable date"),  # ISO 8601 only: day/month order is ambiguous
        ("precip_mm", "12,5", "unparseable number"),
        ("precip_mm", "-3.5", "negative precipitation"),
        ("precip_mm", "-999", "sentinel value"),
        ("tmax_c", "-9999", "sentinel value"),
        ("precip_mm", "inf", "value not finite"),
        ("county_id", "", "missing required value"),
        ("date", "", "missing required value"),
        ("precip_mm", "", "missing required value"),
        ("county_id", "09999", "unknown county"),
        ("tmin_c", "75", "temperature out of range"),
    ],
)
def test_climate_cell_problems(base_folder, column, text, reason):
    path = _climate_with(base_folder, {(4, column): text})
    b = read_inputs(make_project(base_folder))
    # frame index 4 is the 5th data row of the file
    _assert_one(b, "climate", row=5, column=column, reason=reason, value=text, file=path)
    assert b.counts.set_index("table").loc["climate", "rows_rejected"] == 1


def test_tmin_above_tmax(base_folder):
    path = _climate_with(base_folder, {(2, "tmin_c"): "20", (2, "tmax_c"): "10"})
    b = read_inputs(make_project(base_folder))
    _assert_one(b, "climate", row=3, column="tmin_c", reason="tmin above tmax", file=path)
    assert "tmin_c=20 > tmax_c=10" == _only(b, "climate")["value"].iloc[0]


def test_duplicate_date_names_the_earlier_row(base_folder):
    c = climate_frame().astype(str)
    c = pd.concat([c, c.iloc[[6]]], ignore_index=True)  # repeat data row 7 at the end
    path = write_csv(base_folder, "climate", c)
    b = read_inputs(make_project(base_folder))
    _assert_one(
        b, "climate", row=len(c), column="county_id+date", reason="duplicate of row 7", file=path
    )
    assert _only(b, "climate")["value"].iloc[0] == f"{c.county_id[6]} | {c.date[6]}"


def test_mixed_cadence_is_fine_but_same_date_twice_is_not(base_folder):
    """Daily, weekly and monthly rows may mix; only a repeated (county, date) is a duplicate."""
    c = climate_frame().astype(str)
    extra = pd.DataFrame(
        {"county_id": ["01001", "01001", "01001"], "date": ["2004-01-01", "2004-01-08", "2004-01-08"],
         "precip_mm": ["1", "2", "3"], "tmin_c": ["0", "0", "0"], "tmax_c": ["5", "5", "5"]}
    )
    write_csv(base_folder, "climate", pd.concat([c, extra], ignore_index=True))
    b = read_inputs(make_project(base_folder))
    r = _only(b, "climate")
    assert r["row"].tolist() == [len(c) + 3]
    assert r["reason"].tolist() == [f"duplicate of row {len(c) + 2}"]


NOTICES = """
notice_id,issuer,start_date,end_date,level,county_id,lon,lat
n1,Town of Ash,2001-05-01,2001-06-01,2,01001,,
n2,Town of Ash,2001-05-01,2001-04-01,2,01001,,
n3,Pine Utility,2001-05-01,,Voluntary,,0.5,0.5
n4,Pine Utility,2001-05-01,,4,01003,,
n5,Pine Utility,2001-05-01,,1,,,
n6,Pine Utility,2001-05-01,,1,,0.5,95
n7,Pine Utility,2001-05-01,,Outdoor ban,01003,,
n8,Town of Ash,2001-05-01,,2.5,01003,,
n9,Town of Ash,2001-05-01,,Voluntary,01003,,
n1,Town of Ash,2001-07-01,,1,01001,,
n10,Town of Ash,,,1,01001,,
n11,Town of Ash,2001-09-01,,0,01001,,
n12,Town of Ash,2001-09-01,,-1,01001,,
"""


def test_notice_rules(base_folder):
    path = write_text(base_folder, "notices.csv", NOTICES)
    impacts = {"restrictions": {"source": "notices", "stage_names": {"Pine Utility": {"voluntary": 1}}}}
    b = read_inputs(make_project(base_folder, impacts=impacts))
    _assert_one(b, "notices", row=2, column="end_date", reason="end before start", file=path)
    _assert_one(b, "notices", row=4, column="level", reason="level outside the ladder", value="4")
    _assert_one(b, "notices", row=5, column="county_id", reason="no county or coordinates")
    _assert_one(b, "notices", row=6, column="lat", reason="coordinates out of range", value="95")
    _assert_one(b, "notices", row=7, column="level", reason="level outside the ladder",
                value="Outdoor ban")
    _assert_one(b, "notices", row=8, column="level", reason="level outside the ladder", value="2.5")
    # stage names belong to their issuer: Town of Ash has no stage called "Voluntary"
    _assert_one(b, "notices", row=9, column="level", reason="level outside the ladder")
    _assert_one(b, "notices", row=10, column="notice_id", reason="duplicate of row 1", value="n1")
    _assert_one(b, "notices", row=11, column="start_date", reason="missing required value")
    _assert_one(b, "notices", row=13, column="level", reason="level outside the ladder", value="-1")
    assert 12 not in _only(b, "notices")["row"].tolist()  # level 0 = restrictions lifted
    clean = b.tables["notices"].set_index("notice_id")
    assert clean.loc["n3", "level"] == 1 and clean.loc["n3", "level_label"] == "Voluntary"
    assert clean["level"].dtype == np.int64
    assert pd.isna(clean.loc["n3", "county_id"]) and clean.loc["n3", "lon"] == 0.5


def test_notice_ladder_option_widens_the_range(base_folder):
    write_text(base_folder, "notices.csv", NOTICES)
    impacts = {"r": {"source": "notices", "ladder": ["watch", "warning", "emergency", "critical"]}}
    b = read_inputs(make_project(base_folder, impacts=impacts))
    assert 4 not in _only(b, "notices")["row"].tolist()  # level 4 now on a 4-step ladder
    assert b.tables["notices"].set_index("notice_id").loc["n4", "level"] == 4


def test_snapshot_stage_zero_and_names(base_folder):
    write_text(
        base_folder, "notice_snapshots.csv",
        """
date,issuer,stage,county_id
2001-05-07,Pine Utility,0,01001
2001-05-14,Pine Utility,Stage Two,01001
2001-05-21,Pine Utility,Stage Nine,01001
2001-05-28,Pine Utility,-1,01001
""",
    )
    impacts = {"r": {"source": "notices", "stage_names": {"Pine Utility": {"Stage Two": 2}}}}
    b = read_inputs(make_project(base_folder, impacts=impacts))
    s = b.tables["notice_snapshots"]
    assert s["stage"].tolist() == [0, 2]
    assert s["stage_label"].tolist() == ["0", "Stage Two"]
    r = _only(b, "notice_snapshots")
    assert r["row"].tolist() == [3, 4]
    assert set(r["reason"]) == {"level outside the ladder"}


def test_yield_rules(base_folder):
    path = write_text(
        base_folder, "yields.csv",
        """
county_id,year,crop,yield
01001,2001,corn,150.5
01001,1492,corn,140
01001,2002.5,corn,140
01001,2003,corn,-1
01003,2001,corn,-999
01001,2001,corn,151
01001,x,corn,151
""",
    )
    b = read_inputs(make_project(base_folder))
    _assert_one(b, "yields", row=2, column="year", reason="year out of range", file=path)
    _assert_one(b, "yields", row=3, column="year", reason="not a whole number", value="2002.5")
    _assert_one(b, "yields", row=4, column="yield", reason="negative yield")
    _assert_one(b, "yields", row=5, column="yield", reason="sentinel value", value="-999")
    _assert_one(b, "yields", row=6, column="county_id+year+crop", reason="duplicate of row 1")
    _assert_one(b, "yields", row=7, column="year", reason="unparseable number", value="x")
    assert b.tables["yields"]["year"].dtype == np.int64


def test_field_report_severity(base_folder):
    write_text(
        base_folder, "field_reports.csv",
        """
county_id,date,sector,severity
01001,2001-06-01,livestock,2
01001,2001-06-02,livestock,9
01001,2001-06-03,livestock,1.5
01001,2001-06-04,livestock,
""",
    )
    b = read_inputs(make_project(base_folder))
    _assert_one(b, "field_reports", row=2, column="severity", reason="severity out of range")
    _assert_one(b, "field_reports", row=3, column="severity", reason="not a whole number")
    sev = b.tables["field_reports"]["severity"]
    assert sev.iloc[0] == 2 and pd.isna(sev.iloc[1])  # blank optional severity is kept as NA


def test_severity_range_option(base_folder):
    write_text(base_folder, "field_reports.csv", "county_id,date,sector,severity\n01001,2001-06-01,hay,0")
    impacts = {"f": {"source": "field_reports", "severity_range": [0, 3]}}
    assert len(read_inputs(make_project(base_folder, impacts=impacts)).rejected) == 0
    b = read_inputs(make_project(base_folder))  # default range 1..5
    _assert_one(b, "field_reports", row=1, column="severity", reason="severity out of range")


def test_price_index_zero_and_prices(base_folder):
    write_text(base_folder, "price_index.csv", "date,price_index\n2001-01-01,100\n2001-02-01,0")
    write_text(
        base_folder, "prices.csv",
        "region,date,commodity,price\nnorth,2001-01-01,hay,90\nnorth,2001-02-01,hay,-90",
    )
    b = read_inputs(make_project(base_folder))
    _assert_one(b, "price_index", row=2, column="price_index", reason="zero price index")
    _assert_one(b, "prices", row=2, column="price", reason="negative price", value="-90")


def test_indicator_not_finite(base_folder):
    write_text(
        base_folder, "indicators.csv",
        "county_id,date,indicator,value\n01001,2001-01-01,soil_pct,40\n01001,2001-01-08,soil_pct,-inf",
    )
    b = read_inputs(make_project(base_folder))
    _assert_one(b, "indicators", row=2, column="value", reason="value not finite", value="-inf")


def test_coverage_rules(base_folder):
    write_text(
        base_folder, "coverage.csv",
        """
source,county_id,region,start_date,end_date
yields,01001,,2000-01-01,2005-12-31
notices,,,2000-01-01,2005-12-31
notices,,north,2003-01-01,2002-12-31
""",
    )
    b = read_inputs(make_project(base_folder))
    _assert_one(b, "coverage", row=2, column="county_id", reason="no county or region")
    _assert_one(b, "coverage", row=3, column="end_date", reason="end before start",
                value="2002-12-31 < 2003-01-01")


def test_county_with_missing_geometry_is_rejected(tmp_path):
    import geopandas as gpd
    from shapely.geometry import box

    gpd.GeoDataFrame(
        {"county_id": ["01001", "01003", "02005"], "region": ["a", "a", "b"]},
        geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1), None],
        crs="EPSG:4326",
    ).to_file(tmp_path / "counties.gpkg")
    write_csv(tmp_path, "climate", climate_frame())
    b = read_inputs(make_project(tmp_path))
    _assert_one(b, "counties", row=3, column="geometry", reason="missing geometry")
    # climate rows for the dropped county become unknown-county rejections
    r = _only(b, "climate")
    assert set(r["reason"]) == {"unknown county"} and set(r["value"]) == {"02005"}


def test_several_bad_cells_in_one_row_are_all_listed_but_counted_once(base_folder):
    _climate_with(base_folder, {(0, "date"): "nope", (0, "precip_mm"): "-999"})
    b = read_inputs(make_project(base_folder))
    r = _only(b, "climate")
    assert sorted(r["reason"]) == ["sentinel value", "unparseable date"]
    assert set(r["row"]) == {1}
    assert b.counts.set_index("table").loc["climate", "rows_rejected"] == 1


def test_blank_line_is_one_rejected_row_and_keeps_row_numbers(base_folder):
    path = write_text(
        base_folder, "yields.csv",
        "county_id,year,crop,yield\n01001,2001,corn,150\n\n,,,\n01001,2002,corn,-5",
    )
    b = read_inputs(make_project(base_folder))
    r = _only(b, "yields")
    assert r[["row", "reason"]].values.tolist() == [
        [2, "blank row"], [3, "blank row"], [4, "negative yield"]
    ]
    assert (r["file"] == str(path)).all()
    assert b.counts.set_index("table").loc["yields", "rows_read"] == 4
