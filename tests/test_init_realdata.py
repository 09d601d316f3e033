"""`impactlink init` / `check` on a folder holding only the five raw Iowa files.

The files are copied from ../shared/realdata (skipped, with the reason, where absent) into a
temporary folder, never into the repository. Every expected number is computed here from the
raw files with the standard library's csv module (independent of the readers), or quoted
from the data's README (/work/shared/realdata/README.md: NASS Quick Stats, nClimDiv nClimDiv and
county-to-division files, Census/us-atlas TopoJSON).
"""

from __future__ import annotations

import csv
import shutil
import tomllib
from collections import Counter

import numpy as np
import pytest
from realdata_paths import realdata_dir

from impactlink.cli import main
from impactlink.inputs import read_inputs
from impactlink.inputs.formats.crop_survey import QUICKSTATS_REASONS
from impactlink.pipeline import init_project
from impactlink.project import load_project

FILES = ("iowa/nass_quickstats_corn_grain_yield_county_1926-2023.csv",
         "iowa/climdiv_monthly_precip_tavg_1895-2022.csv", "iowa/climdiv_pdsi_1895-2022.csv",
         "iowa/county_to_climdiv.csv", "us/counties-10m.json")
QS, CLIM, PDSI, TABLE, TOPO = (f.split("/")[1] for f in FILES)


def _rows(path):
    with open(path, newline="", encoding="utf-8-sig") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    data = realdata_dir()
    out = tmp_path_factory.mktemp("iowa_download")
    for f in FILES:
        shutil.copy(data / f, out / f.split("/")[1])
    init_project(out)
    return out


@pytest.fixture(scope="module")
def bundle(folder):
    return read_inputs(load_project(folder / "impactlink.toml"))


def test_init_declares_formats_units_and_settings_the_data_support(folder):
    raw = tomllib.loads((folder / "impactlink.toml").read_text())
    assert raw["tables"] == {"climate": CLIM, "counties": TOPO, "indicators": PDSI, "yields": QS}
    assert raw["formats"] == {"climate": "zones", "indicators": "zones", "counties": "topojson",
                              "yields": "quickstats", "zones": TABLE, "zone_column": "climdiv_id"}
    # README: precip_in is inches, tavg_f degrees Fahrenheit
    assert raw["units"] == {"precip_unit": "in", "temp_unit": "F"}
    # README: mean temperature only (no maximum or minimum) -> Thornthwaite (1948)
    assert raw["indices"]["pet_method"] == "thornthwaite"
    assert raw["indices"]["scales_months"] == [1, 2, 3, 6, 9, 12, 24]
    # climate 1895-2022 covers the 1991-2020 normals; audit halves of the shared 1926-2022
    assert (raw["calibration"]["start_year"], raw["calibration"]["end_year"]) == (1991, 2020)
    audit = raw["audit"][0]
    assert audit["late"][1] == 2022 and audit["early"][0] == 1926
    assert audit["early"][1] + 1 == audit["late"][0]
    assert raw["impacts"] == {"corn_grain": {"source": "yields", "crop": "corn grain",
                                             "practice": "all", "trend": "auto",
                                             "season_weeks": [22, 40]}}
    project = load_project(folder / "impactlink.toml")
    assert project.formats.climate == "zones" and project.units.temp_unit == "F"
    assert 1895 <= project.calibration.start_year <= project.calibration.end_year <= 2022


def test_check_reads_every_raw_row(folder, bundle, capsys):
    data = realdata_dir()
    zone_of = {r["postal_fips_id"]: r["climdiv_id"] for r in _rows(data / FILES[3])}
    months = Counter(r["climdiv_id"] for r in _rows(data / FILES[1]))
    expected = sum(months[z] for z in zone_of.values())
    assert len(zone_of) == 99 and set(months.values()) == {1536}  # 128 years x 12 months
    assert expected == 99 * 1536 == len(bundle.tables["climate"])
    assert len(bundle.tables["indicators"]) == 99 * 1536
    assert len(bundle.tables["counties"]) == 99
    assert set(bundle.tables["counties"]["county_id"]) == set(zone_of)

    qs = _rows(data / FILES[0])
    pooled = sum(r["County ANSI"] == "" for r in qs)
    c = bundle.counts.set_index("table")
    assert c.loc["yields", "rows_read"] == len(qs) == 9658  # README: 9,658 rows
    assert c.loc["yields", "rows_rejected"] == pooled == 14
    assert (c["rows_read"] == c["rows_used"] + c["rows_rejected"]).all()
    assert c.loc["zones", "rows_read"] == 99 and c.loc["climate", "rows_read"] == 13824
    rej = bundle.rejected[bundle.rejected["table"] == "yields"]
    assert set(rej["reason"]) == {QUICKSTATS_REASONS["pooled"]} and len(rej) == 14
    # row numbers as the inputs stage counts them: data rows, header excluded
    assert rej["row"].tolist() == [i + 1 for i, r in enumerate(qs) if r["County ANSI"] == ""]

    assert main(["check", str(folder / "impactlink.toml")]) == 0
    out = capsys.readouterr().out
    assert "9,658" in out and "pooled" in out


def test_units_converted_once(bundle):
    data = realdata_dir()
    zone_of = {r["postal_fips_id"]: r["climdiv_id"] for r in _rows(data / FILES[3])}
    first = next(r for r in _rows(data / FILES[1])
                 if r["climdiv_id"] == zone_of["19153"] and r["year"] == "2012"
                 and r["month"] == "7")
    clim = bundle.tables["climate"]
    row = clim[(clim["county_id"] == "19153")
               & (clim["date"] == np.datetime64("2012-07-01"))].iloc[0]
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959); C = (F - 32) 5/9
    assert row["precip_mm"] == pytest.approx(float(first["precip_in"]) * 25.4)
    assert row["tmean_c"] == pytest.approx((float(first["tavg_f"]) - 32.0) * 5.0 / 9.0)
