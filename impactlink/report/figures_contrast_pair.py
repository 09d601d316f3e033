"""Side-by-side figure of one county contrast: index trajectories, impacts and parts, traits.

Pure function, frames in, :class:`matplotlib.figure.Figure` out, in the report's "estuary"
colours (:mod:`impactlink.report.palette`); the two counties differ by colour and by line
style or hatching, so a grey print still reads.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.fig_style import styled
from impactlink.report.palette import CATEGORICAL, NEUTRAL
from impactlink.report.text import index_name

__all__ = ["contrast_figure"]

_A, _B = CATEGORICAL["rust"], CATEGORICAL["harbour"]


@styled  # the report's one matplotlib style (9 pt text)
def contrast_figure(summary: pd.DataFrame, trajectories: pd.DataFrame,
                    traits_side: pd.DataFrame) -> Figure:
    """Three panels: index trajectories, impacts with the three parts, traits side by side.

    Parameters
    ----------
    summary : pandas.DataFrame
        One row of :attr:`ContrastDecomposition.summary`.
    trajectories : pandas.DataFrame
        ``county_id, year, week_offset, value`` (:attr:`ContrastDecomposition.trajectories`).
    traits_side : pandas.DataFrame
        ``label, unit, value_a, value_b`` (:attr:`ContrastDecomposition.traits_side`).

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        A frame lacks a column, or the summary is not one row.
    """
    _need(summary, ["county_a", "county_b", "county_name_a", "county_name_b", "index",
                    "scale_weeks", "expected_a", "expected_b", "exposure_pts",
                    "sensitivity_pts", "unexplained_pts"], "summary")
    _need(trajectories, ["county_id", "year", "week_offset", "value"], "trajectories")
    _need(traits_side, ["label", "unit", "value_a", "value_b"], "traits_side")
    if len(summary) != 1:
        raise ReportError(f"contrast_figure: summary has {len(summary)} rows; pass one row.")
    row = summary.iloc[0]
    fig = Figure(figsize=(9.6, 3.4), layout="constrained")
    ax1, ax2, ax3 = fig.subplots(1, 3, width_ratios=[1.3, 1.0, 1.1])
    names = {row["county_a"]: str(row["county_name_a"]),
             row["county_b"]: str(row["county_name_b"])}
    for cid, colour, style in ((row["county_a"], _A, "-"), (row["county_b"], _B, "--")):
        sub = trajectories[trajectories["county_id"] == cid]
        for k, (_, g) in enumerate(sub.groupby("year", sort=True)):
            ax1.plot(g["week_offset"], g["value"], color=colour, ls=style, lw=1.5,
                     marker="o" if cid == row["county_a"] else "s", ms=2.5,
                     label=names[cid] if k == 0 else None)
    ax1.axhline(0, color=NEUTRAL["baseline"], lw=0.8)
    ax1.set_xlabel("weeks before the reference week")
    ax1.set_ylabel(f"{int(row['scale_weeks'])}-week {index_name(row['index'])} "
                   "[index units]")
    ax1.set_title("index trajectories")
    ax1.legend(loc="best")
    ax2.bar([0, 1], [row["expected_a"], row["expected_b"]], color=[_A, _B],
            hatch=["", "//"], edgecolor=NEUTRAL["edge"])
    ax2.set_xticks([0, 1], [names[row["county_a"]], names[row["county_b"]]])
    parts = [row["exposure_pts"], row["sensitivity_pts"], row["unexplained_pts"]]
    base = float(row["expected_b"])
    for k, v in enumerate(parts):  # waterfall from b's expected impact to a's
        ax2.bar(2 + 0.6 * k, v, bottom=base, width=0.5, color=CATEGORICAL["marigold"]
                if k % 2 == 0 else CATEGORICAL["ink"], edgecolor=NEUTRAL["edge"])
        ax2.text(2 + 0.6 * k, base + v, f"{v:+.0f}", ha="center",
                 va="bottom" if v >= 0 else "top")
        base += float(v)
    ax2.set_xticks([0, 1, 2, 2.6, 3.2], [names[row["county_a"]], names[row["county_b"]],
                                         "exp.", "sens.", "unexpl."])
    levels = np.cumsum([float(row["expected_b"])] + [float(v) for v in parts])
    top = max(float(row["expected_a"]), float(row["expected_b"]), *levels)
    ax2.set_ylim(min(0.0, 1.15 * float(levels.min())), min(105.0, 1.15 * top + 2))
    ax2.axhline(0, color=NEUTRAL["baseline"], lw=0.8)
    ax2.set_ylabel("modelled chance of an impact [%]")
    ax2.set_title("expected impact and its parts")
    ax3.axis("off")
    cells = [[textwrap.fill(str(r["label"]), 22), _fmt(r["value_a"], r["unit"]), _fmt(r["value_b"], r["unit"])]
             for _, r in traits_side.iterrows()]
    table = ax3.table(cellText=cells, colLabels=["trait", names[row["county_a"]],
                                                 names[row["county_b"]]], loc="center",
                      cellLoc="left", colWidths=[0.44, 0.28, 0.28])
    table.auto_set_font_size(False)
    table.set_fontsize(6.5)
    table.scale(1.0, 2.4)
    ax3.set_title("county traits (real units)")
    return fig


def _fmt(v, unit) -> str:
    v = float(v)
    if not np.isfinite(v):
        return "n/a"
    digits = 1 if unit == "head/km²" or (unit == "" and abs(v) < 10) else 0
    return f"{v:.{digits}f} {unit}".strip()


def _need(frame: pd.DataFrame, cols, what: str) -> None:
    """Like :func:`~impactlink.report.fig_style.need_columns`, naming the decomposition part."""
    missing = [c for c in cols if c not in frame.columns]
    if missing:
        raise ReportError(f"contrast_figure: {what} lacks column(s) {missing}; pass the "
                          f"ContrastDecomposition.{what} frame.")
