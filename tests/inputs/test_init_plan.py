"""Files recognised by header; `init` writes only what the data support; [formats]/[units].

Small files written here in the publishers' published layouts (NASS Quick Stats column
names; nClimDiv's county-to-division columns ``postal_fips_id,ncdc_fips_id,climdiv_id``;
TopoJSON's ``"type": "Topology"``). PET methods by input: Hargreaves and Samani (1985) needs
daily/monthly minimum and maximum temperature, Thornthwaite (1948) only mean temperature.
"""

from __future__ import annotations

import tomllib

import pytest

from impactlink.errors import ProjectError
from impactlink.inputs.formats import QUICKSTATS_COLUMNS
from impactlink.inputs.init_plan import periods_for, pet_method_for, plan_project
from impactlink.inputs.recognise import recognise_file, recognise_files
from impactlink.pipeline import init_project
from impactlink.project import project_from_dict


def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def _qs(path, rows):
    head = ",".join(f'"{c}"' for c in QUICKSTATS_COLUMNS)
    body = []
    for year, county, item, value in rows:
        cells = dict.fromkeys(QUICKSTATS_COLUMNS, "")
        cells.update({"Program": "SURVEY", "Year": str(year), "Period": "YEAR",
                      "Geo Level": "COUNTY", "State": "VELLMORA", "State ANSI": "90",
                      "County": "X", "County ANSI": county, "Commodity": "CORN",
                      "Data Item": item, "Domain": "TOTAL", "Domain Category": "NOT SPECIFIED",
                      "Value": value})
        body.append(",".join(f'"{cells[c]}"' for c in QUICKSTATS_COLUMNS))
    return _write(path, "\n".join([head, *body]) + "\n")


def test_files_are_recognised_by_header_not_name(tmp_path):
    qs = _qs(tmp_path / "download (3).csv", [(2000, "001", "CORN, GRAIN - YIELD, MEASURED IN "
                                              "BU / ACRE", "150")])
    clim = _write(tmp_path / "a.csv", "climdiv_id,year,month,precip_in,tavg_f\n9001,2000,1,1,30\n")
    pdsi = _write(tmp_path / "b.csv", "climdiv_id,year,month,pdsi\n9001,2000,1,-1.2\n")
    divtable = _write(tmp_path / "c.csv", "postal_fips_id,ncdc_fips_id,climdiv_id\n90001,41001,9001\n")
    two = _write(tmp_path / "d.csv", "county,basin\n90001,B1\n")
    topo = _write(tmp_path / "e.json", '{"type":"Topology","objects":{},"arcs":[]}')
    other = _write(tmp_path / "f.csv", "site,date,flow,stage,temp\n1,2000-01-01,3,4,5\n")
    got = {p.name: (r.table, r.format) if (r := recognise_file(p)) else None
           for p in (qs, clim, pdsi, divtable, two, topo, other)}
    assert got == {"download (3).csv": ("yields", "quickstats"), "a.csv": ("climate", "zones"),
                   "b.csv": ("indicators", "zones"), "c.csv": ("zones", "table"),
                   "d.csv": ("zones", "table"), "e.json": ("counties", "topojson"),
                   "f.csv": None}
    assert recognise_file(clim).zone_column == "climdiv_id"
    with pytest.raises(Exception, match="both hold the zones table"):
        recognise_files(tmp_path)


def test_contract_files_keep_their_names(tmp_path):
    _write(tmp_path / "climate.csv", "county_id,date,precip_mm,tmin_c,tmax_c\n"
           "90001,2001-01-01,3.0,-2,5\n90001,2024-12-01,3.0,-2,5\n")
    plan = plan_project(tmp_path)
    assert plan["tables"] == {"climate": "climate.csv"} and "formats" not in plan
    assert plan["settings"]["indices"] == {"pet_method": "hargreaves"}
    # 2001-2024 does not cover the 1991-2020 normals: the whole record is used
    assert plan["settings"]["calibration"] == {"start_year": 2001, "end_year": 2024}


@pytest.mark.parametrize(("columns", "method"), [
    (["climdiv_id", "year", "month", "precip_in", "tavg_f"], "thornthwaite"),
    (["county_id", "date", "precip_mm", "tmean_c"], "thornthwaite"),
    (["county_id", "date", "precip_mm", "tmin_c", "tmax_c"], "hargreaves"),
    (["zone", "date", "prcp_mm", "tmin_c", "tmax_c", "pet_mm"], "supplied"),
    (["county_id", "date", "precip_mm"], None)])
def test_pet_method_follows_the_columns(columns, method):
    assert pet_method_for(columns) == method


def test_periods_stay_inside_the_record():
    assert periods_for((1895, 2022), (1926, 2023)) == ((1991, 2020), (1926, 1973), (1974, 2022))
    cal, early, late = periods_for((1981, 2025))
    # 45 years: 22 early, 23 late (the odd year goes to the late half)
    assert cal == (1991, 2020) and early == (1981, 2002) and late == (2003, 2025)
    assert periods_for((2000, 2030), (2030, 2040))[1:] == (None, None)


def test_per_zone_climate_without_zone_table_is_a_clear_error(tmp_path):
    _write(tmp_path / "a.csv", "climdiv_id,year,month,precip_in,tavg_f\n9001,2000,1,1,30\n")
    with pytest.raises(ProjectError, match="no zone-to-county table was found"):
        plan_project(tmp_path)


def test_init_on_zone_files_writes_formats_and_units(tmp_path):
    _write(tmp_path / "a.csv", "zone,date,precip_mm,tmin_c,tmax_c\n"
           + "".join(f"Z1,{y}-01-01,10,-3,4\n" for y in range(1990, 2021)))
    _write(tmp_path / "z.csv", "county_id,zone\n90001,Z1\n")
    raw = tomllib.loads(init_project(tmp_path).read_text())
    assert raw["formats"] == {"climate": "zones", "zones": "z.csv", "zone_column": "zone"}
    assert raw["units"] == {"precip_unit": "mm", "temp_unit": "C"}
    assert raw["indices"]["pet_method"] == "hargreaves"
    assert raw["audit"][0]["late"][1] == 2020


def test_formats_and_units_are_validated(tmp_path):
    base = {"project": {"data_dir": str(tmp_path)}}
    with pytest.raises(ProjectError, match=r"formats.yields: got \"csv\" \(text\), expected one of"):
        project_from_dict({**base, "formats": {"yields": "csv"}})
    with pytest.raises(ProjectError, match="needs the zone-to-county table"):
        project_from_dict({**base, "formats": {"climate": "zones"}})
    with pytest.raises(ProjectError, match=r"units.temp_unit: got \"K\" \(text\), expected one of"):
        project_from_dict({**base, "units": {"temp_unit": "K"}})
    with pytest.raises(ProjectError, match="unknown key"):
        project_from_dict({**base, "formats": {"climat": "zones"}})
    p = project_from_dict({**base, "formats": {"climate": "zones", "zones": "z.csv"},
                           "units": {"precip_unit": "in"}})
    assert p.formats.zones == "z.csv" and p.units.precip_unit == "in"
