"""Fatal problems: one InputError that names the file and says what to do."""

from __future__ import annotations

import re

import pandas as pd
import pytest
from inputs_fixtures import climate_frame, counties_frame, make_project, write_csv, write_text

from impactlink.inputs import InputError, discover_tables, read_inputs


def test_missing_required_table(tmp_path):
    counties_frame().to_file(tmp_path / "counties.geojson", driver="GeoJSON")
    with pytest.raises(InputError, match=r"required table 'climate' not found.*add the file"):
        read_inputs(make_project(tmp_path))


def test_missing_required_table_mentions_unsupported_file(tmp_path):
    counties_frame().to_file(tmp_path / "counties.geojson", driver="GeoJSON")
    (tmp_path / "climate.xlsx").write_bytes(b"not really")
    with pytest.raises(InputError, match=r"found climate\.xlsx, which is not a supported format"):
        read_inputs(make_project(tmp_path))


def test_named_optional_file_missing(base_folder):
    p = make_project(base_folder, tables={"yields": "yields_2020.csv"})
    with pytest.raises(InputError, match=r"yields_2020\.csv: file not found; check the path under \[tables\]"):
        read_inputs(p)


def test_unsupported_extension_named_in_project(base_folder):
    (base_folder / "yields.xlsx").write_bytes(b"PK")
    p = make_project(base_folder, tables={"yields": "yields.xlsx"})
    with pytest.raises(InputError, match=r"yields\.xlsx: unsupported file extension '\.xlsx'.*CSV"):
        read_inputs(p)


def test_missing_required_column_lists_found_and_expected(base_folder):
    c = climate_frame().rename(columns={"precip_mm": "precip"})
    path = write_csv(base_folder, "climate", c)
    with pytest.raises(InputError) as err:
        read_inputs(make_project(base_folder))
    msg = str(err.value)
    assert str(path) in msg
    assert "lacks required column(s) ['precip_mm']" in msg
    assert "found ['county_id', 'date', 'precip', 'tmin_c', 'tmax_c']" in msg
    assert "expected ['county_id', 'date', 'precip_mm']" in msg
    assert "rename 'precip' -> 'precip_mm'" in msg


def test_notices_without_county_or_coordinate_columns(base_folder):
    write_text(base_folder, "notices.csv", "notice_id,issuer,start_date,level\nn1,Ash,2001-01-01,1")
    with pytest.raises(InputError, match=r"notices\.csv: the notices table needs county_id or lon\+lat"):
        read_inputs(make_project(base_folder))


def test_counties_csv_without_geometry(tmp_path):
    write_text(tmp_path, "counties.csv", "county_id,region\n01001,north")
    write_csv(tmp_path, "climate", climate_frame())
    with pytest.raises(InputError, match=r"counties\.csv: the counties table has no geometry; save it as GeoPackage"):
        read_inputs(make_project(tmp_path))


def test_unreadable_geometry_file(tmp_path):
    write_text(tmp_path, "counties.geojson", '{"type": "FeatureCollection", "features": [ {')
    write_csv(tmp_path, "climate", climate_frame())
    with pytest.raises(InputError, match=r"counties\.geojson: unreadable geometry file .*re-export"):
        read_inputs(make_project(tmp_path))


def test_unreadable_wkt(tmp_path):
    write_text(tmp_path, "counties.csv", 'county_id,geometry\n01001,"POLYGON ((0 0, 1"')
    write_csv(tmp_path, "climate", climate_frame())
    with pytest.raises(InputError, match=r"counties\.csv: column 'geometry' holds unreadable WKT"):
        read_inputs(make_project(tmp_path))


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_projected_counties_without_crs(tmp_path):
    g = counties_frame().to_crs("EPSG:5070").set_crs(None, allow_override=True)
    g.to_file(tmp_path / "counties.gpkg")  # GeoJSON would imply degrees (RFC 7946)
    write_csv(tmp_path, "climate", climate_frame())
    with pytest.raises(InputError, match=r"counties\.gpkg: no coordinate reference system and the coordinates are not degrees"):
        read_inputs(make_project(tmp_path))


def test_duplicate_county_ids(tmp_path):
    g = counties_frame()
    g.loc[2, "county_id"] = "01001"
    g.to_file(tmp_path / "counties.gpkg")
    write_csv(tmp_path, "climate", climate_frame())
    with pytest.raises(InputError, match=r"counties\.gpkg: county_id repeats \(\['01001'\] at rows \[1, 3\]\)"):
        read_inputs(make_project(tmp_path))


def test_no_county_id_matches(base_folder):
    c = climate_frame()
    c["county_id"] = c["county_id"].str.lstrip("0")  # ids that lost their leading zeros
    write_csv(base_folder, "climate", c)
    with pytest.raises(InputError) as err:
        read_inputs(make_project(base_folder))
    msg = str(err.value)
    assert "climate.csv: none of the county ids in column 'county_id'" in msg
    assert "lost or gained leading zeros" in msg


def test_record_too_short(base_folder):
    p = make_project(base_folder, min_years=20)
    with pytest.raises(InputError) as err:
        read_inputs(p)
    msg = str(err.value)
    assert "climate.csv: the climate record covers 3 year(s) (2001-2003)" in msg
    assert "fewer than the 20 the calibration needs" in msg
    assert "lower min_years under [calibration]" in msg


def test_unparseable_parquet(base_folder):
    (base_folder / "climate.csv").unlink()
    (base_folder / "climate.parquet").write_bytes(b"this is not parquet")
    with pytest.raises(InputError, match=r"climate\.parquet: cannot be read as Parquet .*re-export"):
        read_inputs(make_project(base_folder))


def test_empty_csv(base_folder):
    write_text(base_folder, "yields.csv", "")
    with pytest.raises(InputError, match=r"yields\.csv: the file is empty"):
        read_inputs(make_project(base_folder))


def test_two_files_claim_one_table(base_folder):
    climate_frame().to_parquet(base_folder / "climate.parquet")
    with pytest.raises(InputError, match=r"2 files claim the table 'climate': climate\.csv, climate\.parquet"):
        discover_tables(base_folder)
    with pytest.raises(InputError, match=r"name the one to use under \[tables\]"):
        read_inputs(make_project(base_folder))
    # naming one explicitly settles it
    b = read_inputs(make_project(base_folder, tables={"climate": "climate.parquet"}))
    assert b.files["climate"].name == "climate.parquet"


def test_traits_text_column_is_fatal(base_folder):
    write_text(base_folder, "traits.csv", "county_id,irrigated_pct,soil\n01001,12,loam\n01003,30,clay")
    with pytest.raises(InputError, match=r"traits\.csv: traits column 'soil' holds no numbers \(e\.g\. 'loam'\)"):
        read_inputs(make_project(base_folder))


def test_traits_single_bad_value_rejects_the_row(base_folder):
    write_text(base_folder, "traits.csv", "county_id,irrigated_pct\n01001,12\n01003,lots")
    b = read_inputs(make_project(base_folder))
    r = b.rejected[b.rejected.table == "traits"]
    assert r[["row", "column", "value", "reason"]].values.tolist() == [
        [2, "irrigated_pct", "lots", "unparseable number"]
    ]
    t = b.tables["traits"]
    assert t["irrigated_pct"].dtype == "float64" and t["county_id"].tolist() == ["01001"]


def test_discover_missing_folder(tmp_path):
    with pytest.raises(InputError, match=re.escape(f"data folder {tmp_path / 'nope'} does not exist")):
        discover_tables(tmp_path / "nope")


def test_all_rows_rejected_is_not_confused_with_unknown_ids(base_folder):
    """A table whose every row fails for other reasons is not blamed on county ids."""
    c = climate_frame().astype(str)
    c.loc[c.index[:3], "precip_mm"] = "-999"
    write_csv(base_folder, "climate", c)
    write_text(base_folder, "yields.csv", "county_id,year,crop,yield\n01001,2001,corn,-999")
    b = read_inputs(make_project(base_folder))
    assert b.counts.set_index("table").loc["yields", "rows_used"] == 0
    assert pd.Series(b.rejected.reason).str.contains("sentinel").sum() == 4


def test_semicolon_separated_csv(base_folder):
    write_text(base_folder, "yields.csv", "county_id;year;crop;yield\n01001;2001;corn;150")
    with pytest.raises(InputError, match=r"yields\.csv: .*another separator: save it with commas"):
        read_inputs(make_project(base_folder))


def test_column_name_case_hint(base_folder):
    write_text(base_folder, "yields.csv", "County_ID,year,crop,yield\n01001,2001,corn,150")
    with pytest.raises(InputError, match=r"rename 'County_ID' -> 'county_id'"):
        read_inputs(make_project(base_folder))


def test_not_utf8_csv(base_folder):
    (base_folder / "yields.csv").write_bytes("county_id,year,crop,yield\n01001,2001,ma\xefs,1\n".encode("utf-16"))
    with pytest.raises(InputError, match=r"yields\.csv: cannot be read as CSV .*UTF-8"):
        read_inputs(make_project(base_folder))


def test_counties_with_no_usable_row(tmp_path):
    write_text(tmp_path, "counties.csv", 'county_id,geometry\n,"POLYGON ((0 0, 1 0, 1 1, 0 0))"')
    write_csv(tmp_path, "climate", climate_frame())
    with pytest.raises(InputError, match=r"counties\.csv: the counties table has no usable county \(1 rows; problems: \{'missing required value': 1\}\)"):
        read_inputs(make_project(tmp_path))


def test_coverage_without_county_or_region_columns(base_folder):
    write_text(base_folder, "coverage.csv", "source,start_date,end_date\nyields,2001-01-01,2002-01-01")
    with pytest.raises(InputError, match=r"coverage\.csv: the coverage table needs county_id or region columns.*Add county_id or region$"):
        read_inputs(make_project(base_folder))


@pytest.mark.parametrize(
    ("options", "message"),
    [
        ({"source": "notices", "ladder": 3}, r"\[impacts\.x\] ladder must be a list of level names"),
        ({"source": "notices", "stage_names": {"Ash": 2}}, r"\[impacts\.x\] stage_names must map issuer"),
        ({"source": "notices", "stage_names": {"Ash": {"Voluntary": "one"}}},
         r"'Ash' stage 'Voluntary' must map to a whole level >= 0, got 'one'"),
        ({"source": "field_reports", "severity_range": [5, 1]},
         r"\[impacts\.x\] severity_range must be \[lowest, highest\] whole numbers, got \[5, 1\]"),
    ],
)
def test_bad_level_options(base_folder, options, message):
    with pytest.raises(InputError, match=message):
        read_inputs(make_project(base_folder, impacts={"x": options}))
