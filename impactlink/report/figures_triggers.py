"""Figures of the trigger plan section: the replay timeline.

Pure functions, tidy frame in, matplotlib Figure out, drawn in the report's style
(:mod:`impactlink.report.fig_style`); the alt text beside each image is written by
the section that embeds it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report.fig_style import need_columns, rows_where, styled
from impactlink.report.palette import CATEGORICAL, category_colours


@styled
def trigger_timeline(timeline: pd.DataFrame, *, target: str | None = None,
                     last_years: int | None = 20,
                     county_names: dict[str, str] | None = None) -> Figure:
    """Replay of trigger plans: index value, thresholds, weeks on, and impact weeks.

    One panel per county. The index line is drawn once; each plan (``scope``: uniform,
    local) adds its threshold as a horizontal line and its "trigger on" weeks as a band
    under the axis; weeks with a recorded impact are marked on a strip above it.

    Parameters
    ----------
    timeline : DataFrame
        ``trigger_timeline.csv``: week, county_id, scope, index_value, threshold, trigger_on,
        impact_level, and optionally target.
    target : str, optional
        Keep rows of this target only (when the table has a ``target`` column).
    last_years : int or None, default 20
        Show only the last so many years (None = whole record).
    county_names : dict, optional
        county_id -> display name for the panel titles.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns, no rows, or ``last_years < 1``.
    """
    where = "trigger_timeline"
    need_columns(timeline, ["week", "county_id", "scope", "index_value", "threshold", "trigger_on"],
          where)
    if last_years is not None and last_years < 1:
        raise ReportError(f"{where}: last_years must be >= 1 or None, got {last_years}")
    sub = timeline
    if target is not None and "target" in timeline.columns:
        sub = rows_where(timeline, where, target=target)
    if sub.empty:
        raise ReportError(f"{where}: the timeline has no rows")
    sub = sub.assign(week=pd.to_datetime(sub["week"], errors="coerce")).dropna(subset=["week"])
    if last_years is not None and not sub.empty:
        start = sub["week"].max() - pd.DateOffset(years=last_years)
        sub = sub[sub["week"] >= start]
    counties = list(dict.fromkeys(sub["county_id"].astype(str)))
    scopes = list(dict.fromkeys(sub["scope"].astype(str)))
    colours = {"uniform": CATEGORICAL["rust"], "local": CATEGORICAL["harbour"]}
    styles = {"uniform": "--", "local": "-."}
    fig = Figure(figsize=(7.6, 1.9 * len(counties) + 0.9), layout="constrained")
    axes = np.atleast_1d(fig.subplots(len(counties), 1, sharex=True, squeeze=False)[:, 0])
    for ax, county in zip(axes, counties, strict=True):
        g = sub[(sub["county_id"].astype(str) == county).to_numpy()]
        first = g[(g["scope"].astype(str) == scopes[0]).to_numpy()].sort_values("week")
        wk = first["week"].to_numpy()
        val = first["index_value"].to_numpy(float)
        ax.plot(wk, val, color=CATEGORICAL["ink"], lw=0.7, label="index value")
        lo = np.nanmin(val) if np.isfinite(val).any() else -3.0
        hi = np.nanmax(val) if np.isfinite(val).any() else 3.0
        span = max(hi - lo, 1.0)
        for k, scope in enumerate(scopes):
            gs = g[(g["scope"].astype(str) == scope).to_numpy()].sort_values("week")
            colour = colours.get(scope, category_colours(k + 3)[k + 2])
            thr = pd.to_numeric(gs["threshold"], errors="coerce").dropna()
            if not thr.empty:
                ax.axhline(float(thr.iloc[0]), color=colour, ls=styles.get(scope, ":"), lw=1.2,
                           label=f"{scope} threshold {float(thr.iloc[0]):.2f}")
            on = gs["trigger_on"].astype("boolean").fillna(False).to_numpy(bool)
            base = lo - span * (0.12 + 0.1 * k)
            ax.fill_between(gs["week"].to_numpy(), base, base + span * 0.08, where=on,
                            color=colour, step="mid", lw=0, label=f"{scope} plan on")
        if "impact_level" in g.columns:
            lev = pd.to_numeric(first.get("impact_level"), errors="coerce").to_numpy(float)
            hit = np.nan_to_num(lev) > 0
            top = hi + span * 0.05
            ax.fill_between(wk, top, top + span * 0.08, where=hit, color=CATEGORICAL["marigold"],
                            step="mid", lw=0, hatch="////", edgecolor=CATEGORICAL["ink"],
                            label="impact recorded")
        ax.set_ylabel("index value")
        name = (county_names or {}).get(county)
        ax.set_title(f"{name} ({county})" if name else f"county {county}", loc="left")
    axes[-1].set_xlabel("week (date)")
    handles, labels = axes[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncol=3)
    title = "trigger plan replay" + (f" \u2014 {target}" if target else "")
    fig.suptitle(title, fontsize=10)
    return fig
