"""The report's matplotlib style and the helpers every figure module shares.

No function here touches disk or the pyplot state machine: each figure is a
:class:`matplotlib.figure.Figure` built directly (rendered by the Agg canvas), in the report's
own colour scheme (:mod:`impactlink.report.palette`). Every figure has labelled
axes with units; colours are backed by markers, line styles or hatching so a grey-scale
print still reads.
"""

from __future__ import annotations

import functools

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.palette import NEUTRAL

MARKERS = ("o", "s", "^", "D", "v", "P")


LINESTYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (1, 1)))


RC = {
    "font.size": 9,
    "axes.titlesize": 10,
    "axes.labelsize": 9,
    "axes.edgecolor": NEUTRAL["edge"],
    "axes.labelcolor": NEUTRAL["text"],
    "axes.grid": True,
    "grid.color": NEUTRAL["grid"],
    "grid.linewidth": 0.6,
    "xtick.color": NEUTRAL["text"],
    "ytick.color": NEUTRAL["text"],
    "text.color": NEUTRAL["text"],
    "legend.frameon": False,
    "legend.fontsize": 8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "savefig.dpi": 110,
    "figure.dpi": 110,
}


def styled(func):
    """Run a figure function inside the report's matplotlib style."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with matplotlib.rc_context(RC):
            return func(*args, **kwargs)

    return wrapper


def need_columns(frame: pd.DataFrame, columns, where: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise ReportError(
            f"{where}: frame lacks column(s) {missing}; it has {list(frame.columns)}. "
            "Pass the table the run folder holds under that name."
        )


def rows_where(frame: pd.DataFrame, where: str, **equal) -> pd.DataFrame:
    mask = np.ones(len(frame), dtype=bool)
    for col, value in equal.items():
        mask &= (frame[col] == value).fillna(False).to_numpy(dtype=bool)
    sub = frame.loc[mask]
    if sub.empty:
        what = ", ".join(f"{k}={v!r}" for k, v in equal.items())
        raise ReportError(f"{where}: no rows with {what}; nothing to draw")
    return sub


def row_chart(n_rows: int, *, row_height: float, pad: float):
    """A figure 6.4 in wide with one axes for ``n_rows`` horizontal rows: ``(fig, ax, y)``,
    ``y`` the row positions with the first row at the top. Height ``row_height * n_rows +
    pad`` [in]."""
    fig = Figure(figsize=(6.4, row_height * n_rows + pad), layout="constrained")
    return fig, fig.subplots(), np.arange(n_rows)[::-1]


def figure_png(fig: Figure, *, dpi: int = 110, colours: int = 128) -> bytes:
    """Render a Figure to PNG bytes with the Agg canvas, quantised to a palette.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    dpi : int, default 110
        Dots per inch.
    colours : int, default 128
        Size of the PNG palette (median-cut quantisation with Pillow, no dithering);
        0 keeps full colour. A chart's flat colours survive; the file is a third the size.

    Returns
    -------
    bytes
        PNG file content.
    """
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from PIL import Image

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    if not colours:
        return buf.getvalue()
    buf.seek(0)
    img = Image.open(buf).convert("RGB").quantize(colors=colours, method=Image.Quantize.MEDIANCUT,
                                                  dither=Image.Dither.NONE)
    out = io.BytesIO()
    img.save(out, format="PNG", optimize=True)
    return out.getvalue()
