"""The ranking table: pooled out-of-fold scores, bootstrap intervals, ranks and paired flags.

Whole years are resampled (block bootstrap, Künsch 1989) with the same replicates for every
record, so the comparisons with the best and with each baseline are paired.

References
----------
Künsch, H. R. (1989). The jackknife and the bootstrap for general stationary
observations. Annals of Statistics 17(3), 1217-1241.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd

from impactlink.skill.result import TABLE_COLUMNS

_ID = ["index", "scale_weeks", "lag_weeks", "index2", "scale2_weeks", "model"]


def _table(ctx, base, records):
    t = ctx.target
    recs = base + records
    W = ctx.boot_w
    ci = ctx.ci
    lo_q, hi_q = (1 - ci) / 2, 1 - (1 - ci) / 2
    rps = np.array([r["rps_g"] for r in recs]) @ W.T  # (T, 1 + R)
    sse = np.array([r["sse_g"] for r in recs]) @ W.T
    ll = np.array([r["ll_g"] for r in recs]) @ W.T
    n = np.array([r["n_g"] for r in recs]) @ W.T
    ev = np.array([r["ev_g"] for r in recs]) @ W.T
    clim = 0  # the climatology baseline is always the first record
    with np.errstate(divide="ignore", invalid="ignore"):
        rpss = 1 - rps / rps[clim]
        bss = 1 - sse / sse[clim]
        brier = sse / n
    auc = np.array([np.r_[r["auc"], r["auc_reps"]] for r in recs])
    has_boot = W.shape[0] > 1

    def interval(a):
        if not has_boot:
            return np.full(a.shape[0], np.nan), np.full(a.shape[0], np.nan)
        return _quantile(a[:, 1:], lo_q), _quantile(a[:, 1:], hi_q)

    df = pd.DataFrame({k: [r.get(k) for r in recs] for k in _ID})
    df.insert(0, "role", t.role)
    df.insert(0, "target", t.name)
    df.insert(0, "impact", t.impact)
    df["events"] = ev[:, 0].round().astype(int)
    df["n"] = n[:, 0].round().astype(int)
    df["n_years"] = ctx.n_years
    for name, arr in (("brier", brier), ("bss", bss), ("roc_auc", auc), ("rpss", rpss)):
        df[name] = arr[:, 0]
        df[f"{name}_lo"], df[f"{name}_hi"] = interval(arr)
        if name == "bss":
            df["log_loss"] = ll[:, 0] / n[:, 0]
        if name == "roc_auc":
            df["rps"] = rps[:, 0] / n[:, 0]
    df["calibration_slope"] = [r["calibration_slope"] for r in recs]

    is_base = df["model"].isin(["climatology", "seasonal", "persistence"]).to_numpy()
    df["rank"] = pd.array([pd.NA] * len(df), dtype="Int64")
    df["rank_overall"] = pd.array([pd.NA] * len(df), dtype="Int64")
    df["indistinguishable_from_best"] = pd.array([pd.NA] * len(df), dtype="boolean")
    cand = np.flatnonzero(~is_base)
    if cand.size:
        df.loc[cand, "rank_overall"] = (
            df.loc[cand, "rpss"].rank(ascending=False, method="min").astype(int).to_numpy())
    for _model, idx in df.iloc[cand].groupby("model").groups.items():
        idx = np.asarray(idx)
        df.loc[idx, "rank"] = df.loc[idx, "rpss"].rank(ascending=False,
                                                        method="min").astype(int).to_numpy()
        b = idx[np.nanargmax(df.loc[idx, "rpss"].to_numpy())]
        if has_boot:
            diff = rpss[b, 1:][None, :] - rpss[idx, 1:]
            df.loc[idx, "indistinguishable_from_best"] = _quantile(diff, lo_q) <= 0
        else:
            df.loc[idx, "indistinguishable_from_best"] = idx == b

    def beats(ref_row, rows_idx):
        if ref_row is None:
            return np.full(len(rows_idx), pd.NA)
        d = rpss[rows_idx] - rpss[ref_row][None, :]
        if has_boot:
            return _quantile(d[:, 1:], lo_q) > 0
        return d[:, 0] > 0

    seas = int(np.flatnonzero(df["model"].to_numpy() == "seasonal")[0])
    for col in ("beats_climatology", "beats_seasonal", "beats_persistence"):
        df[col] = pd.array([pd.NA] * len(df), dtype="boolean")
    allrows = np.arange(len(df))
    notclim = allrows[allrows != clim]
    df.loc[notclim, "beats_climatology"] = beats(clim, notclim)
    notseas = allrows[(allrows != seas) & (allrows != clim)]
    df.loc[notseas, "beats_seasonal"] = beats(seas, notseas)
    pers_rows = {int(df.at[i, "lag_weeks"]): i for i in allrows
                 if df.at[i, "model"] == "persistence"}
    for lag, pr in pers_rows.items():
        sel = np.flatnonzero((~is_base) & (df["lag_weeks"].to_numpy() == lag))
        if sel.size:
            df.loc[sel, "beats_persistence"] = beats(pr, sel)
    df = df[TABLE_COLUMNS].copy()
    for c in ("scale_weeks", "lag_weeks", "scale2_weeks"):
        df[c] = pd.array(df[c], dtype="Int64")
    return df, {"rpss": rpss, "records": recs}


def _quantile(a: np.ndarray, q: float) -> np.ndarray:
    """Row quantiles; the slow NaN-aware path only where a row has NaN (e.g. ROC area of a
    replicate without events)."""
    out = np.quantile(a, q, axis=1)
    bad = np.isnan(out)
    if bad.any():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            out[bad] = np.nanquantile(a[bad], q, axis=1)
    return out
