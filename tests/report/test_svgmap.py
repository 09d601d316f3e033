"""Inline SVG county maps, first-screen words and display names (hand-built cases)."""

from __future__ import annotations

import re

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

from impactlink.errors import ReportError
from impactlink.report.palette import SEQUENCE, relative_luminance, sequential_hex
from impactlink.report.svgmap import map_shapes, svg_map
from impactlink.report.text import in_cadence, is_primary, level_name, target_name
from impactlink.report.words_answers import is_demo
from impactlink.schema import EQUAL_AREA_CRS


def _counties():
    return gpd.GeoDataFrame(
        {"county_id": ["90001", "90002", "90003"], "county_name": ["Tovova", "Brackwater",
                                                                   "<b>Elk</b>"]},
        geometry=[box(-100, 40, -99, 41), box(-99, 40, -98, 41), box(-100, 41, -98, 42)],
        crs="EPSG:4326")


def test_svg_map_has_one_titled_linked_path_per_county_with_one_decimal_coordinates():
    shapes = map_shapes(_counties())
    values = pd.DataFrame({"county_id": ["90001", "90002"], "prob": [0.25, 0.75]})
    svg = svg_map(shapes, values, "prob", title="Chance now", unit="chance (0 to 1)")
    assert svg.count("<path") == 3 and svg.count('<a href="#county-') == 3
    assert "<title>Tovova: 0.25 chance (0 to 1)</title>" in svg
    assert "<title>&lt;b&gt;Elk&lt;/b&gt;: no value</title>" in svg  # escaped, no markup
    assert re.search(r'<path d="[^"]+" fill="url\(#m[0-9a-f]{10}nv\)">', svg)  # no value: patterned
    numbers = re.findall(r"[ M](-?\d+(?:\.\d+)?),(-?\d+(?:\.\d+)?)", svg)
    assert numbers and all(len(x.split(".")[-1]) <= 1 for pair in numbers for x in pair
                           if "." in x)
    # The frame is 600 units wide: the projected state spans it exactly.
    xs = [float(x) for x, _ in numbers]
    assert min(xs) == pytest.approx(0, abs=0.1) and max(xs) == pytest.approx(600, abs=0.1)


def test_map_shapes_project_to_the_equal_area_crs():
    # Reference: geopandas / pyproj's own projection of the same outlines. The height /
    # width ratio of the drawn frame equals that of the projected bounds.
    c = _counties()
    minx, miny, maxx, maxy = c.to_crs(EQUAL_AREA_CRS).total_bounds
    shapes = map_shapes(c)
    assert shapes.height == pytest.approx(600 * (maxy - miny) / (maxx - minx), abs=0.1)
    assert shapes.area_rank[2] == 0  # the two-degree-wide county is the largest


def test_map_shapes_rejects_a_frame_without_county_ids():
    with pytest.raises(ReportError, match="county_id"):
        map_shapes(_counties().drop(columns="county_id"))


def test_sequential_hex_is_the_ramp_at_its_ends_and_darkens_monotonically():
    assert sequential_hex([0.0, 1.0], 0.0, 1.0) == [SEQUENCE[0], SEQUENCE[-1]]
    ramp = sequential_hex(np.linspace(0, 1, 25), 0.0, 1.0)
    assert np.all(np.diff(relative_luminance(ramp)) < 0)
    assert sequential_hex([np.nan, 2.0], 0.0, 1.0) == [None, SEQUENCE[-1]]  # clipped


def test_demo_detection_reads_the_manifest_not_the_folder():
    assert is_demo({"scenario": True}) and not is_demo({"scenario": False,
                                                        "project": {"name": "Vellmora demo"}})
    assert is_demo({"project": {"name": "Vellmora demonstration scenario"}})
    assert not is_demo({"project": {"name": "Tallow Creek Water Board"}}) and not is_demo(None)


def test_display_names_decode_internal_ids():
    assert target_name("restrictions", "restrictions:escalation:13w") == (
        "a move to a stricter level within 13 weeks")
    assert target_name("maize_shortfall", "maize_shortfall:maize:irrigated") == (
        "irrigated maize: yield-shortfall class")
    assert level_name("stage_2") == "level 2 or stricter"
    # Monthly cadence: 52 / 12 weeks a month (common practice), so 26 weeks is 6 months.
    assert in_cadence(26, "monthly") == "6 months" and in_cadence(0, "monthly") == "0 months"
    assert is_primary({"role": "annual", "target": "m:maize:rainfed"})
    assert not is_primary({"role": "annual", "target": "m:maize:rainfed:shortfall_20pct"})
    assert not is_primary({"role": "onset", "target": "restrictions:onset:4w"})
