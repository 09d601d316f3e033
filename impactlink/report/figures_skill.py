"""Figures of the skill stage: skill heat map, candidate intervals, persistence
comparison, reliability diagram.

Pure functions, tidy frame in, matplotlib Figure out, drawn in the report's style
(:mod:`impactlink.report.fig_style`); the alt text beside each image is written by
the section that embeds it.
"""

from __future__ import annotations

import matplotlib.patches as mpatches
import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report._select import BASELINE_MODELS, PERSISTENCE_COMBOS, single_candidates
from impactlink.report.fig_style import (
    LINESTYLES,
    MARKERS,
    need_columns,
    row_chart,
    rows_where,
    styled,
)
from impactlink.report.palette import CATEGORICAL, NEUTRAL, category_colours, sequential_cmap
from impactlink.report.text import index_name, row_label, score_label, target_label


@styled
def skill_heatmap(skill: pd.DataFrame, *, impact: str, target: str, score: str = "bss") -> Figure:
    """Heat map of out-of-sample skill by time scale and lag, one panel per index.

    Each cell holds the best score over models for that index, time scale and lag; the
    overall best cell is framed, cells statistically as good as the best carry a dot, and
    cells with no skill (score <= 0) are hatched.

    Parameters
    ----------
    skill : DataFrame
        ``skill.csv`` rows: impact, target, index, scale_weeks, lag_weeks, model, the
        ``score`` column, and optionally ``indistinguishable_from_best`` and ``index2``.
    impact, target : str
        Which impact and target to draw.
    score : str, default "bss"
        Score column ("bss" for binary targets, "rpss" for ordinal ones); higher is better.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns or no candidate rows for ``impact`` / ``target``.
    """
    where = "skill_heatmap"
    need_columns(skill, ["impact", "target", "index", "scale_weeks", "lag_weeks", "model", score], where)
    sub = single_candidates(rows_where(skill, where, impact=impact, target=target))
    sub = sub.dropna(subset=[score])
    if sub.empty:
        raise ReportError(f"{where}: no scored candidates for {impact!r} / {target!r}")
    best_cell = (
        sub.groupby(["index", "scale_weeks", "lag_weeks"], observed=True)[score].max().reset_index()
    )
    if "indistinguishable_from_best" in sub.columns:
        tie = sub.assign(_tie=sub["indistinguishable_from_best"].astype("boolean").fillna(False))
        ties = tie.groupby(["index", "scale_weeks", "lag_weeks"], observed=True)["_tie"].any()
        best_cell = best_cell.merge(ties.reset_index(), on=["index", "scale_weeks", "lag_weeks"])
    else:
        best_cell["_tie"] = False
    lags = np.sort(best_cell["lag_weeks"].unique())
    xlabel, lag_ticks = _lag_axis(sub, lags)
    if xlabel != "lag (weeks)":
        lags = lags[::-1]  # a seasonal window's end runs forward in time as the lag shrinks
        lag_ticks = lag_ticks[::-1]
    top = best_cell.loc[best_cell[score].idxmax()]
    vmax = max(float(best_cell[score].max()), 0.05)
    panels = _heatmap_panels(best_cell, score, _months_of(sub))
    n = len(panels)
    ncol = min(n, 3)
    nrow = int(np.ceil(n / ncol))
    tallest = max(len(p[1]) for p in panels)
    fig = Figure(
        figsize=(2.6 * ncol + 1.2, (0.32 * tallest + 1.3) * nrow + 0.4), layout="constrained"
    )
    axes = fig.subplots(nrow, ncol, squeeze=False)
    image = None
    for k, ax in enumerate(axes.ravel()):
        if k >= n:
            ax.set_visible(False)
            continue
        title, row_keys, row_labels, ylabel, cell = panels[k]
        values = cell.pivot(index="_row", columns="lag_weeks", values=score).reindex(
            index=row_keys, columns=lags).to_numpy(dtype=float)
        ties = cell.pivot(index="_row", columns="lag_weeks", values="_tie").reindex(
            index=row_keys, columns=lags).fillna(False).to_numpy(dtype=bool)
        image = _heat_cells(ax, values, ties, vmax)
        ax.set_xticks(range(len(lags)), lag_ticks)
        ax.set_yticks(range(len(row_keys)), row_labels)
        ax.set_title(title)
        ax.set_xlabel(xlabel)
        ax.set_ylabel(ylabel)
        is_top = cell[(cell["index"] == top["index"]) & (cell["scale_weeks"] == top["scale_weeks"])
                      & (cell["lag_weeks"] == top["lag_weeks"])]
        if not is_top.empty:
            i = row_keys.index(is_top["_row"].iloc[0])
            jj = int(np.flatnonzero(lags == top["lag_weeks"])[0])
            ax.add_patch(mpatches.Rectangle(
                (jj - 0.5, i - 0.5), 1, 1, fill=False, edgecolor=CATEGORICAL["marigold"],
                linewidth=2.5))
    if image is not None:
        bar = fig.colorbar(image, ax=axes.ravel().tolist(), shrink=0.9)
        bar.set_label(f"{score_label(score)} (0 = climatology)")
    what = "lag" if xlabel == "lag (weeks)" else "window end"
    fig.suptitle(f"{impact} \u2014 {target_label(impact, target)}: skill by time scale and {what}",
                 fontsize=10)
    return fig


_MON = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


def _months_of(sub: pd.DataFrame) -> dict[float, int]:
    """Time scale in weeks -> months, when every computed scale of monthly input has one."""
    if "scale_months" not in sub.columns:
        return {}
    rows = sub[sub["scale_weeks"] != 0].dropna(subset=["scale_weeks"])
    if rows.empty or rows["scale_months"].isna().any():
        return {}
    return {float(w): int(m) for w, m in zip(rows["scale_weeks"], rows["scale_months"],
                                             strict=True)}


def _lag_axis(sub: pd.DataFrame, lags: np.ndarray) -> tuple[str, list[str]]:
    """Column axis: lag in weeks, or for a seasonal target where the window ends (its month
    for monthly input, else its ISO week)."""
    if "end_week" not in sub.columns or sub["end_week"].isna().all():
        return "lag (weeks)", [str(int(v)) for v in lags]
    ends = sub.drop_duplicates("lag_weeks").set_index("lag_weeks")
    if "end_month" in ends.columns and ends["end_month"].notna().all():
        return "window ends in", [_MON[int(ends.at[v, "end_month"]) - 1] for v in lags]
    return "window ends in ISO week", [str(int(ends.at[v, "end_week"])) for v in lags]


def _heatmap_panels(best_cell: pd.DataFrame, score: str,
                    months: dict[float, int] | None = None) -> list:
    """One panel per computed index (rows = time scales, in months for monthly input);
    supplied indicators, which have no time scale (``scale_weeks == 0``), share one panel
    with a row each."""
    supplied_mask = (best_cell["scale_weeks"] == 0).to_numpy()
    computed = best_cell[~supplied_mask].assign(_row=lambda f: f["scale_weeks"].astype(float))
    supplied = best_cell[supplied_mask].assign(_row=lambda f: f["index"].astype(str))
    panels = []
    scales = sorted(computed["_row"].unique())
    for ix in sorted(computed["index"].unique(), key=str):
        cell = computed[(computed["index"] == ix).to_numpy()]
        ticks = [str(months[v]) if months else str(int(v)) for v in scales]
        panels.append((index_name(ix), scales, ticks,
                       "time scale (months)" if months else "time scale (weeks)", cell))
    if not supplied.empty:
        names = sorted(supplied["_row"].unique())
        panels.append(("supplied indicators", names, [index_name(v) for v in names], "",
                       supplied))
    return panels


def _heat_cells(ax, values: np.ndarray, ties: np.ndarray, vmax: float):
    """Colour, annotate and hatch the cells of one heat-map panel."""
    cmap = sequential_cmap()
    image = ax.imshow(np.ma.masked_invalid(np.clip(values, 0.0, vmax)), cmap=cmap, vmin=0.0,
                      vmax=vmax, aspect="auto", origin="lower")
    ax.grid(False)
    rgba = cmap(np.clip(np.nan_to_num(values) / vmax, 0, 1))
    light = (rgba[..., :3] @ np.array([0.2126, 0.7152, 0.0722])) > 0.35
    rows, cols = values.shape
    for i in range(rows):  # a few dozen cells: annotating in a loop is fine
        for j in range(cols):
            v = values[i, j]
            if np.isnan(v):
                continue
            text = f"{v:.2f}"
            text = text[1:] if text == "-0.00" else text
            ax.text(j, i, text + ("\u2022" if ties[i, j] else ""), ha="center", va="center",
                    fontsize=7, color=NEUTRAL["text"] if light[i, j] else "white")
            if v <= 0:
                ax.add_patch(mpatches.Rectangle(
                    (j - 0.5, i - 0.5), 1, 1, fill=False, hatch="///",
                    edgecolor=NEUTRAL["grid"], linewidth=0))
    return image


@styled
def candidate_intervals(
    skill: pd.DataFrame, *, impact: str, target: str, score: str = "bss", top: int = 10
) -> Figure:
    """Best candidates with their bootstrap intervals, against the baselines.

    Parameters
    ----------
    skill : DataFrame
        ``skill.csv`` rows with ``score``, ``score_lo`` and ``score_hi`` columns.
    impact, target : str
    score : str, default "bss"
        Higher is better; 0 is the climatological base rate by construction.
    top : int, default 10
        How many candidates to show (highest score first).

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns, no rows, or ``top < 1``.
    """
    where = "candidate_intervals"
    if top < 1:
        raise ReportError(f"{where}: top must be >= 1, got {top}")
    lo, hi = f"{score}_lo", f"{score}_hi"
    need_columns(skill, ["impact", "target", "index", "scale_weeks", "lag_weeks", "model", score, lo, hi],
          where)
    rows = rows_where(skill, where, impact=impact, target=target)
    cand = single_candidates(rows).dropna(subset=[score]).sort_values(score, ascending=False).head(top)
    if cand.empty:
        raise ReportError(f"{where}: no scored candidates for {impact!r} / {target!r}")
    base = rows[rows["model"].isin(BASELINE_MODELS).fillna(False).to_numpy(dtype=bool)]
    fig, ax, y = row_chart(len(cand), row_height=0.34, pad=1.4)
    tie = (
        cand["indistinguishable_from_best"].astype("boolean").fillna(False).to_numpy(dtype=bool)
        if "indistinguishable_from_best" in cand.columns
        else np.zeros(len(cand), bool)
    )
    est = cand[score].to_numpy(float)
    err = np.vstack([est - cand[lo].to_numpy(float), cand[hi].to_numpy(float) - est])
    err = np.nan_to_num(np.clip(err, 0, None))
    for flag, colour, marker, label in (
        (True, CATEGORICAL["ink"], "o", "statistically as good as the best"),
        (False, CATEGORICAL["sky"], "s", "clearly behind the best"),
    ):
        m = tie == flag
        if m.any():
            ax.errorbar(est[m], y[m], xerr=err[:, m], fmt=marker, color=colour, ecolor=colour,
                        capsize=2, label=label, markeredgecolor=CATEGORICAL["ink"])
    labels = [
        row_label(r)
        + (f" ({r['model']})" if pd.notna(r["model"]) and r["model"] != "index" else "")
        for _, r in cand.iterrows()
    ]
    ax.set_yticks(y, labels)
    ax.axvline(0, color=NEUTRAL["baseline"], lw=1)
    styles = {"seasonal": "--", "persistence": ":"}
    for model, style in styles.items():  # the best of each baseline (persistence has one per lag)
        vals = base[(base["model"] == model).fillna(False).to_numpy(bool)][score].dropna()
        if not vals.empty:
            ax.axvline(float(vals.max()), color=CATEGORICAL["rust"], lw=1.2, ls=style,
                       label=f"{model} baseline")
    ax.set_xlabel(f"{score_label(score)} (higher is better; 0 = climatology)")
    ax.set_title(f"{impact} \u2014 {target_label(impact, target)}: best candidates with intervals")
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncol=2)
    return fig


@styled
def persistence_comparison(skill: pd.DataFrame, *, impact: str, score: str = "bss") -> Figure:
    """Index alone, persistence alone and index plus persistence, for each target.

    Parameters
    ----------
    skill : DataFrame
        ``skill.csv`` rows; for each target the best single-index candidate, the
        ``persistence`` baseline and the best index-plus-persistence model, all at one lag
        (see :func:`persistence_picks`).
    impact : str
    score : str, default "bss"
        Higher is better.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns, or no persistence rows for ``impact``.
    """
    where = "persistence_comparison"
    lo, hi = f"{score}_lo", f"{score}_hi"
    need_columns(skill, ["impact", "target", "model", score, lo, hi], where)
    sub = rows_where(skill, where, impact=impact)
    if not sub["model"].isin(("persistence",) + PERSISTENCE_COMBOS).any():
        raise ReportError(f"{where}: no persistence rows for {impact!r}")
    targets = list(dict.fromkeys(sub["target"].astype(str)))
    kinds = [("index alone", CATEGORICAL["harbour"], "o"),
             ("persistence alone", CATEGORICAL["marigold"], "s"),
             ("index + persistence", CATEGORICAL["ink"], "D")]
    fig = Figure(figsize=(6.4, 0.8 * len(targets) + 1.6), layout="constrained")
    ax = fig.subplots()
    ticks = []
    for t, tgt in enumerate(targets):
        g = sub[(sub["target"].astype(str) == tgt).to_numpy()]
        lag, picks = persistence_picks(g, score)
        ticks.append(target_label(impact, tgt) + (f" (lag {lag}w)" if lag is not None else ""))
        for k, (r, (label, colour, marker)) in enumerate(zip(picks, kinds, strict=True)):
            if r is None:
                continue
            y = len(targets) - 1 - t + (1 - k) * 0.22
            est = float(r[score])
            err = np.nan_to_num(np.clip([[est - float(r[lo])], [float(r[hi]) - est]], 0, None))
            ax.errorbar([est], [y], xerr=err, fmt=marker, color=colour, capsize=2,
                        label=label if t == 0 else None, markeredgecolor=CATEGORICAL["ink"])
    ax.axvline(0, color=NEUTRAL["baseline"], lw=1)
    ax.set_yticks(range(len(targets))[::-1], ticks)
    ax.set_xlabel(f"{score_label(score)} (higher is better; 0 = climatology)")
    ax.set_title(f"{impact}: does the index add warning beyond persistence?")
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncol=3)
    return fig


def persistence_picks(rows: pd.DataFrame, score: str):
    """The like-for-like rows of a persistence comparison for one target.

    Persistence gets much stronger at short lags, so the three models are compared at one
    lag: the shortest lag that has both a persistence baseline and an index-plus-persistence
    row (the lag the skill stage's own comparison sentence uses). Without persistence rows
    at a shared lag, each model's best row is used.

    Parameters
    ----------
    rows : DataFrame
        ``skill.csv`` rows of one target.
    score : str
        Higher is better.

    Returns
    -------
    (int or None, list)
        The lag in weeks (None when no shared lag), and the rows (Series or None) of: the
        best single index, persistence, the best index plus persistence.
    """
    scored = rows.dropna(subset=[score])
    pers = scored[(scored["model"] == "persistence").fillna(False).to_numpy(bool)]
    combo = scored[scored["model"].isin(PERSISTENCE_COMBOS).fillna(False).to_numpy(bool)]
    single = single_candidates(scored)
    shared = sorted(set(pers["lag_weeks"].dropna()) & set(combo["lag_weeks"].dropna()))
    lag = None
    if shared:
        lag = int(shared[0])
        pers, combo, single = (f[(f["lag_weeks"] == lag).fillna(False).to_numpy(bool)]
                               for f in (pers, combo, single))
    picks = [f.loc[f[score].idxmax()] if not f.empty else None for f in (single, pers, combo)]
    return lag, picks


@styled
def reliability_diagram(reliability: pd.DataFrame, *, impact: str, target: str) -> Figure:
    """Observed frequency against forecast chance, per model, with the count in each bin.

    Parameters
    ----------
    reliability : DataFrame
        ``reliability.csv``: target, mean_forecast, observed_frequency, n (forecasts in the
        bin), and optionally
        impact and model (without ``model`` the rows are the best candidate's).
    impact, target : str

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Points on the diagonal are perfectly reliable (Murphy 1973 decomposition of the Brier
    score: the reliability term is the count-weighted squared distance from it).

    Raises
    ------
    ReportError
        Missing columns or no rows.
    """
    where = "reliability_diagram"
    need_columns(reliability, ["target", "mean_forecast", "observed_frequency", "n"], where)
    if "model" not in reliability.columns:
        reliability = reliability.assign(model="best candidate")
    keys = {"impact": impact, "target": target} if "impact" in reliability.columns else {
        "target": target}
    sub = rows_where(reliability, where, **keys)
    models = list(dict.fromkeys(sub["model"].astype(str)))
    colours = category_colours(len(models))
    fig = Figure(figsize=(6.4, 4.6), layout="constrained")
    ax, axc = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1]})
    ax.plot([0, 1], [0, 1], color=NEUTRAL["baseline"], lw=1, ls="--", label="perfectly reliable")
    width = 0.8 / max(len(models), 1) / 10
    for k, model in enumerate(models):
        g = sub[(sub["model"].astype(str) == model).to_numpy()].sort_values("mean_forecast")
        x = g["mean_forecast"].to_numpy(float)
        ax.plot(x, g["observed_frequency"].to_numpy(float), marker=MARKERS[k % len(MARKERS)],
                ls=LINESTYLES[k % len(LINESTYLES)], color=colours[k], label=str(model),
                markeredgecolor=CATEGORICAL["ink"])
        axc.bar(x + (k - (len(models) - 1) / 2) * width, g["n"].to_numpy(float), width=width,
                color=colours[k], edgecolor=CATEGORICAL["ink"], lw=0.4)
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_ylabel("observed frequency (0\u20131)")
    ax.set_title(f"{impact} \u2014 {target_label(impact, target)}: reliability")
    ax.legend(loc="upper left")
    axc.set_xlabel("forecast chance (0\u20131)")
    counts = sub["n"].to_numpy(float)
    counts = counts[counts > 0]
    if counts.size and counts.max() > 100 * counts.min():
        axc.set_yscale("log")  # a few crowded low-chance bins would flatten the rest
        axc.set_ylabel("forecasts (count, log)")
    else:
        axc.set_ylabel("forecasts (count)")
    return fig
