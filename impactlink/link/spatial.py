"""Spatial steps of the linking stage: area (or trait) weights of counties within regions,
and the join of point-located records to the county that contains them."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd

from impactlink.link._common import LinkError, LinkWarning
from impactlink.schema import COUNTY, EQUAL_AREA_CRS

__all__ = ["area_weights", "points_to_counties"]


def area_weights(counties, *, by: str = "region", crs: str = EQUAL_AREA_CRS,
                 trait: pd.Series | None = None) -> pd.DataFrame:
    """Weights of each county within its region, for region-level predictors.

    Parameters
    ----------
    counties : geopandas.GeoDataFrame
        ``county_id``, geometry and the grouping column ``by``. Must carry a CRS.
    by : str, default "region"
        Column that names each county's region.
    crs : str, default ``impactlink.schema.EQUAL_AREA_CRS`` (EPSG:5070)
        Equal-area projection in which areas are measured (CONUS Albers by default).
    trait : pandas.Series, optional
        County characteristic indexed by ``county_id`` (for example harvested acres) to use as
        the weight instead of land area. Counties with a missing or negative trait get weight 0
        (a :class:`LinkWarning` says how many).

    Returns
    -------
    pandas.DataFrame
        region, county_id, weight (and ``area_km2``); weights sum to 1 within each region.

    Raises
    ------
    LinkError
        Missing columns, no CRS, or a region whose weights sum to zero.

    Notes
    -----
    :math:`w_{c} = a_c / \\sum_{c' \\in r} a_{c'}`, with :math:`a_c` the equal-area area of
    county *c* (or its trait value) and *r* its region: an area-weighted mean of county values
    (common practice).

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> from impactlink.schema import EQUAL_AREA_CRS
    >>> g = gpd.GeoDataFrame({"county_id": ["a", "b"], "region": ["r", "r"]},
    ...                      geometry=[box(0, 0, 1000, 1000), box(1000, 0, 4000, 1000)],
    ...                      crs=EQUAL_AREA_CRS)
    >>> area_weights(g)["weight"].tolist()
    [0.25, 0.75]
    """
    for col in (COUNTY, by):
        if col not in counties.columns:
            raise LinkError(
                f"area_weights: counties has no column {col!r} (columns: {list(counties.columns)}); "
                f"add a {col!r} column to the counties layer"
            )
    if getattr(counties, "crs", None) is None:
        raise LinkError(
            "area_weights: counties has no CRS; set one (e.g. counties.set_crs('EPSG:4326')) "
            "so areas can be measured in an equal-area projection"
        )
    proj = counties.to_crs(crs)
    out = pd.DataFrame({
        "region": counties[by].astype(str).to_numpy(),
        COUNTY: counties[COUNTY].astype(str).to_numpy(),
        "area_km2": proj.geometry.area.to_numpy() / 1e6,
    })
    if trait is None:
        raw = out["area_km2"].to_numpy()
    else:
        t = pd.Series(trait)
        t.index = t.index.astype(str)
        raw = t.reindex(out[COUNTY]).to_numpy(dtype=float)
        bad = ~np.isfinite(raw) | (raw < 0)
        if bad.any():
            warnings.warn(
                f"area_weights: {int(bad.sum())} counties have a missing or negative trait "
                f"{t.name!r}; they get weight 0", LinkWarning, stacklevel=2)
            raw = np.where(bad, 0.0, raw)
    total = pd.Series(raw).groupby(out["region"].to_numpy()).transform("sum").to_numpy()
    if (total <= 0).any():
        zero = sorted(set(out.loc[total <= 0, "region"]))
        raise LinkError(
            f"area_weights: region(s) {zero} have total weight 0; give them counties with a "
            "positive area or trait value"
        )
    out["weight"] = raw / total
    return out[["region", COUNTY, "weight", "area_km2"]]


def points_to_counties(lon, lat, counties, *, crs: str = EQUAL_AREA_CRS) -> np.ndarray:
    """County id holding each (lon, lat) point (WGS84 degrees); None where no county holds it.

    A point on a shared border belongs to the county with the smallest id (deterministic).
    Uses :func:`geopandas.sjoin` with the ``intersects`` predicate in ``crs``.
    """
    import geopandas as gpd

    lon = np.asarray(lon, dtype=float)
    lat = np.asarray(lat, dtype=float)
    out = np.full(len(lon), None, dtype=object)
    ok = np.isfinite(lon) & np.isfinite(lat)
    if not ok.any():
        return out
    if getattr(counties, "crs", None) is None:
        raise LinkError(
            "points_to_counties: counties has no CRS; set one so points (WGS84 lon/lat) can "
            "be placed"
        )
    pts = gpd.GeoDataFrame({"i": np.flatnonzero(ok)},
                           geometry=gpd.points_from_xy(lon[ok], lat[ok]), crs="EPSG:4326")
    poly = counties[[COUNTY, "geometry"]].copy()
    poly[COUNTY] = poly[COUNTY].astype(str)
    poly = poly.to_crs(crs)
    j = gpd.sjoin(pts.to_crs(crs), poly, how="inner", predicate="intersects")
    j = j.sort_values(["i", COUNTY]).drop_duplicates("i")
    out[j["i"].to_numpy()] = j[COUNTY].to_numpy()
    return out
