"""The publisher-format readers on tiny hand-made files: every marker and edge case.

The Quick Stats files follow the publisher's export layout (21 quoted columns, Value as text;
NASS Quick Stats glossary for the markers). Expected values are worked by hand beside each
check.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pandas as pd
import pytest
import shapely

from impactlink.errors import InputError, InputWarning
from impactlink.inputs.formats import (
    MARKER_REASONS,
    QUICKSTATS_COLUMNS,
    parse_data_item,
    read_quickstats,
    sniff_quickstats,
)
from impactlink.inputs.formats.crop_survey import QUICKSTATS_REASONS
from impactlink.inputs.formats.topojson import read_topojson_counties, sniff_topojson
from impactlink.inputs.formats.zones import (
    ZONE_REASONS,
    assign_zones,
    climate_columns,
    read_zone_climate,
    read_zone_indicators,
    read_zone_table,
    units_from_header,
    zone_column_of,
)

ITEM = "CORN, GRAIN - YIELD, MEASURED IN BU / ACRE"


def _qs_row(**kw):
    row = dict.fromkeys(QUICKSTATS_COLUMNS, "")
    row.update({"Program": "SURVEY", "Year": "2020", "Period": "YEAR", "Geo Level": "COUNTY",
                "State": "VELLMORA", "State ANSI": "19", "County": "ASHFORD",
                "County ANSI": "001", "watershed_code": "00000000", "Commodity": "CORN",
                "Data Item": ITEM, "Domain": "TOTAL", "Domain Category": "NOT SPECIFIED",
                "Value": "150.5"})
    row.update(kw)
    return row


def _write_qs(path, rows):
    with open(path, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=QUICKSTATS_COLUMNS, quoting=csv.QUOTE_ALL)
        w.writeheader()
        w.writerows(rows)
    return path


# ------------------------------------------------------------------ Quick Stats
def test_each_marker_is_rejected_with_its_own_reason(tmp_path):
    rows = [_qs_row(Value="1,234.5", Year="2019")]
    rows += [_qs_row(Value=m, Year=str(2000 + i)) for i, m in enumerate(MARKER_REASONS)]
    res = read_quickstats(_write_qs(tmp_path / "download.csv", rows))
    assert res.frame["yield"].tolist() == [1234.5]  # "1,234.5": thousands separator removed
    rej = res.rejected
    assert rej["row"].tolist() == [2, 3, 4, 5, 6]  # header excluded: first data row is row 1
    assert rej["reason"].tolist() == list(MARKER_REASONS.values())
    assert rej["value"].tolist() == list(MARKER_REASONS)
    assert len(set(MARKER_REASONS.values())) == 5
    assert res.rows_read == 6 == res.rows_used + res.rows_rejected


@pytest.mark.parametrize(("value", "reason"), [
    ("", "missing required value"), ("abc", "unparseable number"),
    ("12.3.4", "unparseable number"), ("1,23", "unparseable number"),
    ("-5", "negative yield"), (" (D) ", MARKER_REASONS["(D)"])])
def test_bad_values(tmp_path, value, reason):
    res = read_quickstats(_write_qs(tmp_path / "q.csv", [_qs_row(), _qs_row(Value=value,
                                                                            Year="2021")]))
    assert res.rejected["reason"].tolist() == [reason] and res.rejected["row"].tolist() == [2]


def test_geoid_pooled_state_and_other_levels(tmp_path):
    rows = [
        _qs_row(**{"State ANSI": "1", "County ANSI": "7"}),  # re-saved by a spreadsheet
        _qs_row(County="OTHER (COMBINED) COUNTIES", **{"County ANSI": ""}),
        _qs_row(County="OTHER COUNTIES", **{"County ANSI": ""}, Year="2019"),
        _qs_row(County="ASHFORD", **{"County ANSI": ""}, Year="2018"),
        _qs_row(**{"Geo Level": "STATE", "County": "", "County ANSI": ""}),
        _qs_row(**{"Geo Level": "AGRICULTURAL DISTRICT", "County ANSI": ""}, Year="2017"),
    ]
    res = read_quickstats(_write_qs(tmp_path / "q.csv", rows))
    assert res.frame["county_id"].tolist() == ["01007", "19"]  # 2 + 3 digits; a state as one
    r = QUICKSTATS_REASONS
    assert res.rejected["reason"].tolist() == [r["pooled"], r["pooled"], r["no_county_ansi"],
                                               r["geo_level"]]


def test_several_crops_practices_and_items(tmp_path):
    rows = [
        _qs_row(),
        _qs_row(**{"Data Item": "CORN, GRAIN, IRRIGATED - YIELD, MEASURED IN BU / ACRE"},
                Value="210"),
        _qs_row(**{"Data Item": "CORN, GRAIN, NON-IRRIGATED - YIELD, MEASURED IN BU / ACRE"},
                Value="140"),
        _qs_row(**{"Data Item": "SOYBEANS - YIELD, MEASURED IN BU / ACRE"}, Value="55"),
        _qs_row(**{"Data Item": "CORN, SILAGE - YIELD, MEASURED IN TONS / ACRE"}, Value="20"),
        _qs_row(**{"Data Item": "CORN, GRAIN - PRODUCTION, MEASURED IN BU"}, Value="9,000"),
        _qs_row(**{"Data Item": "CORN, GRAIN - ACRES HARVESTED"}, Value="60,000"),
        _qs_row(Domain="AREA OPERATED", Value="1"),
        _qs_row(Period="YEAR - AUG FORECAST", Value="1"),
        _qs_row(**{"Data Item": "NOT A NASS ITEM"}),
        _qs_row(Value="151"),  # same county, year, crop and practice as data row 1
    ]
    res = read_quickstats(_write_qs(tmp_path / "q.csv", rows))
    f = res.frame.sort_values(["crop", "practice"])
    assert list(zip(f["crop"], f["practice"], f["yield"], f["unit"], strict=True)) == [
        ("corn grain", "all", 150.5, "bu / acre"), ("corn grain", "irrigated", 210.0, "bu / acre"),
        ("corn grain", "non-irrigated", 140.0, "bu / acre"),
        ("corn silage", "all", 20.0, "tons / acre"), ("soybeans", "all", 55.0, "bu / acre")]
    r = QUICKSTATS_REASONS
    assert res.rejected["reason"].tolist() == [r["not_yield"], r["not_yield"], r["domain"],
                                               r["period"], r["data_item"], "duplicate of row 1"]
    items = res.details["items"]
    assert len(items) == 8 and items["rows"].sum() == 11 and items["rows_used"].sum() == 5


def test_parse_data_item_parts():
    p = parse_data_item("CORN, GRAIN, NON-IRRIGATED - YIELD, MEASURED IN BU / ACRE")
    assert p == {"crop": "corn grain", "commodity": "corn", "utilisation": "grain",
                 "practice": "non-irrigated", "statistic": "yield", "unit": "bu / acre"}
    p = parse_data_item("CORN, GRAIN - ACRES HARVESTED")
    assert (p["statistic"], p["unit"]) == ("acres harvested", "")
    assert parse_data_item("nonsense")["crop"] == ""


def test_sniff_by_header_not_name(tmp_path):
    good = _write_qs(tmp_path / "anything.txt", [_qs_row()])
    assert sniff_quickstats(good)
    fake = tmp_path / "quickstats.csv"
    fake.write_text("Year,County,Value\n2020,X,1\n")
    assert not sniff_quickstats(fake) and not sniff_quickstats(tmp_path / "missing.csv")


def test_quickstats_errors_name_the_file(tmp_path):
    p = tmp_path / "q.csv"
    p.write_text("Year,Value\n2020,1\n")
    with pytest.raises(InputError, match=r"q\.csv: not a NASS Quick Stats export"):
        read_quickstats(p)
    bad = _write_qs(tmp_path / "all_withheld.csv", [_qs_row(Value="(D)")])
    with pytest.raises(InputError, match=r"all_withheld\.csv: no usable yield row"):
        read_quickstats(bad)
    with pytest.raises(InputError, match="file not found"):
        read_quickstats(tmp_path / "absent.csv")


# ------------------------------------------------------------------ zones
def _write(path, text):
    path.write_text(text)
    return path


def test_zone_table_forms(tmp_path):
    divtable = read_zone_table(_write(tmp_path / "a.csv", "postal_fips_id,ncdc_fips_id,climdiv_id\n"
                                  "19001,13001,1307\n19003,13003,1307\n"))
    assert divtable.frame.to_dict("list") == {"county_id": ["19001", "19003"],
                                          "zone": ["1307", "1307"], "weight": [1.0, 1.0]}
    two = read_zone_table(_write(tmp_path / "b.csv", "c,basin\nA1,B07\nA2,\nA1,B08\n"))
    assert two.frame["zone"].tolist() == ["B07"]
    assert two.rejected["reason"].tolist() == ["missing required value",
                                               ZONE_REASONS["second_zone"]]
    w = read_zone_table(_write(tmp_path / "c.csv", "county_id,zone,weight\nA1,Z1,0.25\n"
                               "A1,Z2,0.75\nA2,Z1,0\nA2,Z2,x\nA1,Z1,0.1\n"))
    assert w.frame["weight"].tolist() == [0.25, 0.75]
    assert w.rejected["reason"].tolist() == [ZONE_REASONS["weight"], "unparseable number",
                                             "duplicate of row 1"]
    with pytest.raises(InputError, match=r"d\.csv: cannot tell the county and zone columns"):
        read_zone_table(_write(tmp_path / "d.csv", "a,b,c\n1,2,3\n"))


def test_units_from_header_and_conflicts():
    assert units_from_header(["zone", "date", "precip_mm", "tmax_c", "tmin_c"]) == {
        "precip_unit": "mm", "temp_unit": "C"}
    assert units_from_header(["zone", "precip", "tavg"]) == {}
    assert climate_columns(["PRECIP_IN", "tmin_F"]) == {"PRECIP_IN": ("precip_mm", "in"),
                                                        "tmin_F": ("tmin_c", "F")}
    with pytest.raises(InputError, match="different units for temp"):
        units_from_header(["tmax_f", "tmin_c"])
    assert zone_column_of(["Year", "CLIMDIV_ID"]) == "CLIMDIV_ID"
    assert zone_column_of(["year", "value"]) is None


def test_declared_units_convert_once_and_never_guess(tmp_path):
    zones = pd.DataFrame({"county_id": ["A1"], "zone": ["0101"], "weight": [1.0]})
    p = _write(tmp_path / "clim.csv", "zone,year,month,precip,tavg\n0101,2000,1,1.0,50\n")
    res = read_zone_climate(p, zones, precip_unit="in", temp_unit="F")
    assert res.frame["precip_mm"].item() == 25.4 and res.frame["tmean_c"].item() == 10.0
    res = read_zone_climate(p, zones, precip_unit="mm", temp_unit="C")  # same numbers, as mm
    assert res.frame["precip_mm"].item() == 1.0 and res.frame["tmean_c"].item() == 50.0
    with pytest.raises(InputError, match=r"clim\.csv: the unit of column 'precip' is not known"):
        read_zone_climate(p, zones)
    q = _write(tmp_path / "q.csv", "zone,year,month,precip_in\n0101,2000,1,1.0\n")
    with pytest.raises(InputError, match="'precip_in' is in in by its name but precip_unit"):
        read_zone_climate(q, zones, precip_unit="mm")
    with pytest.raises(InputError, match="precip_unit must be 'in' or 'mm'"):
        read_zone_climate(q, zones, precip_unit="cm")


def test_zone_rows_rejected_with_reasons(tmp_path):
    zones = pd.DataFrame({"county_id": ["A1", "A2"], "zone": ["0101", "0102"],
                          "weight": [1.0, 1.0]})
    p = _write(tmp_path / "c.csv", "climdiv_id,year,month,precip_in,tavg_f\n"
               "0101,2000,1,1.0,50\n"    # data row 1 used
               "101,2000,1,1.0,50\n"     # data row 2: "101" is not "0101" (ids matched as text)
               "0102,2000,13,1.0,50\n"   # data row 3: month 13
               "0102,2000,2,-99.99,50\n"  # data row 4: nClimDiv missing code
               "0102,2000,3,-1,50\n"     # data row 5: negative
               "0102,2000,4,1,200\n"     # data row 6: 93 C
               ",2000,5,1,50\n"          # data row 7: blank zone
               "0102,2000,6,x,50\n")     # data row 8: not a number
    res = read_zone_climate(p, zones, counties=["A1", "A2", "A9"])
    assert res.frame[["county_id", "precip_mm"]].values.tolist() == [["A1", 25.4]]
    assert res.rejected["row"].tolist() == [2, 3, 4, 5, 6, 7, 8]
    assert res.rejected["reason"].tolist() == [
        ZONE_REASONS["no_county"], "unparseable date", "sentinel value",
        "negative precipitation", "temperature out of range", "missing required value",
        "unparseable number"]
    assert res.rows_read == 8 == res.rows_used + res.rows_rejected
    assert any("1 counties have no zone" in n and "A9" in n for n in res.notes)
    with pytest.raises(InputError, match="no zone column"):
        read_zone_climate(_write(tmp_path / "n.csv", "year,month,precip_mm\n2000,1,1\n"), zones)


def test_weighted_assignment_and_provenance():
    s = pd.DataFrame({"zone": ["Z1", "Z2", "Z1", "Z3"], "date": [1, 1, 2, 1],
                      "x": [10.0, 20.0, 30.0, 5.0]})
    z = pd.DataFrame({"county_id": ["A", "A", "B", "C"], "zone": ["Z1", "Z2", "Z3", "Z9"],
                      "weight": [1.0, 3.0, 2.0, 1.0]})
    a = assign_zones(s, z, value_columns=["x"], counties=["A", "B", "C", "D"])
    # A at date 1: (1*10 + 3*20) / 4 = 17.5; A at date 2 lacks Z2 -> dropped, not filled
    assert a.frame.values.tolist() == [["A", 1, 17.5], ["B", 1, 5.0]]
    assert a.incomplete == 1
    assert a.counties_without_zone == ("D",) and a.zones_without_series == ("Z9",)
    prov = a.provenance.set_index("county_id")
    assert prov.at["A", "method"] == "area-weighted mean of 2 zones"
    assert prov.at["A", "weights"] == "0.25;0.75" and prov.at["B", "method"] == "series of zone Z3"
    assert prov.at["C", "rows"] == 0


def test_indicators_long_form(tmp_path):
    zones = pd.DataFrame({"county_id": ["A1"], "zone": ["7"], "weight": [1.0]})
    p = _write(tmp_path / "pal.csv", "zone,date,pdsi,phdi\n7,2001-05-01,-1.5,-2\n")
    res = read_zone_indicators(p, zones)
    assert res.frame.values.tolist() == [["A1", pd.Timestamp("2001-05-01"), "pdsi", -1.5],
                                         ["A1", pd.Timestamp("2001-05-01"), "phdi", -2.0]]
    with pytest.raises(InputError, match="no indicator column"):
        read_zone_indicators(_write(tmp_path / "e.csv", "zone,date\n7,2001-05-01\n"), zones)


# ------------------------------------------------------------------ TopoJSON
def _topology(ids, *, numeric=False, translate=(-94.0, 41.0)):
    """Two unit squares sharing one arc (quantized, delta-encoded: TopoJSON spec sec. 2.1)."""
    arcs = [[[0, 0], [0, 1]],                     # shared edge x=0 (up)
            [[0, 1], [-1, 0], [0, -1], [1, 0]],   # west square, the rest of its ring
            [[0, 0], [1, 0], [0, 1], [-1, 0]]]    # east square, from (0,0) round to (0,1)
    geoms = [{"type": "Polygon", "arcs": [[0, 1]], "id": int(ids[0]) if numeric else ids[0],
              "properties": {"name": "West"}},
             {"type": "Polygon", "arcs": [[2, -1]], "id": int(ids[1]) if numeric else ids[1],
              "properties": {"name": "East"}}]
    return {"type": "Topology", "transform": {"scale": [0.5, 0.5], "translate": list(translate)},
            "objects": {"counties": {"type": "GeometryCollection", "geometries": geoms}},
            "arcs": arcs}


def test_topojson_reader_decodes_and_filters(tmp_path):
    p = tmp_path / "t.json"
    p.write_text(json.dumps(_topology(["01001", "01003"])))
    assert sniff_topojson(p)
    g = read_topojson_counties(p, county_ids=["01003"])
    assert g["county_id"].tolist() == ["01003"] and g["county_name"].tolist() == ["East"]
    assert g.crs.to_epsg() == 4326
    # east square: quantized (0,0)-(1,1) -> lon -94.0..-93.5, lat 41.0..41.5
    assert tuple(np.round(g.total_bounds, 9)) == (-94.0, 41.0, -93.5, 41.5)
    assert shapely.area(g.geometry.item()) == pytest.approx(0.25, abs=1e-12)  # degrees squared
    with pytest.warns(InputWarning, match=r"1 county of the data has no polygon.*'01999'"):
        read_topojson_counties(p, county_ids=["01001", "01999"])


def test_topojson_numeric_ids_are_zero_padded(tmp_path):
    p = tmp_path / "n.json"
    p.write_text(json.dumps(_topology(["01001", "01003"], numeric=True)))
    assert read_topojson_counties(p)["county_id"].tolist() == ["01001", "01003"]


def test_topojson_errors(tmp_path):
    p = tmp_path / "t.json"
    p.write_text(json.dumps(_topology(["01001", "01003"])))
    with pytest.raises(InputError, match=r"no TopoJSON object 'states'"):
        read_topojson_counties(p, object_name="states")
    with pytest.raises(InputError, match=r"no county of the data \(1, e.g."):
        read_topojson_counties(p, county_ids=["99999"])
    q = tmp_path / "albers.json"
    q.write_text(json.dumps(_topology(["01001", "01003"], translate=(500000.0, 900000.0))))
    with pytest.raises(InputError, match="not longitude/latitude"):
        read_topojson_counties(q)
    csvfile = tmp_path / "x.csv"
    csvfile.write_text("a,b\n1,2\n")
    assert not sniff_topojson(csvfile)


@pytest.mark.parametrize("name", ["crop_survey", "zones"])
def test_docstring_examples_run(name):
    import doctest
    import importlib

    mod = importlib.import_module(f"impactlink.inputs.formats.{name}")
    res = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0 and res.failed == 0
