"""The counties table: one polygon per county id, a CRS, a region for every county."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from impactlink.inputs._errors import REASONS, InputError
from impactlink.inputs._rules import TableCheck
from impactlink.inputs.table_rules import DEFAULT_REGION
from impactlink.schema import COUNTY, REGION


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
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    check.reject(empty, "geometry", "", REASONS["geometry"])
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
    valid = shapely.is_valid(geoms) | empty
    if not valid.all():
        geoms = geoms.copy()
        geoms[~valid] = shapely.make_valid(geoms[~valid])
        notes.append(f"{path}: {int((~valid).sum())} invalid geometries repaired with make_valid")
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

