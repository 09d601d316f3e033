"""Figures of trigger plans: the tuning trade-off and a per-unit timeline.

Pure functions: a tidy frame of the run folder in, a :class:`matplotlib.figure.Figure` out,
in the report's style and its own palette (:mod:`impactlink.report.palette`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.fig_style import need_columns as _need
from impactlink.report.fig_style import styled as _styled
from impactlink.report.palette import CATEGORICAL, NEUTRAL, category_colours, sequential_cmap

__all__ = ["tuning_tradeoff", "plan_timeline"]


@_styled
def tuning_tradeoff(curve: pd.DataFrame, *, title: str = "") -> Figure:
    """Hit rate against false-alarm ratio, and weeks in stage, as the threshold moves.

    Parameters
    ----------
    curve : pandas.DataFrame
        ``trigger_plan_tuning.csv``: ``threshold, enter_weeks, hit_rate, false_alarm_ratio,
        weeks_in_stage_share, chosen``.
    title : str
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
        Left: one line per number of entry weeks through the thresholds (hit rate on y,
        false-alarm ratio on x); right: share of unit-weeks in the stage against the
        threshold. The chosen candidate is ringed in both panels.

    Raises
    ------
    ReportError
        If a column is missing or no row is marked chosen.
    """
    where = "tuning_tradeoff"
    _need(curve, ["threshold", "enter_weeks", "hit_rate", "false_alarm_ratio",
                  "weeks_in_stage_share", "chosen"], where)
    chosen = curve[curve["chosen"].astype(bool)]
    if chosen.empty:
        raise ReportError(f"{where}: no row has chosen = True; pass the whole tuning curve")
    fig = Figure(figsize=(7.2, 3.2), layout="constrained")
    left, right = fig.subplots(1, 2)
    groups = sorted(curve["enter_weeks"].unique())
    for colour, n in zip(category_colours(len(groups)), groups, strict=True):
        g = curve[curve["enter_weeks"] == n].sort_values("threshold")
        label = f"{int(n)} week{'s' if n != 1 else ''} to enter"
        left.plot(g["false_alarm_ratio"], g["hit_rate"], "-o", color=colour, ms=3, lw=1.2,
                  label=label)
        right.plot(g["threshold"], g["weeks_in_stage_share"], "-o", color=colour, ms=3, lw=1.2)
    c = chosen.iloc[0]
    for ax, x, y in ((left, c.false_alarm_ratio, c.hit_rate),
                     (right, c.threshold, c.weeks_in_stage_share)):
        ax.plot([x], [y], "o", ms=11, mfc="none", mec=CATEGORICAL["rust"], mew=2,
                label="chosen" if ax is left else None)
        ax.grid(color=NEUTRAL["grid"], lw=0.5)
    left.set_xlabel("false-alarm ratio (share of stage weeks without impact)")
    left.set_ylabel("hit rate (share of impact weeks in stage)")
    left.set_xlim(0, 1)
    left.set_ylim(0, 1)
    right.set_xlabel("entry threshold")
    right.set_ylabel("share of weeks in stage")
    left.legend(loc="lower right")
    if title:
        fig.suptitle(title, fontsize=10)
    return fig


@_styled
def plan_timeline(timeline: pd.DataFrame, *, unit: str, stage_names=(), title: str = "") -> Figure:
    """Indicators, thresholds, stages and impact episodes of one unit on one time axis.

    Parameters
    ----------
    timeline : pandas.DataFrame
        ``trigger_plan_timeline.csv``: ``unit, week, indicator, value, enter_threshold,
        exit_threshold, stage, impact_level``.
    unit : str
        The unit to draw.
    stage_names : sequence of str
        Names of stages 1..S (labels of the stage axis).
    title : str

    Returns
    -------
    matplotlib.figure.Figure
        Top: each indicator with its entry (solid) and exit (dotted) thresholds; middle: the
        stage as a step line; bottom: impact level, shaded darker for higher levels, blank
        where the impact could not be recorded.

    Raises
    ------
    ReportError
        If a column is missing or the unit has no rows.
    """
    where = "plan_timeline"
    _need(timeline, ["unit", "week", "indicator", "value", "enter_threshold",
                     "exit_threshold", "stage", "impact_level"], where)
    sub = timeline[timeline["unit"].astype(str) == str(unit)]
    if sub.empty:
        raise ReportError(f"{where}: no rows for unit {unit!r}; units are "
                          f"{sorted(timeline['unit'].astype(str).unique())[:5]}")
    fig = Figure(figsize=(7.2, 4.6), layout="constrained")
    ax_i, ax_s, ax_e = fig.subplots(3, 1, sharex=True, height_ratios=[3, 1.4, 0.7])
    indicators = list(dict.fromkeys(sub["indicator"]))
    for colour, ind in zip(category_colours(2 * len(indicators))[::2], indicators, strict=True):
        g = sub[sub["indicator"] == ind]
        weeks = pd.DatetimeIndex(g["week"])
        ax_i.plot(weeks, g["value"], color=colour, lw=0.9, label=ind)
        ax_i.plot(weeks, g["enter_threshold"], color=colour, lw=1.2, ls="-", alpha=0.6)
        ax_i.plot(weeks, g["exit_threshold"], color=colour, lw=1.0, ls=":")
    ax_i.set_ylabel("indicator")
    ax_i.legend(loc="upper left", ncol=len(indicators))
    one = sub[sub["indicator"] == indicators[0]]
    weeks = pd.DatetimeIndex(one["week"])
    ax_s.step(weeks, one["stage"], where="post", color=CATEGORICAL["ink"], lw=1.2)
    n_s = max(len(stage_names), int(one["stage"].max()))
    ax_s.set_yticks(range(n_s + 1))
    ax_s.set_yticklabels(["none", *stage_names][: n_s + 1] if stage_names else range(n_s + 1))
    ax_s.set_ylabel("stage")
    lev = one["impact_level"].to_numpy(dtype=float)
    top = np.nanmax(lev) if np.isfinite(lev).any() else 1.0
    edges = np.append(weeks.to_numpy(), weeks[-1] + pd.Timedelta(days=7))
    ax_e.pcolormesh(edges, [0, 1], np.ma.masked_invalid(lev)[None, :], cmap=sequential_cmap(),
                    vmin=0, vmax=max(top, 1.0), shading="flat")
    ax_e.set_yticks([])
    ax_e.set_ylabel("impact")
    for ax in (ax_i, ax_s):
        ax.grid(color=NEUTRAL["grid"], lw=0.5)
    fig.suptitle(title or f"{unit}", fontsize=10)
    return fig
