"""Figures of the impact curves section.

Pure functions, tidy frame in, matplotlib Figure out, drawn in the report's style
(:mod:`impactlink.report.fig_style`); the alt text beside each image is written by
the section that embeds it.
"""

from __future__ import annotations

import pandas as pd
from matplotlib.figure import Figure

from impactlink.report.fig_style import LINESTYLES, need_columns, rows_where, styled
from impactlink.report.palette import NEUTRAL, category_colours
from impactlink.report.text import index_name, target_label


@styled
def impact_curves(
    curves: pd.DataFrame, crossings: pd.DataFrame | None = None, *, impact: str, target: str
) -> Figure:
    """Chance of each impact level against the index value, with intervals.

    Parameters
    ----------
    curves : DataFrame
        ``curves.csv``: impact, target, index, scale_weeks, x, prob and optionally lag_weeks,
        level_k, level_label, prob_lo, prob_hi, pooling, unit.
    crossings : DataFrame, optional
        ``crossings.csv``: index values where each curve crosses a chance level; drawn as
        ticks on the x axis.
    impact, target : str

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    When the table holds several poolings, the pooled curve (``pooling == "all"``) is drawn;
    otherwise each unit's curve is drawn thin in its level's colour.

    Raises
    ------
    ReportError
        Missing columns or no rows.
    """
    where = "impact_curves"
    need_columns(curves, ["impact", "target", "index", "scale_weeks", "x", "prob"], where)
    sub = rows_where(curves, where, impact=impact, target=target)
    if "pooling" in sub.columns and (sub["pooling"] == "all").any():
        sub = sub[(sub["pooling"] == "all").to_numpy(dtype=bool)]
    first = sub.iloc[0]
    level_col = "level_label" if "level_label" in sub.columns else None
    level_key = "level_k" if "level_k" in sub.columns else level_col
    groups = [("", sub)] if level_key is None else list(sub.groupby(level_key, sort=True))
    colours = category_colours(len(groups))
    fig = Figure(figsize=(6.4, 3.8), layout="constrained")
    ax = fig.subplots()
    units = sub["unit"].dropna().unique() if "unit" in sub.columns else []
    for k, (_key, g) in enumerate(groups):
        label = str(g[level_col].iloc[0]) if level_col else "impact"
        if level_col and "level_k" in g.columns:
            label = f"at least '{label}'"
        per_unit = list(g.groupby("unit", sort=True)) if len(units) > 1 else [("", g)]
        for u, (_, gu) in enumerate(per_unit):
            gu = gu.sort_values("x")
            x = gu["x"].to_numpy(float)
            thin = len(per_unit) > 1
            ax.plot(x, gu["prob"].to_numpy(float), color=colours[k],
                    ls=LINESTYLES[k % len(LINESTYLES)], lw=0.8 if thin else 2,
                    label=label if u == 0 else None)
            if not thin and {"prob_lo", "prob_hi"} <= set(gu.columns):
                ax.fill_between(x, gu["prob_lo"].to_numpy(float), gu["prob_hi"].to_numpy(float),
                                color=colours[k], alpha=0.22, lw=0)
    if crossings is not None and not crossings.empty and "x_cross" in crossings.columns:
        cr = crossings[((crossings["impact"] == impact) & (crossings["target"] == target))
                       .fillna(False).to_numpy(dtype=bool)].dropna(subset=["x_cross"])
        for _, c in cr.iterrows():
            ax.plot([c["x_cross"]], [c["prob_level"]], marker="x", color=NEUTRAL["text"], ms=6)
        if not cr.empty:
            ax.plot([], [], marker="x", ls="", color=NEUTRAL["text"], label="crossing of a chance level")
    unit_word = "" if len(units) != 1 else f" ({units[0]})"
    lag = f", lag {int(first['lag_weeks'])} weeks" if "lag_weeks" in sub.columns and pd.notna(
        first["lag_weeks"]) else ""
    ax.set_xlabel(
        f"{index_name(first['index'])}, {int(first['scale_weeks'])}-week time scale{lag}"
        f"{unit_word} \u2014 value (standardized units; lower = drier)"
    )
    ax.set_ylabel("chance of impact (0\u20131)")
    ax.set_ylim(0, 1)
    ax.set_title(f"{impact} \u2014 {target_label(impact, target)}: impact curve")
    ax.legend(loc="best")
    return fig
