"""County maps drawn as inline SVG: each county a path with its name and value in a
``<title>`` (a tooltip in every browser, no script), linked to its county card.

Counties are projected to the equal-area CRS of :mod:`impactlink.schema`, simplified
(Douglas-Peucker, via shapely) and written with one-decimal coordinates in a 600-unit-wide
frame. Sequential quantities use the report's single-hue ramp, with limits shared by every
panel of one quantity; categories use the categorical colours; counties without a value are
white with a grey dotted pattern.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np
import pandas as pd

from impactlink.errors import ReportError
from impactlink.report.html import Markup, el, esc
from impactlink.report.palette import NEUTRAL, SEQUENCE, category_colours, sequential_hex
from impactlink.schema import COUNTY, EQUAL_AREA_CRS

__all__ = ["MapShapes", "map_shapes", "svg_map"]

_WIDTH = 600.0


@dataclass(frozen=True)
class MapShapes:
    """Projected county outlines ready for SVG: ids, names, path data, label points."""

    ids: tuple[str, ...]
    names: tuple[str, ...]
    paths: tuple[str, ...]
    label_xy: tuple[tuple[float, float], ...]
    area_rank: tuple[int, ...]
    height: float
    #: counties whose shapes link to their card; None = every county
    linked: frozenset[str] | None = None


def map_shapes(counties, *, tolerance_share: float = 0.002,
               linked: frozenset[str] | None = None) -> MapShapes:
    """Project, simplify and scale county outlines once for all maps of a page.

    Parameters
    ----------
    counties : GeoDataFrame
        With ``county_id`` (and ``county_name``) and a CRS.
    tolerance_share : float, default 0.002
        Simplification tolerance as a share of the state's width.
    linked : frozenset of str, optional
        Counties that have a card to link to (default: every county).

    Raises
    ------
    ReportError
        If ``counties`` lacks ``county_id`` or geometry.
    """
    if counties is None or COUNTY not in counties.columns or not hasattr(counties, "geometry"):
        raise ReportError(f"svg map: counties must be a GeoDataFrame with {COUNTY!r} and geometry")
    gdf = counties.to_crs(EQUAL_AREA_CRS) if counties.crs is not None else counties
    minx, miny, maxx, maxy = gdf.total_bounds
    scale = _WIDTH / max(maxx - minx, 1e-9)
    geoms = gdf.geometry.simplify((maxx - minx) * tolerance_share, preserve_topology=True)
    paths = tuple(_path(g, minx, maxy, scale) for g in geoms)
    pts = gdf.geometry.representative_point()
    xy = tuple((round((p.x - minx) * scale, 1), round((maxy - p.y) * scale, 1)) for p in pts)
    order = np.argsort(-gdf.geometry.area.to_numpy())
    rank = np.empty(len(order), dtype=int)
    rank[order] = np.arange(len(order))
    names = (gdf["county_name"].astype(str) if "county_name" in gdf.columns
             else gdf[COUNTY].astype(str))
    return MapShapes(ids=tuple(gdf[COUNTY].astype(str)), names=tuple(names), paths=paths,
                     label_xy=xy, area_rank=tuple(int(r) for r in rank),
                     height=round((maxy - miny) * scale, 1), linked=linked)


def svg_map(shapes: MapShapes, values: pd.DataFrame | None, column: str | None, *, title: str,
            unit: str, kind: str = "sequential", vmin: float = 0.0, vmax: float = 1.0,
            digits: int = 2, n_labels: int = 6, extra: dict[str, str] | None = None,
            caption: str | None = None) -> Markup:
    """One county map as an inline ``<figure>`` holding an SVG.

    Parameters
    ----------
    shapes : MapShapes
    values : DataFrame or None
        ``county_id`` and ``column``; counties absent from it are "no value".
    column : str or None
    title, unit : str
        Map title and the legend's unit ("chance (0 to 1)").
    kind : {"sequential", "categorical"}
    vmin, vmax : float
        Colour limits (share them across panels of one quantity).
    digits : int
        Decimals of the value in each tooltip.
    n_labels : int
        How many of the largest counties get a name label.
    extra : dict, optional
        county id -> extra tooltip text.
    caption : str, optional
        Caption under the map.
    """
    key = Markup("")
    # ids of this map's pattern and gradient: one page holds many maps, and SVG ids are
    # document-wide (HTML Living Standard, "the id attribute"), so each map gets its own
    uid = "m" + hashlib.sha1(f"{title}|{column}|{caption}|{kind}".encode()).hexdigest()[:10]
    vals: dict[str, object] = {}
    if values is not None and column is not None and len(values):
        v = values.drop_duplicates(COUNTY)
        vals = dict(zip(v[COUNTY].astype(str), v[column], strict=True))
    raw = [vals.get(i) for i in shapes.ids]
    legend: list[Markup] = []
    if kind == "categorical":
        cats = sorted({str(x) for x in raw if _has(x)})
        colours = dict(zip(cats, category_colours(len(cats)), strict=True))
        fills = [colours.get(str(x)) if _has(x) else None for x in raw]
        text = [str(x) if _has(x) else "no value" for x in raw]
        legend = []
        key = el("ul", *[el("li", el("span", "", class_="sw", style=f"background:{c}"), cat)
                         for cat, c in colours.items()],
                 *([el("li", el("span", "", class_="sw nv"), "no value")] if None in fills
                   else []), class_="legend")
    else:
        nums = pd.to_numeric(pd.Series(raw, dtype=object), errors="coerce").to_numpy(float)
        fills = sequential_hex(nums, vmin, vmax)
        text = [f"{x:.{digits}f} {unit}" if np.isfinite(x) else "no value" for x in nums]
        legend = _ramp_legend(vmin, vmax, unit, shapes.height, digits, uid)
    body = []
    for k, cid in enumerate(shapes.ids):
        tip = f"{shapes.names[k]}: {text[k]}" + (f"; {extra[cid]}" if extra and cid in extra
                                                 else "")
        fill = fills[k] or f"url(#{uid}nv)"
        path = (f'<path d="{shapes.paths[k]}" fill="{fill}"><title>{esc(tip)}</title></path>')
        body.append(f'<a href="#county-{esc(cid)}">{path}</a>'
                    if shapes.linked is None or cid in shapes.linked else path)
    labels = [f'<text x="{x}" y="{y}">{esc(shapes.names[k])}</text>'
              for k, (x, y) in enumerate(shapes.label_xy) if shapes.area_rank[k] < n_labels]
    h = shapes.height + (60 if kind != "categorical" else 10)
    svg = (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {_WIDTH:.0f} {h:.0f}" '
           f'role="img" aria-label="{esc(title)}" class="map">'
           f'<defs><pattern id="{uid}nv" width="6" height="6" patternUnits="userSpaceOnUse">'
           f'<rect width="6" height="6" fill="#fff"/><circle cx="3" cy="3" r="0.9" '
           f'fill="{NEUTRAL["baseline"]}"/></pattern></defs>'
           f'<g stroke="{NEUTRAL["edge"]}" stroke-width="0.6">{"".join(body)}</g>'
           f'<g class="lab">{"".join(labels)}</g>{"".join(legend)}</svg>')
    cap = el("figcaption", caption) if caption else Markup("")
    return el("figure", el("div", el("strong", title), class_="maptitle"), Markup(svg), key, cap,
              class_="svgmap")


def _path(geom, minx: float, maxy: float, scale: float) -> str:
    polys = getattr(geom, "geoms", [geom])
    out = []
    for poly in polys:
        for ring in [poly.exterior, *poly.interiors]:
            c = np.asarray(ring.coords)[:, :2]
            x = np.round((c[:, 0] - minx) * scale, 1)
            y = np.round((maxy - c[:, 1]) * scale, 1)
            pts = " ".join(f"{a:g},{b:g}" for a, b in zip(x, y, strict=True))
            out.append(f"M{pts}Z")
    return "".join(out)


def _ramp_legend(vmin: float, vmax: float, unit: str, top: float, digits: int,
                 uid: str) -> list[Markup]:
    y = top + 14
    stops = "".join(f'<stop offset="{k / (len(SEQUENCE) - 1):.3f}" stop-color="{c}"/>'
                    for k, c in enumerate(SEQUENCE))
    return [Markup(
        f'<defs><linearGradient id="{uid}ramp">{stops}</linearGradient></defs>'
        f'<rect x="20" y="{y:.0f}" width="260" height="12" fill="url(#{uid}ramp)" '
        f'stroke="{NEUTRAL["edge"]}" stroke-width="0.5"/>'
        f'<text x="20" y="{y + 28:.0f}">{vmin:.{digits}f}</text>'
        f'<text x="280" y="{y + 28:.0f}" text-anchor="end">{vmax:.{digits}f}</text>'
        f'<text x="295" y="{y + 11:.0f}">{esc(unit)}</text>'
        f'<rect x="295" y="{y + 17:.0f}" width="14" height="12" fill="url(#{uid}nv)" '
        f'stroke="{NEUTRAL["edge"]}" stroke-width="0.5"/>'
        f'<text x="315" y="{y + 28:.0f}">no value</text>')]


def _has(value) -> bool:
    return value is not None and not (isinstance(value, float) and np.isnan(value)) and \
        value is not pd.NA
