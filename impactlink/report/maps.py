"""County maps of the report: pure functions, (Geo)DataFrames in, matplotlib Figure out.

Sequential quantities use the single-hue umber ramp (light = low, dark = high); categories use
the named categorical colours with a hatch pattern each, so a grey-scale print still
separates them; counties without a value are white with a grey outline and a dotted hatch.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.fig_style import styled
from impactlink.report.palette import NEUTRAL, category_colours, sequential_cmap
from impactlink.schema import COUNTY

__all__ = ["county_map", "county_panels", "MapPanel"]

_HATCHES = ("", "//", "..", "xx", "\\\\", "++", "oo", "--")


class MapPanel:
    """One panel of a multi-panel county map.

    Parameters
    ----------
    values : DataFrame
        ``county_id`` and ``column``.
    column : str
        Column to colour by.
    title : str
        Panel title.
    label : str
        Legend or colour-bar label, with units.
    kind : {"sequential", "categorical"}
        How to colour.
    vmin, vmax : float, optional
        Colour limits for sequential panels (shared limits make panels comparable).
    """

    __slots__ = ("values", "column", "title", "label", "kind", "vmin", "vmax")

    def __init__(self, values: pd.DataFrame, column: str, *, title: str, label: str,
                 kind: str = "sequential", vmin: float | None = None,
                 vmax: float | None = None) -> None:
        if kind not in ("sequential", "categorical"):
            raise ReportError(
                f"MapPanel: kind must be 'sequential' or 'categorical', got {kind!r}"
            )
        for col in (COUNTY, column):
            if col not in values.columns:
                raise ReportError(
                    f"MapPanel {title!r}: values lack column {col!r}; have {list(values.columns)}"
                )
        self.values, self.column, self.title, self.label = values, column, title, label
        self.kind, self.vmin, self.vmax = kind, vmin, vmax


def county_map(counties, values: pd.DataFrame, column: str, *, title: str, label: str,
               kind: str = "sequential", vmin: float | None = None,
               vmax: float | None = None) -> Figure:
    """One county map coloured by ``column`` of ``values`` (joined on ``county_id``).

    Parameters
    ----------
    counties : GeoDataFrame
        County outlines with ``county_id``.
    values : DataFrame
        ``county_id`` and ``column``; counties absent from it are drawn as "no value".
    column, title, label, kind, vmin, vmax
        See :class:`MapPanel`.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns, or ``counties`` without geometry.
    """
    panel = MapPanel(values, column, title=title, label=label, kind=kind, vmin=vmin, vmax=vmax)
    return county_panels(counties, [panel])


@styled
def county_panels(counties, panels: list[MapPanel], *, suptitle: str | None = None,
                  max_columns: int = 3) -> Figure:
    """Side-by-side county maps, one per :class:`MapPanel`.

    Parameters
    ----------
    counties : GeoDataFrame
        County outlines with ``county_id``.
    panels : list of MapPanel
    suptitle : str, optional
    max_columns : int, default 3
        Panels per row; more panels wrap onto further rows.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        No panels, or ``counties`` lacks ``county_id`` / geometry.
    """
    if not panels:
        raise ReportError("county_panels: panels is empty; pass at least one MapPanel")
    if max_columns < 1:
        raise ReportError(f"county_panels: max_columns must be >= 1, got {max_columns}")
    if counties is None or COUNTY not in counties.columns or not hasattr(counties, "geometry"):
        raise ReportError(
            f"county_panels: counties must be a GeoDataFrame with {COUNTY!r} and geometry"
        )
    minx, miny, maxx, maxy = counties.total_bounds
    aspect = (maxy - miny) / max(maxx - minx, 1e-9)
    width = 3.4
    ncol = min(len(panels), max_columns)
    nrow = -(-len(panels) // ncol)
    fig = Figure(figsize=(width * ncol, (width * aspect + 1.4) * nrow), layout="constrained")
    axes = np.atleast_1d(fig.subplots(nrow, ncol, squeeze=False).ravel())
    for k, ax in enumerate(axes):
        if k < len(panels):
            _draw_panel(ax, fig, counties, panels[k])
        else:
            ax.set_visible(False)
    if suptitle:
        fig.suptitle(suptitle, fontsize=10)
    return fig


def _draw_panel(ax, fig, counties, panel: MapPanel) -> None:
    vals = panel.values[[COUNTY, panel.column]].drop_duplicates(COUNTY)
    vals = vals.assign(**{COUNTY: vals[COUNTY].astype("string")})
    shapes = counties[[COUNTY, "geometry"]].assign(
        **{COUNTY: counties[COUNTY].astype("string")}
    )
    gdf = shapes.merge(vals, on=COUNTY, how="left")
    missing = gdf[panel.column].isna().to_numpy()
    ax.set_axis_off()
    ax.set_title(panel.title)
    if missing.any():
        gdf[missing].plot(ax=ax, color=NEUTRAL["missing"], edgecolor=NEUTRAL["baseline"],
                          hatch="...", linewidth=0.5)
        ax.plot([], [], marker="s", ls="", mfc="white", mec=NEUTRAL["baseline"], label="no value")
    have = gdf[~missing]
    if panel.kind == "categorical":
        cats = sorted(have[panel.column].astype(str).unique())
        colours = category_colours(len(cats))
        import matplotlib.patches as mpatches

        handles = []
        for k, cat in enumerate(cats):  # one draw per category (a handful), not per county
            part = have[(have[panel.column].astype(str) == cat).to_numpy()]
            hatch = _HATCHES[k % len(_HATCHES)]
            part.plot(ax=ax, color=colours[k], edgecolor=NEUTRAL["edge"], linewidth=0.5,
                      hatch=hatch)
            handles.append(mpatches.Patch(facecolor=colours[k], edgecolor=NEUTRAL["edge"],
                                          hatch=hatch, label=cat))
        if missing.any():
            handles.append(mpatches.Patch(facecolor="white", edgecolor=NEUTRAL["baseline"],
                                          hatch="...", label="no value"))
        ax.legend(handles=handles, title=panel.label, loc="upper center",
                  bbox_to_anchor=(0.5, -0.02), ncol=1, fontsize=7, title_fontsize=8)
        return
    numbers = pd.to_numeric(have[panel.column], errors="coerce").to_numpy(float)
    if numbers.size:
        vmin = panel.vmin if panel.vmin is not None else float(np.nanmin(numbers))
        vmax = panel.vmax if panel.vmax is not None else float(np.nanmax(numbers))
        if vmax <= vmin:
            vmax = vmin + 1e-9
        have.assign(_v=numbers).plot(ax=ax, column="_v", cmap=sequential_cmap(), vmin=vmin,
                                      vmax=vmax, edgecolor=NEUTRAL["edge"], linewidth=0.5)
        from matplotlib.cm import ScalarMappable
        from matplotlib.colors import Normalize

        sm = ScalarMappable(norm=Normalize(vmin, vmax), cmap=sequential_cmap())
        bar = fig.colorbar(sm, ax=ax, orientation="horizontal", shrink=0.85, pad=0.02)
        bar.set_label(panel.label)
    if missing.any():
        ax.legend(loc="lower left", fontsize=7)
