"""County geometry from TopoJSON: empty features rejected by name, holes kept, ranges checked.

The topologies are written here by hand from the TopoJSON specification (Bostock and
Metcalf, https://github.com/topojson/topojson-specification: unquantized arcs are absolute
positions; a polygon is a list of rings, each a list of arc indices; the first ring is the
exterior, the others holes). Areas are checked with the shoelace formula (common practice).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from impactlink.errors import InputError
from impactlink.inputs.counties import _read_counties, check_crs_range
from impactlink.inputs.formats.topojson import read_topojson_counties

OUTER = [[-93.0, 41.0], [-92.0, 41.0], [-92.0, 42.0], [-93.0, 42.0], [-93.0, 41.0]]
HOLE = [[-92.6, 41.4], [-92.6, 41.6], [-92.4, 41.6], [-92.4, 41.4], [-92.6, 41.4]]


def _topology(path: Path, geometries: list[dict], arcs: list) -> Path:
    path.write_text(json.dumps({"type": "Topology", "arcs": arcs, "objects": {
        "counties": {"type": "GeometryCollection", "geometries": geometries}}}))
    return path


def _shoelace(ring) -> float:
    r = np.asarray(ring, dtype=float)
    x, y = r[:, 0], r[:, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def test_topojson_county_with_a_hole_keeps_it(tmp_path):
    path = _topology(tmp_path / "c.json", [
        {"type": "Polygon", "id": "19001", "properties": {"name": "Alder"}, "arcs": [[0], [1]]}],
        [OUTER, HOLE])
    g = read_topojson_counties(path)
    geom = g.geometry.iloc[0]
    assert len(geom.interiors) == 1
    assert geom.area == pytest.approx(_shoelace(OUTER) - _shoelace(HOLE))


def test_topojson_feature_without_geometry_is_rejected_by_name(tmp_path):
    path = _topology(tmp_path / "c.json", [
        {"type": "Polygon", "id": "19001", "properties": {"name": "Alder"}, "arcs": [[0]]},
        {"type": "Polygon", "id": "19003", "properties": {"name": "Birch"}, "arcs": []}],
        [OUTER])
    g = read_topojson_counties(path)
    assert g["county_id"].tolist() == ["19001", "19003"]
    clean, check = _read_counties(g, path, [])
    assert clean["county_id"].tolist() == ["19001"]
    rej = check.rejected()
    assert rej[["row", "column", "value", "reason"]].values.tolist() == [
        [2, "geometry", "county 19003 (Birch)", "missing geometry"]]


def test_projected_topology_is_fatal_naming_the_file(tmp_path):
    arcs = [[[100000.0, 200000.0], [300000.0, 200000.0], [300000.0, 400000.0],
             [100000.0, 400000.0], [100000.0, 200000.0]]]
    path = _topology(tmp_path / "albers.json", [
        {"type": "Polygon", "id": "19001", "arcs": [[0]]}], arcs)
    with pytest.raises(InputError, match=r"albers\.json: coordinates are not longitude/latitude"):
        read_topojson_counties(path)


def test_range_of_another_geographic_crs():
    import shapely

    geoms = np.array([shapely.box(500000, 4500000, 600000, 4600000)])
    with pytest.raises(InputError) as exc:
        check_crs_range(geoms, "EPSG:4269", "counties.shp")  # NAD83 degrees
    assert str(exc.value) == (
        "counties.shp: coordinates up to 4600000 lie outside EPSG:4269's range (lon -180..180, "
        "lat -90..90): the layer looks projected; set the layer's CRS correctly (e.g. re-save "
        "it with its real EPSG code)")
    check_crs_range(np.array([shapely.box(-93, 41, -92, 42)]), "EPSG:4269", "counties.shp")
