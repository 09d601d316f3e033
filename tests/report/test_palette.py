"""The "estuary" colour scheme reads in grey and under colour-vision deficiency.

Reference implementation: colorspacious (PyPI), which converts sRGB to CIE XYZ per
IEC 61966-2-1 and simulates colour-vision deficiency with the model of Machado, Oliveira &
Fernandes (2009), "A physiologically-based model for simulation of color vision
deficiency", IEEE TVCG 15(6), 1291-1298; distances are in CAM02-UCS (Luo, Cui & Li 2006),
where about 1 unit is a just-noticeable difference.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from matplotlib.colors import to_rgb

from impactlink.report.palette import (
    CATEGORICAL,
    SEQUENCE,
    category_colours,
    relative_luminance,
    sequential_cmap,
)

colorspacious = pytest.importorskip("colorspacious")


def test_relative_luminance_matches_cie_y_of_reference_library():
    # WCAG relative luminance is the Y of CIE XYZ for sRGB (IEC 61966-2-1, D65, Y of white
    # = 1); colorspacious computes it independently. Tolerance 1e-3: WCAG's 0.04045
    # linearisation cut-off versus the library's, which differ only near black.
    colours = ["#000000", "#ffffff", "#808080", *CATEGORICAL.values(), *SEQUENCE]
    ours = relative_luminance(colours)
    ref = np.array([colorspacious.cspace_convert(to_rgb(c), "sRGB1", "XYZ1")[1] for c in colours])
    np.testing.assert_allclose(ours, ref, atol=1e-3)
    # Mid grey #808080 has relative luminance 0.2159 (common practice: sRGB 128 -> 21.6 %).
    assert ours[2] == pytest.approx(0.2159, abs=1e-4)


def test_sequential_ramp_gets_darker_monotonically():
    rgba = sequential_cmap()(np.linspace(0, 1, 256))
    lum = relative_luminance(rgba)
    assert np.all(np.diff(lum) < 0), "the ramp must darken from low to high values"
    assert lum[0] - lum[-1] > 0.8, "the ramp must span light to dark"
    rev = relative_luminance(sequential_cmap(reverse=True)(np.linspace(0, 1, 256)))
    assert np.all(np.diff(rev) > 0)


@pytest.mark.parametrize("cvd", ["deuteranomaly", "protanomaly", "tritanomaly"])
def test_sequential_ramp_stays_ordered_under_colour_vision_deficiency(cvd):
    rgb = sequential_cmap()(np.linspace(0, 1, 64))[:, :3]
    sim = np.clip(colorspacious.cspace_convert(
        rgb, {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}, "sRGB1"), 0, 1)
    lightness = colorspacious.cspace_convert(sim, "sRGB1", "CAM02-UCS")[:, 0]
    assert np.all(np.diff(lightness) < 0)


def test_categorical_neighbours_differ_in_grey():
    lum = relative_luminance(list(CATEGORICAL.values()))
    # Neighbours in hand-out order must differ by at least 0.2 in relative luminance so
    # that two adjacent series stay apart on a grey-scale print.
    assert np.all(np.abs(np.diff(lum)) >= 0.2)


@pytest.mark.parametrize("cvd", ["deuteranomaly", "protanomaly", "tritanomaly"])
def test_categories_stay_apart_under_colour_vision_deficiency(cvd):
    rgb = np.array([to_rgb(c) for c in CATEGORICAL.values()])
    sim = np.clip(colorspacious.cspace_convert(
        rgb, {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}, "sRGB1"), 0, 1)
    ucs = colorspacious.cspace_convert(sim, "sRGB1", "CAM02-UCS")
    closest = min(np.linalg.norm(a - b) for a, b in itertools.combinations(ucs, 2))
    # 10 CAM02-UCS units is ten or so just-noticeable differences: clearly distinct.
    assert closest > 10


def test_category_colours_cycles_and_rejects_negative():
    six = list(CATEGORICAL.values())
    assert category_colours(8) == six + six[:2]
    assert category_colours(0) == []
    with pytest.raises(ValueError, match="n must be >= 0, got -1"):
        category_colours(-1)


def test_relative_luminance_rejects_a_bare_string():
    with pytest.raises(TypeError, match="wrap it in a list"):
        relative_luminance("#ffffff")
