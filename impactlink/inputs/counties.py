"""The counties table: one polygon per county id, a CRS, a region for every county.

Geometry rules: a county without geometry (null or empty) is rejected by row, naming it; an
invalid polygon is repaired with :func:`shapely.make_valid` (the "structure" method, which
keeps polygons polygonal) and a warning names each county repaired and why it was invalid;
holes and multipolygons are kept as they are; coordinates outside the declared CRS's range
(projected metres labelled as degrees, or degrees labelled as a projection) are fatal.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import REASONS, InputError
from impactlink.inputs._rules import TableCheck
from impactlink.inputs.table_rules import DEFAULT_REGION
from impactlink.schema import COUNTY, REGION
from impactlink.words import counted, verb


def _read_counties(gdf, path: Path, notes: list[str]) -> tuple[pd.DataFrame, TableCheck]:
    import geopandas as gpd
    import shapely

    geom_name = gdf.geometry.name if isinstance(gdf, gpd.GeoDataFrame) else None
    if geom_name is None:
        raise InputError(
            f"{path}: the counties table has no geometry; save it as GeoPackage, GeoJSON or "
            f"Shapefile"
        )
    geoms = gdf.geometry.to_numpy()
    crs = gdf.crs
    attrs = pd.DataFrame(gdf.drop(columns=geom_name))
    check = TableCheck("counties", str(path), attrs)
    check.coerce(COUNTY, "id", required=True)
    for col in ("county_name", REGION):
        if col in attrs:
            check.coerce(col, "str", required=False)
    labels = _labels(check.clean[COUNTY], check.clean.get("county_name"))
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    check.reject(empty, "geometry", labels, REASONS["geometry"])
    if pd.api.types.is_numeric_dtype(attrs[COUNTY].dtype):
        notes.append(
            f"{path}: county_id is stored as numbers; ids with leading zeros (e.g. county "
            f"GEOIDs like 01001) have lost them. Store county_id as text"
        )
    ids = check.clean[COUNTY]
    dup = ids.duplicated(keep=False).to_numpy() & check.alive
    if dup.any():
        rows = check.rows[dup][:6].tolist()
        raise InputError(
            f"{path}: county_id repeats ({sorted(set(ids[dup]))[:5]} at rows {rows}); each "
            f"county must appear once: merge the parts into one (multi)polygon per county"
        )
    check_crs_range(geoms, crs, path)
    valid = shapely.is_valid(geoms) | empty
    if not valid.all():
        geoms = _repair(geoms, ~valid, labels, path, notes)
        collapsed = shapely.is_empty(geoms) & ~empty
        check.reject(collapsed, "geometry", labels, REASONS["geometry"])
        empty = empty | collapsed
    if crs is None:
        xmin, ymin, xmax, ymax = shapely.total_bounds(geoms[~empty])
        if -180 <= xmin and xmax <= 180 and -90 <= ymin and ymax <= 90:
            crs = "EPSG:4326"
            notes.append(f"{path}: no coordinate reference system; assuming EPSG:4326 (degrees)")
        else:
            raise InputError(
                f"{path}: no coordinate reference system and the coordinates are not degrees "
                f"(bounds {xmin:.0f}, {ymin:.0f}, {xmax:.0f}, {ymax:.0f}); save the file with "
                f"its CRS (e.g. a .prj beside a shapefile)"
            )
    if not check.alive.any():
        why = check.rejected()["reason"].value_counts().to_dict()
        raise InputError(
            f"{path}: the counties table has no usable county ({check.n} rows; problems: "
            f"{why or 'none'}); each county needs a county_id and a polygon"
        )
    columns = [c for c in (COUNTY, "county_name", REGION) if c in attrs]
    clean = check.used(columns)
    if REGION not in clean:
        clean[REGION] = DEFAULT_REGION
        notes.append(
            f"{path}: no 'region' column; every county is put in region {DEFAULT_REGION!r}"
        )
    elif (clean[REGION] == "").any():
        n = int((clean[REGION] == "").sum())
        clean[REGION] = clean[REGION].where(clean[REGION] != "", DEFAULT_REGION)
        notes.append(f"{path}: {n} counties have a blank region; put in {DEFAULT_REGION!r}")
    out = gpd.GeoDataFrame(clean, geometry=geoms[check.alive], crs=crs)
    return out, check



def _labels(ids: pd.Series, names: pd.Series | None) -> pd.Series:
    """``county 01001 (Alder)`` per row, for messages and the rejected-rows ``value``."""
    text = "county " + ids.astype(str)
    if names is not None:
        named = names.astype(str).str.strip() != ""
        text = text.where(~named.to_numpy(), text + " (" + names.astype(str) + ")")
    return text.reset_index(drop=True)


def _repair(geoms, bad, labels: pd.Series, path: Path, notes: list[str], most: int = 50):  # noqa: ANN001, ANN202
    """Invalid shapes made valid; one warning names each county repaired (up to ``most``)."""
    import shapely

    geoms = geoms.copy()
    why = shapely.is_valid_reason(geoms[bad])
    geoms[bad] = shapely.make_valid(geoms[bad], method="structure", keep_collapsed=False)
    idx = np.flatnonzero(bad)
    named = [f"{labels.iloc[i]}: {w}" for i, w in zip(idx[:most], why[:most], strict=False)]
    more = f"; and {idx.size - most} more" if idx.size > most else ""
    notes.append(f"{path}: {idx.size} invalid polygon(s) repaired with make_valid (holes and "
                 f"parts kept; check the boundaries): {'; '.join(named)}{more}")
    return geoms


def check_crs_range(geoms, crs, path: Path | str) -> None:  # noqa: ANN001
    """Stop when the coordinates cannot be in the declared CRS.

    Degrees (a geographic CRS such as EPSG:4326) lie within longitude -180..180 and latitude
    -90..90 by definition; larger values are projected coordinates (metres or feet) labelled
    as degrees. A projected layer whose coordinates all lie within those ranges spans less
    than a kilometre around the projection's origin: degrees labelled as a projection.

    Raises
    ------
    InputError
        Naming the file, the largest coordinate and the CRS, and how to fix the label.
    """
    import shapely
    from pyproj import CRS

    if crs is None:
        return
    c = CRS.from_user_input(crs)
    b = np.asarray(shapely.total_bounds(geoms), dtype=float)
    if not np.isfinite(b).all():
        return
    name = c.to_string()
    degrees = abs(b[0]) <= 180 and abs(b[2]) <= 180 and abs(b[1]) <= 90 and abs(b[3]) <= 90
    if c.is_geographic and not degrees:
        top = float(np.abs(b).max())
        raise InputError(
            f"{path}: coordinates up to {top:.0f} lie outside {name}'s range (lon -180..180, "
            f"lat -90..90): the layer looks projected; set the layer's CRS correctly (e.g. "
            f"re-save it with its real EPSG code)")
    if c.is_projected and degrees:
        unit = c.axis_info[0].unit_name if c.axis_info else "units"
        raise InputError(
            f"{path}: every coordinate lies within -180..180 and -90..90 (bounds {b[0]:.2f}, "
            f"{b[1]:.2f}, {b[2]:.2f}, {b[3]:.2f}), a few hundred {unit} around the origin of "
            f"{name}: the layer looks like longitude/latitude labelled {name}; set the layer's "
            f"CRS correctly (e.g. re-save it as EPSG:4326)")


def counties_without_polygon(rejected: pd.DataFrame, counties_file: Path | str,
                             most: int = 10) -> list[str]:
    """Warnings naming, per table, the counties that have rows but no polygon.

    Such rows are rejected as "unknown county" by row; the warning says which counties they
    belong to and why they have no polygon (an empty geometry in the counties table, or no
    row there at all).
    """
    geo = rejected[(rejected["table"] == "counties") & (rejected["reason"] == REASONS["geometry"])]
    empty = dict(zip(geo["value"].astype(str).str.extract(r"^county (\S+)")[0], geo["row"],
                     strict=True))
    unknown = rejected[(rejected["reason"] == REASONS["unknown_county"])
                       & (rejected["column"] == COUNTY) & (rejected["table"] != "counties")]
    out = []
    for (table, file), grp in unknown.groupby(["table", "file"], sort=False):  # a few tables
        n = grp["value"].astype(str).value_counts()
        named = [f"{c} ({k} row{'s' if k != 1 else ''}; " + (f"its geometry is empty, counties row {empty[c]})"
                                       if c in empty else "not in the counties table)")
                 for c, k in n.head(most).items()]
        more = f"; and {len(n) - most} more" if len(n) > most else ""
        out.append(f"{file}: {counted(len(n), 'county', 'counties')} of the {table} table "
                   f"{verb(len(n), 'has', 'have')} no polygon in "
                   f"{counties_file}: {', '.join(named)}{more}; their rows are rejected as "
                   f"unknown county: give each county a polygon in the counties table, or "
                   f"correct the id")
    return out
