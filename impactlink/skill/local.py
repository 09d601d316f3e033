"""Per-place best candidates (per region and unit), reliability and row-level predictions.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.skill import _engine as E
from impactlink.skill._shared import _feature
from impactlink.skill.scores import reliability_table, rps_per_row


def _local_and_predictions(ctx, features, units, records, base, table, *, n_local, keep,
                           threads: int = 1):
    """Per-region and per-unit best of the leading ``n_local`` candidates, the reliability
    table and the row-level predictions; the leading candidates' row losses are computed on
    ``threads`` threads (kept in rank order, so the result does not depend on it)."""
    from impactlink.execution import thread_map

    fr = ctx.target.frame.iloc[ctx.rows]
    recs = base + records
    idx = np.flatnonzero(table["model"].to_numpy() == "index")
    order = idx[np.argsort(-table["rpss"].to_numpy()[idx], kind="stable")][:n_local]
    if order.size == 0:
        return pd.DataFrame(), pd.DataFrame(), pd.DataFrame()
    lvl = ctx.level
    clim_P = base[0]["P_oof"][ctx.block, 0]
    clim_loss = rps_per_row(clim_P, lvl)
    best_P, best_eta = _row_probs(ctx, features, units, recs[order[0]])

    def loss(j):
        P = best_P if j == 0 else _row_probs(ctx, features, units, recs[order[j]])[0]
        return rps_per_row(P, lvl)

    losses = np.array(thread_map(loss, list(range(order.size)), threads))
    event = (lvl >= 1).astype(float)
    parts = []
    for level_name, col in (("region", "region"), ("unit", "unit_id")):
        if col not in fr:
            continue
        codes, labels = pd.factorize(fr[col].astype(str))
        m = labels.size
        L = np.stack([np.bincount(codes, weights=lo, minlength=m) for lo in losses])
        Lc = np.bincount(codes, weights=clim_loss, minlength=m)
        with np.errstate(divide="ignore", invalid="ignore"):
            skill = np.where(Lc > 0, 1 - L / Lc, np.nan)
        filled = np.where(np.isfinite(skill), skill, -np.inf)
        best = np.argmax(filled, axis=0)
        sel = table.iloc[order[best]]
        parts.append(pd.DataFrame({
            "impact": ctx.target.impact, "target": ctx.target.name, "level": level_name,
            "unit": labels.to_numpy(), "index": sel["index"].to_numpy(),
            "scale_weeks": sel["scale_weeks"].to_numpy(),
            "lag_weeks": sel["lag_weeks"].to_numpy(),
            "rpss": skill[best, np.arange(m)],
            "events": np.bincount(codes, weights=event, minlength=m).astype(int),
            "n": np.bincount(codes, minlength=m),
        }))
    local = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
    brow = table.iloc[order[0]]
    q_best = 1 - best_P[:, 0]
    rel = reliability_table(event, np.clip(q_best, 0, 1), n_bins=10)
    rel.insert(0, "target", ctx.target.name)
    if not keep:
        return local, pd.DataFrame(), rel
    preds = pd.DataFrame({
        "target": ctx.target.name,
        "unit_id": fr["unit_id"].to_numpy(),
        "time": fr["time"].to_numpy() if "time" in fr else pd.NaT,
        "year": fr["year"].to_numpy(),
        "level": lvl,
        "event": event.astype(int),
        "p_event_best": q_best,
        "eta_best": best_eta,  # held-out linear predictor: the ROC area's ordering
        "p_event_climatology": 1 - clim_P[:, 0],
        "p_event_seasonal": 1 - base[1]["P_oof"][ctx.block, base[1]["cat"], 0],
    })
    lag = int(brow["lag_weeks"])
    pb = [b for b in base if b["model"] == "persistence" and b["lag_weeks"] == lag]
    if pb:
        preds["p_event_persistence"] = 1 - pb[0]["P_oof"][ctx.block, pb[0]["cat"], 0]
    return local, preds, rel


def _row_probs(ctx, features, units, rec) -> tuple[np.ndarray, np.ndarray]:
    """Out-of-fold level probabilities (rows, K) and linear predictor (rows,) of one single
    candidate, row by row."""
    u = units[rec["unit"]]
    lay = ctx.layout
    P_oof, eta = E.predict_blocks(u.hist, rec["coef_main"], use_cells=u.use_cells,
                                  n_levels=lay.n_levels, jobs=lay.block_fold,
                                  blocks=np.arange(lay.n_blocks), return_eta=True)
    x = _feature(features, u.key, len(ctx.target.frame))[ctx.rows]
    lo, hi = u.transform[0][2:]
    b = E.bin_codes(x, u.n_bins, lo, hi)
    if u.n_season > 1:
        b = b * u.n_season + ctx.seasons.code
    cell = ctx.pers_cells[u.lag] if u.hist.n_cells > 1 else np.zeros_like(b)
    r = u.row_map[b * u.hist.n_cells + cell]
    return P_oof[ctx.block, r], eta[ctx.block, r]
