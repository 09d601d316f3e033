"""The one-row summary of a target: best candidate, naive and nested skill, comparisons.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.skill._shared import _best_single


def _summary(ctx, table, nested, pers, reps) -> pd.DataFrame:
    t = ctx.target
    model = table["model"].to_numpy()
    singles = table[model == "index"]
    b = table.iloc[_best_single(table)]
    row = {
        "impact": t.impact, "target": t.name, "role": t.role, "kind": t.kind,
        "best_index": b["index"], "best_scale_weeks": b["scale_weeks"],
        "best_lag_weeks": b["lag_weeks"], "ranking_score": "rpss",
        "naive_rpss": b["rpss"], "naive_rpss_lo": b["rpss_lo"], "naive_rpss_hi": b["rpss_hi"],
        "best_bss": b["bss"], "best_roc_auc": b["roc_auc"],
        "n_candidates": int(len(singles)),
        "n_indistinguishable": int(singles["indistinguishable_from_best"].fillna(False).sum()),
        "events": int(b["events"]), "n": int(b["n"]), "n_years": ctx.n_years,
    }
    row.update({k: nested.get(k, np.nan) for k in
                ("nested_rpss", "nested_rpss_lo", "nested_rpss_hi", "nested_distinct_picks",
                 "nested_most_picked", "nested_most_picked_share")})
    pairs = table[model == "index_pair"]
    if len(pairs):
        p = pairs.loc[pairs["rpss"].idxmax()]
        row["best_pair"] = f"{p['index']} {p['scale_weeks']}w + {p['scale2_weeks']}w lag {p['lag_weeks']}w"
        row["best_pair_rpss"] = p["rpss"]
        g = _paired_gain(reps["rpss"], int(p.name), int(b.name), ctx.ci)
        row.update(best_pair_gain=g[0], best_pair_gain_lo=g[1], best_pair_gain_hi=g[2])
    boosted = table[model == "boosted"]
    if len(boosted):
        row["boosted_rpss"] = boosted["rpss"].iloc[0]
        g = _paired_gain(reps["rpss"], int(boosted.index[0]), int(b.name), ctx.ci)
        row.update(boosted_gain=g[0], boosted_gain_lo=g[1], boosted_gain_hi=g[2])
    if len(pers):
        p0 = pers.sort_values("lag_weeks").iloc[0]
        row.update(persistence_lag_weeks=p0["lag_weeks"], persistence_gain=p0["gain"],
                   persistence_gain_lo=p0["gain_lo"], persistence_gain_hi=p0["gain_hi"],
                   index_adds_skill=p0["index_adds_skill"])
    return pd.DataFrame([row])


def _paired_gain(rpss: np.ndarray, i: int, j: int, ci: float) -> tuple[float, float, float]:
    """Skill of row i minus row j, with the paired bootstrap interval (same replicates)."""
    d = rpss[i] - rpss[j]
    if d.size < 2:
        return float(d[0]), float("nan"), float("nan")
    lo, hi = np.quantile(d[1:], [(1 - ci) / 2, 1 - (1 - ci) / 2])
    return float(d[0]), float(lo), float(hi)
