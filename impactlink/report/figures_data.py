"""Figures of the data section: the record span of each input.

Pure functions, tidy frame in, matplotlib Figure out, drawn in the report's style
(:mod:`impactlink.report.fig_style`); the alt text beside each image is written by
the section that embeds it.
"""

from __future__ import annotations

import matplotlib.dates as mdates
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.fig_style import need_columns, row_chart, styled
from impactlink.report.palette import CATEGORICAL


@styled
def record_timeline(inputs: pd.DataFrame) -> Figure:
    """Record span of every input table as a horizontal bar.

    Parameters
    ----------
    inputs : DataFrame
        One row per input: table, date_min, date_max (ISO dates) and optionally rows_used.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns or no dated rows.
    """
    where = "record_timeline"
    need_columns(inputs, ["table", "date_min", "date_max"], where)
    d = inputs.assign(
        start=pd.to_datetime(inputs["date_min"], errors="coerce"),
        end=pd.to_datetime(inputs["date_max"], errors="coerce"),
    ).dropna(subset=["start", "end"])
    if d.empty:
        raise ReportError(f"{where}: no input has both date_min and date_max")
    fig, ax, y = row_chart(len(d), row_height=0.36, pad=1.2)
    start = mdates.date2num(d["start"])
    span = mdates.date2num(d["end"]) - start
    ax.barh(y, span, left=start, color=CATEGORICAL["harbour"], edgecolor=CATEGORICAL["ink"],
            height=0.55)
    ax.set_yticks(y, d["table"].astype(str))
    ax.xaxis_date()
    ax.set_xlabel("date (year)")
    ax.set_title("record span of each input")
    return fig
