"""Prediction from a fitted :class:`~impactlink.models.ImpactModel`: linear predictors and
their delta-method variances, for one unit, for region members and county deviations.

:meth:`ImpactModel.predict` and :meth:`ImpactModel.predict_interval` map these through the
link's distribution function; :mod:`impactlink.models.curves` uses them on a grid.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from impactlink.errors import ModelError
from impactlink.models._design import as_feature_dict
from impactlink.schema import COUNTY

if TYPE_CHECKING:
    from impactlink.models.result import ImpactModel

__all__ = ["linear_predictor", "lp_var", "check_ci"]


def linear_predictor(model: ImpactModel, x_new, frame: pd.DataFrame | None
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Linear predictors eta_k = x'beta - c_k (+ u_j) and their variances, each (n, K).

    Parameters
    ----------
    model : ImpactModel
    x_new : ndarray (n,) or dict of name -> ndarray (n,)
        Index feature values.
    frame : pandas.DataFrame or None
        The other columns the model needs (see :meth:`ImpactModel.predict`).

    Returns
    -------
    lp, var : ndarray (n, K)
        NaN where the model (or the row's region model) is not ok.
    """
    m = model
    xd = as_feature_dict(x_new, name=m.design.features[0] if m.design else "x")
    n = len(next(iter(xd.values())))
    K = m.n_cuts
    if m.pooling == "all" or not m.members:
        if not m.ok:
            return np.full((n, K), np.nan), np.full((n, K), np.nan)
        Xd = m.spec.build(xd, frame, n).to_numpy(dtype=float)
        return lp_var(m, Xd)
    if frame is None or "region" not in frame.columns:
        raise ModelError(
            f"a model with pooling={m.pooling!r} needs frame with a 'region' column"
        )
    lp = np.full((n, K), np.nan)
    var = np.full((n, K), np.nan)
    regions = frame["region"].astype(str).to_numpy()
    # loop over regions (a handful), each vectorised over its rows
    for r, member in m.members.items():
        rows = np.flatnonzero(regions == r)
        if rows.size == 0 or not member.ok:
            continue
        sub_x = {k: np.asarray(v)[rows] for k, v in xd.items()}
        sub_f = frame.iloc[rows].reset_index(drop=True)
        Xd = member.spec.build(sub_x, sub_f, rows.size).to_numpy(dtype=float)
        lp[rows], var[rows] = lp_var(member, Xd)
    if m.pooling == "county":
        if COUNTY not in frame.columns:
            raise ModelError("a model with pooling='county' needs a 'county_id' column in frame")
        if m.groups is None:
            raise ModelError(
                "a model with pooling='county' has groups=None; it cannot add county "
                "deviations. Fit it with fit_impact_model(..., pooling='county')."
            )
        g = m.groups.set_index(COUNTY)
        ids = frame[COUNTY].astype(str)
        u = np.array(ids.map(g["deviation"]).to_numpy(dtype=float))
        u_sd = np.array(ids.map(g["deviation_sd"]).to_numpy(dtype=float))
        unseen = np.isnan(u)
        u[unseen] = 0.0
        u_sd[unseen] = m.tau if np.isfinite(m.tau) else 0.0
        lp = lp + u[:, None]
        var = var + (u_sd**2)[:, None]
    return lp, var


def lp_var(m: ImpactModel, Xd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Linear predictors eta_k = x'beta - c_k and their delta-method variances, (n, K).

    ``Xd`` (n, p) holds the predictor columns of ``m`` in the order of its slopes; the
    variance of eta_k is g'Vg with g = (x, -e_k) and V the coefficient covariance.
    """
    p = len(m.predictors)
    V = m.cov.to_numpy(dtype=float)
    Vbb, Vbc, Vcc = V[:p, :p], V[:p, p:], V[p:, p:]
    eta = Xd @ m.beta if p else np.zeros(Xd.shape[0])
    lp = eta[:, None] - m.cuts[None, :]
    quad = np.einsum("ij,jk,ik->i", Xd, Vbb, Xd) if p else np.zeros(Xd.shape[0])
    var = quad[:, None] - 2.0 * (Xd @ Vbc) + np.diag(Vcc)[None, :]
    return lp, var


def check_ci(ci: float) -> None:
    """A ModelError unless ``ci`` (interval coverage) is strictly between 0 and 1."""
    if not (0.0 < float(ci) < 1.0):
        raise ModelError(f"ci must be strictly between 0 and 1 (e.g. 0.90); got {ci!r}")
