"""County boundaries from TopoJSON (feature id = 5-digit county GEOID) -> the counties table.

TopoJSON (Bostock and Metcalf, *The TopoJSON Format Specification*, 2013-2016,
https://github.com/topojson/topojson-specification) stores shared borders once as
delta-encoded, quantized arcs; the US county files distributed with the ``us-atlas``
package (from the Census cartographic boundary files) have an object ``counties`` whose
feature ``id`` is the county GEOID as a zero-padded string and whose property ``name`` is the
county name.

**Why GDAL.** The file is decoded by GDAL's TopoJSON driver (through pyogrio, already a
dependency of the inputs stage) rather than by a decoder of our own: the driver implements the
whole specification (quantized and unquantized topologies, reversed arc indices ``~i``,
polygons with holes, multipolygons, geometry collections, per-object layers) and is tested by
the GDAL project on many publishers' files, whereas a decoder written here would cover only
the cases we thought of. The tests check the driver's polygons against an independent numpy
decoding of the arcs written from the specification.

TopoJSON has no CRS member; coordinates of unprojected topologies are longitude and latitude
(the specification's default). The reader says so when it assumes EPSG:4326 and refuses
coordinates that cannot be degrees (a pre-projected topology), rather than guess a projection.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import InputError, InputWarning
from impactlink.schema import COUNTY
from impactlink.words import counted, verb

__all__ = ["GEOGRAPHIC_CRS", "sniff_topojson", "topojson_objects", "read_topojson_counties"]

#: Longitude/latitude on WGS 84, the coordinates of an unprojected TopoJSON file.
GEOGRAPHIC_CRS = "EPSG:4326"


def sniff_topojson(path: str | Path) -> bool:
    """True when the file is a TopoJSON topology (its JSON ``type`` is ``"Topology"``).

    Only the first 4 kB are looked at: ``"type": "Topology"`` opens the files TopoJSON
    writers produce; a full parse is left to :func:`read_topojson_counties`.
    """
    try:
        with open(path, encoding="utf-8-sig") as fh:
            head = fh.read(4096)
    except (OSError, UnicodeDecodeError):
        return False
    compact = "".join(head.split())
    return compact.startswith("{") and '"type":"Topology"' in compact


def topojson_objects(path: str | Path) -> list[str]:
    """Names of the objects (layers) of a TopoJSON file, as GDAL lists them."""
    import pyogrio

    try:
        return [str(name) for name, _ in pyogrio.list_layers(_without_bom(path))]
    except Exception as exc:  # pyogrio raises DataSourceError and friends
        raise InputError(f"{path}: cannot be read as TopoJSON ({_first_line(exc)}); check "
                         "that it is a TopoJSON topology") from None


def read_topojson_counties(path: str | Path, *, county_ids: Iterable[str] | None = None,
                           object_name: str = "counties", id_field: str = "id",
                           name_field: str = "name"):
    """County polygons of one TopoJSON object, filtered to the counties in the data.

    Parameters
    ----------
    path : str or Path
        TopoJSON file (e.g. ``counties-10m.json`` of ``us-atlas``).
    county_ids : iterable of str, optional
        Counties in the data (5-digit GEOIDs as text); default every feature.
    object_name : str, default "counties"
        The topology object holding the counties.
    id_field, name_field : str
        Feature member holding the GEOID and property holding the county name.

    Returns
    -------
    geopandas.GeoDataFrame
        ``county_id`` (text), ``county_name``, ``geometry`` in EPSG:4326, sorted by id.

    Raises
    ------
    InputError
        No such object, no id field, repeated ids, coordinates that are not degrees, or none
        of ``county_ids`` in the file.

    Warns
    -----
    InputWarning
        Some ``county_ids`` have no polygon in the file (they are listed).
    """
    import geopandas as gpd

    path = Path(path)
    if not path.exists():
        raise InputError(f"{path}: file not found; check the path of the county boundaries")
    if not sniff_topojson(path) and not _is_topology(path):
        raise InputError(f"{path}: not a TopoJSON topology (its JSON \"type\" is not "
                         "\"Topology\"); [formats] counties = \"topojson\" needs one: give the "
                         "TopoJSON file, or remove that line to read this file as a counties "
                         "table (GeoJSON, GeoPackage, shapefile)")
    layers = topojson_objects(path)
    if object_name not in layers:
        raise InputError(f"{path}: no TopoJSON object {object_name!r} (objects: {layers}); "
                         "name the object holding the counties")
    try:
        gdf = gpd.read_file(_without_bom(path), layer=object_name, engine="pyogrio")
    except Exception as exc:  # pyogrio raises DataSourceError, DataLayerError, ...
        raise InputError(f"{path}: object {object_name!r} cannot be read ({_first_line(exc)})"
                         ) from None
    if id_field not in gdf.columns:
        raise InputError(f"{path}: features of {object_name!r} have no {id_field!r} "
                         f"(fields: {[c for c in gdf.columns if c != 'geometry']}); give the "
                         "GEOID as the feature id")
    ids = _geoid_text(gdf[id_field])
    names = (gdf[name_field].astype("string").fillna("").astype(str) if name_field in gdf
             else pd.Series("", index=gdf.index))
    out = gpd.GeoDataFrame({COUNTY: ids.to_numpy(), "county_name": names.to_numpy()},
                           geometry=gdf.geometry.to_numpy(), crs=gdf.crs)
    # a feature without geometry is kept: the counties table rejects it by row, naming it
    blank = (out[COUNTY] == "").to_numpy()
    if len(out) and blank.all():
        raise InputError(f"{path}: no feature of {object_name!r} has an {id_field!r} "
                         f"({len(out)} features); give each feature its county GEOID as text "
                         f"in the feature member {id_field!r} (e.g. \"{id_field}\": \"01001\")")
    if blank.any():
        warnings.warn(f"{path}: {int(blank.sum())} of {len(out)} features of {object_name!r} "
                      f"have no {id_field!r} and are left out (features "
                      f"{', '.join(str(i + 1) for i in np.flatnonzero(blank)[:10])}); give "
                      "each feature its county GEOID as the feature id", InputWarning,
                      stacklevel=2)
    out = out[~blank]
    if county_ids is not None:
        wanted = pd.Index(sorted({str(c) for c in county_ids}))
        absent = wanted.difference(pd.Index(out[COUNTY]))
        out = out[out[COUNTY].isin(wanted)]
        if len(out) == 0:
            raise InputError(f"{path}: no county of the data ({len(wanted)}, e.g. "
                             f"{list(wanted[:3])}) is a feature id of {object_name!r}; the ids "
                             "must be 5-digit county GEOIDs as text")
        if len(absent):
            warnings.warn(f"{path}: {counted(len(absent), 'county', 'counties')} of the data "
                          f"{verb(len(absent), 'has', 'have')} no polygon in "
                          f"{object_name!r}: {list(absent[:10])}", InputWarning, stacklevel=2)
    dup = out[COUNTY].duplicated(keep=False)
    if dup.any():
        raise InputError(f"{path}: feature ids repeat in {object_name!r} "
                         f"({sorted(set(out.loc[dup, COUNTY]))[:5]}); each county must be one "
                         "feature")
    return _to_geographic(out, path).sort_values(COUNTY, ignore_index=True)


def _geoid_text(ids: pd.Series) -> pd.Series:
    """GEOIDs as text. Ids written as JSON numbers (``1001``: the leading zero is lost) come
    back from GDAL as numbers or digit strings shorter than 5; they are zero-padded to 5."""
    if pd.api.types.is_numeric_dtype(ids.dtype):
        text = ids.map(lambda v: "" if pd.isna(v) else str(int(v)))
    else:
        text = ids.astype("string").fillna("").str.strip()
    short = text.str.fullmatch(r"\d{1,4}")
    return text.where(~short, text.str.zfill(5)).astype(str)


def _to_geographic(gdf, path: Path):
    if gdf.crs is not None:
        from impactlink.inputs.counties import check_crs_range

        check_crs_range(gdf.geometry.to_numpy(), gdf.crs, path)  # a projected topology
        return gdf.to_crs(GEOGRAPHIC_CRS)
    xmin, ymin, xmax, ymax = (float(b) for b in np.asarray(gdf.total_bounds))  # nan: no shape
    if not (-180 <= xmin and xmax <= 180 and -90 <= ymin and ymax <= 90):
        raise InputError(f"{path}: coordinates are not longitude/latitude (bounds {xmin:.0f}, "
                         f"{ymin:.0f}, {xmax:.0f}, {ymax:.0f}): a projected topology; use the "
                         "unprojected file (e.g. counties-10m.json, not counties-albers-10m)")
    return gdf.set_crs(GEOGRAPHIC_CRS)


def _is_topology(path: Path) -> bool:
    """Whether the whole file parses as JSON with ``"type": "Topology"`` (the slow check, for
    files whose first 4 kB do not show it)."""
    import json

    try:
        with open(path, encoding="utf-8-sig") as fh:
            doc = json.load(fh)
    except (OSError, UnicodeDecodeError, ValueError):
        return False
    return isinstance(doc, dict) and doc.get("type") == "Topology"


def _without_bom(path: str | Path):  # noqa: ANN202 (a path or an in-memory file)
    """``path``, or its bytes without a leading UTF-8 byte-order mark, which GDAL's TopoJSON
    driver does not accept (it is valid UTF-8 text; RFC 8259 section 8.1 lets a parser
    ignore it)."""
    import io

    with open(path, "rb") as fh:
        if fh.read(3) != b"\xef\xbb\xbf":
            return path
        return io.BytesIO(fh.read())


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__

