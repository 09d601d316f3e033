"""Figures of the county contrasts section: odds ratios of county traits.

Pure functions, tidy frame in, matplotlib Figure out, drawn in the report's style
(:mod:`impactlink.report.fig_style`); the alt text beside each image is written by
the section that embeds it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.fig_style import need_columns, row_chart, rows_where, styled
from impactlink.report.palette import CATEGORICAL, NEUTRAL


@styled
def odds_ratio_chart(contrast: pd.DataFrame, *, target: str | None = None) -> Figure:
    """County traits: odds ratio per standard deviation with intervals (log axis).

    Parameters
    ----------
    contrast : DataFrame
        ``contrast.csv``: term, odds_ratio_per_sd, or_lo, or_hi and optionally target.
    target : str, optional
        Keep rows of this target only.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    An odds ratio above 1 means more impacts than the index alone predicts in counties with
    more of the trait; it is an association, not an effect.

    Raises
    ------
    ReportError
        Missing columns or no rows.
    """
    where = "odds_ratio_chart"
    need_columns(contrast, ["term", "odds_ratio_per_sd", "or_lo", "or_hi"], where)
    sub = rows_where(contrast, where, target=target) if target is not None else contrast
    sub = sub.dropna(subset=["odds_ratio_per_sd"])
    if sub.empty:
        raise ReportError(f"{where}: no odds ratios to draw")
    fig, ax, y = row_chart(len(sub), row_height=0.4, pad=1.3)
    est = sub["odds_ratio_per_sd"].to_numpy(float)
    err = np.nan_to_num(np.clip(np.vstack([est - sub["or_lo"].to_numpy(float),
                                           sub["or_hi"].to_numpy(float) - est]), 0, None))
    ax.errorbar(est, y, xerr=err, fmt="o", color=CATEGORICAL["ink"], capsize=2)
    ax.axvline(1, color=NEUTRAL["baseline"], ls="--", lw=1)
    ax.set_xscale("log")
    ax.set_yticks(y, sub["term"].astype(str))
    ax.set_xlabel("odds ratio per standard deviation of the trait (log scale; 1 = no association)")
    ax.set_title("county traits and impacts at similar index values" + (
        f"\n{target}" if target else ""), fontsize=9)
    return fig
