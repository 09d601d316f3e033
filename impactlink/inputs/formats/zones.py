"""Climate and indicators given per zone (climate division, basin, grid cell) -> per county.

Many publishers give climate per zone rather than per county: the national climate centre's climate divisional
database (nClimDiv) per climate division, hydrologic data per basin, gridded data per cell.
A zone-to-county table says which zone(s) each county takes its series from:

- nClimDiv's county-to-division file: ``postal_fips_id`` (5-digit county GEOID), ``ncdc_fips_id``
  (nClimDiv state code + county code), ``climdiv_id`` (nClimDiv state code + 2-digit division);
- any two-column table ``county, zone`` (each county one zone);
- area weights ``county, zone, weight`` (a county takes the weighted mean of its zones).

**nClimDiv state codes are not FIPS codes.** nClimDiv numbers the 48 contiguous states
alphabetically (Iowa = 13), FIPS does not (Iowa = 19). The county side of the table is the
FIPS GEOID (``postal_fips_id``); the zone side (``climdiv_id``) is matched to the climate
file's zone column *as text*, exactly as written (``"1301"``), never converted.

Units are declared (``precip_unit="in"|"mm"``, ``temp_unit="F"|"C"``) or read from the
column names (``precip_in``, ``tavg_f``, ``tmax_c``; :func:`units_from_header`), converted
once (inches x 25.4 = mm exactly; degrees C = (F - 32) x 5/9), never guessed from the values.
A declared unit that contradicts the header is an error.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import REASONS, InputError
from impactlink.inputs.formats._ledger import (
    FormatResult,
    RowLedger,
    read_text_csv,
    reject_repeats,
    reject_unknown_counties,
)
from impactlink.inputs.formats._units import stop_on_unit_mistakes
from impactlink.schema import COUNTY, DATE, SENTINELS, VALUE

__all__ = [
    "ZoneAssignment",
    "ZONE_COLUMNS",
    "ZONE_REASONS",
    "MM_PER_INCH",
    "units_from_header",
    "climate_columns",
    "zone_column_of",
    "read_zone_table",
    "read_zone_climate",
    "read_zone_indicators",
    "assign_zones",
]

#: Column names taken as the zone id, in order of preference (lower case).
ZONE_COLUMNS = ("climdiv_id", "zone_id", "zone", "division_id", "division", "basin_id",
                "basin", "huc", "cell_id", "grid_cell", "cell")
#: Column names taken as the county id of a zone table (lower case).
_COUNTY_COLUMNS = (COUNTY, "postal_fips_id", "geoid", "fips", "county_fips", "county")
_WEIGHT_COLUMNS = ("weight", "area_weight", "share", "fraction")
#: Exact length of an inch in millimetres (international yard and pound agreement, 1959).
MM_PER_INCH = 25.4
#: nClimDiv's missing-value codes in nClimDiv files: -99.99 (precipitation, PDSI) and -99.90
#: (temperature) (from memory of nClimDiv's divisional-data readme), with the contract's own.
CLIMDIV_SENTINELS = (-99.99, -99.9, *SENTINELS)
#: Plausible air temperature range [degrees C] (recorded extremes about -89 and +57).
TEMPERATURE_RANGE_C = (-90.0, 60.0)

ZONE_REASONS = {
    "no_county": "zone assigned to no county in the zone table",
    "no_series": "zone not in the climate file",
    "second_zone": "county already has a zone (give area weights to mix zones)",
    "weight": "weight not positive",
}

_QUANTITY = re.compile(r"^(?P<q>precip|prcp|pcp|ppt|tavg|tmean|tmax|tmin|pet)"
                       r"(?:_(?P<u>in|mm|f|c))?$")
_CONTRACT = {"precip": "precip_mm", "prcp": "precip_mm", "pcp": "precip_mm",
             "ppt": "precip_mm", "pet": "pet_mm", "tavg": "tmean_c", "tmean": "tmean_c",
             "tmax": "tmax_c", "tmin": "tmin_c"}


@dataclass(frozen=True)
class ZoneAssignment:
    """Zone series put on counties, with where each county's series came from.

    Attributes
    ----------
    frame : DataFrame
        ``county_id``, the key columns, the value columns.
    provenance : DataFrame
        One line per county: ``county_id``, ``zones`` (``;``-joined), ``weights``, ``method``
        (``"series of zone <id>"`` or ``"area-weighted mean of <n> zones"``), ``rows``.
    counties_without_zone : tuple of str
        Counties asked for (``counties``) that the zone table does not list.
    zones_without_series : tuple of str
        Zones of the table absent from the series (their counties get nothing from them).
    incomplete : int
        County-key cells dropped because a weighted zone had no value there.
    """

    frame: pd.DataFrame
    provenance: pd.DataFrame
    counties_without_zone: tuple[str, ...]
    zones_without_series: tuple[str, ...]
    incomplete: int

    def to_frame(self) -> pd.DataFrame:
        """The provenance table."""
        return self.provenance.copy()


def units_from_header(columns: Sequence[str]) -> dict[str, str]:
    """Units named by the column headers: ``precip_unit`` ("in"|"mm"), ``temp_unit`` ("F"|"C").

    Parameters
    ----------
    columns : sequence of str
        Header of a climate file.

    Returns
    -------
    dict
        Only the units the headers name (``{}`` when none does).

    Raises
    ------
    InputError
        Two headers name different units for one kind of quantity.

    Examples
    --------
    >>> units_from_header(["climdiv_id", "year", "month", "precip_in", "tavg_f"])
    {'precip_unit': 'in', 'temp_unit': 'F'}
    """
    found: dict[str, set[str]] = {"precip_unit": set(), "temp_unit": set()}
    for raw, (contract, unit) in climate_columns(columns).items():
        del raw
        if unit:
            found["temp_unit" if contract.endswith("_c") else "precip_unit"].add(unit)
    out = {}
    for key, units in found.items():
        if len(units) > 1:
            raise InputError(f"climate columns {list(columns)} name different units for "
                             f"{key.split('_')[0]} ({sorted(units)}); use one unit per kind")
        if units:
            out[key] = units.pop()
    return out


def climate_columns(columns: Sequence[str]) -> dict[str, tuple[str, str]]:
    """Climate value columns: raw name -> (contract column, unit named by the header or "").

    Examples
    --------
    >>> climate_columns(["year", "precip_in", "tavg_f", "tmax"])
    {'precip_in': ('precip_mm', 'in'), 'tavg_f': ('tmean_c', 'F'), 'tmax': ('tmax_c', '')}
    """
    out = {}
    for c in columns:
        m = _QUANTITY.match(str(c).strip().lower())
        if m:
            unit = (m["u"] or "")
            out[str(c)] = (_CONTRACT[m["q"]], unit.upper() if unit in ("f", "c") else unit)
    return out


def zone_column_of(columns: Sequence[str]) -> str | None:
    """The zone id column of a per-zone file (first of :data:`ZONE_COLUMNS`), or None."""
    lower = {str(c).strip().lower(): str(c) for c in columns}
    return next((lower[z] for z in ZONE_COLUMNS if z in lower), None)


def read_zone_table(path: str | Path, *, counties: Sequence[str] | None = None) -> FormatResult:
    """Read a zone-to-county table (nClimDiv county-to-division, two-column, or area weights).

    Parameters
    ----------
    path : str or Path
        CSV with a county column (``county_id``, ``postal_fips_id``, ``geoid``, ``fips``, ...
        or the first column of a two-column table), a zone column (:data:`ZONE_COLUMNS`, or
        the second column) and optionally ``weight``.

    Returns
    -------
    FormatResult
        ``frame``: ``county_id``, ``zone``, ``weight`` (1.0 without weights), text ids as
        written. Rejected: blank ids, weights not positive, a repeated county-zone pair,
        without weights a county's second zone, and a county not in ``counties`` (the
        counties table's ids, when given): it would get a series no county polygon takes.

    Raises
    ------
    InputError
        No county or zone column can be identified, or no row is usable.
    """
    path = Path(path)
    raw = read_text_csv(path, what="zone-to-county table")
    lower = {c.lower(): c for c in raw.columns}
    county = next((lower[c] for c in _COUNTY_COLUMNS if c in lower), None)
    zone = zone_column_of(raw.columns)
    weight = next((lower[c] for c in _WEIGHT_COLUMNS if c in lower), None)
    if len(raw.columns) == 2 and (county is None or zone is None):
        county, zone = raw.columns[0], raw.columns[1]
    if county is None or zone is None or county == zone:
        raise InputError(f"{path}: cannot tell the county and zone columns of the zone table "
                         f"(columns {list(raw.columns)}); name them county_id and zone")
    led = RowLedger("zones", str(path), len(raw))
    cid, zid = raw[county].str.strip(), raw[zone].str.strip()
    led.reject((cid == "").to_numpy(), county, cid, REASONS["missing"])
    led.reject((zid == "").to_numpy(), zone, zid, REASONS["missing"])
    w = np.ones(len(raw))
    if weight is not None:
        w = pd.to_numeric(raw[weight].str.strip(), errors="coerce").to_numpy(float)
        led.reject(~np.isfinite(w), weight, raw[weight], REASONS["number"])
        led.reject(w <= 0, weight, raw[weight], ZONE_REASONS["weight"])
    frame = pd.DataFrame({COUNTY: cid.to_numpy(), "zone": zid.to_numpy(), "weight": w})
    keys = [COUNTY, "zone"] if weight is not None else [COUNTY]
    why = REASONS["duplicate"] if weight is not None else ZONE_REASONS["second_zone"]
    reject_repeats(led, frame, keys, why)
    reject_unknown_counties(led, frame[COUNTY].to_numpy(), None if counties is None else
                            list(counties), path, what="zone table")
    if not led.alive.any():
        raise InputError(f"{path}: no usable county-zone pair in {led.n} rows; each row needs "
                         "a county id and a zone id")
    used = frame.loc[led.alive].reset_index(drop=True)
    note = (f"{path}: zone table, county column {county!r}, zone column {zone!r}"
            + (f", weights {weight!r}" if weight else "") + "; zone ids matched as text")
    return FormatResult("zones", str(path), used, led.rejected(), led.n, (note,))


def read_zone_climate(path: str | Path, zones: pd.DataFrame, *, zone_column: str | None = None,
                      precip_unit: str | None = None, temp_unit: str | None = None,
                      counties: Sequence[str] | None = None) -> FormatResult:
    """Read a per-zone climate file and give each county its zone's series (climate contract).

    Parameters
    ----------
    path : str or Path
        CSV with a zone column, ``date`` or ``year`` + ``month`` (+ ``day``), and value
        columns named as in :func:`climate_columns` (e.g. nClimDiv's ``climdiv_id, year, month,
        precip_in, tavg_f``).
    zones : DataFrame
        ``county_id``, ``zone``, ``weight`` (the frame of :func:`read_zone_table`).
    zone_column : str, optional
        The zone id column (default: found by name, :data:`ZONE_COLUMNS`).
    precip_unit : {"in", "mm"}, optional
        Unit of precipitation (and PET) when the headers do not name it.
    temp_unit : {"F", "C"}, optional
        Unit of temperatures when the headers do not name it.
    counties : sequence of str, optional
        Counties of the project; those without a zone are listed in the notes.

    Returns
    -------
    FormatResult
        ``frame``: ``county_id``, ``date`` (month start for monthly rows), ``precip_mm`` and
        any of ``tmean_c``, ``tmax_c``, ``tmin_c``, ``pet_mm``. ``details["provenance"]``:
        the county -> zone table of :class:`ZoneAssignment`. Raw rows are rejected for a
        blank zone, unreadable date or number, sentinel, negative precipitation, temperature
        out of range, or a zone no county takes.

    Raises
    ------
    InputError
        No zone column, no precipitation column, a unit neither declared nor in the header,
        a declared unit contradicting the header, or values in another unit than the one
        read (a zone's Fahrenheit under ``tmax_c``; before the range rules).
    """
    path = Path(path)
    raw = read_text_csv(path, what="per-zone climate file")
    cols = climate_columns(raw.columns)
    if "precip_mm" not in {c for c, _ in cols.values()}:
        raise InputError(f"{path}: no precipitation column among {list(raw.columns)}; name it "
                         "precip_in or precip_mm")
    units = _resolve_units(path, cols, precip_unit, temp_unit)
    led, zone, dates = _zone_rows(path, raw, zone_column, zones, "climate")
    out = {}
    for rawcol, (contract, _) in cols.items():
        v = _numbers(led, raw[rawcol], rawcol)
        if contract.endswith("_mm"):
            v = v * MM_PER_INCH if units[rawcol] == "in" else v
        else:
            v = (v - 32.0) * 5.0 / 9.0 if units[rawcol] == "F" else v
        out[contract] = v
    stop_on_unit_mistakes(path, led, zone, dates, out,
                          {c: r for r, (c, _) in cols.items()})
    for rawcol, (contract, _) in cols.items():  # the range rules, after the unit check
        v = out[contract]
        if contract.endswith("_mm"):
            led.reject(v < 0, rawcol, raw[rawcol], REASONS["negative"].format(
                quantity="precipitation" if contract == "precip_mm" else "evapotranspiration"))
        else:
            lo, hi = TEMPERATURE_RANGE_C
            led.reject((v < lo) | (v > hi), rawcol, raw[rawcol], REASONS["temperature"])
    frame = pd.DataFrame({"zone": zone, DATE: dates, **out}).loc[led.alive]
    assigned = assign_zones(frame, zones, value_columns=list(out), counties=counties)
    notes = [f"{path}: {c} from {r} [{units[r]}]" for r, (c, _) in cols.items()]
    return _finish("climate", path, led, assigned, notes)


def read_zone_indicators(path: str | Path, zones: pd.DataFrame, *,
                         zone_column: str | None = None,
                         counties: Sequence[str] | None = None) -> FormatResult:
    """Read a per-zone indicator file (e.g. nClimDiv's division Palmer index) -> indicators contract.

    Parameters
    ----------
    path : str or Path
        CSV with a zone column, ``date`` or ``year`` + ``month``, and one or more indicator
        columns (every other column; e.g. ``pdsi``). The indicator name is the column name.
    zones : DataFrame
        ``county_id``, ``zone``, ``weight``.
    zone_column : str, optional
        The zone id column (default: found by name).
    counties : sequence of str, optional
        Counties of the project (those without a zone are listed in the notes).

    Returns
    -------
    FormatResult
        ``frame``: ``county_id``, ``date``, ``indicator``, ``value``;
        ``details["provenance"]`` as for :func:`read_zone_climate`.
    """
    path = Path(path)
    raw = read_text_csv(path, what="per-zone indicator file")
    led, zone, dates = _zone_rows(path, raw, zone_column, zones, "indicators")
    time_cols = {"date", "year", "month", "day"}
    names = [c for c in raw.columns if c.lower() not in time_cols
             and c != (zone_column or zone_column_of(raw.columns))]
    if not names:
        raise InputError(f"{path}: no indicator column besides the zone and date columns; "
                         "add one column per indicator (e.g. pdsi)")
    values = {c: _numbers(led, raw[c], c) for c in names}
    wide = pd.DataFrame({"zone": zone, DATE: dates, **values}).loc[led.alive]
    long = wide.melt(id_vars=["zone", DATE], value_vars=names, var_name="indicator",
                     value_name=VALUE)
    assigned = assign_zones(long, zones, value_columns=[VALUE], keys=(DATE, "indicator"),
                            counties=counties)
    return _finish("indicators", path, led, assigned, [f"{path}: indicators {names}"])


def assign_zones(series: pd.DataFrame, zones: pd.DataFrame, *, value_columns: Sequence[str],
                 keys: Sequence[str] = (DATE,), counties: Sequence[str] | None = None
                 ) -> ZoneAssignment:
    """Give each county the series of its zone, or the weighted mean of its zones.

    Parameters
    ----------
    series : DataFrame
        ``zone``, the ``keys`` columns and the ``value_columns``; one row per zone and key.
    zones : DataFrame
        ``county_id``, ``zone``, ``weight`` (> 0).
    value_columns : sequence of str
        Columns to carry over.
    keys : sequence of str, default ("date",)
        Columns that, with the zone, identify a row of ``series``.
    counties : sequence of str, optional
        Counties wanted; those absent from ``zones`` are listed in the result.

    Returns
    -------
    ZoneAssignment

    Notes
    -----
    :math:`v_{c,t} = \\sum_z w_{cz} v_{z,t} / \\sum_z w_{cz}` over the zones *z* of county
    *c*; with one zone per county this is the zone's value itself. A county-key cell where
    one of the county's zones has no value is dropped (counted in ``incomplete``), never
    filled from the other zones. One vectorised merge and group-by (no loop over counties).

    Examples
    --------
    >>> s = pd.DataFrame({"zone": ["A", "B"], "date": [1, 1], "x": [10.0, 20.0]})
    >>> z = pd.DataFrame({"county_id": ["c1", "c1"], "zone": ["A", "B"], "weight": [3.0, 1.0]})
    >>> assign_zones(s, z, value_columns=["x"]).frame["x"].tolist()
    [12.5]
    """
    keys, vals = list(keys), list(value_columns)
    s = series.assign(zone=series["zone"].astype(str))
    z = zones[[COUNTY, "zone", "weight"]].assign(zone=zones["zone"].astype(str),
                                                  **{COUNTY: zones[COUNTY].astype(str)})
    known = set(s["zone"])
    no_series = tuple(sorted(set(z["zone"]) - known))
    n_zones = z.groupby(COUNTY)["zone"].transform("size")
    m = z.assign(n_zones=n_zones).merge(s, on="zone", how="inner")
    w = m["weight"].to_numpy(float)
    agg = pd.DataFrame({COUNTY: m[COUNTY], **{k: m[k] for k in keys}, "_w": w,
                        "_n": 1, "_need": m["n_zones"]})
    for v in vals:
        agg[v] = m[v].to_numpy(float) * w
    g = agg.groupby([COUNTY, *keys], sort=True).agg(
        {"_w": "sum", "_n": "sum", "_need": "first", **dict.fromkeys(vals, "sum")})
    full = (g["_n"] == g["_need"]).to_numpy()
    for v in vals:
        g[v] = g[v] / g["_w"]
    frame = g.loc[full, vals].reset_index()
    prov = _provenance(z, frame)
    wanted = [] if counties is None else [str(c) for c in counties]
    without = tuple(sorted(set(wanted) - set(z[COUNTY])))
    return ZoneAssignment(frame, prov, without, no_series, int((~full).sum()))


# ----------------------------------------------------------------------- steps
def _resolve_units(path: Path, cols: dict[str, tuple[str, str]], precip_unit: str | None,
                   temp_unit: str | None) -> dict[str, str]:
    """Unit of every value column: the header's, else the declared one; never guessed."""
    if precip_unit is not None and precip_unit not in ("in", "mm"):
        raise InputError(f"{path}: precip_unit must be 'in' or 'mm', got {precip_unit!r}")
    if temp_unit is not None and temp_unit not in ("F", "C"):
        raise InputError(f"{path}: temp_unit must be 'F' or 'C', got {temp_unit!r}")
    out = {}
    for raw, (contract, unit) in cols.items():
        declared, key = ((precip_unit, "precip_unit") if contract.endswith("_mm")
                         else (temp_unit, "temp_unit"))
        if unit and declared and unit != declared:
            raise InputError(f"{path}: column {raw!r} is in {unit} by its name but {key} = "
                             f"{declared!r} is declared; fix the declaration or the header")
        if not (unit or declared):
            raise InputError(f"{path}: the unit of column {raw!r} is not known; declare {key} "
                             f"(e.g. {key} = \"{'in' if key == 'precip_unit' else 'F'}\") or "
                             "name the column with its unit (precip_in, tavg_f, tmax_c, ...)")
        out[raw] = unit or str(declared)
    return out


def _zone_rows(path: Path, raw: pd.DataFrame, zone_column: str | None, zones: pd.DataFrame,
               table: str) -> tuple[RowLedger, np.ndarray, np.ndarray]:
    """Ledger, zone id (text) and date of every raw row; rejects blank zones and bad dates."""
    zcol = zone_column or zone_column_of(raw.columns)
    if zcol is None or zcol not in raw.columns:
        raise InputError(f"{path}: no zone column (looked for {zone_column or ZONE_COLUMNS}) "
                         f"among {list(raw.columns)}; name the zone id column 'zone'")
    led = RowLedger(table, str(path), len(raw))
    zone = raw[zcol].str.strip()
    led.reject((zone == "").to_numpy(), zcol, zone, REASONS["missing"])
    lower = {c.lower(): c for c in raw.columns}
    if "date" in lower:
        text = raw[lower["date"]]
        dates = pd.to_datetime(text.str.strip(), errors="coerce", format="ISO8601")
        led.reject(dates.isna().to_numpy(), lower["date"], text, REASONS["date"])
    elif "year" in lower and "month" in lower:
        parts = {k: pd.to_numeric(raw[lower[k]].str.strip(), errors="coerce")
                 for k in ("year", "month", "day") if k in lower}
        parts.setdefault("day", pd.Series(1, index=raw.index))
        dates = pd.to_datetime(pd.DataFrame(parts), errors="coerce")
        shown = raw[lower["year"]] + "-" + raw[lower["month"]]
        led.reject(dates.isna().to_numpy(), lower["month"], shown, REASONS["date"])
    else:
        raise InputError(f"{path}: no date column; give 'date' (ISO 8601) or 'year' and "
                         f"'month' columns (found {list(raw.columns)})")
    taken = set(zones["zone"].astype(str))
    led.reject(~zone.isin(taken).to_numpy(), zcol, zone, ZONE_REASONS["no_county"])
    return led, zone.to_numpy(dtype=object), dates.to_numpy(dtype="datetime64[ns]")


def _numbers(led: RowLedger, text: pd.Series, column: str) -> np.ndarray:
    s = text.str.strip()
    v = pd.to_numeric(s, errors="coerce").to_numpy(float)
    led.reject((s == "").to_numpy(), column, s, REASONS["missing"])
    led.reject(~np.isfinite(v), column, s, REASONS["number"])
    led.reject(np.isin(np.round(v, 2), CLIMDIV_SENTINELS), column, s, REASONS["sentinel"])
    return v


def _provenance(z: pd.DataFrame, frame: pd.DataFrame) -> pd.DataFrame:
    zs = z.sort_values([COUNTY, "zone"])
    g = zs.groupby(COUNTY, sort=True)
    prov = pd.DataFrame({
        "zones": g["zone"].agg(";".join),
        "weights": g["weight"].agg(lambda w: ";".join(f"{x:g}" for x in w / w.sum())),
        "n": g.size()})
    prov["method"] = np.where(prov["n"] == 1, "series of zone " + prov["zones"],
                              "area-weighted mean of " + prov["n"].astype(str) + " zones")
    prov["rows"] = frame.groupby(COUNTY).size().reindex(prov.index).fillna(0).astype(np.int64)
    return prov.drop(columns="n").reset_index()


def _finish(table: str, path: Path, led: RowLedger, assigned: ZoneAssignment,
            notes: list[str]) -> FormatResult:
    if not led.alive.any():
        why = led.rejected()["reason"].value_counts().head(3).to_dict()
        raise InputError(f"{path}: no usable row in {led.n} rows (most common reasons: {why}); "
                         "check that the zone ids match the zone table's")
    notes = [*notes, f"{path}: {len(assigned.provenance)} counties take zone series "
             "(zone ids matched as text; nClimDiv state codes are not FIPS codes)"]
    if assigned.counties_without_zone:
        notes.append(f"{path}: {len(assigned.counties_without_zone)} counties have no zone in "
                     f"the zone table (e.g. {list(assigned.counties_without_zone[:5])})")
    if assigned.zones_without_series:
        notes.append(f"{path}: zones {list(assigned.zones_without_series[:5])} of the zone "
                     f"table are not in this file; their counties get no {table}")
    if assigned.incomplete:
        notes.append(f"{path}: {assigned.incomplete} county-date cells dropped: a weighted "
                     "zone had no value there")
    return FormatResult(table, str(path), assigned.frame, led.rejected(), led.n, tuple(notes),
                        {"provenance": assigned.provenance})
