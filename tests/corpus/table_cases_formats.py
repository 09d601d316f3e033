"""One-defect cases of the publisher formats the project file declares (``[formats]``,
``[units]``): a file that does not match its declared format, a unit the header contradicts,
a per-zone climate file's mistakes. Same :class:`table_cases.Case` lines as the table cases
(``{d}`` = the case folder); expected numbers are computed here from the rows written.
"""

from __future__ import annotations

import datetime as dt
import io
import statistics

import pandas as pd
from table_cases import QUICKSTATS, TOPO, ZONES, Case, csv_text
from table_fixtures import climate_rows, yields_rows, zone_climate_rows, zone_rows


def _zone_files(climate: list[dict[str, str]], zones: list[dict[str, str]] | None = None
                ) -> dict[str, str]:
    return {"climate.csv": csv_text(climate), "zone_table.csv": csv_text(zones or zone_rows())}


def _renamed(rows: list[dict[str, str]], old: str, new: str) -> list[dict[str, str]]:
    return [{(new if k == old else k): v for k, v in r.items()} for r in rows]


def _parquet(frame: pd.DataFrame) -> bytes:
    buf = io.BytesIO()
    frame.to_parquet(buf, index=False)
    return buf.getvalue()


def _climate_frame() -> pd.DataFrame:
    c = pd.DataFrame(climate_rows())
    return c.astype({k: float for k in ("precip_mm", "tmin_c", "tmax_c")})


def parquet_cases() -> list[Case]:
    """Typed columns of a Parquet climate table."""
    c = _climate_frame()
    c["date"] = range(len(c))  # integers, which pandas would read as nanoseconds after 1970
    out = [Case(
        "Parquet climate with integer dates", "climate",
        {"files": {"climate.parquet": _parquet(c)}}, before_indices=True,
        fatal=f"{{d}}/climate.parquet: the climate table loses all {len(c)} rows in the inputs "
              "stage, more than max_rejected_share = 0.2 allows (top reasons: "
              f"{len(c)} unparseable date (date)); hint: column date: {len(c)} dates are "
              "numbers (e.g. '0'); store dates, or text YYYY-MM-DD such as '2001-03-15'; fix the table, or allow the loss with [project] max_rejected_share in "
              "{d}/impactlink.toml (0..1; 1 = never stop)")]
    c = _climate_frame()
    c["date"] = [dt.date.fromisoformat(x) for x in c["date"]]  # Parquet date32
    c.loc[4, "date"] = dt.date(2500, 1, 1)
    out.append(Case(
        "Parquet climate with a stored date in year 2500", "climate",
        {"files": {"climate.parquet": _parquet(c)}},
        rejected=(("climate", "climate.parquet", 5, "date", "2500-01-01", "date out of range"),)))
    return out


def formats_cases() -> list[Case]:
    out = [Case(
        "project declares Quick Stats yields for a contract yields table", "yields",
        {"tables": {"yields": yields_rows()}, "formats": QUICKSTATS},
        fatal="{d}/yields.csv: not a NASS Quick Stats export but a yields table of the input "
              "contract (columns ['county_id', 'year', 'crop', 'yield']); remove yields = "
              "\"quickstats\" under [formats] to read it as one")]
    out.append(Case(
        "project declares TopoJSON counties for a GeoJSON file", "counties",
        {"formats": TOPO, "extra": "", "counties": "geojson"},
        fatal="{d}/counties.geojson: not a TopoJSON topology (its JSON \"type\" is not "
              "\"Topology\"); [formats] counties = \"topojson\" needs one: give the TopoJSON "
              "file, or remove that line to read this file as a counties table (GeoJSON, "
              "GeoPackage, shapefile)"))
    out.append(Case(
        "project declares zones without the zone table", "zones",
        {"formats": ZONES, "files": {"climate.csv": csv_text(zone_climate_rows())}},
        fatal="{d}/zone_table.csv: the zone-to-county table named by [formats] zones is not "
              "found; climate = \"zones\" needs it"))
    out.append(Case(
        "per-zone climate in F by its header, C declared", "climate",
        {"formats": ZONES + '[units]\ntemp_unit = "C"\n',
         "files": _zone_files(_renamed(zone_climate_rows(), "tmax_c", "tmax_f"))},
        fatal="{d}/climate.csv: column 'tmax_f' is in F by its name but temp_unit = 'C' is "
              "declared; fix the declaration or the header"))
    out.append(Case(
        "per-zone climate temperature without a unit", "climate",
        {"formats": ZONES, "files": _zone_files(_renamed(zone_climate_rows(), "tmax_c", "tmax"))},
        fatal="{d}/climate.csv: the unit of column 'tmax' is not known; declare temp_unit (e.g. "
              "temp_unit = \"F\") or name the column with its unit (precip_in, tavg_f, tmax_c, "
              "...)"))
    zc = zone_climate_rows()
    zc[3]["zone"] = "7777"
    out.append(Case(
        "per-zone climate row of a zone no county takes", "climate",
        {"formats": ZONES, "files": _zone_files(zc)},
        rejected=(("climate", "climate.csv", 4, "zone", "7777",
                   "zone assigned to no county in the zone table"),)))
    zc = zone_climate_rows()
    for r in zc:
        if r["zone"] == "7002":
            r["tmax_c"] = f"{float(r['tmax_c']) * 9 / 5 + 32:.1f}"  # NIST SP 811, B.9
    hot = [float(r["tmax_c"]) for r in zc if r["zone"] == "7002"]
    q = statistics.quantiles(hot, n=50, method="inclusive")
    found = (f"median {statistics.median(hot):.1f} and 2-98 % spread {q[-1] - q[0]:.1f} look "
             "like degrees Fahrenheit (a Celsius median above 45 or a spread above 80 is hotter "
             "or wider than any climate; record high 56.7 C); convert the column to degrees "
             "Celsius, C = (F - 32) x 5/9")
    out.append(Case(
        "per-zone climate in Fahrenheit under a _c header in one zone", "climate",
        {"formats": ZONES, "files": _zone_files(zc)}, before_indices=True,
        fatal=f"{{d}}/climate.csv: column tmax_c, zone 7002: {found}"))
    z = [dict(r, weight="1") for r in zone_rows()]
    z[2]["weight"] = "-0.5"
    out.append(Case(
        "zone table with a negative area weight", "zones",
        {"formats": ZONES, "files": _zone_files(zone_climate_rows(), z)},
        rejected=(("zones", "zone_table.csv", 3, "weight", "-0.5", "weight not positive"),),
        warnings=(f"{{d}}/climate.csv: 1 of 5 counties has a polygon but no climate rows: "
                  f"{z[2]['county_id']} (Dervin Flats); they get no index values (add their "
                  "climate rows, or leave them out of the counties table)",)))
    return out
