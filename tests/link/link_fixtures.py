"""Small hand-built geometry and weekly grids for the linking tests."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

from impactlink.indices.cube import IndexCube

#: Origin of the test grid in CONUS Albers (EPSG:5070) metres: a point inside the projection's
#: intended area; the squares are exact in this projection, so their areas are known.
X0, Y0 = 0.0, 1_800_000.0


@pytest.fixture
def counties() -> gpd.GeoDataFrame:
    """Four counties in EPSG:5070: a, b in region "north" (10x10 km and 10x30 km), c, d in
    "south" (20x10 km each)."""
    geoms = [
        box(X0, Y0, X0 + 10_000, Y0 + 10_000),            # a: 100 km2
        box(X0 + 10_000, Y0, X0 + 40_000, Y0 + 10_000),   # b: 300 km2
        box(X0, Y0 - 10_000, X0 + 20_000, Y0),            # c: 200 km2
        box(X0 + 20_000, Y0 - 10_000, X0 + 40_000, Y0),   # d: 200 km2
    ]
    return gpd.GeoDataFrame({"county_id": ["a", "b", "c", "d"],
                             "region": ["north", "north", "south", "south"]},
                            geometry=geoms, crs="EPSG:5070")


def lonlat_of(counties: gpd.GeoDataFrame, county: str) -> tuple[float, float]:
    """WGS84 lon/lat of a county's centroid (for point-located records)."""
    pt = counties.set_index("county_id").geometry.centroid.to_crs("EPSG:4326")[county]
    return float(pt.x), float(pt.y)


def mondays(start: str, n: int) -> pd.DatetimeIndex:
    return pd.date_range(start, periods=n, freq="7D")


def cube_from(weeks: pd.DatetimeIndex, county_ids, values: np.ndarray, *, index="spi",
              scale=4) -> IndexCube:
    return IndexCube(weeks=weeks, county_ids=tuple(county_ids),
                     arrays={(index, scale): np.asarray(values, dtype=float)})
