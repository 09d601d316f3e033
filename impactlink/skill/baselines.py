"""Baselines: climatological base rate, seasonal base rate and persistence (per lag).

Each is a categorical forecast (level frequencies of the training folds per category),
scored out of fold like every candidate.
"""

from __future__ import annotations

import numpy as np

from impactlink.skill import _engine as E
from impactlink.skill._shared import _score_oof


def _baselines(ctx, cands) -> list[dict]:
    out = []
    zero = np.zeros(ctx.rows.size, dtype=np.int64)
    specs = [("climatology", None, zero, 1, 1.0),
             ("seasonal", None, ctx.season, int(ctx.season.max()) + 1, 2.0)]
    lags = sorted({c[2] for c in cands})
    for lag in lags:
        if lag in ctx.pers_cells:
            specs.append(("persistence", lag, ctx.pers_cells[lag], ctx.layout.n_levels + 1, 1.0))
    for model, lag, cat, n_cat, shrink in specs:
        P, N = _categorical(ctx, cat, n_cat, shrink=shrink)
        rec = _score_oof(P, N, ctx.layout, ctx.boot_w)
        rec.update(model=model, index=None, scale_weeks=None, lag_weeks=lag, index2=None,
                   scale2_weeks=None, P_oof=P, cat=cat)
        out.append(rec)
    return out


def _categorical(ctx, cat, n_cat, *, shrink):
    K = ctx.layout.n_levels
    G = ctx.layout.n_blocks
    N = np.bincount((ctx.block * n_cat + cat) * K + ctx.level,
                    minlength=G * n_cat * K).reshape(G, n_cat, K).astype(float)
    P = E.rate_predictions(N, ctx.layout, shrink=shrink)
    return P, N
