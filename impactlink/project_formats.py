"""The ``[formats]`` and ``[units]`` sections of the project file (publisher layouts, units).

Kept apart from :mod:`impactlink.project` so that module stays one room; it imports the two
dataclasses and :func:`check_formats` from here and re-exports them.
"""

from __future__ import annotations

from dataclasses import dataclass

from impactlink.errors import ProjectError

__all__ = ["TABLE_FORMATS", "UNIT_CHOICES", "FormatSettings", "UnitSettings", "check_formats"]


#: Formats each table may be written in ("table" = the input contract as is).
TABLE_FORMATS: dict[str, tuple[str, ...]] = {
    "climate": ("table", "zones"), "indicators": ("table", "zones"),
    "yields": ("table", "quickstats"), "counties": ("table", "topojson"),
}
UNIT_CHOICES: dict[str, tuple[str, ...]] = {"precip_unit": ("", "in", "mm"),
                                            "temp_unit": ("", "F", "C")}


@dataclass(frozen=True)
class FormatSettings:
    """How each table's file is written (``[formats]``); ``"table"`` = the input contract.

    ``"zones"``: one series per zone (climate division, basin, grid cell) given to counties
    by the zone-to-county table ``zones`` (a file, relative to the data folder);
    ``zone_column`` names the zone id column of the per-zone files (blank = found by name).
    ``"quickstats"``: a NASS Quick Stats CSV export. ``"topojson"``: TopoJSON counties
    with the GEOID as feature id, kept for the counties in the data.
    """

    climate: str = "table"
    indicators: str = "table"
    yields: str = "table"
    counties: str = "table"
    zones: str = ""
    zone_column: str = ""


@dataclass(frozen=True)
class UnitSettings:
    """Units of per-zone climate files (``[units]``), converted once; blank = from the header."""

    precip_unit: str = ""  # "in" | "mm"
    temp_unit: str = ""  # "F" | "C"


def check_formats(formats: FormatSettings, units: UnitSettings, where: str) -> None:
    for table, allowed in TABLE_FORMATS.items():
        value = getattr(formats, table)
        if value not in allowed:
            raise ProjectError(f"{where}: [formats] {table} must be one of {allowed}, got "
                               f"{value!r}")
    zoned = [t for t in ("climate", "indicators") if getattr(formats, t) == "zones"]
    if zoned and not formats.zones:
        raise ProjectError(f"{where}: [formats] {zoned[0]} = \"zones\" needs the zone-to-county "
                           "table: add zones = \"FILE.csv\" under [formats]")
    for key, allowed in UNIT_CHOICES.items():
        if getattr(units, key) not in allowed:
            raise ProjectError(f"{where}: [units] {key} must be one of {allowed[1:]}, got "
                               f"{getattr(units, key)!r}")

