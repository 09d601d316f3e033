"""One-defect corpus for whole-table loss and county geometry (inputs stage).

Each case is a small copy of the committed fictional scenario (scenario_data/: its 60 counties
and two years of its climate, plus the one table the case needs) with one mistake, and the
exact outcome: a fatal one-line message naming the file and column with its hint, rows
rejected with their reason, or a named warning. Fatal cases are run through ``impactlink
run`` with the indices stage replaced by a failure, so they must stop before any index is
computed, and through ``impactlink check``, which must stop the same way.

Expected counts are computed here from the scenario files with the standard library's csv
module or plain pandas, not by the readers. Areas are checked with the shoelace (surveyor's)
formula written out in numpy (common practice).
"""

from __future__ import annotations

import csv
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from corpus_common import fatal_line, scenario_climate, write_rows

from impactlink.cli import main
from impactlink.errors import InputError, InputWarning
from impactlink.inputs import read_inputs
from impactlink.inputs.loss import table_loss
from impactlink.project import load_project

SCENARIO = Path(__file__).resolve().parents[2] / "scenario_data"
YEARS = ("2001-01-01", "2002-12-31")
_TOML = (SCENARIO / "impactlink.toml").read_text(encoding="utf-8")
#: The scenario's notices impact (its ladder and one issuer's stage names), for notice cases.
NOTICES_IMPACT = _TOML[_TOML.index("[impacts.restrictions]"):_TOML.index("[impacts.crop_reports]")]


def _rows(name: str) -> list[dict[str, str]]:
    with open(SCENARIO / name, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def climate() -> pd.DataFrame:
    return scenario_climate(YEARS)


def make_case(folder: Path, climate: pd.DataFrame, *, share: float | None = None,
              tables: tuple[str, ...] = (), counties: str = "counties.geojson",
              notices: bool = False) -> Path:
    """The scenario's counties, two years of its climate and ``tables`` (copied), in ``folder``."""
    folder.mkdir(exist_ok=True)
    if counties == "counties.geojson":
        shutil.copy(SCENARIO / counties, folder / counties)
    if not (folder / "climate.parquet").exists():
        climate.to_parquet(folder / "climate.parquet", index=False)
    for t in tables:
        if not (folder / t).exists():
            shutil.copy(SCENARIO / t, folder / t)
    extra = f"max_rejected_share = {share}\n" if share is not None else ""
    impacts = NOTICES_IMPACT if notices else ""
    (folder / "impactlink.toml").write_text(
        f'[project]\nname = "loss case"\ndata_dir = "."\noutput_dir = "out"\n{extra}'
        f'[tables]\ncounties = "{counties}"\n'
        f"[calibration]\nstart_year = 2001\nend_year = 2002\nmin_years = 2\n{impacts}",
        encoding="utf-8")
    return folder / "impactlink.toml"




# ------------------------------------------------------------------- swapped columns
def test_notices_with_lon_and_lat_swapped_stop_with_the_hint(tmp_path, climate, monkeypatch,
                                                             capsys):
    rows = _rows("notices.csv")
    for r in rows:
        r["lon"], r["lat"] = r["lat"], r["lon"]
    path = make_case(tmp_path, climate, notices=True)
    write_rows(tmp_path / "notices.csv", rows)
    n = len(rows)  # every scenario longitude is below -90, so every swapped latitude is out
    line = fatal_line(path, monkeypatch, capsys)
    assert line.startswith(f"{tmp_path / 'notices.csv'}: the notices table loses all {n} rows "
                           "in the inputs stage, more than max_rejected_share = 0.2 allows "
                           f"(top reasons: {n} coordinates out of range (lat)); hint: columns "
                           f"lon and lat look swapped: {n} of {n} lat values lie outside "
                           f"-90..90 (e.g. {float(rows[0]['lat']):g})")
    assert line.endswith("exchange the two column names; fix the table, or allow the loss "
                         f"with [project] max_rejected_share in {path} (0..1; 1 = never stop)")


def test_points_swapped_inside_the_valid_range_are_caught_by_the_counties_extent():
    # counties near lon 30, lat 60 (invented): swapped points stay within -90..90 but fall
    # outside the counties' extent, and inside it once exchanged back
    frame = pd.DataFrame({"lon": ["60.1", "60.4", "61.0", "30.2"],
                          "lat": ["30.5", "31.0", "30.9", "60.3"]})
    count = {"rows_read": 4, "rows_rejected": 0}
    empty = pd.DataFrame(columns=["row", "column", "value", "reason"])
    line = table_loss("water_systems", "water_systems.csv", count, empty, limit=0.2,
                      frame=frame, extent=(29.5, 59.5, 31.5, 61.5))
    assert line == (
        "water_systems.csv: the water_systems table loses 3 of 4 rows (75 %) in the inputs "
        "stage, more than max_rejected_share = 0.2 allows (top reasons: 3 points outside the "
        "counties' extent); hint: columns lon and lat look swapped: 3 of 4 points lie outside "
        "the counties' extent (lon 29.50..31.50, lat 59.50..61.50) and inside it with lon and "
        "lat exchanged; exchange the two column names; fix the table, or allow the loss with "
        "[project] max_rejected_share in the project file (0..1; 1 = never stop)")


def test_notices_with_start_and_end_swapped_stop_with_the_hint(tmp_path, climate, monkeypatch,
                                                               capsys):
    rows = _rows("notices.csv")
    for r in rows:
        r["start_date"], r["end_date"] = r["end_date"], r["start_date"]
    path = make_case(tmp_path, climate, notices=True)
    write_rows(tmp_path / "notices.csv", rows)
    n = len(rows)
    blank_start = sum(r["start_date"] == "" for r in rows)  # open notices: no end -> no start
    before = sum(r["start_date"] != "" and r["end_date"] < r["start_date"] for r in rows)
    assert blank_start + before == n
    line = fatal_line(path, monkeypatch, capsys)
    assert line.startswith(f"{tmp_path / 'notices.csv'}: the notices table loses all {n} rows")
    assert f"{before} end before start (end_date)" in line
    assert f"{blank_start} missing required value (start_date)" in line
    assert (f"hint: columns start_date and end_date look swapped: {before} of {n} rows end "
            "before they start; exchange the two column names") in line


# ------------------------------------------------------------------- formats and units
def test_field_reports_in_day_first_dates_stop_with_the_iso_format(tmp_path, climate,
                                                                   monkeypatch, capsys):
    rows = _rows("field_reports.csv")
    for r in rows:
        y, m, d = r["date"].split("-")
        r["date"] = f"{d}/{m}/{y}"
    path = make_case(tmp_path, climate)
    write_rows(tmp_path / "field_reports.csv", rows)
    n = len(rows)
    first = next(r["date"] for r in rows if int(r["date"][:2]) > 12)  # the day shows it
    d, m, y = first.split("/")
    line = fatal_line(path, monkeypatch, capsys)
    assert line.startswith(f"{tmp_path / 'field_reports.csv'}: the field_reports table loses "
                           f"all {n:,} rows in the inputs stage")
    assert f"(top reasons: {n:,} unparseable date (date))" in line
    # ISO 8601-1:2019 calendar date, extended format: YYYY-MM-DD
    assert (f"hint: column date: {n:,} dates do not read as ISO 8601 (e.g. '{first}'); dates must "
            f"be YYYY-MM-DD (write '{y}-{m}-{d}' for '{first}')") in line


def test_climate_in_kelvin_under_a_celsius_name_stops_with_the_unit(tmp_path, climate,
                                                                     monkeypatch, capsys):
    c = climate.copy()
    c["tmax_c"] = (c["tmax_c"] + 273.15).round(2)  # every value beyond 60 C
    c.to_parquet(tmp_path / "climate.parquet", index=False)
    path = make_case(tmp_path, climate)
    ids = sorted(c["county_id"].astype(str).unique())
    first = c.loc[c["county_id"].astype(str) == ids[0], "tmax_c"].median()
    line = fatal_line(path, monkeypatch, capsys)
    # a unit mistake is named as read, before the row rules could reject its rows one by one
    assert line == (f"{tmp_path / 'climate.parquet'}: column tmax_c: {len(ids)} counties "
                    f"({', '.join(ids[:3])} ...), e.g. county {ids[0]}: median {first:.1f} "
                    "looks like kelvin (a median above 150 is neither Celsius nor Fahrenheit; "
                    "record low -89.2 C = 184 K); convert the column to degrees Celsius, "
                    "C = K - 273.15")


# ------------------------------------------------------------------- the share
def _yields_with_blanks(folder: Path, share: float) -> tuple[int, int]:
    """The scenario's yields with every k-th usable yield blanked; (rows, rows lost)."""
    rows = _rows("yields.csv")
    usable = [r for r in rows if r["yield"] != ""]
    k = round(1 / share)
    for r in usable[::k]:
        r["yield"] = ""
    write_rows(folder / "yields.csv", rows)
    return len(rows), sum(r["yield"] == "" for r in rows)


def test_thirty_percent_of_yields_lost_stops(tmp_path, climate, monkeypatch, capsys):
    path = make_case(tmp_path, climate)
    n, lost = _yields_with_blanks(tmp_path, 0.3)
    assert 0.2 < lost / n < 0.4
    line = fatal_line(path, monkeypatch, capsys)
    assert line.startswith(
        f"{tmp_path / 'yields.csv'}: the yields table loses {lost:,} of {n:,} rows "
        f"({100 * lost / n:.0f} %) in the inputs stage, more than max_rejected_share = 0.2 "
        f"allows (top reasons: {lost:,} missing required value (yield)); fix the table")


def test_ten_percent_of_yields_lost_does_not_stop(tmp_path, climate):
    path = make_case(tmp_path, climate)
    n, lost = _yields_with_blanks(tmp_path, 0.1)
    assert 0.05 < lost / n < 0.2
    b = read_inputs(load_project(path))
    y = b.counts.set_index("table").loc["yields"]
    assert (y["rows_read"], y["rows_rejected"], y["rows_used"]) == (n, lost, n - lost)
    assert (b.rejected.loc[b.rejected["table"] == "yields", "reason"]
            == "missing required value").sum() == lost


def test_thirty_percent_lost_is_allowed_by_the_project_file(tmp_path, climate):
    path = make_case(tmp_path, climate, share=0.5)
    n, lost = _yields_with_blanks(tmp_path, 0.3)
    b = read_inputs(load_project(path))
    assert int(b.counts.set_index("table").loc["yields", "rows_rejected"]) == lost


def test_share_one_never_stops_even_when_all_rows_go(tmp_path, climate):
    rows = _rows("notices.csv")
    for r in rows:
        r["lon"], r["lat"] = r["lat"], r["lon"]
    path = make_case(tmp_path, climate, share=1, notices=True)
    write_rows(tmp_path / "notices.csv", rows)
    b = read_inputs(load_project(path))
    assert int(b.counts.set_index("table").loc["notices", "rows_used"]) == 0
    assert len(b.rejected[b.rejected["table"] == "notices"]) == len(rows)


def test_share_out_of_range_is_a_project_error(tmp_path, climate, capsys):
    path = make_case(tmp_path, climate, share=1.5)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{path}: project.max_rejected_share: got 1.5" in err


# ------------------------------------------------------------------- geometry
def _counties():
    import geopandas as gpd

    return gpd.read_file(SCENARIO / "counties.geojson")


def _shoelace(ring: np.ndarray) -> float:
    x, y = ring[:, 0], ring[:, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def test_invalid_polygon_is_repaired_and_the_county_named(tmp_path, climate):
    from shapely.geometry import Polygon

    g = _counties()
    x0, y0, x1, y1 = g.geometry.iloc[4].bounds
    g.loc[4, "geometry"] = Polygon([(x0, y0), (x1, y1), (x1, y0), (x0, y1)])  # a bow-tie
    path = make_case(tmp_path, climate, counties="counties.gpkg")
    g.to_file(tmp_path / "counties.gpkg")
    cid, name = g.loc[4, "county_id"], g.loc[4, "county_name"]
    with pytest.warns(InputWarning, match=f"county {cid} \\({name}\\): Self-intersection"):
        b = read_inputs(load_project(path))
    line = next(w for w in b.warnings if "repaired" in w)
    assert line.startswith(f"{tmp_path / 'counties.gpkg'}: 1 invalid polygon(s) repaired with "
                           f"make_valid (holes and parts kept; check the boundaries): county "
                           f"{cid} ({name}): Self-intersection")
    c = b.tables["counties"].set_index("county_id")
    assert c.geometry.is_valid.all() and c.loc[cid].geometry.geom_type == "MultiPolygon"
    # the two triangles of the bow-tie: each a quarter of the box
    assert c.loc[cid].geometry.area == pytest.approx((x1 - x0) * (y1 - y0) / 2)


def test_county_with_a_hole_keeps_its_hole(tmp_path, climate):
    g = _counties()
    outer = g.geometry.iloc[7]
    hole = outer.centroid.buffer(0.05, quad_segs=4)
    g.loc[7, "geometry"] = outer.difference(hole)
    path = make_case(tmp_path, climate, counties="counties.gpkg")
    g.to_file(tmp_path / "counties.gpkg")
    b = read_inputs(load_project(path))
    got = b.tables["counties"].set_index("county_id").loc[g.loc[7, "county_id"]].geometry
    assert len(got.interiors) == 1
    expected = (_shoelace(np.asarray(outer.exterior.coords))
                - _shoelace(np.asarray(hole.exterior.coords)))
    assert got.area == pytest.approx(expected, rel=1e-9)


def test_multipolygon_county_keeps_every_part(tmp_path, climate):
    from shapely.geometry import MultiPolygon, box

    g = _counties()
    main_part = g.geometry.iloc[9]
    x0, y0, x1, y1 = g.total_bounds
    island = box(x1 + 0.2, y0, x1 + 0.4, y0 + 0.1)  # an island off the region (invented)
    g.loc[9, "geometry"] = MultiPolygon([main_part, island])
    path = make_case(tmp_path, climate, counties="counties.gpkg")
    g.to_file(tmp_path / "counties.gpkg")
    b = read_inputs(load_project(path))
    got = b.tables["counties"].set_index("county_id").loc[g.loc[9, "county_id"]].geometry
    assert got.geom_type == "MultiPolygon" and len(got.geoms) == 2
    expected = _shoelace(np.asarray(main_part.exterior.coords)) + 0.2 * 0.1
    assert got.area == pytest.approx(expected, rel=1e-9)


def test_projected_coordinates_labelled_as_degrees_are_fatal(tmp_path, climate, monkeypatch,
                                                             capsys):
    g = _counties().to_crs("EPSG:5070")  # CONUS Albers equal-area metres
    g = g.set_crs("EPSG:4326", allow_override=True)
    path = make_case(tmp_path, climate, counties="counties.gpkg")
    g.to_file(tmp_path / "counties.gpkg")
    top = float(np.abs(g.total_bounds).max())
    line = fatal_line(path, monkeypatch, capsys)
    assert line == (f"{tmp_path / 'counties.gpkg'}: coordinates up to {top:.0f} lie outside "
                    "EPSG:4326's range (lon -180..180, lat -90..90): the layer looks projected; "
                    "set the layer's CRS correctly (e.g. re-save it with its real EPSG code)")


def test_degrees_labelled_as_a_projection_are_fatal(tmp_path, climate, monkeypatch, capsys):
    g = _counties().set_crs("EPSG:5070", allow_override=True)
    path = make_case(tmp_path, climate, counties="counties.gpkg")
    g.to_file(tmp_path / "counties.gpkg")
    line = fatal_line(path, monkeypatch, capsys)
    assert line.startswith(f"{tmp_path / 'counties.gpkg'}: every coordinate lies within "
                           "-180..180 and -90..90")
    assert line.endswith("the layer looks like longitude/latitude labelled EPSG:5070; set the "
                         "layer's CRS correctly (e.g. re-save it as EPSG:4326)")


def test_county_without_geometry_is_rejected_by_row_and_its_climate_named(tmp_path, climate):
    g = _counties()
    g.loc[2, "geometry"] = None
    path = make_case(tmp_path, climate, counties="counties.gpkg")
    g.to_file(tmp_path / "counties.gpkg")
    cid, name = g.loc[2, "county_id"], g.loc[2, "county_name"]
    with pytest.warns(InputWarning, match=f"{cid} \\(.* its geometry is empty, counties row 3\\)"):
        b = read_inputs(load_project(path))
    r = b.rejected
    geo = r[r["table"] == "counties"]
    assert geo[["row", "column", "value", "reason"]].values.tolist() == [
        [3, "geometry", f"county {cid} ({name})", "missing geometry"]]
    n_climate = int((climate["county_id"] == cid).sum())
    assert ((r["table"] == "climate") & (r["reason"] == "unknown county")).sum() == n_climate
    line = next(w for w in b.warnings if "no polygon in" in w)
    assert line.startswith(f"{tmp_path / 'climate.parquet'}: 1 county of the climate table "
                           f"has no polygon in {tmp_path / 'counties.gpkg'}: {cid} "
                           f"({n_climate:,} rows; its geometry is empty, counties row 3)")


def test_county_without_climate_is_named(tmp_path, climate):
    g = _counties()
    cid, name = g.loc[5, "county_id"], g.loc[5, "county_name"]
    c = climate[climate["county_id"] != cid]
    c.to_parquet(tmp_path / "climate.parquet", index=False)
    path = make_case(tmp_path, climate)
    with pytest.warns(InputWarning, match=f"has a polygon but no climate rows: {cid} "
                                          f"\\({name}\\); they get no index values"):
        read_inputs(load_project(path))


def test_the_committed_scenario_stays_under_the_share():
    # the scenario plants a few bad rows on purpose; none of its tables comes near 20 %
    counts = {}
    for name in ("yields.csv", "notices.csv", "field_reports.csv", "prices.csv"):
        rows = _rows(name)
        col = {"yields.csv": "yield", "prices.csv": "price"}.get(name)
        counts[name] = sum(r[col] == "" for r in rows) / len(rows) if col else 0.0
    assert max(counts.values()) < 0.2


def test_read_inputs_raises_input_error_for_the_stop(tmp_path, climate):
    rows = _rows("notices.csv")
    for r in rows:
        r["lon"], r["lat"] = r["lat"], r["lon"]
    path = make_case(tmp_path, climate, notices=True)
    write_rows(tmp_path / "notices.csv", rows)
    with pytest.raises(InputError, match="the notices table loses all"):
        read_inputs(load_project(path))
