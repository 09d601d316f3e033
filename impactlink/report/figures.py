"""Figures of the report: pure functions, tidy frame in, matplotlib Figure out.

No function here touches disk or the pyplot state machine: each builds a
:class:`matplotlib.figure.Figure` directly (rendered by the Agg canvas), in the report's
own "estuary" colour scheme (:mod:`impactlink.report.palette`). Every figure has labelled
axes with units; colours are backed by markers, line styles or hatching so a grey-scale
print still reads.

The alt text that goes beside each image in the page is written by the section builders
(:mod:`impactlink.report.sections`), which know the numbers the figure shows.
"""

from __future__ import annotations

import functools

import matplotlib
import matplotlib.dates as mdates
import matplotlib.patches as mpatches
import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.errors import ReportError
from impactlink.report._select import BASELINE_MODELS, PERSISTENCE_COMBOS, single_candidates
from impactlink.report.palette import CATEGORICAL, NEUTRAL, category_colours, sequential_cmap
from impactlink.report.text import candidate_label, index_name, score_label, target_label

__all__ = [
    "ReportError",
    "BASELINE_MODELS",
    "PERSISTENCE_COMBOS",
    "persistence_picks",
    "skill_heatmap",
    "candidate_intervals",
    "impact_curves",
    "reliability_diagram",
    "audit_shares",
    "persistence_comparison",
    "record_timeline",
    "figure_png",
    "record_period",
    "trigger_timeline",
    "odds_ratio_chart",
]

_MARKERS = ("o", "s", "^", "D", "v", "P")
_LINESTYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (1, 1)))

_RC = {
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


def _styled(func):
    """Run a figure function inside the report's matplotlib style."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with matplotlib.rc_context(_RC):
            return func(*args, **kwargs)

    return wrapper


def _need(frame: pd.DataFrame, columns, where: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise ReportError(
            f"{where}: frame lacks column(s) {missing}; it has {list(frame.columns)}. "
            "Pass the table the run folder holds under that name."
        )


def _rows(frame: pd.DataFrame, where: str, **equal) -> pd.DataFrame:
    mask = np.ones(len(frame), dtype=bool)
    for col, value in equal.items():
        mask &= (frame[col] == value).fillna(False).to_numpy(dtype=bool)
    sub = frame.loc[mask]
    if sub.empty:
        what = ", ".join(f"{k}={v!r}" for k, v in equal.items())
        raise ReportError(f"{where}: no rows with {what}; nothing to draw")
    return sub


def _row_chart(n_rows: int, *, row_height: float, pad: float):
    """A figure 6.4 in wide with one axes for ``n_rows`` horizontal rows: ``(fig, ax, y)``,
    ``y`` the row positions with the first row at the top. Height ``row_height * n_rows +
    pad`` [in]."""
    fig = Figure(figsize=(6.4, row_height * n_rows + pad), layout="constrained")
    return fig, fig.subplots(), np.arange(n_rows)[::-1]


def figure_png(fig: Figure, *, dpi: int = 110) -> bytes:
    """Render a Figure to PNG bytes with the Agg canvas.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    dpi : int, default 110
        Dots per inch.

    Returns
    -------
    bytes
        PNG file content.
    """
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    return buf.getvalue()


def _candidates(skill: pd.DataFrame) -> pd.DataFrame:
    """Single-index candidate rows (no baselines, no second index)."""
    return single_candidates(skill)


# ------------------------------------------------------------------------ skill heat map
@_styled
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
    _need(skill, ["impact", "target", "index", "scale_weeks", "lag_weeks", "model", score], where)
    sub = _candidates(_rows(skill, where, impact=impact, target=target))
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
    top = best_cell.loc[best_cell[score].idxmax()]
    vmax = max(float(best_cell[score].max()), 0.05)
    panels = _heatmap_panels(best_cell, score)
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
        ax.set_xticks(range(len(lags)), [str(int(v)) for v in lags])
        ax.set_yticks(range(len(row_keys)), row_labels)
        ax.set_title(title)
        ax.set_xlabel("lag (weeks)")
        ax.set_ylabel(ylabel)
        is_top = cell[(cell["index"] == top["index"]) & (cell["scale_weeks"] == top["scale_weeks"])
                      & (cell["lag_weeks"] == top["lag_weeks"])]
        if not is_top.empty:
            i = row_keys.index(is_top["_row"].iloc[0])
            jj = int(np.searchsorted(lags, top["lag_weeks"]))
            ax.add_patch(mpatches.Rectangle(
                (jj - 0.5, i - 0.5), 1, 1, fill=False, edgecolor=CATEGORICAL["marigold"],
                linewidth=2.5))
    if image is not None:
        bar = fig.colorbar(image, ax=axes.ravel().tolist(), shrink=0.9)
        bar.set_label(f"{score_label(score)} (0 = climatology)")
    fig.suptitle(f"{impact} \u2014 {target_label(impact, target)}: skill by time scale and lag",
                 fontsize=10)
    return fig


def _heatmap_panels(best_cell: pd.DataFrame, score: str) -> list:
    """One panel per computed index (rows = time scales); supplied indicators, which have no
    time scale (``scale_weeks == 0``), share one panel with a row each."""
    supplied_mask = (best_cell["scale_weeks"] == 0).to_numpy()
    computed = best_cell[~supplied_mask].assign(_row=lambda f: f["scale_weeks"].astype(float))
    supplied = best_cell[supplied_mask].assign(_row=lambda f: f["index"].astype(str))
    panels = []
    scales = sorted(computed["_row"].unique())
    for ix in sorted(computed["index"].unique(), key=str):
        cell = computed[(computed["index"] == ix).to_numpy()]
        panels.append((index_name(ix), scales, [str(int(v)) for v in scales],
                       "time scale (weeks)", cell))
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


# ------------------------------------------------------------------ candidate intervals
@_styled
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
    _need(skill, ["impact", "target", "index", "scale_weeks", "lag_weeks", "model", score, lo, hi],
          where)
    rows = _rows(skill, where, impact=impact, target=target)
    cand = _candidates(rows).dropna(subset=[score]).sort_values(score, ascending=False).head(top)
    if cand.empty:
        raise ReportError(f"{where}: no scored candidates for {impact!r} / {target!r}")
    base = rows[rows["model"].isin(BASELINE_MODELS).fillna(False).to_numpy(dtype=bool)]
    fig, ax, y = _row_chart(len(cand), row_height=0.34, pad=1.4)
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
        candidate_label(r["index"], r["scale_weeks"], r["lag_weeks"], short=True)
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


# -------------------------------------------------------------------------- impact curves
@_styled
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
    _need(curves, ["impact", "target", "index", "scale_weeks", "x", "prob"], where)
    sub = _rows(curves, where, impact=impact, target=target)
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
                    ls=_LINESTYLES[k % len(_LINESTYLES)], lw=0.8 if thin else 2,
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


# ---------------------------------------------------------------------------- reliability
@_styled
def reliability_diagram(reliability: pd.DataFrame, *, impact: str, target: str) -> Figure:
    """Observed frequency against forecast chance, per model, with the count in each bin.

    Parameters
    ----------
    reliability : DataFrame
        ``reliability.csv``: target, forecast_mean, observed_freq, count, and optionally
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
    _need(reliability, ["target", "forecast_mean", "observed_freq", "count"], where)
    if "model" not in reliability.columns:
        reliability = reliability.assign(model="best candidate")
    keys = {"impact": impact, "target": target} if "impact" in reliability.columns else {
        "target": target}
    sub = _rows(reliability, where, **keys)
    models = list(dict.fromkeys(sub["model"].astype(str)))
    colours = category_colours(len(models))
    fig = Figure(figsize=(6.4, 4.6), layout="constrained")
    ax, axc = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1]})
    ax.plot([0, 1], [0, 1], color=NEUTRAL["baseline"], lw=1, ls="--", label="perfectly reliable")
    width = 0.8 / max(len(models), 1) / 10
    for k, model in enumerate(models):
        g = sub[(sub["model"].astype(str) == model).to_numpy()].sort_values("forecast_mean")
        x = g["forecast_mean"].to_numpy(float)
        ax.plot(x, g["observed_freq"].to_numpy(float), marker=_MARKERS[k % len(_MARKERS)],
                ls=_LINESTYLES[k % len(_LINESTYLES)], color=colours[k], label=str(model),
                markeredgecolor=CATEGORICAL["ink"])
        axc.bar(x + (k - (len(models) - 1) / 2) * width, g["count"].to_numpy(float), width=width,
                color=colours[k], edgecolor=CATEGORICAL["ink"], lw=0.4)
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_ylabel("observed frequency (0\u20131)")
    ax.set_title(f"{impact} \u2014 {target_label(impact, target)}: reliability")
    ax.legend(loc="upper left")
    axc.set_xlabel("forecast chance (0\u20131)")
    counts = sub["count"].to_numpy(float)
    counts = counts[counts > 0]
    if counts.size and counts.max() > 100 * counts.min():
        axc.set_yscale("log")  # a few crowded low-chance bins would flatten the rest
        axc.set_ylabel("forecasts (count, log)")
    else:
        axc.set_ylabel("forecasts (count)")
    return fig


# --------------------------------------------------------------------------- threshold audit
@_styled
def audit_shares(audit: pd.DataFrame, *, ladder: str) -> Figure:
    """Threshold audit: observed against expected share of weeks per stage, and drift.

    Left: for the record period, the observed / expected ratio in every county (one dot
    each) with the median; 1 means the stage occurs as often as its definition implies.
    Right: median observed share across counties in the early and late periods, against
    the expected share.

    Parameters
    ----------
    audit : DataFrame
        ``audit.csv``: county_id, ladder, stage, period, expected_share, observed_share and
        optionally ratio, threshold.
    ladder : str

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ReportError
        Missing columns or no rows.
    """
    where = "audit_shares"
    _need(audit, ["ladder", "stage", "period", "expected_share", "observed_share"], where)
    sub = _rows(audit, where, ladder=ladder)
    stages = list(dict.fromkeys(sub["stage"].astype(str)))
    if "threshold" in sub.columns:
        order = sub.groupby("stage", observed=True)["threshold"].first()
        stages = sorted(stages, key=lambda s: -float(order.get(s, 0)))
    ratio = sub["observed_share"] / sub["expected_share"] if "ratio" not in sub else sub["ratio"]
    sub = sub.assign(_ratio=ratio.astype(float))
    fig = Figure(figsize=(9.0, 3.8), layout="constrained")
    ax1, ax2 = fig.subplots(1, 2)
    rec = sub[(sub["period"] == record_period(sub)).to_numpy(dtype=bool)]
    rng = np.random.default_rng(0)  # jitter only; fixed seed keeps the picture reproducible
    for k, st in enumerate(stages):
        r = rec[(rec["stage"].astype(str) == st).to_numpy()]["_ratio"].dropna().to_numpy()
        if r.size:
            ax1.scatter(r, k + rng.uniform(-0.15, 0.15, r.size), s=12,
                        color=CATEGORICAL["harbour"], edgecolor=CATEGORICAL["ink"], lw=0.3)
            ax1.plot([np.median(r)] * 2, [k - 0.3, k + 0.3], color=CATEGORICAL["rust"], lw=2.5)
    ax1.axvline(1, color=NEUTRAL["baseline"], ls="--", lw=1)
    ax1.set_yticks(range(len(stages)), stages)
    ax1.invert_yaxis()  # mildest stage on top, as in a ladder read from the first rung
    ax1.set_xlabel("observed / expected share of weeks (ratio; 1 = as defined)")
    ax1.set_title("record period, one dot per county")
    ax1.plot([], [], color=CATEGORICAL["rust"], lw=2.5, label="median")
    ax1.legend(loc="lower right")

    periods = [p for p in ("early", "late") if (sub["period"] == p).any()]
    x = np.arange(len(stages))
    width = 0.8 / max(len(periods) + 1, 1)
    expected = sub.groupby("stage", observed=True)["expected_share"].median()
    ax2.bar(x - width * len(periods) / 2, [expected.get(s, np.nan) for s in stages], width,
            color="white", edgecolor=NEUTRAL["text"], hatch="//", label="expected")
    for k, p in enumerate(periods):
        med = sub[(sub["period"] == p).to_numpy(dtype=bool)].groupby(
            "stage", observed=True)["observed_share"].median()
        ax2.bar(x - width * len(periods) / 2 + width * (k + 1), [med.get(s, np.nan) for s in stages],
                width, color=category_colours(3)[k if k == 0 else 2], edgecolor=CATEGORICAL["ink"],
                label=f"observed, {p} period")
    ax2.set_xticks(x, stages, rotation=20, ha="right")
    ax2.set_ylabel("share of weeks (0\u20131)")
    ax2.set_title("drift: early vs late period")
    ax2.legend(loc="upper right")
    fig.suptitle(f"threshold audit \u2014 {ladder}", fontsize=10)
    return fig


def record_period(audit: pd.DataFrame) -> str:
    """Name of the whole-record period in an audit table.

    ``"record"`` by contract; ``"full"`` or any period other than ``"early"`` / ``"late"``
    is accepted as well, so a stage that names it differently still gets its audit drawn.
    """
    periods = list(dict.fromkeys(audit["period"].dropna().astype(str)))
    for name in ("record", "full"):
        if name in periods:
            return name
    rest = [p for p in periods if p not in ("early", "late")]
    return rest[0] if rest else "record"


# ------------------------------------------------------------- persistence comparison
@_styled
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
    _need(skill, ["impact", "target", "model", score, lo, hi], where)
    sub = _rows(skill, where, impact=impact)
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
    single = _candidates(scored)
    shared = sorted(set(pers["lag_weeks"].dropna()) & set(combo["lag_weeks"].dropna()))
    lag = None
    if shared:
        lag = int(shared[0])
        pers, combo, single = (f[(f["lag_weeks"] == lag).fillna(False).to_numpy(bool)]
                               for f in (pers, combo, single))
    picks = [f.loc[f[score].idxmax()] if not f.empty else None for f in (single, pers, combo)]
    return lag, picks


# ----------------------------------------------------------------------- record timeline
@_styled
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
    _need(inputs, ["table", "date_min", "date_max"], where)
    d = inputs.assign(
        start=pd.to_datetime(inputs["date_min"], errors="coerce"),
        end=pd.to_datetime(inputs["date_max"], errors="coerce"),
    ).dropna(subset=["start", "end"])
    if d.empty:
        raise ReportError(f"{where}: no input has both date_min and date_max")
    fig, ax, y = _row_chart(len(d), row_height=0.36, pad=1.2)
    start = mdates.date2num(d["start"])
    span = mdates.date2num(d["end"]) - start
    ax.barh(y, span, left=start, color=CATEGORICAL["harbour"], edgecolor=CATEGORICAL["ink"],
            height=0.55)
    ax.set_yticks(y, d["table"].astype(str))
    ax.xaxis_date()
    ax.set_xlabel("date (year)")
    ax.set_title("record span of each input")
    return fig


# ---------------------------------------------------------------------- trigger timeline
@_styled
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
    _need(timeline, ["week", "county_id", "scope", "index_value", "threshold", "trigger_on"],
          where)
    if last_years is not None and last_years < 1:
        raise ReportError(f"{where}: last_years must be >= 1 or None, got {last_years}")
    sub = timeline
    if target is not None and "target" in timeline.columns:
        sub = _rows(timeline, where, target=target)
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


# ------------------------------------------------------------------ odds ratio chart
@_styled
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
    _need(contrast, ["term", "odds_ratio_per_sd", "or_lo", "or_hi"], where)
    sub = _rows(contrast, where, target=target) if target is not None else contrast
    sub = sub.dropna(subset=["odds_ratio_per_sd"])
    if sub.empty:
        raise ReportError(f"{where}: no odds ratios to draw")
    fig, ax, y = _row_chart(len(sub), row_height=0.4, pad=1.3)
    est = sub["odds_ratio_per_sd"].to_numpy(float)
    err = np.nan_to_num(np.clip(np.vstack([est - sub["or_lo"].to_numpy(float),
                                           sub["or_hi"].to_numpy(float) - est]), 0, None))
    ax.errorbar(est, y, xerr=err, fmt="o", color=CATEGORICAL["ink"], capsize=2)
    ax.axvline(1, color=NEUTRAL["baseline"], ls="--", lw=1)
    ax.set_xscale("log")
    ax.set_yticks(y, sub["term"].astype(str))
    ax.set_xlabel("odds ratio per standard deviation of the trait (log scale; 1 = no association)")
    ax.set_title("county traits and impacts at similar index values" + (
        f" \u2014 {target}" if target else ""))
    return fig
