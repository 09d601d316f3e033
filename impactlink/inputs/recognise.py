"""Recognise downloaded files by their headers (never their names): which table, which format.

:func:`recognise_files` looks at every CSV and JSON file of a folder that is not already a
contract table by name (:func:`impactlink.inputs.discover_tables`) and says what it holds:

========================================================== ============ ============
header (or content)                                         table        format
========================================================== ============ ============
the 21 NASS Quick Stats columns                             yields       quickstats
zone column + time (``date`` or ``year`` + ``month``) +
precipitation column (``precip_in``, ``prcp``, ...)         climate      zones
zone column + time + other value columns (e.g. ``pdsi``)    indicators   zones
zone column (or two columns) + county column, no time       zones        (zone table)
a TopoJSON topology (``"type": "Topology"``)                counties     topojson
========================================================== ============ ============
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

from impactlink.inputs._errors import InputError
from impactlink.inputs.discover import _candidates
from impactlink.inputs.formats.crop_survey import sniff_quickstats
from impactlink.inputs.formats.topojson import sniff_topojson
from impactlink.inputs.formats.zones import climate_columns, zone_column_of

__all__ = ["Recognised", "recognise_file", "recognise_files", "csv_header"]

_TIME = {"date", "year", "month", "day"}


@dataclass(frozen=True)
class Recognised:
    """A file recognised by its header.

    Attributes
    ----------
    table : str
        Contract table (``yields``, ``climate``, ``indicators``, ``counties``) or ``zones``
        for a zone-to-county table.
    format : str
        ``quickstats``, ``zones``, ``topojson`` or ``table`` (for the zone table itself).
    path : Path
    columns : tuple of str
        The CSV header (empty for TopoJSON).
    zone_column : str or None
        The zone id column of a per-zone file.
    """

    table: str
    format: str
    path: Path
    columns: tuple[str, ...] = ()
    zone_column: str | None = None


def csv_header(path: str | Path) -> list[str]:
    """The first row of a CSV file, stripped (``[]`` when it cannot be read)."""
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            return [h.strip() for h in next(csv.reader(fh), [])]
    except (OSError, UnicodeDecodeError, csv.Error):
        return []


def recognise_file(path: str | Path) -> Recognised | None:
    """What one file holds, from its header; None when it is none of the known layouts."""
    path = Path(path)
    ext = path.suffix.lower()
    if ext in (".json", ".topojson") and sniff_topojson(path):
        return Recognised("counties", "topojson", path)
    if ext != ".csv":
        return None
    if sniff_quickstats(path):
        return Recognised("yields", "quickstats", path)
    cols = csv_header(path)
    if not cols:
        return None
    lower = {c.lower() for c in cols}
    zone = zone_column_of(cols)
    timed = "date" in lower or {"year", "month"} <= lower
    if zone is not None and timed:
        values = [c for c in cols if c.lower() not in _TIME and c != zone]
        if "precip_mm" in {k for k, _ in climate_columns(cols).values()}:
            return Recognised("climate", "zones", path, tuple(cols), zone)
        if values:
            return Recognised("indicators", "zones", path, tuple(cols), zone)
        return None
    if not timed and (zone is not None or len(cols) in (2, 3)) and len(cols) <= 3:
        return Recognised("zones", "table", path, tuple(cols), zone)
    return None


def recognise_files(folder: str | Path) -> list[Recognised]:
    """Every file of ``folder`` recognised by header, skipping contract tables found by name.

    Raises
    ------
    InputError
        Two files are recognised as the same table (for example two Quick Stats exports);
        the message names both.
    """
    folder = Path(folder)
    by_name = {p for paths in _candidates(folder).values() for p in paths}
    found: dict[str, Recognised] = {}
    for path in sorted(folder.iterdir()):
        if not path.is_file() or path in by_name:
            continue
        rec = recognise_file(path)
        if rec is None:
            continue
        if rec.table in found:
            raise InputError(
                f"{folder}: {found[rec.table].path.name} and {path.name} both hold the "
                f"{rec.table} table (recognised from their headers); keep one of them, or "
                f"name the one to use under [tables] in the project file")
        found[rec.table] = rec
    return list(found.values())
