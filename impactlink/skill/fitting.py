"""Batched cross-validated fits of every candidate histogram.

:func:`_score_units` fits the units of one (index, lag) group, same-shaped units together
(:func:`_score_chunk`); it runs inside the group's task of
:func:`impactlink.skill.grid._grid`, wherever that runs. :func:`_records` names the results.
"""

from __future__ import annotations

import warnings

import numpy as np

from impactlink.errors import SkillWarning
from impactlink.skill import _engine as E
from impactlink.skill._shared import _score_oof

CHUNK = 12  # units per batched fit (a group's scales, or its short x long pairs, in one)
VARIANTS = {  # unit kind -> (model, use cells, nested estimate)
    "single": [("index", False, True)],
    "single_pers": [("index_persistence", True, False)],
    "pair": [("index_pair", False, False)],
}


def _score_units(units, layout, W, *, chunk: int = CHUNK) -> list[list[dict]]:
    """Fit and score every CV job of the units of one (index, lag) group.

    Units of the same kind and shape are fitted together, ``chunk`` at a time; returns the
    records of each unit (one per model variant), in unit order.
    """
    by_shape: dict[tuple, list[int]] = {}
    for i, u in enumerate(units):
        by_shape.setdefault((u.kind, u.hist.n_cells, u.use_cells), []).append(i)
    out: list[list[dict]] = [[] for _ in units]
    for (kind, _, _), idx in by_shape.items():
        for s in range(0, len(idx), chunk):
            part = idx[s: s + chunk]
            res = _score_chunk([units[i].hist for i in part], layout, VARIANTS[kind], W)
            for i, r in zip(part, res, strict=True):
                out[i] = r
    return out


def _records(ctx, units, scored) -> list[dict]:
    """The candidate records of every unit: its scores named by index, scales and lag."""
    records = []
    n_bad = 0
    for i, (u, per_unit) in enumerate(zip(units, scored, strict=True)):
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


def _score_chunk(hists, layout, variants, W) -> list[list[dict]]:
    """Fit and score every CV job of a chunk of same-shaped candidates."""
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
