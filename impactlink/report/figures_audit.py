"""Figures of the threshold audit.

Pure functions, tidy frame in, matplotlib Figure out, drawn in the report's style
(:mod:`impactlink.report.fig_style`); the alt text beside each image is written by
the section that embeds it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from impactlink.report.fig_style import need_columns, rows_where, styled
from impactlink.report.palette import CATEGORICAL, NEUTRAL, category_colours


@styled
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
    need_columns(audit, ["ladder", "stage", "period", "expected_share", "observed_share"], where)
    sub = rows_where(audit, where, ladder=ladder)
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
