"""Small invented input folders for the table corpus (tests/corpus/test_tables_*.py).

Five fictional counties of a fictional state (ids 70101..70109, state code 70, which no
real state uses), three years of monthly climate (2001-2003) and one small file per table.
Every builder returns plain rows (lists of dicts of text), so a case changes one cell or one
row and writes the table with :func:`write_rows`; expected counts are computed from these
rows in the tests, not by the readers.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np

COUNTIES = {"70101": "Brannock", "70103": "Cullwater", "70105": "Dervin Flats",
            "70107": "Eskerby", "70109": "Fenmoor"}
IDS = list(COUNTIES)
REGION = {"70101": "Tollan", "70103": "Tollan", "70105": "Tollan", "70107": "Vessary",
          "70109": "Vessary"}
YEARS = (2001, 2002, 2003)
MONTHS = [f"{y}-{m:02d}-01" for y in YEARS for m in range(1, 13)]

Rows = list[dict[str, str]]


def write_rows(path: Path, rows: Rows, columns: list[str] | None = None) -> Path:
    """``rows`` as RFC 4180 CSV (header from ``columns`` or the first row)."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=columns or list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return path


def _box(i: int) -> list[list[float]]:
    """A 0.5-degree box for county ``i`` (west to east), closed ring, anticlockwise."""
    x0, y0 = -101.0 + 0.5 * i, 39.0
    return [[x0, y0], [x0 + 0.5, y0], [x0 + 0.5, y0 + 0.5], [x0, y0 + 0.5], [x0, y0]]


def counties_geojson(ids: list[str] | None = None) -> dict:
    """GeoJSON (RFC 7946) FeatureCollection of the counties (or of ``ids``)."""
    feats = [{"type": "Feature", "properties": {"county_id": c, "county_name": COUNTIES.get(c, c),
                                                "region": REGION.get(c, "Tollan")},
              "geometry": {"type": "Polygon", "coordinates": [_box(i)]}}
             for i, c in enumerate(ids or IDS)]
    return {"type": "FeatureCollection", "features": feats}


def counties_topojson(*, with_ids: bool = True) -> dict:
    """TopoJSON topology (unquantised: no ``transform``) with one object ``counties``; each
    feature's ``id`` is the county GEOID as text (TopoJSON specification 1.0, section 2.2)."""
    geoms = []
    for i, c in enumerate(IDS):
        g = {"type": "Polygon", "arcs": [[i]], "properties": {"name": COUNTIES[c]}}
        if with_ids:
            g["id"] = c
        geoms.append(g)
    return {"type": "Topology", "objects": {"counties": {"type": "GeometryCollection",
                                                         "geometries": geoms}},
            "arcs": [_box(i) for i in range(len(IDS))]}


def climate_rows() -> Rows:
    """Monthly precipitation and temperatures (a cool continental cycle: tmax -1..27 C)."""
    out = []
    for k, c in enumerate(IDS):
        for j, d in enumerate(MONTHS):
            season = np.cos(2 * np.pi * (j % 12 - 6.5) / 12)  # -1 in January, +1 in July
            out.append({"county_id": c, "date": d,
                        "precip_mm": f"{40 + 30 * season + 7 * ((j * 7 + k * 3) % 5):.1f}",
                        "tmin_c": f"{-3 + 13 * season + 0.3 * k:.1f}",
                        "tmax_c": f"{13 + 14 * season + 0.3 * k:.1f}"})
    return out


def yields_rows() -> Rows:
    """Maize yields, rainfed and irrigated, in t/ha (invented; irrigated about 40 % higher)."""
    out = []
    for k, c in enumerate(IDS):
        for y in YEARS:
            base = 6.0 + 0.4 * k + 0.3 * (y - 2001)
            for practice, f in (("rainfed", 1.0), ("irrigated", 1.4)):
                out.append({"county_id": c, "year": str(y), "crop": "maize",
                            "practice": practice, "yield": f"{base * f:.2f}",
                            "unit": "t_per_ha"})
    return out


def prices_rows() -> Rows:
    """Monthly hay prices of the two regions, in currency per tonne (invented)."""
    return [{"region": r, "date": d, "commodity": "hay",
             "price": f"{90 + 5 * (j % 12) + (7 if r == 'Vessary' else 0):.2f}",
             "unit": "usd_per_t"} for r in ("Tollan", "Vessary") for j, d in enumerate(MONTHS)]


def price_index_rows() -> Rows:
    """A monthly price index rising 0.2 % a month (invented)."""
    return [{"date": d, "price_index": f"{100 * 1.002 ** j:.2f}"} for j, d in enumerate(MONTHS)]


def notices_rows() -> Rows:
    """Water-restriction notices of five fictional utilities, by county (eight notices)."""
    spec = [("70101", "Brannock Water Board", "2001-07-02", "2001-09-14", "1"),
            ("70103", "Cullwater Rural Water", "2002-06-17", "2002-10-01", "2"),
            ("70105", "Dervin Flats Utility", "2002-08-05", "2002-11-20", "3"),
            ("70107", "Eskerby Public Water", "2003-07-21", "2003-09-30", "1"),
            ("70109", "Fenmoor Springs Water", "2001-08-13", "2001-10-05", "1"),
            ("70101", "Brannock Water Board", "2002-07-08", "2002-09-27", "2"),
            ("70103", "Cullwater Rural Water", "2003-06-30", "2003-08-29", "1"),
            ("70109", "Fenmoor Springs Water", "2003-08-04", "2003-10-17", "2")]
    return [{"notice_id": f"WN-{i:03d}", "issuer": s, "start_date": a, "end_date": b,
             "level": lv, "county_id": c, "cause": "drought"}
            for i, (c, s, a, b, lv) in enumerate(spec, start=1)]


def field_reports_rows() -> Rows:
    """Field reports of crop and water-supply impacts (severity 1..3)."""
    return [{"county_id": c, "date": f"{2001 + i % 3}-{6 + i % 4:02d}-{10 + i:02d}",
             "sector": "crops" if i % 2 else "water_supply", "severity": str(1 + i % 3)}
            for i, c in enumerate(IDS * 2)]


def indicators_rows() -> Rows:
    """A supplied monthly soil-moisture percentile per county (invented)."""
    return [{"county_id": c, "date": d, "indicator": "soil_moisture_pct",
             "value": f"{(17 * j + 11 * k) % 100:.0f}"}
            for k, c in enumerate(IDS) for j, d in enumerate(MONTHS)]


#: The 21 Quick Stats export columns, in the publisher's order (the reader's list).
QS_COLUMNS = (
    "Program", "Year", "Period", "Week Ending", "Geo Level", "State", "State ANSI",
    "Ag District", "Ag District Code", "County", "County ANSI", "Zip Code", "Region",
    "watershed_code", "Watershed", "Commodity", "Data Item", "Domain", "Domain Category",
    "Value", "CV (%)",
)


def quickstats_rows() -> Rows:
    """An invented Quick Stats-format export: county maize grain yields in bu/acre."""
    out = []
    for k, c in enumerate(IDS):
        for y in YEARS:
            row = dict.fromkeys(QS_COLUMNS, "")
            row.update({"Program": "SURVEY", "Year": str(y), "Period": "YEAR",
                        "Geo Level": "COUNTY", "State": "WESTMARCH", "State ANSI": c[:2],
                        "Ag District": "NORTH", "Ag District Code": "10",
                        "County": COUNTIES[c].upper(), "County ANSI": c[2:],
                        "Commodity": "CORN",
                        "Data Item": "CORN, GRAIN - YIELD, MEASURED IN BU / ACRE",
                        "Domain": "TOTAL", "Domain Category": "NOT SPECIFIED",
                        "Value": f"{140 + 6 * k + 3 * (y - 2001):.1f}"})
            out.append(row)
    return out


def zone_rows() -> Rows:
    """Two-column zone-to-county table: the Tollan counties in zone 7001, the rest in 7002."""
    return [{"county_id": c, "zone": "7001" if REGION[c] == "Tollan" else "7002"} for c in IDS]


def zone_climate_rows() -> Rows:
    """Monthly climate per zone, headers naming the units (precip_mm, tmax_c)."""
    return [{"zone": z, "date": d, "precip_mm": f"{35 + 4 * (j % 12) + (3 if z == '7002' else 0):.1f}",
             "tmax_c": f"{12 + (j % 12):.1f}"} for z in ("7001", "7002")
            for j, d in enumerate(MONTHS)]


#: The tables each builder writes, and their file names.
BUILDERS = {"climate": climate_rows, "yields": yields_rows, "prices": prices_rows,
            "price_index": price_index_rows, "notices": notices_rows,
            "field_reports": field_reports_rows, "indicators": indicators_rows}


def make_folder(folder: Path, tables: dict[str, Rows] | None = None, *,
                counties: str = "geojson", formats: str = "", extra: str = "",
                files: dict[str, str | bytes] | None = None) -> Path:
    """Write a project over ``folder``: counties, climate and ``tables`` (name -> rows;
    climate from :func:`climate_rows` unless given), plus ``files`` (name -> text as is).
    Returns the project file's path."""
    folder.mkdir(parents=True, exist_ok=True)
    tables = dict(tables or {})
    named = ""
    if counties == "geojson":
        (folder / "counties.geojson").write_text(json.dumps(counties_geojson()), "utf-8")
    elif counties == "topojson":
        (folder / "boundaries.json").write_text(json.dumps(counties_topojson()), "utf-8")
        named = 'counties = "boundaries.json"\n'
    if "climate" not in tables and not any(f.startswith("climate.") for f in files or {}):
        tables["climate"] = climate_rows()
    for name, rows in tables.items():
        write_rows(folder / f"{name}.csv", rows)
    for name, text in (files or {}).items():  # text, or bytes (a Parquet file)
        if isinstance(text, bytes):
            (folder / name).write_bytes(text)
        else:
            (folder / name).write_text(text, encoding="utf-8")
    text = ('[project]\nname = "table case"\ndata_dir = "."\noutput_dir = "out"\n'
            f'{extra}[calibration]\nstart_year = 2001\nend_year = 2003\nmin_years = 2\n'
            '[indices]\nscales_weeks = [4]\nindices = ["spi"]\n'
            + (f"[tables]\n{named}" if named else "") + formats)
    path = folder / "impactlink.toml"
    path.write_text(text, encoding="utf-8")
    return path
