"""The persistence comparison: per lag, does the best index add skill beyond the level known?
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def _persistence_gain(ctx, table, reps) -> pd.DataFrame:
    """Per lag: does the best index add skill beyond the level known at forecast time?"""
    rpss = reps["rpss"]
    lo_q, hi_q = (1 - ctx.ci) / 2, 1 - (1 - ctx.ci) / 2
    has_boot = rpss.shape[1] > 1
    model = table["model"].to_numpy()
    lag = table["lag_weeks"].to_numpy(dtype=float, na_value=np.nan)
    rows = []
    for pr in np.flatnonzero(model == "persistence"):
        L = lag[pr]
        ip = np.flatnonzero((model == "index_persistence") & (lag == L))
        io = np.flatnonzero((model == "index") & (lag == L))
        if ip.size == 0 or io.size == 0:
            continue
        b_ip = ip[np.nanargmax(rpss[ip, 0])]
        b_io = io[np.nanargmax(rpss[io, 0])]
        gain = rpss[b_ip] - rpss[pr]
        alone = rpss[b_io] - rpss[pr]
        g_lo = np.quantile(gain[1:], lo_q) if has_boot else np.nan
        g_hi = np.quantile(gain[1:], hi_q) if has_boot else np.nan
        a_lo = np.quantile(alone[1:], lo_q) if has_boot else np.nan
        adds = bool(g_lo > 0) if has_boot else bool(gain[0] > 0)
        rows.append({
            "impact": ctx.target.impact, "target": ctx.target.name, "lag_weeks": int(L),
            "persistence_rpss": rpss[pr, 0],
            "index": table.at[b_ip, "index"], "scale_weeks": table.at[b_ip, "scale_weeks"],
            "index_persistence_rpss": rpss[b_ip, 0],
            "best_index_alone": table.at[b_io, "index"],
            "best_index_alone_scale_weeks": table.at[b_io, "scale_weeks"],
            "index_alone_rpss": rpss[b_io, 0],
            "gain": gain[0], "gain_lo": g_lo, "gain_hi": g_hi, "index_adds_skill": adds,
            "index_alone_beats_persistence": bool(a_lo > 0) if has_boot else bool(alone[0] > 0),
        })
    cols = ["impact", "target", "lag_weeks", "persistence_rpss", "index", "scale_weeks",
            "index_persistence_rpss", "best_index_alone", "best_index_alone_scale_weeks",
            "index_alone_rpss", "gain", "gain_lo", "gain_hi", "index_adds_skill",
            "index_alone_beats_persistence"]
    return pd.DataFrame(rows, columns=cols)
