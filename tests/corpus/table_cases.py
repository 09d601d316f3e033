"""The one-defect cases of tests/corpus/test_tables_inputs.py, one line of the table each.

Each :class:`Case` starts from the valid invented folder of :mod:`table_fixtures`, makes one
mistake in one table and states the exact outcome: the fatal error line, or the rows of
``rejected_rows.csv`` (table, file, row, column, value, reason), and the warning lines. In
the texts, ``{d}`` stands for the case folder. Rows are the 1-based data rows of the file, the
header excluded (row 1 is the first line under the header; for geometry, the first feature).
Expected numbers (row counts, medians, rows) are computed here from the rows the case writes,
with the standard library, not by the readers.
"""

from __future__ import annotations

import csv
import io
import json
import statistics
from dataclasses import dataclass
from typing import Any

from table_fixtures import (
    IDS,
    QS_COLUMNS,
    Rows,
    climate_rows,
    counties_geojson,
    counties_topojson,
    field_reports_rows,
    indicators_rows,
    notices_rows,
    price_index_rows,
    prices_rows,
    quickstats_rows,
    yields_rows,
    zone_climate_rows,
    zone_rows,
)

Rejected = tuple[str, str, int, str, str, str]  # table, file name, row, column, value, reason


@dataclass
class Case:
    """One defect and its outcome. ``folder`` holds the keyword arguments of
    :func:`table_fixtures.make_folder` (tables as rows, files as text, formats, counties)."""

    name: str
    table: str
    folder: dict[str, Any]
    fatal: str = ""
    rejected: tuple[Rejected, ...] = ()
    warnings: tuple[str, ...] = ()
    before_indices: bool = False  # a unit or whole-table case (issue text)


def csv_text(rows: Rows, columns: list[str] | tuple[str, ...] | None = None) -> str:
    s = io.StringIO()
    w = csv.DictWriter(s, fieldnames=list(columns or rows[0]), lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    return s.getvalue()


def _f(x: float) -> str:
    return f"{x:.1f}"


def _to_f(rows: Rows, col: str, counties: list[str] | None = None) -> Rows:
    """``col`` in degrees Fahrenheit, F = C x 9/5 + 32 (NIST SP 811, B.9), in ``counties``."""
    for r in rows:
        if counties is None or r["county_id"] in counties:
            r[col] = _f(float(r[col]) * 9 / 5 + 32)
    return rows


def _median(rows: Rows, col: str, county: str) -> float:
    return statistics.median(float(r[col]) for r in rows if r["county_id"] == county)


def _cool(rows: Rows, county: str, shift: float = 18.0) -> Rows:
    """``county`` made cool (both temperatures ``shift`` C lower): a mountain county."""
    for r in rows:
        if r["county_id"] == county:
            r["tmin_c"], r["tmax_c"] = (_f(float(r[c]) - shift) for c in ("tmin_c", "tmax_c"))
    return rows


def _set(rows: Rows, i: int, **cells: str) -> Rows:
    rows[i].update(cells)
    return rows


# ----------------------------------------------------------------------------- climate
def _climate_cases() -> list[Case]:
    out = []
    c = _to_f(climate_rows(), "tmax_c")
    med = _median(c, "tmax_c", IDS[0])
    spread = statistics.quantiles([float(r["tmax_c"]) for r in c if r["county_id"] == IDS[0]],
                                  n=50, method="inclusive")
    out.append(Case(
        "climate tmax_c in Fahrenheit, summers above the row rule's 60", "climate",
        {"tables": {"climate": c}}, before_indices=True,
        fatal=f"{{d}}/climate.csv: column tmax_c: 5 counties ({', '.join(IDS[:3])} ...), e.g. "
              f"county {IDS[0]}: median {med:.1f} and 2-98 % spread "
              f"{spread[-1] - spread[0]:.1f} look like degrees Fahrenheit (a Celsius median "
              "above 45 or a spread above 80 is hotter or wider than any climate; record high "
              "56.7 C); convert the column to degrees Celsius, C = (F - 32) x 5/9"))
    # a cool county's Fahrenheit tmax: every value under 56.7 and its median under 45, so
    # only the day-night range tells (its tmin_c stays Celsius)
    c = _to_f(_cool(climate_rows(), IDS[4]), "tmax_c", [IDS[4]])
    cool = [r for r in c if r["county_id"] == IDS[4]]
    assert max(float(r["tmax_c"]) for r in cool) < 56.7 and _median(c, "tmax_c", IDS[4]) < 45
    dtr = statistics.median(float(r["tmax_c"]) - float(r["tmin_c"]) for r in cool)
    out.append(Case(
        "climate tmax_c in Fahrenheit in a cool county, under every limit", "climate",
        {"tables": {"climate": c}}, before_indices=True,
        fatal=f"{{d}}/climate.csv: column tmax_c, county {IDS[4]}: the median of tmax_c - "
              f"tmin_c is {dtr:.1f}, wider than the day-night range of any climate (above 30 "
              f"C; median tmin_c {_median(c, 'tmin_c', IDS[4]):.1f}, tmax_c "
              f"{_median(c, 'tmax_c', IDS[4]):.1f}): tmax_c looks like degrees Fahrenheit; "
              "convert tmax_c to degrees Celsius, C = (F - 32) x 5/9"))
    c = _to_f(_cool(climate_rows(), IDS[4]), "tmin_c", [IDS[4]])
    cool = [r for r in c if r["county_id"] == IDS[4]]
    above = sum(float(r["tmin_c"]) > float(r["tmax_c"]) for r in cool)
    out.append(Case(
        "climate tmin_c in Fahrenheit in a cool county (tmin above tmax)", "climate",
        {"tables": {"climate": c}}, before_indices=True,
        fatal=f"{{d}}/climate.csv: column tmin_c, county {IDS[4]}: tmin_c is above tmax_c in "
              f"{above} of {len(cool)} rows (median tmin_c {_median(c, 'tmin_c', IDS[4]):.1f}, "
              f"tmax_c {_median(c, 'tmax_c', IDS[4]):.1f}): tmin_c looks like degrees "
              "Fahrenheit, or the two columns are exchanged; convert tmin_c to degrees "
              "Celsius, C = (F - 32) x 5/9, or exchange the column names"))
    c = climate_rows()
    for r in c:
        r["tmax_c"] = f"{float(r['tmax_c']) + 273.15:.2f}"
    out.append(Case(
        "climate tmax_c in kelvin", "climate", {"tables": {"climate": c}}, before_indices=True,
        fatal=f"{{d}}/climate.csv: column tmax_c: 5 counties ({', '.join(IDS[:3])} ...), e.g. "
              f"county {IDS[0]}: median {_median(c, 'tmax_c', IDS[0]):.1f} looks like kelvin (a "
              "median above 150 is neither Celsius nor Fahrenheit; record low -89.2 C = 184 "
              "K); convert the column to degrees Celsius, C = K - 273.15"))
    c = climate_rows()
    for r in c:
        if r["county_id"] == IDS[2]:
            r["precip_mm"] = f"{float(r['precip_mm']) / 25.4:.2f}"  # 1 in = 25.4 mm exactly
    wet = statistics.median(float(r["precip_mm"]) for r in c if r["county_id"] == IDS[2])
    out.append(Case(
        "climate precip_mm in inches in one county", "climate", {"tables": {"climate": c}},
        before_indices=True,
        fatal=f"{{d}}/climate.csv: column precip_mm, county {IDS[2]}: the median monthly value "
              f"above zero is {wet:.2f}, below 5 mm (looks like inches); convert the column to "
              "millimetres, mm = inches x 25.4"))
    c = climate_rows()
    out.append(Case("climate date in year 2400 (beyond a nanosecond timestamp)", "climate",
                    {"tables": {"climate": _set(c, 5, date="2400-06-01")}},
                    rejected=(("climate", "climate.csv", 6, "date", "2400-06-01",
                               "date out of range"),)))
    c = climate_rows()
    out.append(Case("climate negative precipitation", "climate",
                    {"tables": {"climate": _set(c, 9, precip_mm="-3.5")}},
                    rejected=(("climate", "climate.csv", 10, "precip_mm", "-3.5",
                               "negative precipitation"),)))
    c = climate_rows()
    out.append(Case("climate sentinel -9999 in precip_mm", "climate",
                    {"tables": {"climate": _set(c, 11, precip_mm="-9999")}},
                    rejected=(("climate", "climate.csv", 12, "precip_mm", "-9999",
                               "sentinel value"),)))
    c = climate_rows()
    c.insert(40, dict(c[39]))
    key = f"{c[39]['county_id']} | {c[39]['date']}"
    out.append(Case("climate repeated county and date", "climate", {"tables": {"climate": c}},
                    rejected=(("climate", "climate.csv", 41, "county_id+date", key,
                               "duplicate of row 40"),)))
    c = climate_rows()
    lo, hi = c[20]["tmax_c"], c[20]["tmin_c"]
    out.append(Case("climate tmin above tmax in one row", "climate",
                    {"tables": {"climate": _set(c, 20, tmin_c=lo, tmax_c=hi)}},
                    rejected=(("climate", "climate.csv", 21, "tmin_c",
                               f"tmin_c={float(lo):g} > tmax_c={float(hi):g}",
                               "tmin above tmax"),)))
    c = climate_rows() + [{"county_id": "70999", "date": "2001-01-01", "precip_mm": "12.0",
                           "tmin_c": "-2.0", "tmax_c": "6.0"}]
    out.append(Case(
        "climate county not in the counties table", "climate", {"tables": {"climate": c}},
        rejected=(("climate", "climate.csv", len(c), "county_id", "70999", "unknown county"),),
        warnings=("{d}/climate.csv: 1 county of the climate table has no polygon in "
                  "{d}/counties.geojson: 70999 (1 row; not in the counties table); their rows "
                  "are rejected as unknown county: give each county a polygon in the counties "
                  "table, or correct the id",)))
    c = [{k: v for k, v in r.items() if k != "precip_mm"} for r in climate_rows()]
    out.append(Case("climate without precip_mm", "climate", {"tables": {"climate": c}},
                    fatal="{d}/climate.csv: the climate table lacks required column(s) ['precip_mm']; "
                          "found ['county_id', 'date', 'tmin_c', 'tmax_c']; expected "
                          "['county_id', 'date', 'precip_mm']. Rename or add the column(s)"))
    return out


# ----------------------------------------------------------------------------- yields
def _scale(rows: Rows, county: str, factor: float, practice: str | None = None,
           unit: str | None = None) -> Rows:
    for r in rows:
        if r["county_id"] == county and practice in (None, r["practice"]):
            r["yield"] = f"{float(r['yield']) * factor:.0f}"
            r["unit"] = unit or r["unit"]
    return rows


def _yield_medians(rows: Rows, practice: str) -> dict[str, float]:
    return {c: statistics.median(float(r["yield"]) for r in rows
                                 if r["county_id"] == c and r["practice"] == practice)
            for c in IDS}


def _yields_cases() -> list[Case]:
    out = []
    # only the irrigated rows of one county: its all-practice median stays in range
    y = _scale(yields_rows(), IDS[2], 1000, "irrigated")
    med = _yield_medians(y, "irrigated")
    out.append(Case(
        "yields one county's irrigated rows scaled by 1,000", "yields", {"tables": {"yields": y}},
        before_indices=True,
        fatal=f"{{d}}/yields.csv: column yield, county {IDS[2]}: crop maize, practice "
              f"irrigated: median {med[IDS[2]]:.4g} is a factor of 1,000 above the median "
              f"county's {statistics.median(med.values()):.4g} (kg/ha among t/ha, or values "
              "scaled by 1,000?); give this county's values in the unit of the others (or fix "
              "the unit column)"))
    y = _scale(yields_rows(), IDS[1], 1000, unit="kg_per_ha")
    out.append(Case(
        "yields unit column with kg_per_ha among t_per_ha", "yields", {"tables": {"yields": y}},
        before_indices=True,
        fatal=f"{{d}}/yields.csv: column unit: crop maize is given in 2 units: t_per_ha (24 "
              f"rows), kg_per_ha (6 rows; county_id {IDS[1]}); give all maize rows in one unit "
              "(convert the other rows to t_per_ha and write that unit)"))
    y = yields_rows()
    y.append(dict(y[0]))
    out.append(Case("yields repeated county, year, crop and practice (year shown as 2001)",
                    "yields", {"tables": {"yields": y}},
                    rejected=(("yields", "yields.csv", len(y), "county_id+year+crop+practice",
                               f"{IDS[0]} | 2001 | maize | rainfed", "duplicate of row 1"),)))
    y = yields_rows()
    out.append(Case("yields year 2002.5", "yields",
                    {"tables": {"yields": _set(y, 3, year="2002.5")}},
                    rejected=(("yields", "yields.csv", 4, "year", "2002.5",
                               "not a whole number"),)))
    y = yields_rows()
    out.append(Case("yields year 1066", "yields", {"tables": {"yields": _set(y, 7, year="1066")}},
                    rejected=(("yields", "yields.csv", 8, "year", "1066",
                               "year out of range"),)))
    y = yields_rows()
    out.append(Case("yields text in the yield column", "yields",
                    {"tables": {"yields": _set(y, 2, **{"yield": "good"})}},
                    rejected=(("yields", "yields.csv", 3, "yield", "good",
                               "unparseable number"),)))
    y = yields_rows()
    for r in y:
        r["yield"] = ""
    out.append(Case(
        "yields every yield blank (the whole table rejected)", "yields",
        {"tables": {"yields": y}, "extra": "max_rejected_share = 0.2\n"}, before_indices=True,
        fatal=f"{{d}}/yields.csv: the yields table loses all {len(y)} rows in the inputs stage, "
              "more than max_rejected_share = 0.2 allows (top reasons: "
              f"{len(y)} missing required value (yield)); fix the table, or allow the loss "
              "with [project] max_rejected_share in {d}/impactlink.toml (0..1; 1 = never "
              "stop)"))
    return out


QUICKSTATS = '[formats]\nyields = "quickstats"\n'


def _quickstats_cases() -> list[Case]:
    out = []
    q = quickstats_rows()
    q[4]["County ANSI"] = "999"
    out.append(Case(
        "Quick Stats row of a county not in the counties table", "yields",
        {"formats": QUICKSTATS, "files": {"yields.csv": csv_text(q, QS_COLUMNS)}},
        rejected=(("yields", "yields.csv", 5, "county_id", "70999", "unknown county"),),
        warnings=("{d}/yields.csv: 1 county of the yields table has no polygon in "
                  "{d}/counties.geojson: 70999 (1 row; not in the counties table); their rows "
                  "are rejected as unknown county: give each county a polygon in the counties "
                  "table, or correct the id",)))
    q = quickstats_rows()
    q[6]["Value"] = "(D)"
    out.append(Case(
        "Quick Stats value withheld (D)", "yields",
        {"formats": QUICKSTATS, "files": {"yields.csv": csv_text(q, QS_COLUMNS)}},
        rejected=(("yields", "yields.csv", 7, "Value", "(D)", "withheld by NASS to avoid "
                   "disclosing data for individual operations (D)"),)))
    q = quickstats_rows()
    cols = [c for c in QS_COLUMNS if c != "County ANSI"]
    out.append(Case(
        "Quick Stats export without County ANSI", "yields",
        {"formats": QUICKSTATS, "files": {"yields.csv": csv_text(
            [{k: r[k] for k in cols} for r in q], cols)}},
        fatal="{d}/yields.csv: not a NASS Quick Stats export: no column(s) ['County ANSI']; "
              "download the table again as CSV from Quick Stats (Spreadsheet)"))
    return out


# ----------------------------------------------------------------------------- prices
def _prices_cases() -> list[Case]:
    out = []
    p = prices_rows()
    p[3]["unit"] = "usd_per_short_ton"
    out.append(Case(
        "prices unit column with one row in another unit", "prices",
        {"tables": {"prices": p, "price_index": price_index_rows()}}, before_indices=True,
        fatal=f"{{d}}/prices.csv: column unit: commodity hay is given in 2 units: usd_per_t "
              f"({len(p) - 1} rows), usd_per_short_ton (1 row; region {p[3]['region']}); give "
              "all hay rows in one unit (convert the other rows to usd_per_t and write that "
              "unit)"))
    p = prices_rows()
    out.append(Case("prices negative price", "prices",
                    {"tables": {"prices": _set(p, 5, price="-12.00")}},
                    rejected=(("prices", "prices.csv", 6, "price", "-12.00",
                               "negative price"),)))
    p = prices_rows()
    out.append(Case("prices date written as a month name", "prices",
                    {"tables": {"prices": _set(p, 8, date="Sept 2001")}},
                    rejected=(("prices", "prices.csv", 9, "date", "Sept 2001",
                               "unparseable date"),)))
    i = price_index_rows()
    gone = i.pop(7)["date"][:7]
    out.append(Case(
        "price index without one month", "price_index",
        {"tables": {"prices": prices_rows(), "price_index": i}},
        warnings=(f"{{d}}/price_index.csv: the monthly price index has no value for 1 month(s) "
                  f"between 2001-01 and 2003-12: {gone}; prices of those months cannot be "
                  "deflated (add the missing months)",)))
    i = price_index_rows()
    out.append(Case(
        "price index of zero", "price_index", {"tables": {"price_index": _set(i, 2,
                                                                      price_index="0")}},
        rejected=(("price_index", "price_index.csv", 3, "price_index", "0", "zero price index"),),
        # the rejected row leaves its month without an index value: told as such
        warnings=(f"{{d}}/price_index.csv: the monthly price index has no value for 1 month(s) "
                  f"between 2001-01 and 2003-12: {i[2]['date'][:7]}; prices of those months "
                  "cannot be deflated (add the missing months)",)))
    return out


# ----------------------------------------------------------------------------- impacts
def _impact_cases() -> list[Case]:
    out = []
    n = notices_rows()
    a, b = n[1]["start_date"], n[1]["end_date"]
    out.append(Case("notices end before start", "notices",
                    {"tables": {"notices": _set(n, 1, start_date=b, end_date=a)}},
                    rejected=(("notices", "notices.csv", 2, "end_date", f"{a} < {b}",
                               "end before start"),)))
    n = notices_rows()
    out.append(Case("notices level 7 on a ladder of 3", "notices",
                    {"tables": {"notices": _set(n, 2, level="7")}},
                    rejected=(("notices", "notices.csv", 3, "level", "7",
                               "level outside the ladder"),)))
    n = notices_rows()
    out.append(Case("notices repeated notice id", "notices",
                    {"tables": {"notices": _set(n, 3, notice_id=n[0]["notice_id"])}},
                    rejected=(("notices", "notices.csv", 4, "notice_id", n[0]["notice_id"],
                               "duplicate of row 1"),)))
    n = [{k: v for k, v in r.items() if k != "county_id"} for r in notices_rows()]
    out.append(Case(
        "notices with neither county_id nor lon and lat", "notices",
        {"tables": {"notices": n}},
        fatal="{d}/notices.csv: the notices table needs county_id or lon+lat columns to place "
              "each row; found ['notice_id', 'issuer', 'start_date', 'end_date', 'level', "
              "'cause']. Add county_id or lon and lat"))
    f = field_reports_rows()
    out.append(Case("field reports severity 9 of 1..5", "field_reports",
                    {"tables": {"field_reports": _set(f, 4, severity="9")}},
                    rejected=(("field_reports", "field_reports.csv", 5, "severity", "9",
                               "severity out of range"),)))
    f = field_reports_rows()
    out.append(Case("field reports blank date", "field_reports",
                    {"tables": {"field_reports": _set(f, 6, date="")}},
                    rejected=(("field_reports", "field_reports.csv", 7, "date", "",
                               "missing required value"),)))
    f = field_reports_rows()
    out.append(Case("field reports date in year 2400", "field_reports",
                    {"tables": {"field_reports": _set(f, 2, date="2400-06-01")}},
                    rejected=(("field_reports", "field_reports.csv", 3, "date", "2400-06-01",
                               "date out of range"),)))
    f = [{k: v for k, v in r.items() if k != "sector"} for r in field_reports_rows()]
    out.append(Case(
        "field reports without sector", "field_reports", {"tables": {"field_reports": f}},
        fatal="{d}/field_reports.csv: the field_reports table lacks required column(s) "
              "['sector']; found ['county_id', 'date', 'severity']; expected ['county_id', "
              "'date', 'sector']. Rename or add the column(s)"))
    s = indicators_rows()
    out.append(Case("indicators text value", "indicators",
                    {"tables": {"indicators": _set(s, 14, value="wet")}},
                    rejected=(("indicators", "indicators.csv", 15, "value", "wet",
                               "unparseable number"),)))
    s = indicators_rows()
    s.insert(3, dict(s[2]))
    key = f"{s[2]['county_id']} | {s[2]['date']} | soil_moisture_pct"
    out.append(Case("indicators repeated county, date and indicator", "indicators",
                    {"tables": {"indicators": s}},
                    rejected=(("indicators", "indicators.csv", 4, "county_id+date+indicator",
                               key, "duplicate of row 3"),)))
    return out


# ----------------------------------------------------------------------------- geometry
ZONES = '[formats]\nclimate = "zones"\nzones = "zone_table.csv"\n'
TOPO = '[formats]\ncounties = "topojson"\n'


def _zoned(z: Rows) -> dict[str, Any]:
    return {"formats": ZONES, "files": {"zone_table.csv": csv_text(z),
                                        "climate.csv": csv_text(zone_climate_rows())}}


def _unknown(county: str) -> tuple[Rejected, ...]:
    """The climate rows of ``county``, rejected as unknown when it has no polygon."""
    return tuple(("climate", "climate.csv", i, "county_id", county, "unknown county")
                 for i, r in enumerate(climate_rows(), start=1) if r["county_id"] == county)


def _geometry_cases() -> list[Case]:
    out = []
    z = zone_rows() + [{"county_id": "70199", "zone": "7002"}]
    out.append(Case(
        "zone table county not in the counties table", "zones", _zoned(z),
        rejected=(("zones", "zone_table.csv", len(z), "county_id", "70199", "unknown county"),),
        warnings=("{d}/zone_table.csv: 1 county of the zones table has no polygon in "
                  "{d}/counties.geojson: 70199 (1 row; not in the counties table); their rows "
                  "are rejected as unknown county: give each county a polygon in the counties "
                  "table, or correct the id",)))
    z = zone_rows() + [{"county_id": IDS[0], "zone": "7002"}]
    out.append(Case("zone table county in a second zone", "zones", _zoned(z),
                    rejected=(("zones", "zone_table.csv", len(z), "county_id", IDS[0],
                               "county already has a zone (give area weights to mix "
                               "zones)"),)))
    topo = json.dumps(counties_topojson(with_ids=False))
    out.append(Case(
        "TopoJSON counties without feature ids", "counties",
        {"counties": "topojson", "formats": TOPO, "files": {"boundaries.json": topo}},
        fatal="{d}/boundaries.json: no feature of 'counties' has an 'id' (5 features); give "
              "each feature its county GEOID as text in the feature member 'id' (e.g. \"id\": "
              "\"01001\")"))
    t = counties_topojson()
    del t["objects"]["counties"]["geometries"][3]["id"]
    out.append(Case(
        "TopoJSON counties with one feature without id", "counties",
        {"counties": "topojson", "formats": TOPO, "files": {"boundaries.json": json.dumps(t)}},
        rejected=_unknown(IDS[3]),
        warnings=("{d}/boundaries.json: 1 of 5 features of 'counties' have no 'id' and are "
                  "left out (features 4); give each feature its county GEOID as the feature "
                  "id", "{d}/climate.csv: 1 county of the climate table has no polygon in "
                  f"{{d}}/boundaries.json: {IDS[3]} (36 rows; not in the counties table); their "
                  "rows are rejected as unknown county: give each county a polygon in the "
                  "counties table, or correct the id")))
    g = counties_geojson()
    g["features"][1]["properties"]["county_id"] = IDS[0]
    out.append(Case(
        "counties repeated county id", "counties",
        {"counties": "", "files": {"counties.geojson": json.dumps(g)}},
        fatal=f"{{d}}/counties.geojson: county_id repeats (['{IDS[0]}'] at rows [1, 2]); each "
              "county must appear once: merge the parts into one (multi)polygon per county"))
    g = counties_geojson()
    g["features"][2]["geometry"] = None
    out.append(Case(
        "counties feature without geometry", "counties",
        {"counties": "", "files": {"counties.geojson": json.dumps(g)}},
        rejected=_unknown(IDS[2]) + (("counties", "counties.geojson", 3, "geometry",
                                       f"county {IDS[2]} (Dervin Flats)", "missing geometry"),),
        warnings=(f"{{d}}/climate.csv: 1 county of the climate table has no polygon in "
                  f"{{d}}/counties.geojson: {IDS[2]} (36 rows; its geometry is empty, counties "
                  "row 3); their rows are rejected as unknown county: give each county a "
                  "polygon in the counties table, or correct the id",)))
    return out


def all_cases() -> list[Case]:
    """Every case, in table order."""
    from table_cases_formats import formats_cases, parquet_cases

    cases = (_climate_cases() + _yields_cases() + _quickstats_cases() + _prices_cases()
             + _impact_cases() + _geometry_cases() + formats_cases() + parquet_cases())
    names = [c.name for c in cases]
    assert len(set(names)) == len(names), "case names must be unique"
    return cases


def CASE_IDS(case: Case) -> str:  # noqa: N802 (a constant-like name for parametrize)
    """The case's name as its test id."""
    return case.name
