"""Area weights and point-in-county joins against hand-built geometry and shapely's areas."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from link_fixtures import lonlat_of
from pyproj import Transformer
from shapely.geometry import box

from impactlink.link import LinkError, LinkWarning, area_weights, points_to_counties


def test_area_weights_hand_built_squares(counties):
    w = area_weights(counties).set_index("county_id")
    # a 10x10 km, b 10x30 km in north; c, d 20x10 km each in south (exact in EPSG:5070)
    np.testing.assert_allclose(w["area_km2"], [100, 300, 200, 200], rtol=1e-12)
    np.testing.assert_allclose(w["weight"], [0.25, 0.75, 0.5, 0.5], rtol=1e-12)
    assert w.groupby("region")["weight"].sum().tolist() == pytest.approx([1.0, 1.0])


def test_area_weights_geographic_input_match_shapely_areas_after_projection():
    """Degree boxes of unequal area: weights equal shapely's areas of the same boxes projected
    with pyproj (independent path: shapely.ops.transform + Polygon.area)."""
    boxes = [box(-100, 40, -99, 41), box(-99, 40, -97, 41), box(-100, 30, -99, 31)]
    g = gpd.GeoDataFrame({"county_id": ["x", "y", "z"], "region": ["r", "r", "r"]},
                         geometry=boxes, crs="EPSG:4326")
    tr = Transformer.from_crs("EPSG:4326", "EPSG:5070", always_xy=True)
    # densify edges so both paths project the same curved outline
    def proj(xy):
        return np.column_stack(tr.transform(xy[:, 0], xy[:, 1]))

    areas = np.array([shapely.transform(b.segmentize(0.01), proj).area for b in boxes])
    w = area_weights(gpd.GeoDataFrame(g.drop(columns="geometry"),
                                      geometry=[b.segmentize(0.01) for b in boxes],
                                      crs="EPSG:4326"))
    np.testing.assert_allclose(w["weight"], areas / areas.sum(), rtol=1e-9)
    # a 1x1 degree box at 30N is larger than at 40N (cos latitude), as the weights show
    assert w["weight"].iloc[2] > w["weight"].iloc[0]


def test_trait_weights_replace_area(counties):
    trait = pd.Series({"a": 30.0, "b": 10.0, "c": np.nan, "d": 5.0}, name="hay_acres")
    with pytest.warns(LinkWarning, match="missing or negative trait"):
        w = area_weights(counties, trait=trait).set_index("county_id")
    np.testing.assert_allclose(w["weight"], [0.75, 0.25, 0.0, 1.0])


def test_points_join_to_the_containing_county(counties):
    pts = [lonlat_of(counties, c) for c in ("d", "a", "b")]
    lon, lat = zip(*pts)
    got = points_to_counties(list(lon) + [0.0, np.nan], list(lat) + [0.0, np.nan], counties)
    assert got.tolist() == ["d", "a", "b", None, None]


def test_point_on_a_shared_corner_goes_to_the_smallest_id():
    g = gpd.GeoDataFrame({"county_id": ["q", "p"]},
                         geometry=[box(-99, 40, -97, 41), box(-100, 40, -99, 41)],
                         crs="EPSG:4326")
    # (-99, 41) is a vertex of both boxes, so it projects onto both outlines exactly
    assert points_to_counties([-99.0], [41.0], g).tolist() == ["p"]
    assert points_to_counties([-98.0], [40.5], g).tolist() == ["q"]


def test_errors(counties):
    with pytest.raises(LinkError, match="no column 'region'"):
        area_weights(counties.drop(columns="region"))
    nocrs = gpd.GeoDataFrame(counties.drop(columns="geometry"), geometry=list(counties.geometry))
    with pytest.raises(LinkError, match="no CRS"):
        area_weights(nocrs)
    with pytest.raises(LinkError, match="no CRS"):
        points_to_counties([0.0], [0.0], nocrs)
    zero = pd.Series({"a": 0.0, "b": 0.0, "c": 1.0, "d": 1.0})
    with pytest.raises(LinkError, match=r"region\(s\) \['north'\] have total weight 0"):
        area_weights(counties, trait=zero)
