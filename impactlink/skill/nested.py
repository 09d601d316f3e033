"""The nested (selection-aware) skill estimate.

The best ``index`` candidate is picked afresh inside each outer fold by the inner year-blocked
CV on the remaining folds and scored on the outer fold (Varma & Simon 2006).

References
----------
Varma, S., Simon, R. (2006). Bias in error estimation when using cross-validation for
model selection. BMC Bioinformatics 7, 91. https://doi.org/10.1186/1471-2105-7-91
"""

from __future__ import annotations

import numpy as np


def _nested(ctx, records, base) -> dict:
    """Selection-aware skill: pick the best ``index`` candidate inside each outer fold."""
    singles = [r for r in records if r["model"] == "index" and "inner" in r]
    if not singles or ctx.layout.excl.shape[0] == ctx.layout.n_main:
        return {}
    inner = np.array([r["inner"] for r in singles])  # (S, groups)
    lay = ctx.layout
    chosen = np.argmin(inner, axis=0)[lay.group_of_fold]  # (F,) the pick of each fold
    rps = np.array([r["rps_g"] for r in singles])
    pick = chosen[lay.block_fold]
    rps_nested = rps[pick, np.arange(lay.n_blocks)]
    W = ctx.boot_w
    num = rps_nested @ W.T
    den = base[0]["rps_g"] @ W.T
    skill = 1 - num / den
    lo_q, hi_q = (1 - ctx.ci) / 2, 1 - (1 - ctx.ci) / 2
    vals, counts = np.unique(chosen, return_counts=True)
    top = singles[int(vals[np.argmax(counts)])]
    return {
        "nested_rpss": float(skill[0]),
        "nested_rpss_lo": float(np.quantile(skill[1:], lo_q)) if W.shape[0] > 1 else np.nan,
        "nested_rpss_hi": float(np.quantile(skill[1:], hi_q)) if W.shape[0] > 1 else np.nan,
        "nested_distinct_picks": int(vals.size),
        "nested_most_picked": f"{top['index']} {top['scale_weeks']}w lag {top['lag_weeks']}w",
        "nested_most_picked_share": float(counts.max() / lay.n_folds),
    }
