"""Reading one table file into a raw frame (no validation beyond "can it be read")."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd

from impactlink.inputs._errors import InputError
from impactlink.inputs.discover import _GEO_EXTENSIONS, SUPPORTED_EXTENSIONS

__all__ = ["read_raw", "checksums_for"]

_SHAPEFILE_SIDECARS = (".dbf", ".shx", ".prj", ".cpg")


def read_raw(path: Path, *, geometry: bool, point_columns: bool = False):
    """Read a table file as it is.

    CSV files are read with every column as text (so ``"01001"`` keeps its leading zero and
    the rejected-rows table can show the value exactly as written); Parquet keeps its stored
    types; geometry files are read with pyogrio.

    Parameters
    ----------
    path : Path
        The file.
    geometry : bool
        The table needs a geometry (counties): return a GeoDataFrame.
    point_columns : bool
        The table accepts ``lon``/``lat``: when read from a geometry file of points that
        lacks them, take them from the points (in degrees).

    Returns
    -------
    pandas.DataFrame or geopandas.GeoDataFrame
        Column names stripped of surrounding white space.
    """
    ext = path.suffix.lower()
    if ext not in SUPPORTED_EXTENSIONS:
        raise InputError(
            f"{path}: unsupported file extension {ext or '(none)'!r}; save the table as CSV "
            f"(.csv) or Parquet (.parquet), or geometry as GeoPackage (.gpkg), GeoJSON "
            f"(.geojson) or Shapefile (.shp)"
        )
    if not path.exists():
        raise InputError(f"{path}: file not found; check the path under [tables] in the project file")
    if ext == ".csv":
        frame = _read_csv(path)
        if geometry:
            frame = _csv_geometry(frame, path)
    elif ext in (".parquet", ".pq"):
        frame = _read_parquet(path, geometry=geometry)
    else:
        frame = _read_geo(path)
        if not geometry:
            frame = _drop_geometry(frame, point_columns=point_columns)
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def _read_csv(path: Path) -> pd.DataFrame:
    try:
        return pd.read_csv(
            path,
            dtype=str,
            keep_default_na=False,
            na_filter=False,
            encoding="utf-8-sig",
            skip_blank_lines=False,  # keep row numbers equal to data lines of the file
        )
    except pd.errors.EmptyDataError:
        raise InputError(f"{path}: the file is empty; it needs a header row and data rows") from None
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        raise InputError(
            f"{path}: cannot be read as CSV ({_first_line(exc)}); save it as comma-separated "
            f"UTF-8 text with one header row"
        ) from None


def _csv_geometry(frame: pd.DataFrame, path: Path):
    """Counties given as CSV need a WKT ``geometry`` column."""
    import geopandas as gpd
    import shapely

    if "geometry" not in frame.columns:
        raise InputError(
            f"{path}: the counties table has no geometry; save it as GeoPackage (.gpkg), "
            f"GeoJSON or Shapefile, or add a 'geometry' column of WKT polygons"
        )
    text = frame["geometry"].str.strip()
    try:
        geoms = shapely.from_wkt(text.where(text != "").to_numpy(dtype=object), on_invalid="raise")
    except Exception as exc:  # shapely raises its own GEOSException subclasses
        raise InputError(
            f"{path}: column 'geometry' holds unreadable WKT ({_first_line(exc)}); "
            f"write polygons as WKT, e.g. 'POLYGON ((0 0, 1 0, 1 1, 0 0))'"
        ) from None
    return gpd.GeoDataFrame(frame.drop(columns="geometry"), geometry=geoms, crs=None)


def _read_parquet(path: Path, *, geometry: bool):
    if geometry:
        import geopandas as gpd

        try:
            return gpd.read_parquet(path)
        except ValueError as exc:
            if "geo" in str(exc).lower():
                raise InputError(
                    f"{path}: the counties table has no geometry (not a GeoParquet file); save "
                    f"it as GeoPackage (.gpkg), GeoJSON, Shapefile or GeoParquet"
                ) from None
            raise InputError(f"{path}: cannot be read as Parquet ({_first_line(exc)})") from None
        except Exception as exc:  # pyarrow raises ArrowInvalid and friends
            raise InputError(
                f"{path}: cannot be read as Parquet ({_first_line(exc)}); re-export the file"
            ) from None
    try:
        return _parquet_frame(path)
    except Exception as exc:  # pyarrow raises ArrowInvalid, OSError, ...
        raise InputError(
            f"{path}: cannot be read as Parquet ({_first_line(exc)}); re-export the file"
        ) from None


def _read_geo(path: Path):
    import geopandas as gpd

    try:
        return gpd.read_file(path, engine="pyogrio")
    except Exception as exc:  # pyogrio raises DataSourceError, DataLayerError, ...
        raise InputError(
            f"{path}: unreadable geometry file ({_first_line(exc)}); check that it opens in a "
            f"GIS, or re-export it as GeoPackage (.gpkg)"
        ) from None


def _drop_geometry(gdf, *, point_columns: bool) -> pd.DataFrame:
    """Attributes of a geometry file; points become lon/lat when the table takes them."""
    frame = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
    geom = gdf.geometry
    if point_columns and "lon" not in frame and "lat" not in frame and len(geom):
        if (geom.geom_type == "Point").all():
            if gdf.crs is not None and not gdf.crs.is_geographic:
                geom = geom.to_crs("EPSG:4326")
            frame["lon"], frame["lat"] = geom.x.to_numpy(), geom.y.to_numpy()
    return frame


def checksums_for(path: Path) -> dict[str, str]:
    """SHA-256 of a file (and of a shapefile's side files), keyed by path."""
    paths = [path]
    if path.suffix.lower() == ".shp":
        paths += [p for ext in _SHAPEFILE_SIDECARS if (p := path.with_suffix(ext)).exists()]
    out = {}
    for p in paths:
        h = hashlib.sha256()
        with open(p, "rb") as fh:
            for chunk in iter(lambda: fh.read(1 << 20), b""):
                h.update(chunk)
        out[str(p)] = h.hexdigest()
    return out


def is_geo_file(path: Path) -> bool:
    return path.suffix.lower() in _GEO_EXTENSIONS


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


def _parquet_frame(path: Path) -> pd.DataFrame:
    """A Parquet file as a frame, calendar dates (``date32`` / ``date64``) as datetime64[s].

    pyarrow turns a date column into one Python ``datetime.date`` object per row (about
    40 bytes each: 2 GB and minutes of parsing for a national daily climate table of 52 M
    rows); cast to a timestamp first, the column arrives as one int64 array.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pq.read_table(path)
    for k, f in enumerate(table.schema):
        if pa.types.is_date(f.type):
            table = table.set_column(k, f.name, table.column(k).cast(pa.timestamp("s")))
    return table.to_pandas()
