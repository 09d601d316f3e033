"""Partial pooling: county intercept deviations shrunk toward their region model.

A county with three events should not get its own curve from three events, nor be forced to
the regional curve. Each county j gets a deviation u_j on the linear predictor,

    P(level >= k | x, county j) = F(x' beta_r - c_{r,k} + u_j),   u_j ~ N(0, tau^2),

where (beta_r, c_r) is the fitted model of the county's region r, held fixed. The
between-county standard deviation tau is estimated by maximising the marginal likelihood of
all counties (u_j integrated out by adaptive Gauss-Hermite quadrature), and each county's
deviation is its posterior mode (an empirical-Bayes estimate). The weight a county's own data
receive, tau^2 / (tau^2 + 1/I_j) with I_j the information in its rows, is its shrinkage
weight: near 0 for a county with few events (pulled to the region), near 1 for a county with
many. Only the intercept varies by county; slopes are shared within the region.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from impactlink.models import _links
from impactlink.schema import COUNTY

__all__ = ["county_partial_pooling", "estimate_county_deviations"]

#: Search range of tau (standard deviation of county deviations on the link scale).
TAU_BOUNDS = (1e-3, 5.0)

#: Gauss-Hermite nodes for the marginal likelihood.
N_QUADRATURE = 9


def county_partial_pooling(whole, members: dict, Xall: pd.DataFrame, y: np.ndarray,
                           frame: pd.DataFrame, *, note: str = ""):
    """County-pooled :class:`~impactlink.models.result.ImpactModel` from region fits.

    Parameters
    ----------
    whole : ImpactModel
        The all-county model (parent of regions whose own model failed).
    members : dict
        region -> region model.
    Xall : pandas.DataFrame
        Predictor columns of every target row (as built at fit time).
    y : ndarray
        Levels of every target row.
    frame : pandas.DataFrame
        The target frame (county_id, region).
    """
    parents = {r: (m if m.ok else whole) for r, m in members.items()}
    usable = {r: m for r, m in parents.items() if m.ok}
    if not usable:
        reasons = "; ".join(f"{r}: {m.reason}" for r, m in members.items())
        return replace(whole, ok=False, pooling="county", members=members, method="none",
                       reason=f"neither the region models nor the all-county model could be "
                              f"fitted ({reasons})")
    n = len(frame)
    K = whole.n_cuts
    eta = np.full(n, np.nan)
    cuts = np.full((n, K), np.nan)
    regions = frame["region"].astype(str).to_numpy()
    parent_name = np.empty(n, dtype=object)
    # loop over regions (a handful), each vectorised over its rows
    for r, m in usable.items():
        rows = regions == r
        Xr = Xall.loc[rows, list(m.predictors)].to_numpy(dtype=float)
        eta[rows] = Xr @ m.beta
        cuts[rows] = m.cuts
        parent_name[rows] = r if m is members[r] else "all"
    keep = np.isfinite(eta) & np.isfinite(y) & np.isfinite(cuts).all(axis=1)
    ids = frame[COUNTY].astype(str).to_numpy()[keep]
    codes, county_ids = pd.factorize(ids, sort=True)
    yk = y[keep].astype(np.int64)
    est = estimate_county_deviations(eta[keep], cuts[keep], yk, codes, whole.link)
    first = pd.Series(np.arange(keep.sum())).groupby(codes).first().to_numpy()
    groups = pd.DataFrame(
        {
            COUNTY: np.asarray(county_ids, dtype=object),
            "region": regions[keep][first],
            "n": np.bincount(codes, minlength=len(county_ids)),
            "events": np.bincount(codes, weights=(yk >= 1), minlength=len(county_ids)).astype(
                int),
            "deviation": est["deviation"],
            "deviation_sd": est["deviation_sd"],
            "shrinkage_weight": est["shrinkage_weight"],
            "parent": parent_name[keep][first],
        }
    )
    notes = [s for s in (note,) if s]
    failed = [r for r, m in members.items() if not m.ok]
    if failed:
        notes.append("region(s) " + ", ".join(failed) + " use the all-county model as parent")
    return replace(
        whole,
        pooling="county",
        members=parents,
        groups=groups,
        tau=est["tau"],
        method=f"{whole.method}+county_random_intercept",
        reason="; ".join(notes),
    )


def estimate_county_deviations(
    eta: np.ndarray, cuts: np.ndarray, y: np.ndarray, codes: np.ndarray, link: str,
    *, tau_bounds: tuple[float, float] = TAU_BOUNDS, n_quadrature: int = N_QUADRATURE,
) -> dict:
    """Empirical-Bayes county intercept deviations with an estimated spread tau.

    Parameters
    ----------
    eta : ndarray (n,)
        Fixed linear predictor x'beta of each row (from the parent model).
    cuts : ndarray (n, K)
        Parent thresholds of each row.
    y : ndarray (n,)
        Levels 0..K.
    codes : ndarray (n,)
        County code 0..J-1 of each row.
    link : {"logit", "probit"}

    Returns
    -------
    dict
        ``tau`` (float), and per county (J,): ``deviation`` (posterior mode of u_j),
        ``deviation_sd`` (1/sqrt(I_j + 1/tau^2)), ``shrinkage_weight`` (tau^2/(tau^2 + 1/I_j)),
        ``information`` (I_j, minus the second derivative of the county log-likelihood at
        the mode).

    Notes
    -----
    Marginal log-likelihood of tau (Pinheiro and Bates 1995, adaptive Gauss-Hermite
    quadrature, their eq. 8 for a scalar random effect):

        log L(tau) = sum_j log[ sqrt(2) s_j sum_q w_q exp(x_q^2) g_j(m_j + sqrt(2) s_j x_q) ],
        g_j(u) = exp(l_j(u)) N(u; 0, tau^2),

    with m_j the mode of log g_j and s_j = (-d^2 log g_j / du^2)^(-1/2) at the mode. With one
    node this is the Laplace approximation. ``log tau`` is maximised over ``tau_bounds``.
    Modes are found by Newton's method, vectorised over all counties (the county
    log-likelihood of a cumulative logit or probit model is concave in u).

    References
    ----------
    Pinheiro, J. C. and Bates, D. M. (1995). Approximations to the log-likelihood function in
    the nonlinear mixed-effects model. Journal of Computational and Graphical Statistics
    4(1), 12-35. https://doi.org/10.1080/10618600.1995.10474663
    Efron, B. and Morris, C. (1975). Data analysis using Stein's estimator and its
    generalizations. Journal of the American Statistical Association 70(350), 311-319.
    """
    from scipy import optimize

    codes = np.asarray(codes, dtype=np.int64)
    J = int(codes.max()) + 1 if codes.size else 0
    nodes, weights = np.polynomial.hermite.hermgauss(n_quadrature)

    def modes(tau):
        u = np.zeros(J)
        prec = 1.0 / tau**2
        for _ in range(50):  # Newton iterations, vectorised over counties
            _, d1, d2 = _links.row_loglik(eta + u[codes], cuts, y, link)
            score = np.bincount(codes, weights=d1, minlength=J) - prec * u
            info = -np.bincount(codes, weights=d2, minlength=J) + prec
            step = score / info
            step = np.clip(step, -2.0, 2.0)
            u = u + step
            if np.max(np.abs(step)) < 1e-9:
                break
        _, _, d2 = _links.row_loglik(eta + u[codes], cuts, y, link)
        data_info = np.maximum(-np.bincount(codes, weights=d2, minlength=J), 1e-12)
        return u, data_info

    def neg_marginal(log_tau):
        tau = np.exp(log_tau)
        u, data_info = modes(tau)
        s = 1.0 / np.sqrt(data_info + 1.0 / tau**2)
        terms = np.empty((nodes.size, J))
        for q, (xq, wq) in enumerate(zip(nodes, weights)):  # a few quadrature nodes
            uq = u + np.sqrt(2.0) * s * xq
            ll, _, _ = _links.row_loglik(eta + uq[codes], cuts, y, link)
            lj = np.bincount(codes, weights=ll, minlength=J)
            log_prior = -0.5 * uq**2 / tau**2 - 0.5 * np.log(2 * np.pi * tau**2)
            terms[q] = np.log(wq) + xq**2 + lj + log_prior
        mx = terms.max(axis=0)
        log_lj = np.log(np.sqrt(2.0) * s) + mx + np.log(np.exp(terms - mx).sum(axis=0))
        return -float(log_lj.sum())

    lo, hi = np.log(tau_bounds[0]), np.log(tau_bounds[1])
    res = optimize.minimize_scalar(neg_marginal, bounds=(lo, hi), method="bounded",
                                   options={"xatol": 1e-4})
    tau = float(np.exp(res.x))
    u, data_info = modes(tau)
    return {
        "tau": tau,
        "deviation": u,
        "deviation_sd": 1.0 / np.sqrt(data_info + 1.0 / tau**2),
        "shrinkage_weight": tau**2 / (tau**2 + 1.0 / data_info),
        "information": data_info,
    }
