"""The publisher-format readers on the real Iowa files (../shared/realdata; skipped if absent).

Every expected number is computed here from the raw files with the standard library's csv
and json modules (an implementation independent of the readers), or quoted from the data's
README (/work/shared/realdata/README.md, describing the NASS, nClimDiv and Census files).
"""

from __future__ import annotations

import csv
import json
from collections import Counter

import numpy as np
import pytest
import shapely
from pyproj import Transformer
from realdata_paths import realdata_dir

from impactlink.inputs.formats import MARKER_REASONS, read_quickstats, sniff_quickstats
from impactlink.inputs.formats.crop_survey import QUICKSTATS_REASONS
from impactlink.inputs.formats.topojson import read_topojson_counties, sniff_topojson
from impactlink.inputs.formats.zones import (
    read_zone_climate,
    read_zone_indicators,
    read_zone_table,
    units_from_header,
)

QS = "iowa/nass_quickstats_corn_grain_yield_county_1926-2023.csv"
CLIM = "iowa/climdiv_monthly_precip_tavg_1895-2022.csv"
PDSI = "iowa/climdiv_pdsi_1895-2022.csv"
TABLE = "iowa/county_to_climdiv.csv"
TOPO = "us/counties-10m.json"


def _rows(path):
    with open(path, newline="", encoding="utf-8-sig") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def data():
    return realdata_dir()


@pytest.fixture(scope="module")
def quickstats(data):
    return read_quickstats(data / QS)


@pytest.fixture(scope="module")
def zone_table(data):
    return read_zone_table(data / TABLE)


# ------------------------------------------------------------------ Quick Stats
def test_quickstats_is_recognised_by_its_header(data):
    assert sniff_quickstats(data / QS)
    assert not sniff_quickstats(data / CLIM)
    assert not sniff_quickstats(data / TOPO)


def test_quickstats_every_row_used_or_rejected(data, quickstats):
    raw = _rows(data / QS)
    assert len(raw) == quickstats.rows_read == 9658  # README: 9,658 rows
    assert quickstats.rows_used + quickstats.rows_rejected == quickstats.rows_read
    assert len(quickstats.frame) == quickstats.rows_used == 9658 - 14
    assert quickstats.rejected["row"].is_unique


def test_quickstats_pooled_rows_rejected_with_their_reason(data, quickstats):
    raw = _rows(data / QS)
    pooled_lines = [i + 1 for i, r in enumerate(raw) if r["County ANSI"] == ""]  # header excluded
    assert len(pooled_lines) == 14  # README: 14 OTHER (COMBINED) COUNTIES / OTHER COUNTIES rows
    assert {raw[i - 1]["County"] for i in pooled_lines} == {"OTHER (COMBINED) COUNTIES",
                                                           "OTHER COUNTIES"}
    rej = quickstats.rejected
    assert rej["row"].tolist() == pooled_lines
    assert set(rej["reason"]) == {QUICKSTATS_REASONS["pooled"]}
    assert set(rej["column"]) == {"County"}


def test_quickstats_marker_counts_match_the_raw_file(data, quickstats):
    counts = Counter(r["Value"].strip() for r in _rows(data / QS))
    got = quickstats.rejected["reason"].value_counts()
    for marker, reason in MARKER_REASONS.items():
        assert int(got.get(reason, 0)) == counts.get(marker, 0)  # this file publishes none


def test_quickstats_geoids_years_and_values(data, quickstats):
    f = quickstats.frame
    ids = sorted(f["county_id"].unique())
    assert len(ids) == 99
    assert ids == [f"19{c:03d}" for c in range(1, 198, 2)]  # Iowa county FIPS 001..197, odd
    assert (f["year"].min(), f["year"].max()) == (1926, 2023)
    assert set(f["crop"]) == {"corn grain"} and set(f["practice"]) == {"all"}
    assert set(f["unit"]) == {"bu / acre"}
    raw = {(r["State ANSI"] + r["County ANSI"], int(r["Year"])): float(r["Value"].replace(",", ""))
           for r in _rows(data / QS) if r["County ANSI"]}
    mine = dict(zip(zip(f["county_id"], f["year"], strict=True), f["yield"], strict=True))
    assert mine == raw


# ------------------------------------------------------------------ zones
def test_zone_table_gives_each_county_one_division(data, zone_table):
    raw = _rows(data / TABLE)
    z = zone_table.frame
    assert zone_table.rows_read == len(raw) == 99 and zone_table.rows_rejected == 0
    assert z["county_id"].is_unique and len(z) == 99
    assert Counter(z["zone"]) == Counter(r["climdiv_id"] for r in raw)
    # nClimDiv numbers states alphabetically (Iowa 13); FIPS does not (Iowa 19); same county code
    assert {r["ncdc_fips_id"][:2] for r in raw} == {"13"}
    assert {r["postal_fips_id"][:2] for r in raw} == {"19"}
    assert all(r["ncdc_fips_id"][2:] == r["postal_fips_id"][2:] for r in raw)


def test_units_are_read_from_the_division_header(data):
    with open(data / CLIM) as fh:
        header = fh.readline().strip().split(",")
    assert units_from_header(header) == {"precip_unit": "in", "temp_unit": "F"}


def test_county_series_equal_their_division_series_after_conversion(data, zone_table):
    res = read_zone_climate(data / CLIM, zone_table.frame)
    raw = _rows(data / CLIM)
    assert res.rows_read == len(raw) == 13824 and res.rows_used == 13824
    prov = res.details["provenance"].set_index("county_id")
    assert len(prov) == 99
    assert Counter(prov["zones"]) == Counter(zone_table.frame["zone"])
    # first raw row: division 1301, January 1895, 0.64 in, 7.1 F
    first = raw[0]
    assert (first["climdiv_id"], first["year"], first["month"]) == ("1301", "1895", "1")
    cty = prov.index[prov["zones"] == "1301"]
    jan = res.frame[(res.frame["date"] == "1895-01-01") & res.frame["county_id"].isin(cty)]
    assert len(jan) == len(cty) > 0
    assert np.all(jan["precip_mm"] == 0.64 * 25.4)  # 16.256 mm: 1 in = 25.4 mm exactly
    np.testing.assert_allclose(jan["tmean_c"], (7.1 - 32) * 5 / 9, rtol=0, atol=1e-12)
    # every county carries its own division's whole series
    div = {(r["climdiv_id"], int(r["year"]), int(r["month"])): (float(r["precip_in"]),
                                                                 float(r["tavg_f"])) for r in raw}
    f = res.frame
    want = np.array([div[(prov.at[c, "zones"], d.year, d.month)]
                     for c, d in zip(f["county_id"], f["date"], strict=True)])
    np.testing.assert_allclose(f["precip_mm"], want[:, 0] * 25.4, rtol=1e-15, atol=1e-12)
    np.testing.assert_allclose(f["tmean_c"], (want[:, 1] - 32) * 5 / 9, rtol=0, atol=1e-12)
    assert len(f) == 99 * 128 * 12


def test_palmer_index_becomes_county_indicators(data, zone_table):
    res = read_zone_indicators(data / PDSI, zone_table.frame)
    raw = _rows(data / PDSI)
    assert res.rows_read == len(raw) == 13824 and res.rows_rejected == 0
    f = res.frame
    assert set(f["indicator"]) == {"pdsi"} and len(f) == 99 * 1536
    zone_of = dict(zip(zone_table.frame["county_id"], zone_table.frame["zone"], strict=True))
    div = {(r["climdiv_id"], int(r["year"]), int(r["month"])): float(r["pdsi"]) for r in raw}
    sample = f.iloc[::997]
    for c, d, v in zip(sample["county_id"], sample["date"], sample["value"], strict=True):
        assert v == div[(zone_of[c], d.year, d.month)]


# ------------------------------------------------------------------ TopoJSON
def _decode_topojson(path, ids):
    """Independent decoder from the TopoJSON specification (quantized, delta-encoded arcs)."""
    topo = json.loads(path.read_text())
    (sx, sy), (tx, ty) = topo["transform"]["scale"], topo["transform"]["translate"]
    arcs = []
    for arc in topo["arcs"]:
        q = np.cumsum(np.asarray(arc, dtype=float), axis=0)  # undo the delta encoding
        arcs.append(np.column_stack([q[:, 0] * sx + tx, q[:, 1] * sy + ty]))

    def ring(idx):
        pts = []
        for i in idx:
            a = arcs[i] if i >= 0 else arcs[~i][::-1]
            pts.extend(a if not pts else a[1:])  # shared end point kept once
        return np.asarray(pts)

    out = {}
    for g in topo["objects"]["counties"]["geometries"]:
        if g.get("id") not in ids:
            continue
        polys = g["arcs"] if g["type"] == "MultiPolygon" else [g["arcs"]]
        out[g["id"]] = shapely.MultiPolygon(
            [shapely.Polygon(ring(p[0]), [ring(h) for h in p[1:]]) for p in polys])
    return out


def test_topojson_counties_of_the_data(data, quickstats):
    assert sniff_topojson(data / TOPO) and not sniff_topojson(data / QS)
    ids = set(quickstats.frame["county_id"])
    g = read_topojson_counties(data / TOPO, county_ids=ids)
    assert len(g) == 99 and set(g["county_id"]) == ids
    assert g.crs.to_epsg() == 4326
    assert g.loc[g["county_id"] == "19153", "county_name"].item() == "Polk"  # Des Moines
    area_km2 = g.to_crs("EPSG:5070").area.to_numpy() / 1e6
    ref = _decode_topojson(data / TOPO, ids)
    to_albers = Transformer.from_crs("EPSG:4326", "EPSG:5070", always_xy=True)
    ref_km2 = np.array([shapely.area(shapely.transform(ref[c], lambda xy: np.column_stack(
        to_albers.transform(xy[:, 0], xy[:, 1])))) / 1e6 for c in g["county_id"]])
    np.testing.assert_allclose(area_km2, ref_km2, rtol=1e-6)
    # Iowa's total area is 145,746 km2 (Census; from memory); the 1:10,000,000 outlines are
    # simplified, so within 2 %. Iowa counties span about 1,000-2,600 km2 (Kossuth largest).
    assert abs(area_km2.sum() / 145_746 - 1) < 0.02
    assert 900 < area_km2.min() and area_km2.max() < 2700
    assert g.loc[np.argmax(area_km2), "county_name"] == "Kossuth"
