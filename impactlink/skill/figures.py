"""Figures of the skill stage: skill by index and time scale (a heat map per target)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.errors import SkillError

__all__ = ["skill_grid", "plot_skill_heatmap"]


def skill_grid(table: pd.DataFrame, target: str, *, model: str = "index") -> pd.DataFrame:
    """Best skill over lags for every (index, time scale) of one target.

    Parameters
    ----------
    table : DataFrame
        :attr:`SkillResult.table` (or ``skill.csv``) rows.
    target : str
        Target name.
    model : str, default "index"
        Which model rows to use.

    Returns
    -------
    DataFrame
        Index: index names; columns: ``scale_weeks``; values: the highest ``rpss`` over lags
        (NaN where a combination was not scored). ``.attrs["lag_weeks"]`` holds the lag
        achieving each value.

    Raises
    ------
    ValueError
        If the table has no rows of that target and model.
    """
    t = table[(table["target"] == target) & (table["model"] == model)]
    if t.empty:
        raise SkillError(f"skill table has no rows for target={target!r} and model={model!r}; "
                         f"targets present: {sorted(table['target'].unique())}")
    best = t.sort_values("rpss", ascending=False).drop_duplicates(["index", "scale_weeks"])
    grid = best.pivot(index="index", columns="scale_weeks", values="rpss").sort_index()
    grid.attrs["lag_weeks"] = best.pivot(index="index", columns="scale_weeks",
                                         values="lag_weeks").reindex_like(grid)
    return grid


def plot_skill_heatmap(table: pd.DataFrame, target: str, *, ax=None, model: str = "index"):
    """Heat map of out-of-sample skill (best over lags) by index and time scale.

    Cells show the ranked probability skill score (``rpss``; the Brier skill score for a
    binary target) with the lag that achieves it; the best cell is outlined. Colours run
    from brown (worse than the base rate) through white (no skill) to teal (skilful).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt
    from matplotlib.colors import TwoSlopeNorm
    from matplotlib.patches import Rectangle

    grid = skill_grid(table, target, model=model)
    lags = grid.attrs["lag_weeks"]
    if ax is None:
        fig, ax = plt.subplots(figsize=(1.1 * grid.shape[1] + 2.5, 0.55 * grid.shape[0] + 1.8))
    else:
        fig = ax.figure
    vals = grid.to_numpy(dtype=float)
    finite = vals[np.isfinite(vals)]
    hi = max(float(finite.max()) if finite.size else 0.0, 1e-3)
    lo = min(float(finite.min()) if finite.size else 0.0, -1e-3)
    im = ax.imshow(vals, cmap="BrBG", norm=TwoSlopeNorm(vcenter=0.0, vmin=lo, vmax=hi),
                   aspect="auto")
    ax.set_xticks(range(grid.shape[1]), [str(c) for c in grid.columns])
    ax.set_yticks(range(grid.shape[0]), list(grid.index))
    ax.set_xlabel("time scale (weeks)")
    ax.set_ylabel("index")
    for i in range(grid.shape[0]):
        for j in range(grid.shape[1]):
            if np.isfinite(vals[i, j]):
                lag = lags.iat[i, j]
                ax.text(j, i, f"{vals[i, j]:.2f}\nlag {lag}", ha="center", va="center",
                        fontsize=7)
    if finite.size:
        bi, bj = np.unravel_index(np.nanargmax(vals), vals.shape)
        ax.add_patch(Rectangle((bj - 0.5, bi - 0.5), 1, 1, fill=False, lw=2.0, ec="black"))
    ax.set_title(f"{target}: out-of-sample skill (best lag)")
    fig.colorbar(im, ax=ax, label="skill score vs base rate")
    fig.tight_layout()
    return fig
