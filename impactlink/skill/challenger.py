"""The boosted challenger: monotone histogram gradient boosting on the best single candidate.

Scored on the same folds as the candidates (Chen & Guestrin 2016; scikit-learn's
``HistGradientBoostingClassifier``). :func:`_boost_fold` is the task run through
:func:`impactlink.execution.map_tasks` (a top-level, picklable function).

References
----------
Chen, T., Guestrin, C. (2016). XGBoost: a scalable tree boosting system. KDD '16, 785-794.
"""

from __future__ import annotations

import numpy as np

from impactlink.skill._shared import _score_oof


def _challenger(ctx, units, best_rec, *, seed, jobs=1, dask_address=None) -> dict:
    """Monotone histogram gradient boosting on the best single candidate, same folds."""
    u = units[best_rec["unit"]]
    h = u.plain if u.plain is not None else u.hist  # the index only, no season classes
    K = ctx.layout.n_levels
    layout = ctx.layout
    N = h.N.sum(-1)
    z = h.S[..., 0] / np.maximum(N, 1e-12)  # (G, R) bin means
    Ntot = h.N.sum(0)
    Stot = h.S[..., 0].sum(0)
    # monotone direction from the pooled data: impacts rise as the index falls (dry) unless
    # the data say otherwise
    ev = (h.N[..., 1:].sum(-1)).sum(0)
    xm = Stot / np.maximum(Ntot.sum(-1), 1e-12)
    w = Ntot.sum(-1)
    rate = ev / np.maximum(w, 1e-12)
    cov = np.sum(w * (xm - np.average(xm, weights=w)) * (rate - np.average(rate, weights=w)))
    sign = -1 if cov <= 0 else 1
    from impactlink.execution import map_tasks

    tasks = []
    for f in range(layout.n_folds):
        m = layout.block_fold == f
        tasks.append((Ntot - h.N[m].sum(0), Stot - h.S[m, :, 0].sum(0), z[m], sign, seed, K))
    fold_P = map_tasks(_boost_fold, tasks, jobs=jobs, dask_address=dask_address,
                       label=f"challenger {ctx.target.name}")
    P = np.zeros(h.N.shape)
    for f, pf in enumerate(fold_P):
        P[layout.block_fold == f] = pf
    P = P / P.sum(-1, keepdims=True)
    rec = _score_oof(P, h.N, layout, ctx.boot_w)
    ix, sc, lg = u.key
    rec.update(model="boosted", index=ix, scale_weeks=sc, lag_weeks=lg, index2=None,
               scale2_weeks=None, unit=None)
    return rec


def _boost_fold(task) -> np.ndarray:
    """Worker: one fold of the boosted challenger; level probabilities of the held-out rows.

    One monotone classifier per exceedance ``P(Y >= k)`` on the training bins (rows weighted
    by their counts), made non-increasing in ``k``. Threads are limited to one: on a few
    hundred rows the thread start-up costs more than it saves (6x slower here).
    """
    from sklearn.ensemble import HistGradientBoostingClassifier
    from threadpoolctl import threadpool_limits

    tr_N, tr_S, z_test, sign, seed, K = task
    n_r = tr_N.sum(-1)
    keep = n_r > 0
    xr = tr_S[keep] / n_r[keep]
    exceed = np.ones(z_test.shape + (K,))
    with threadpool_limits(1):
        for k in range(1, K):
            pos = tr_N[keep, k:].sum(-1)
            neg = n_r[keep] - pos
            if pos.sum() == 0 or neg.sum() == 0:
                exceed[..., k] = pos.sum() / max(n_r.sum(), 1.0)
                continue
            X = np.r_[xr, xr][:, None]
            y = np.r_[np.ones(xr.size), np.zeros(xr.size)]
            sw = np.r_[pos, neg]
            clf = HistGradientBoostingClassifier(
                max_iter=30, learning_rate=0.2, max_leaf_nodes=8, min_samples_leaf=10,
                monotonic_cst=[sign], early_stopping=False, random_state=seed)
            clf.fit(X[sw > 0], y[sw > 0], sample_weight=sw[sw > 0])
            exceed[..., k] = clf.predict_proba(z_test.reshape(-1, 1))[:, 1].reshape(z_test.shape)
    exceed = np.minimum.accumulate(exceed, axis=-1)
    tail = np.concatenate([exceed, np.zeros(exceed.shape[:-1] + (1,))], -1)
    return np.maximum(-np.diff(tail, axis=-1), 1e-15)
