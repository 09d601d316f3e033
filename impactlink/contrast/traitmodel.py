"""Trait-aware impact model: index, county traits, trait x index, partially pooled counties.

One logistic model for all counties,

    logit P(level >= k | x, county c) = b0 + b1 x + sum_k (g_k + d_k x) z_ck + u_c,
    u_c ~ N(0, tau^2),

with ``x`` the impact's best index feature (centred on its mean over the rows used), ``z_ck``
trait k of county c standardized across counties (each county once, SD with ddof = 1), so
``g_k`` shifts the county's risk and ``d_k`` changes its sensitivity to the index, and ``u_c``
the county effect that the index and the traits leave unexplained, shrunk toward zero.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import special

from impactlink.errors import ContrastError, ContrastWarning
from impactlink.link.target import Target
from impactlink.models.pooling import estimate_county_deviations
from impactlink.schema import COUNTY, LEVEL, REGION, YEAR

__all__ = ["TraitModel", "RefitRows", "fit_trait_model", "refit", "refit_rows", "model_rows",
           "penalised_fit"]

#: Alternations between the fixed part and the spread tau of the county effects.
_TAU_ROUNDS = 3


@dataclass(frozen=True)
class TraitModel:
    """A fitted trait-aware impact model (see the module docstring for the equation).

    Attributes
    ----------
    traits : tuple of str
        Trait names, in the order of ``gamma`` and ``delta``.
    b0, b1 : float
        Intercept and index slope [per index unit] at the mean trait values.
    gamma, delta : ndarray (K,)
        Trait shift and trait x index slope change per SD of each trait.
    x_center : float
        Mean of the index feature over the rows used (``x`` enters as ``x - x_center``).
    trait_mean, trait_sd : ndarray (K,)
        Mean and SD (ddof = 1) of each trait across counties, in the trait's own units.
    tau : float
        Estimated SD of the county effects on the log-odds scale.
    county_effect : pandas.Series
        Posterior mode of ``u_c`` per county id.
    rows : pandas.DataFrame
        The rows used: ``county_id, region, year, season, time, x`` (raw index units),
        ``y`` (0/1) and extra target columns (``departure_pct`` where present).
    county_traits : pandas.DataFrame
        One row per county: ``county_id, region`` and the raw trait values.
    provenance : dict
    """

    traits: tuple[str, ...]
    b0: float
    b1: float
    gamma: np.ndarray
    delta: np.ndarray
    x_center: float
    trait_mean: np.ndarray
    trait_sd: np.ndarray
    tau: float
    county_effect: pd.Series
    rows: pd.DataFrame
    county_traits: pd.DataFrame
    provenance: dict = field(default_factory=dict)

    def standardize(self, raw: np.ndarray) -> np.ndarray:
        """Traits in own units (..., K) -> standardized values."""
        return (np.asarray(raw, dtype=float) - self.trait_mean) / self.trait_sd

    def linear_predictor(self, x: np.ndarray, z: np.ndarray, u: np.ndarray | float
                         ) -> np.ndarray:
        """Log-odds for raw index values ``x`` (n,), standardized traits ``z`` (n, K) or (K,),
        county effects ``u``."""
        xc = np.asarray(x, dtype=float) - self.x_center
        z = np.asarray(z, dtype=float)
        return (self.b0 + self.b1 * xc + z @ self.gamma + (z @ self.delta) * xc + u)

    def coefficients(self) -> pd.DataFrame:
        """Tidy table of the fixed part: ``term, estimate`` (log-odds)."""
        names = (["intercept", "index"] + [f"{t}" for t in self.traits]
                 + [f"{t}:index" for t in self.traits])
        vals = np.concatenate([[self.b0, self.b1], self.gamma, self.delta])
        return pd.DataFrame({"term": names, "estimate": vals})


def fit_trait_model(target: Target, x: np.ndarray, traits: pd.DataFrame,
                    counties: pd.DataFrame | None = None, *, level_at_least: int = 1
                    ) -> TraitModel:
    """Fit the trait-aware, partially pooled impact model.

    Parameters
    ----------
    target : Target
        County-grain target (``county_week`` or ``county_year``); the outcome is level >= 1.
    x : ndarray (n_rows,)
        The best index feature for each row of ``target.frame`` [index units].
    traits : pandas.DataFrame
        ``county_id`` and numeric trait columns, one row per county.
    counties : pandas.DataFrame, optional
        ``county_id`` and ``region`` (overrides the target frame's region).
    level_at_least : int, default 1
        The modelled event is level >= this (1..K; e.g. 2 for a shortfall of at least the
        second class edge of an ordinal yield target).

    Returns
    -------
    TraitModel

    Raises
    ------
    ContrastError
        Wrong grain, mismatched ``x``, no usable trait, too few rows or events, or a fit that
        does not converge (separation).

    Notes
    -----
    For a given tau the fixed part and the county effects are the joint mode of the penalised
    log-likelihood :math:`\\ell(\\beta, u) - \\sum_c u_c^2 / (2\\tau^2)` (Newton's method on
    all parameters at once; the penalised quasi-likelihood of Breslow & Clayton 1993). tau is
    the maximiser of the marginal likelihood of the county effects given the fixed part
    (adaptive Gauss-Hermite quadrature, :func:`impactlink.models.pooling.estimate_county_deviations`);
    the two steps alternate a few times.

    References
    ----------
    Breslow, N. E., & Clayton, D. G. (1993). Approximate inference in generalized linear mixed
    models. Journal of the American Statistical Association, 88(421), 9-25.
    https://doi.org/10.1080/01621459.1993.10594284
    """
    rows, names, ct, prov = model_rows(target, x, traits, counties,
                                       level_at_least=level_at_least)
    raw = ct[names].to_numpy(float)
    mean, sd = raw.mean(axis=0), raw.std(axis=0, ddof=1)
    codes, ids = pd.factorize(rows[COUNTY].to_numpy(), sort=True)
    z_c = (ct.set_index(COUNTY).loc[ids, names].to_numpy(float) - mean) / sd
    xc_center = float(rows["x"].mean())
    design = _design(rows["x"].to_numpy() - xc_center, z_c[codes])
    y = rows["y"].to_numpy()
    w = np.ones(len(y))
    tau = 1.0
    theta = None
    for _ in range(_TAU_ROUNDS):
        theta = penalised_fit(design, codes, y, w, tau, start=theta)
        eta_fixed = design @ theta[: design.shape[1]]
        est = estimate_county_deviations(eta_fixed, np.zeros((len(y), 1)), y.astype(np.int64),
                                         codes, "logit")
        new = float(est["tau"])
        done = abs(np.log(new) - np.log(tau)) < 1e-3
        tau = new
        if done:
            break
    theta = penalised_fit(design, codes, y, w, tau, start=theta)
    K = len(names)
    beta, u = theta[: design.shape[1]], theta[design.shape[1]:]
    prov.update({"tau": tau, "method": "logit + traits + traits x index + county random "
                 "intercept (penalised quasi-likelihood, tau by marginal likelihood)"})
    return TraitModel(
        traits=tuple(names), b0=float(beta[0]), b1=float(beta[1]),
        gamma=beta[2:2 + K].copy(), delta=beta[2 + K:].copy(), x_center=xc_center,
        trait_mean=mean, trait_sd=sd, tau=tau,
        county_effect=pd.Series(u, index=pd.Index(np.asarray(ids, dtype=object), name=COUNTY)),
        rows=rows, county_traits=ct, provenance=prov)


@dataclass(frozen=True)
class RefitRows:
    """A model's rows sorted by county, built once for many refits (:func:`refit_rows`).

    Attributes
    ----------
    order : ndarray (n,)
        Position in ``model.rows`` of each sorted row (row weights are taken in this order).
    design, codes, y : ndarrays
        Fixed-effect design, county code 0..J-1 (sorted) and outcome of the sorted rows.
    ids : ndarray (J,)
        County id of each code.
    start : ndarray (p + J,)
        The model's estimate, the start of every refit.
    """

    order: np.ndarray
    design: np.ndarray
    codes: np.ndarray
    y: np.ndarray
    ids: np.ndarray
    start: np.ndarray


def refit_rows(model: TraitModel) -> RefitRows:
    """The rows of ``model`` sorted by county: each county's rows contiguous, so the Newton
    step's county sums are one segment sum (``np.add.reduceat``) instead of one
    ``bincount`` per design column."""
    rows = model.rows
    codes, ids = pd.factorize(rows[COUNTY].to_numpy(), sort=True)
    order = np.argsort(codes, kind="stable")
    codes = codes[order]
    z_c = model.standardize(model.county_traits.set_index(COUNTY).loc[ids, list(model.traits)]
                            .to_numpy(float))
    design = _design(rows["x"].to_numpy()[order] - model.x_center, z_c[codes])
    start = np.concatenate([[model.b0, model.b1], model.gamma, model.delta,
                            model.county_effect.loc[ids].to_numpy()])
    return RefitRows(order=order, design=design, codes=codes, y=rows["y"].to_numpy()[order],
                     ids=np.asarray(ids, dtype=object), start=start)


def refit(model: TraitModel, row_weights: np.ndarray, *,
          prepared: RefitRows | None = None) -> TraitModel:
    """The same model refitted with row weights (a bootstrap replicate), tau held fixed.

    ``row_weights`` follow the order of ``model.rows``; ``prepared`` (from
    :func:`refit_rows`) saves rebuilding the sorted design for every replicate.
    """
    prep = prepared if prepared is not None else refit_rows(model)
    theta = penalised_fit(prep.design, prep.codes, prep.y,
                          np.asarray(row_weights, dtype=float)[prep.order], model.tau,
                          start=prep.start)
    K = len(model.traits)
    p = prep.design.shape[1]
    return TraitModel(
        traits=model.traits, b0=float(theta[0]), b1=float(theta[1]),
        gamma=theta[2:2 + K].copy(), delta=theta[2 + K:p].copy(), x_center=model.x_center,
        trait_mean=model.trait_mean, trait_sd=model.trait_sd, tau=model.tau,
        county_effect=pd.Series(theta[p:], index=pd.Index(prep.ids, name=COUNTY)),
        rows=model.rows, county_traits=model.county_traits, provenance=model.provenance)


def penalised_fit(design: np.ndarray, codes: np.ndarray, y: np.ndarray, w: np.ndarray,
                  tau: float, *, start: np.ndarray | None = None, max_iter: int = 60
                  ) -> np.ndarray:
    """Joint mode of ``(beta, u)``: weighted logistic log-likelihood minus ``sum u^2/(2 tau^2)``.

    Parameters
    ----------
    design : ndarray (n, p)
        Fixed-effect design.
    codes : ndarray (n,)
        County code 0..J-1 of each row.
    y, w : ndarray (n,)
        Outcome 0/1 and row weight (bootstrap multiplicity).
    tau : float
        SD of the county effects.

    Returns
    -------
    ndarray (p + J,)
        ``beta`` followed by ``u``.

    Notes
    -----
    When ``codes`` are sorted with every county present (:func:`refit_rows`), the county
    sums of the weighted design are segment sums (``np.add.reduceat``, the same additions in
    the same order as ``bincount``); otherwise one ``bincount`` per column.
    """
    n, p = design.shape
    J = int(codes.max()) + 1
    seg = _segments(codes, J)
    theta = np.zeros(p + J) if start is None else np.asarray(start, dtype=float).copy()
    prec = 1.0 / tau**2
    for _ in range(max_iter):
        eta = design @ theta[:p] + theta[p:][codes]
        mu = special.expit(eta)
        r = w * (y - mu)
        v = w * mu * (1.0 - mu)
        g_beta = design.T @ r
        g_u = np.bincount(codes, weights=r, minlength=J) - prec * theta[p:]
        dv = design * v[:, None]
        a = dv.T @ design  # (p, p); p is small (2 + 2K columns)
        if seg is not None:
            cross = np.add.reduceat(dv, seg, axis=0)  # (J, p)
        else:
            cross = np.column_stack([np.bincount(codes, weights=dv[:, c], minlength=J)
                                     for c in range(p)])
        d = np.bincount(codes, weights=v, minlength=J) + prec  # diagonal county block
        try:
            step = _arrow_solve(a, cross, d, g_beta, g_u)
        except np.linalg.LinAlgError:
            break
        big = np.max(np.abs(step))
        if big > 5.0:
            step *= 5.0 / big
        theta = theta + step
        if big < 1e-10:
            return theta
    if not np.all(np.isfinite(theta)) or np.max(np.abs(theta[:p])) > 30:
        raise ContrastError(
            "the trait-aware impact model did not converge (the impact is nearly separated by "
            "the index or the traits); use fewer traits or a longer record.")
    return theta


def _segments(codes: np.ndarray, J: int) -> np.ndarray | None:
    """Start of each county's rows when ``codes`` are sorted and all J present, else None."""
    if codes.size == 0 or np.any(codes[1:] < codes[:-1]):
        return None
    starts = np.searchsorted(codes, np.arange(J))
    if np.any(np.diff(np.r_[starts, codes.size]) <= 0):
        return None
    return starts


def _arrow_solve(a: np.ndarray, cross: np.ndarray, d: np.ndarray, g_beta: np.ndarray,
                 g_u: np.ndarray) -> np.ndarray:
    """Solve the Newton system ``[[a, cross.T], [cross, diag(d)]] step = [g_beta, g_u]``.

    The county block of the Hessian is diagonal (one random intercept per county), so the
    fixed part comes from the p x p Schur complement ``a - cross.T diag(1/d) cross`` and
    the county effects from one division each: O(J p^2) work and memory instead of the
    O(J^3) dense solve of the (p + J) system (block elimination, Golub & Van Loan 2013,
    section 3.2.10; the same step up to round-off). ``d > 0`` always (it includes the
    prior precision 1/tau^2); a singular Schur complement raises ``LinAlgError`` as the
    dense solve would.

    References
    ----------
    Golub, G. H., & Van Loan, C. F. (2013). Matrix Computations, 4th ed. Johns Hopkins
    University Press.
    """
    cd = cross / d[:, None]  # diag(1/d) cross, (J, p)
    schur = a - cross.T @ cd
    step_beta = np.linalg.solve(schur, g_beta - cd.T @ g_u)
    step_u = (g_u - cross @ step_beta) / d
    return np.concatenate([step_beta, step_u])


def model_rows(target: Target, x: np.ndarray, traits: pd.DataFrame,
               counties: pd.DataFrame | None = None, *, level_at_least: int = 1
               ) -> tuple[pd.DataFrame, list[str], pd.DataFrame, dict]:
    """Rows with a feature value, a level and complete traits; usable trait names."""
    frame = target.frame
    k = int(level_at_least)
    if not 1 <= k < max(len(target.levels), 2):
        raise ContrastError(
            f"level_at_least={level_at_least!r} is not a level of target {target.name!r} "
            f"(levels {list(target.levels)}); give 1..{max(len(target.levels) - 1, 1)}.")
    if target.grain not in ("county_week", "county_year") or COUNTY not in frame.columns:
        raise ContrastError(
            f"target {target.name!r} is on the {target.grain!r} grain; county contrasts need a "
            "county grain (county_week or county_year) with a county_id column.")
    xv = np.asarray(x, dtype=np.float64)
    if xv.shape != (len(frame),):
        raise ContrastError(
            f"x has shape {xv.shape}; expected ({len(frame)},), one feature value per row of "
            f"target {target.name!r}.")
    if not isinstance(traits, pd.DataFrame) or COUNTY not in traits.columns:
        raise ContrastError("traits must be a DataFrame with a county_id column and numeric "
                            "trait columns (e.g. irrigated_share, soil_whc_mm).")
    prov: dict = {"target": target.name, "warnings": [], "rows_in": int(len(frame)),
                  "level_at_least": k}
    numeric = [c for c in traits.columns if c != COUNTY
               and pd.api.types.is_numeric_dtype(traits[c])
               and not pd.api.types.is_bool_dtype(traits[c])]
    tr = traits[[COUNTY] + numeric].copy()
    tr[COUNTY] = tr[COUNTY].astype(str)
    if tr[COUNTY].duplicated().any():
        dup = tr.loc[tr[COUNTY].duplicated(), COUNTY].tolist()[:5]
        raise ContrastError(f"traits has repeated county_id values {dup}; one row per county.")
    rows = pd.DataFrame({
        COUNTY: frame[COUNTY].astype(str).to_numpy(),
        YEAR: frame[YEAR].to_numpy(),
        "season": frame["season"].to_numpy() if "season" in frame.columns else 0,
        "x": xv,
        "y": (frame[LEVEL].to_numpy(dtype=np.float64) >= k).astype(np.float64),
        LEVEL: frame[LEVEL].to_numpy(),
    })
    if "departure_pct" in frame.columns:
        rows["departure_pct"] = frame["departure_pct"].to_numpy(float)
    region = (frame[REGION].astype(str).to_numpy() if REGION in frame.columns
              else np.full(len(frame), ""))
    if counties is not None and REGION in counties.columns:
        lookup = pd.Series(counties[REGION].astype(str).to_numpy(),
                           index=counties[COUNTY].astype(str).to_numpy())
        region = lookup.reindex(rows[COUNTY]).fillna("").to_numpy()
    rows[REGION] = region
    ok = np.isfinite(xv) & frame[LEVEL].notna().to_numpy()
    ok &= rows[COUNTY].isin(tr[COUNTY]).to_numpy()
    if numeric:
        ok &= ~rows[[COUNTY]].merge(tr, on=COUNTY, how="left")[numeric].isna().any(
            axis=1).to_numpy()
    if (~ok).any():
        _warn(prov, f"{int((~ok).sum())} rows without a feature value, level or complete "
                    "traits left out")
    rows = rows[ok].reset_index(drop=True)
    ct = tr[tr[COUNTY].isin(rows[COUNTY])].sort_values(COUNTY).reset_index(drop=True)
    ct.insert(1, REGION, rows.drop_duplicates(COUNTY).set_index(COUNTY)[REGION]
              .reindex(ct[COUNTY]).to_numpy())
    sd = ct[numeric].std(ddof=1).to_numpy() if numeric else np.array([])
    keep = [c for c, s in zip(numeric, sd) if np.isfinite(s) and s > 0]
    if len(keep) < len(numeric):
        _warn(prov, f"traits constant across counties left out: "
                    f"{[c for c in numeric if c not in keep]}")
    if not keep:
        raise ContrastError("traits has no numeric column that varies across the counties "
                            "with data; add county characteristics such as irrigated_share.")
    n_events = int(rows["y"].sum())
    if len(rows) < 20 or n_events < 5 or n_events > len(rows) - 5 or ct.shape[0] < 3:
        raise ContrastError(
            f"target {target.name!r}: {len(rows)} usable rows in {ct.shape[0]} counties with "
            f"{n_events} events; need >= 20 rows, >= 3 counties and >= 5 of each outcome.")
    prov.update({"rows_used": int(len(rows)), "events": n_events,
                 "counties": int(ct.shape[0]), "traits": keep})
    return rows, keep, ct[[COUNTY, REGION] + keep], prov


def _design(xc: np.ndarray, z: np.ndarray) -> np.ndarray:
    return np.column_stack([np.ones_like(xc), xc, z, z * xc[:, None]])


def _warn(prov: dict, message: str) -> None:
    prov["warnings"].append(message)
    warnings.warn(message, ContrastWarning, stacklevel=3)
