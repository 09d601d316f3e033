"""Batched cross-validated fits of every candidate histogram.

:func:`_fit_all` groups same-shaped units into chunks and runs :func:`_score_chunk` on each
through :func:`impactlink.execution.map_tasks` (process pool or Dask: the task stays a
top-level, picklable function).
"""

from __future__ import annotations

import warnings

import numpy as np

from impactlink.errors import SkillWarning
from impactlink.execution import blas_threads
from impactlink.skill import _engine as E
from impactlink.skill._shared import _score_oof


def _fit_all(ctx, units, *, jobs, dask_address, progress, chunk=8) -> list[dict]:
    from impactlink.execution import map_tasks

    groups: dict[tuple, list[int]] = {}
    for i, u in enumerate(units):
        groups.setdefault((u.kind, u.hist.n_cells, u.use_cells), []).append(i)
    tasks, where = [], []
    for (kind, _, _use_cells), idx in groups.items():
        for s in range(0, len(idx), chunk):
            part = idx[s: s + chunk]
            if kind == "single":
                variants = [("index", False, True)]
            elif kind == "single_pers":
                variants = [("index_persistence", True, False)]
            else:
                variants = [("index_pair", False, False)]
            tasks.append(([units[i].hist for i in part], ctx.layout, variants, ctx.boot_w,
                          jobs > 1 or dask_address is not None))
            where.append(part)
    results = map_tasks(_score_chunk, tasks, jobs=jobs, dask_address=dask_address,
                        progress=progress, label=f"skill {ctx.target.name}")
    records = []
    n_bad = 0
    for part, res in zip(where, results, strict=True):
        for i, per_unit in zip(part, res, strict=True):
            u = units[i]
            for rec in per_unit:
                n_bad += rec.pop("n_unconverged")
                if u.kind in ("single", "single_pers"):
                    ix, sc, lg = u.key
                    rec.update(index=ix, scale_weeks=sc, lag_weeks=lg, index2=None,
                               scale2_weeks=None)
                else:
                    ix, s1, s2, lg = u.key
                    rec.update(index=ix, scale_weeks=s1, lag_weeks=lg, index2=ix,
                               scale2_weeks=s2)
                rec["unit"] = i
                records.append(rec)
    if n_bad:
        warnings.warn(f"target {ctx.target.name!r}: {n_bad} cross-validation fits stopped "
                      "before converging (their last iterate is used)", SkillWarning,
                      stacklevel=3)
    return records


def _score_chunk(task) -> list[list[dict]]:
    """Worker: fit and score every CV job of a chunk of same-shaped candidates."""
    hists, layout, variants, W, parallel = task
    if parallel:  # one BLAS thread per worker process: workers already fill the cores
        with blas_threads(1):
            return _score_chunk((hists, layout, variants, W, False))
    out: list[list[dict]] = [[] for _ in hists]
    for model, use_cells, nested in variants:
        coef, conv = E.fit_chunk(hists, layout, use_cells=use_cells,
                                 jobs_subset="all" if nested else "main")
        G = layout.n_blocks
        ji, gi = np.nonzero(layout.scored[layout.n_main:])
        for u, h in enumerate(hists):
            P_oof, eta = E.predict_blocks(h, coef[u], use_cells=use_cells,
                                          n_levels=layout.n_levels, jobs=layout.block_fold,
                                          blocks=np.arange(G), return_eta=True)
            rec = _score_oof(P_oof, h.N, layout, W, rank=eta)
            rec["model"] = model
            rec["coef_main"] = coef[u, : layout.n_main]
            rec["n_unconverged"] = int((~conv[u]).sum())
            if nested:
                # inner jobs: only the (job, block) pairs each inner fit scores
                P_in = E.predict_blocks(h, coef[u], use_cells=use_cells,
                                        n_levels=layout.n_levels, jobs=ji + layout.n_main,
                                        blocks=gi)
                rps = E.block_losses(P_in, h.N[gi])["rps"]
                inner = np.zeros(layout.n_groups)
                np.add.at(inner, layout.inner_of[ji + layout.n_main], rps)
                rec["inner"] = inner
            out[u].append(rec)
    return out
