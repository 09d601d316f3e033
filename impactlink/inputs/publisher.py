"""Tables given in a publisher's format (``[formats]`` of the project file), read into the contract.

:func:`read_published` reads, in this order, the zone-to-county table, Quick Stats yields,
TopoJSON counties (kept for the counties of the zone table and the yields), then per-zone
climate and indicators given to counties through the zone table. Each table comes back as a
clean contract frame, its rejected rows (the format reader's, same columns and row numbering
as the inputs stage's) and a count line with ``rows_read == rows_used + rows_rejected``.
The zone-to-county table is counted too (table ``zones``) so the manifest reconciles every
raw row, but it is not a contract table of the bundle.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from impactlink.inputs._errors import InputError, InputWarning
from impactlink.inputs._files import checksums_for
from impactlink.inputs.counties import _read_counties
from impactlink.inputs.formats._ledger import FormatResult
from impactlink.inputs.formats.crop_survey import read_quickstats
from impactlink.inputs.formats.topojson import read_topojson_counties
from impactlink.inputs.formats.zones import read_zone_climate, read_zone_indicators, read_zone_table
from impactlink.project import Project
from impactlink.schema import COUNTY

__all__ = ["Published", "read_published", "zone_table_path"]


@dataclass(frozen=True)
class Published:
    """One table read from a publisher's format.

    Attributes
    ----------
    clean : DataFrame
        The contract frame (a GeoDataFrame for counties).
    rejected : DataFrame
        Rejected raw rows (``table, file, row, column, value, reason``).
    counts : dict
        The bundle's count line (``table, file, rows_read, rows_used, rows_rejected,
        date_min, date_max, counties``).
    notes : tuple of str
        What the reader did (units converted, zones assigned, features kept).
    details : dict
        Reader extras (Quick Stats data items, county -> zone provenance).
    warnings : tuple of str
        Recoverable surprises (issued as :class:`InputWarning` by the inputs stage).
    """

    clean: pd.DataFrame
    rejected: pd.DataFrame
    counts: dict[str, Any]
    notes: tuple[str, ...] = ()
    details: dict[str, pd.DataFrame] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()


def zone_table_path(project: Project) -> Path:
    """The zone-to-county table of ``[formats] zones``, relative to the data folder."""
    return (Path(project.data_dir) / project.formats.zones).resolve()


def read_published(project: Project, files: dict[str, Path], *,
                   county_ids: list[str] | None = None
                   ) -> tuple[dict[str, Published], dict[str, str]]:
    """Read every table the project declares in a publisher format.

    Parameters
    ----------
    project : Project
        ``project.formats`` says which tables are not in the contract's own layout and where
        the zone-to-county table is; ``project.units`` gives the climate units.
    files : dict
        Contract table name -> file (from :func:`impactlink.inputs.resolve_files`).
    county_ids : list of str, optional
        Ids of the counties table when it is a contract table (read first). Rows of the zone
        table and of Quick Stats yields for other counties are rejected as "unknown county";
        with TopoJSON counties the same is done against the features kept.

    Returns
    -------
    published : dict
        Table name -> :class:`Published`; includes ``zones`` when a table uses zones.
    checksums : dict
        File -> SHA-256 of every file read here.

    Raises
    ------
    InputError
        From the format readers (file missing, not the format, no usable row), or a table
        declared ``"zones"`` whose zone table is missing.
    """
    fm, un = project.formats, project.units
    out: dict[str, Published] = {}
    sums: dict[str, str] = {}
    zoned = [t for t in ("climate", "indicators") if t in files and getattr(fm, t) == "zones"]
    zpath = zone_table_path(project)
    if zoned and not zpath.is_file():
        raise InputError(f"{zpath}: the zone-to-county table named by [formats] zones is "
                         f"not found; {zoned[0]} = \"zones\" needs it")
    quickstats = "yields" in files and fm.yields == "quickstats"

    def by_county(ids: list[str] | None) -> pd.DataFrame | None:
        """Read the zone table and the Quick Stats yields, rows of counties not in ``ids``
        rejected; the zone table's frame."""
        frame = None
        if zoned:
            res = read_zone_table(zpath, counties=ids)
            out["zones"] = _from_result(res, "zones")
            frame = res.frame
        if quickstats:
            out["yields"] = _from_result(read_quickstats(files["yields"], counties=ids),
                                         "yields")
        return frame

    zones = by_county(county_ids)
    if zoned:
        sums.update(checksums_for(zpath))
    if quickstats:
        sums.update(checksums_for(files["yields"]))
    if fm.counties == "topojson":
        wanted = _data_counties(zones, out.get("yields"))
        path = files["counties"]
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", InputWarning)
            gdf = read_topojson_counties(path, county_ids=wanted)
        surprises = [str(w.message) for w in caught]
        notes: list[str] = []
        clean, check = _read_counties(gdf, path, notes)
        kept = "every feature" if wanted is None else f"the {len(wanted)} counties of the data"
        notes.insert(0, f"{path}: TopoJSON counties, {len(clean)} features kept ({kept})")
        out["counties"] = Published(clean, check.rejected(), _count(
            "counties", str(path), check.n, check.n - int(check.alive.sum()), clean),
            tuple(notes), warnings=tuple(surprises))
        sums.update(checksums_for(path))
        polygons = clean[COUNTY].astype(str).tolist()
        if wanted is not None and set(wanted) - set(polygons):  # rows without a polygon
            zones = by_county(polygons)
    county_ids = _county_ids(out) or county_ids
    for table in zoned:
        assert zones is not None
        column = fm.zone_column or None
        if table == "climate":
            res = read_zone_climate(files[table], zones, zone_column=column,
                                    precip_unit=un.precip_unit or None,
                                    temp_unit=un.temp_unit or None, counties=county_ids)
        else:
            res = read_zone_indicators(files[table], zones, zone_column=column,
                                       counties=county_ids)
        out[table] = _from_result(res, table)
        sums.update(checksums_for(files[table]))
    return out, sums


def _from_result(res: FormatResult, table: str) -> Published:
    clean = res.frame.reset_index(drop=True)
    return Published(clean, res.rejected, _count(table, res.file, res.rows_read,
                                                 res.rows_rejected, clean),
                     res.notes, dict(res.details))


def _count(table: str, file: str, read: int, rejected: int, clean: pd.DataFrame
           ) -> dict[str, Any]:
    dmin = dmax = pd.NaT
    if "date" in clean and len(clean):
        dmin, dmax = clean["date"].min(), clean["date"].max()
    elif "year" in clean and len(clean):
        dmin = pd.Timestamp(int(clean["year"].min()), 1, 1)
        dmax = pd.Timestamp(int(clean["year"].max()), 12, 31)
    return {"table": table, "file": file, "rows_read": int(read), "rows_used": int(read - rejected),
            "rows_rejected": int(rejected), "date_min": dmin, "date_max": dmax,
            "counties": int(clean[COUNTY].nunique()) if COUNTY in clean else None}


def _data_counties(zones: pd.DataFrame | None, yields: Published | None) -> list[str] | None:
    """Counties named by the zone table and the yields (None: no table names any)."""
    ids: set[str] = set()
    if zones is not None:
        ids |= set(zones[COUNTY].astype(str))
    if yields is not None:
        ids |= set(yields.clean[COUNTY].astype(str))
    return sorted(ids) if ids else None


def _county_ids(out: dict[str, Published]) -> list[str] | None:
    """Counties of the TopoJSON layer (None when counties are a contract table)."""
    if "counties" in out:
        return out["counties"].clean[COUNTY].astype(str).tolist()
    return None

