"""The report's own colour scheme, "estuary".

Two parts:

- :data:`CATEGORICAL` -- named colours for lines, points and categories. Neighbouring
  entries differ strongly in lightness, so they stay apart when printed in grey, and the
  hues sit on the blue/orange axis that colour-vision deficiencies keep (red/green pairs
  are avoided).
- :data:`SEQUENCE` -- anchor colours of a continuous single-hue ramp from pale linen to deep
  umber whose lightness falls monotonically, so larger values are always darker, in colour
  or in grey; a warm neutral hue, so a high chance of impact does not read as wet.

The scheme is our own; it is not taken from any map product. Tests check the lightness
order with the WCAG 2 relative-luminance formula and the separation of categories under
simulated colour-vision deficiency.

Notes
-----
Relative luminance (WCAG 2.1, "relative luminance" definition):
``Y = 0.2126 R + 0.7152 G + 0.0722 B`` on linearised sRGB channels, where a channel
``c`` in [0, 1] is linearised as ``c / 12.92`` if ``c <= 0.04045`` else
``((c + 0.055) / 1.055) ** 2.4``.

References
----------
W3C (2018). Web Content Accessibility Guidelines (WCAG) 2.1, definition of relative
luminance. https://www.w3.org/TR/WCAG21/#dfn-relative-luminance
"""

from __future__ import annotations

from types import MappingProxyType

import numpy as np

from impactlink.errors import ReportError

__all__ = [
    "PALETTE_NAME",
    "CATEGORICAL",
    "SEQUENCE",
    "NEUTRAL",
    "category_colours",
    "sequential_cmap",
    "relative_luminance",
    "sequential_hex",
]

PALETTE_NAME = "estuary"

#: Named categorical colours, in the order they are handed out. Lightness alternates
#: dark / light so that any two neighbours differ in grey.
CATEGORICAL = MappingProxyType(
    {
        "ink": "#1b2a49",  # deep navy
        "marigold": "#e8a33d",  # warm orange-gold
        "harbour": "#3b78b0",  # mid blue
        "shell": "#d9d2c3",  # pale stone
        "rust": "#9c4a1a",  # dark burnt orange
        "sky": "#9cc6e4",  # pale blue
    }
)

#: Anchors of the sequential ramp, lightest to darkest: one warm-neutral hue ("umber",
#: hue angle about 30-35 degrees) from pale linen to deep umber, so a high chance of impact
#: reads as dry and dark, never as wet. Continuous (interpolated), with no classes.
SEQUENCE = (
    "#f8f4ee",  # linen
    "#eadfcf",  # oat
    "#d6c1a6",  # sand
    "#bb9b78",  # tan
    "#96714f",  # umber
    "#6a4a31",  # deep umber
    "#3a2718",  # bark
)

#: Neutral colours for text, grid, baselines and "no data".
NEUTRAL = MappingProxyType(
    {
        "text": "#222222",
        "grid": "#d0d0d0",
        "baseline": "#6b6b6b",
        "missing": "#ffffff",
        "edge": "#5a5a5a",
    }
)


def category_colours(n: int) -> list[str]:
    """The first ``n`` categorical colours, cycling if more are asked for.

    Parameters
    ----------
    n : int
        Number of colours wanted (>= 0).

    Returns
    -------
    list of str
        Hex colours.

    Raises
    ------
    ReportError
        If ``n`` is negative.
    """
    if n < 0:
        raise ReportError(f"category_colours: n must be >= 0, got {n}")
    values = list(CATEGORICAL.values())
    return [values[i % len(values)] for i in range(n)]


def sequential_cmap(*, reverse: bool = False):
    """The "estuary" sequential ramp as a matplotlib colormap (light = low, dark = high).

    Parameters
    ----------
    reverse : bool, default False
        If True, dark = low and light = high.

    Returns
    -------
    matplotlib.colors.LinearSegmentedColormap
    """
    from matplotlib.colors import LinearSegmentedColormap

    anchors = list(SEQUENCE[::-1]) if reverse else list(SEQUENCE)
    name = f"{PALETTE_NAME}_r" if reverse else PALETTE_NAME
    return LinearSegmentedColormap.from_list(name, anchors, N=256).with_extremes(
        bad=NEUTRAL["missing"]
    )


def relative_luminance(colours) -> np.ndarray:
    """WCAG 2 relative luminance of colours (0 = black, 1 = white).

    Parameters
    ----------
    colours : sequence of str or array of shape (n, 3) or (n, 4)
        Hex strings or RGB(A) values in [0, 1].

    Returns
    -------
    numpy.ndarray of shape (n,)

    Notes
    -----
    See the module docstring for the formula (WCAG 2.1 definition).
    """
    from matplotlib.colors import to_rgb

    if isinstance(colours, str):
        raise TypeError(
            "relative_luminance: colours must be a sequence of colours, got a single string "
            f"{colours!r}; wrap it in a list"
        )
    rgb = np.asarray(
        [to_rgb(c) for c in colours] if not isinstance(colours, np.ndarray) else colours,
        dtype=float,
    )[:, :3]
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return lin @ np.array([0.2126, 0.7152, 0.0722])


def sequential_hex(values, vmin: float, vmax: float) -> list[str | None]:
    """Colours of the sequential ramp for ``values`` scaled to ``[vmin, vmax]`` (hex strings;
    ``None`` for missing values), for maps drawn as SVG.

    Parameters
    ----------
    values : array-like of float
    vmin, vmax : float
        Values at the lightest and darkest ends (shared across panels of one quantity).

    Returns
    -------
    list of str or None

    Examples
    --------
    >>> sequential_hex([0.0, 1.0, float("nan")], 0.0, 1.0)
    ['#f8f4ee', '#3a2718', None]
    """
    from matplotlib.colors import to_rgb

    v = np.asarray(values, dtype=float)
    span = max(float(vmax) - float(vmin), 1e-12)
    t = np.clip((v - float(vmin)) / span, 0.0, 1.0)
    anchors = np.asarray([to_rgb(c) for c in SEQUENCE])
    pos = np.linspace(0.0, 1.0, len(anchors))
    rgb = np.stack([np.interp(np.nan_to_num(t), pos, anchors[:, k]) for k in range(3)], axis=1)
    codes = np.rint(rgb * 255).astype(int)
    return [None if np.isnan(t[i]) else "#{:02x}{:02x}{:02x}".format(*tuple(codes[i])) for i in range(len(t))]
