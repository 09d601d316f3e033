"""Every supported format reads, ids keep their leading zeros, types come out as documented."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from inputs_fixtures import (
    COUNTY_IDS,
    climate_frame,
    counties_frame,
    make_project,
    write_csv,
    write_text,
)

from impactlink.inputs import InputWarning, discover_tables, read_inputs, summary_frame


@pytest.mark.parametrize(
    ("file_name", "driver"),
    [
        ("counties.geojson", "GeoJSON"),
        ("counties.json", "GeoJSON"),
        ("counties.gpkg", "GPKG"),
        ("counties.shp", "ESRI Shapefile"),
    ],
)
@pytest.mark.filterwarnings("ignore:Column names longer than 10")
@pytest.mark.filterwarnings("ignore:Normalized/laundered field name")
def test_counties_geometry_formats(tmp_path, file_name, driver):
    counties_frame().to_crs("EPSG:5070").to_file(tmp_path / file_name, driver=driver)
    write_csv(tmp_path, "climate", climate_frame())
    b = read_inputs(make_project(tmp_path))
    g = b.tables["counties"]
    assert g.crs.to_epsg() == 5070  # kept in the file's own CRS
    assert g["county_id"].tolist() == COUNTY_IDS  # leading zeros preserved
    assert g["region"].tolist() == ["north", "north", "south"]
    assert g["county_name"].tolist() == ["Alder", "Birch", "Cedar"]  # shapefile: county_nam
    assert g.geometry.area.gt(0).all()
    sums = b.checksums
    assert str(tmp_path / file_name) in sums and all(len(v) == 64 for v in sums.values())
    if driver == "ESRI Shapefile":  # side files are part of the input too
        assert str(tmp_path / "counties.dbf") in sums


def test_counties_geoparquet_and_wkt_csv(tmp_path):
    counties_frame().to_parquet(tmp_path / "counties.parquet")
    write_csv(tmp_path, "climate", climate_frame())
    a = read_inputs(make_project(tmp_path)).tables["counties"]
    (tmp_path / "counties.parquet").unlink()
    g = counties_frame()
    pd.DataFrame({"county_id": g.county_id, "geometry": g.geometry.to_wkt()}).to_csv(
        tmp_path / "counties.csv", index=False
    )
    with pytest.warns(InputWarning) as rec:
        b = read_inputs(make_project(tmp_path)).tables["counties"]
    text = " ".join(str(w.message) for w in rec)
    assert "no coordinate reference system; assuming EPSG:4326" in text
    assert "no 'region' column; every county is put in region 'all'" in text
    assert b["county_id"].tolist() == a["county_id"].tolist() == COUNTY_IDS
    assert b.crs.to_epsg() == 4326 and (b["region"] == "all").all()
    assert a.geometry.geom_equals(b.geometry).all()


def test_csv_and_parquet_give_the_same_clean_climate(tmp_path):
    counties_frame().to_file(tmp_path / "counties.gpkg")
    c = climate_frame()
    write_csv(tmp_path, "climate", c)
    from_csv = read_inputs(make_project(tmp_path)).tables["climate"]
    (tmp_path / "climate.csv").unlink()
    c.assign(date=pd.to_datetime(c["date"])).to_parquet(tmp_path / "climate.parquet")
    from_parquet = read_inputs(make_project(tmp_path)).tables["climate"]
    pd.testing.assert_frame_equal(from_csv, from_parquet)
    assert from_csv["date"].dtype == "datetime64[ns]"
    assert from_csv["precip_mm"].dtype == np.float64
    assert from_csv["county_id"].iloc[0] == "01001"


def test_parquet_dates_as_date_objects(base_folder):
    import pyarrow as pa
    import pyarrow.parquet as pq

    (base_folder / "climate.csv").unlink()
    c = climate_frame()
    table = pa.table(
        {"county_id": c.county_id, "date": pd.to_datetime(c.date).dt.date, "precip_mm": c.precip_mm}
    )
    pq.write_table(table, base_folder / "climate.parquet")
    clim = read_inputs(make_project(base_folder)).tables["climate"]
    assert clim["date"].dtype == "datetime64[ns]" and len(clim) == len(c)


def test_numeric_ids_in_parquet_get_their_zeros_back(base_folder):
    (base_folder / "climate.csv").unlink()
    c = climate_frame()
    c.assign(county_id=c.county_id.astype(int)).to_parquet(base_folder / "climate.parquet")
    with pytest.warns(InputWarning, match=r"leading zeros restored to 5 digits"):
        b = read_inputs(make_project(base_folder))
    assert sorted(b.tables["climate"]["county_id"].unique()) == COUNTY_IDS
    assert b.counts.set_index("table").loc["climate", "rows_rejected"] == 0


def test_dates_iso_8601_variants(base_folder):
    """ISO 8601 calendar dates with or without a time part; times are dropped (normalized)."""
    write_text(
        base_folder, "field_reports.csv",
        "county_id,date,sector\n01001,2001-06-01,hay\n01001,2001-06-02T15:30:00,hay\n01001,20010603,hay",
    )
    fr = read_inputs(make_project(base_folder)).tables["field_reports"]
    # Reference: Python's own ISO 8601 parser (datetime.date.fromisoformat, Python >= 3.11
    # accepts the basic format 20010603 too).
    import datetime as dt

    expected = [dt.date.fromisoformat(s) for s in ("2001-06-01", "2001-06-02", "20010603")]
    assert [d.date() for d in fr["date"]] == expected


def test_notices_from_points_file(base_folder):
    import geopandas as gpd
    from shapely.geometry import Point

    gpd.GeoDataFrame(
        {"notice_id": ["a1"], "issuer": ["Pine Utility"], "start_date": ["2001-05-01"], "level": [2]},
        geometry=[Point(0.25, 0.75)], crs="EPSG:4326",
    ).to_file(base_folder / "notices.gpkg")
    n = read_inputs(make_project(base_folder)).tables["notices"]
    assert n[["lon", "lat"]].values.tolist() == [[0.25, 0.75]]
    assert n["level"].tolist() == [2] and n["level_label"].tolist() == ["2"]


def test_discover_tables_by_name(base_folder):
    write_text(base_folder, "Yields.CSV", "county_id,year,crop,yield\n01001,2001,corn,1")
    write_text(base_folder, "notes.txt", "not a table")
    found = discover_tables(base_folder)
    assert list(found) == ["counties", "climate", "yields"]
    assert found["yields"].name == "Yields.CSV"


def test_summary_and_counts(base_folder):
    c = climate_frame().astype(str)
    c.loc[0, "precip_mm"] = "-1"
    c.loc[1, "precip_mm"] = "-2"
    c.loc[2, "county_id"] = "77777"
    write_csv(base_folder, "climate", c)
    seen = []
    b = read_inputs(make_project(base_folder), progress=seen.append)
    assert seen == ["reading counties from counties.geojson", "reading climate from climate.csv"]
    s = summary_frame(b).set_index("table")
    assert s.loc["climate", "rows_read"] == len(c)
    assert s.loc["climate", "rows_rejected"] == 3
    assert s.loc["climate", "first"] == "2001-01-01" and s.loc["climate", "last"] == "2003-12-01"
    assert s.loc["climate", "counties"] == 3
    assert s.loc["climate", "top_reasons"] == "2 negative precipitation; 1 unknown county"
    assert s.loc["counties", "file"] == "counties.geojson"


def test_clean_run_has_no_warnings(base_folder):
    with warnings.catch_warnings():
        warnings.simplefilter("error", InputWarning)
        b = read_inputs(make_project(base_folder))
    assert b.warnings == [] and len(b.rejected) == 0
    assert list(b.rejected.columns) == ["table", "file", "row", "column", "value", "reason"]


def test_dates_with_time_zones_keep_the_calendar_date(base_folder):
    write_text(
        base_folder, "field_reports.csv",
        "county_id,date,sector\n01001,2001-06-01T23:00:00-05:00,hay\n01001,2001-06-02,hay\n"
        "01001,2001-06-03 08:00:00Z,hay",
    )
    fr = read_inputs(make_project(base_folder)).tables["field_reports"]
    assert fr["date"].dt.strftime("%Y-%m-%d").tolist() == ["2001-06-01", "2001-06-02", "2001-06-03"]
    assert fr["date"].dtype == "datetime64[ns]"


def test_warnings_for_repairs_and_gaps(tmp_path):
    from shapely.geometry import Polygon

    g = counties_frame()
    g.loc[1, "geometry"] = Polygon([(1, 0), (2, 1), (2, 0), (1, 1)])  # a bow-tie: invalid
    g.to_file(tmp_path / "counties.gpkg")
    c = climate_frame()
    c = c[c.county_id != "02005"]  # one county without climate
    short = c[(c.county_id == "01003") & (c.date < "2002-01-01")]
    c = pd.concat([c[c.county_id != "01003"], short])
    write_csv(tmp_path, "climate", c)
    write_text(tmp_path, "prices.csv", "region,date,commodity,price\neast,2001-01-01,hay,90")
    with pytest.warns(InputWarning):
        b = read_inputs(make_project(tmp_path))
    text = "\n".join(b.warnings)
    assert ("counties.gpkg: 1 invalid polygon(s) repaired with make_valid (holes and parts kept; "
            "check the boundaries): county 01003 (Birch): Self-intersection[1.5 0.5]") in text
    assert "climate.csv: 1 of 3 counties has a polygon but no climate rows: 02005 (Cedar);" in text
    assert "1 county has fewer than 2 years of climate rows (e.g. {'01003': 1} years)" in text
    assert "prices.csv: region(s) ['east'] are not regions of the counties table" in text
    assert b.tables["counties"].geometry.is_valid.all()
