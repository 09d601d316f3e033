"""Fitting impact models: logistic (binary) and proportional-odds (ordinal) regression.

One public entry point, :func:`fit_impact_model`, returns an
:class:`~impactlink.models.result.ImpactModel` that predicts P(level >= k) with intervals.
Fits that cannot be made (no events, constant predictor, non-convergence) end as ``ok=False``
with the reason; fits that diverge because of separation are refitted with a light ridge
penalty and say so (:mod:`impactlink.models.separation`). Every fit is made by the one
cumulative link solver, :func:`impactlink.models.batch.fit_cumlogit_batch`.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from impactlink.errors import ModelError
from impactlink.link.target import Target
from impactlink.models import _links
from impactlink.models._design import (
    DesignSpec,
    as_feature_dict,
    standardise_traits,
)
from impactlink.models.batch import fit_cumlogit_batch
from impactlink.models.predict import check_ci as _check_ci  # noqa: F401 (outlook imports it)
from impactlink.models.result import ImpactModel
from impactlink.models.separation import (
    PRIOR_SD,
    SEPARATION_LIMIT,
    separation_symptom,
    slope_precision,
)
from impactlink.schema import COUNTY

__all__ = ["ImpactModel", "fit_impact_model", "SEPARATION_LIMIT", "POOLINGS"]

POOLINGS = ("all", "region", "county")

#: Fewest impact rows (and fewest non-impact rows) a model is fitted on.
MIN_EVENTS = 3

#: Newton-Raphson limits of the final fits (tighter than the cross-validation defaults).
MAX_ITER = 100
TOL = 1e-10


def fit_impact_model(
    target: Target,
    x,
    *,
    link: str = "logit",
    pooling: str = "all",
    seasonal: bool = False,
    traits: pd.DataFrame | None = None,
    covariates: tuple[str, ...] = (),
    meta: dict | None = None,
) -> ImpactModel:
    """Fit a logistic (binary) or proportional-odds (ordinal) impact model.

    Parameters
    ----------
    target : Target
        The impact target; its ``frame`` gives ``level``, ``season``, ``county_id``,
        ``region`` and any covariate columns.
    x : ndarray (n_rows,) or dict of name -> ndarray (n_rows,)
        Index feature values aligned to ``target.frame`` (unitless index values; negative =
        dry for standardized indices). At least one feature is needed (see Notes for a
        persistence-only model). Rows with a NaN in any predictor are left out.
    link : {"logit", "probit"}
        The distribution function F of P(level >= k) = F(x'b - c_k): logistic or
        standard normal.
    pooling : {"all", "region", "county"}
        ``"all"``: one model for all counties. ``"region"``: one model per region.
        ``"county"``: per-county intercept deviations shrunk toward the region model, with the
        shrinkage strength estimated (see :mod:`impactlink.models.pooling`).
    seasonal : bool
        Add sin and cos of 2*pi*season/period (ISO week, period 52.18; or month, period 12).
        Ignored, with a note in ``reason``, for annual targets.
    traits : pandas.DataFrame, optional
        County traits (``county_id`` + numeric columns), merged on county_id and standardised
        to mean 0, sd 1 over the target's counties.
    covariates : tuple of str
        Extra predictor columns of ``target.frame`` (e.g. ``("persistence_4",)`` or time since
        the last episode): index-only, persistence-only and index-plus-persistence models are
        just different predictor sets.
    meta : dict, optional
        Candidate metadata (``index``, ``scale_weeks``, ``lag_weeks``) stored on the model and
        copied into curves and outlook tables.

    Returns
    -------
    ImpactModel
        Never raises for data problems: no events, every row an event, an empty ordinal
        level, too few events, a constant index feature, non-convergence end as ``ok=False``
        with ``reason``. A fit rescued from separation by the ridge penalty is ``ok=True``
        with ``method="ridge_cumulative_link"`` and the symptom in ``reason`` (its
        predictions are usable; callers that want strict maximum likelihood filter on
        ``method``).

    Raises
    ------
    TypeError, ModelError
        For impossible requests: not a Target, unknown link or pooling, feature length not
        matching the frame, a covariate column the frame lacks, region pooling without a
        ``region`` column.

    Notes
    -----
    Binary targets: logistic (or probit) regression, logit P(level >= 1) = b_0 + x'b
    (McCullagh and Nelder 1989, Ch. 4). Ordinal targets: the cumulative link
    (proportional-odds) model logit P(level <= k-1) = c_k - x'b (McCullagh 1980). Both are
    the same model, stored in the form P(level >= k) = F(x'b - c_k) (a binary target is its
    two-level case, c_1 = -b_0), and both are fitted by maximum likelihood with one solver,
    :func:`impactlink.models.batch.fit_cumlogit_batch` (Newton-Raphson); the covariance is
    the inverse of the observed information. statsmodels ``GLM`` / ``OrderedModel`` and R's
    ``MASS::polr`` are the references it is tested against.

    Separation (the impact rows and the others split perfectly or almost perfectly along
    a predictor) sends maximum-likelihood slopes to infinity. It is detected when the fit
    does not converge, a standard error is not finite, or a slope exceeds
    ``SEPARATION_LIMIT`` per standard deviation of its predictor
    (:mod:`impactlink.models.separation`). The model is then refitted
    with a normal prior of sd 2.5 on each slope per two standard deviations of its predictor
    (a ridge penalty; Gelman et al. 2008 scale, normal instead of Cauchy), reported as
    ``method="ridge_cumulative_link"`` with the reason. Its intervals are approximate
    posterior intervals. The ridge was preferred to Firth's correction because it applies
    unchanged to ordinal models and to several predictors.

    A persistence-only model passes the state column itself as the feature, e.g.
    ``x={"persistence_4": frame["persistence_4"].to_numpy()}``; an index-plus-persistence
    model passes the index as ``x`` and ``covariates=("persistence_4",)``.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from impactlink.link import Target
    >>> rng = np.random.default_rng(0)
    >>> x = rng.normal(size=400)                      # index values, negative = dry
    >>> level = (rng.uniform(size=400) < 1 / (1 + np.exp(1 + 1.5 * x))).astype(int)
    >>> frame = pd.DataFrame({"unit_id": "c1", "county_id": "c1", "region": "north",
    ...                       "time": pd.Timestamp("2001-01-01"), "year": 2001,
    ...                       "season": 1, "level": level})
    >>> t = Target("demo", "demo", "binary", "county_week", "state", frame, ("none", "impact"))
    >>> m = fit_impact_model(t, x, meta={"index": "spi", "scale_weeks": 8, "lag_weeks": 0})
    >>> m.ok, m.method, m.predictors
    (True, 'glm_binomial', ('x',))
    >>> bool(m.predict(np.array([-2.0]))[0, 0] > m.predict(np.array([1.0]))[0, 0])
    True

    References
    ----------
    McCullagh, P. (1980). Regression models for ordinal data. Journal of the Royal
    Statistical Society B 42(2), 109-142.
    McCullagh, P. and Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall.
    Gelman, A., Jakulin, A., Pittau, M. G. and Su, Y.-S. (2008). A weakly informative default
    prior distribution for logistic and other regression models. Annals of Applied Statistics
    2(4), 1360-1383. https://doi.org/10.1214/08-AOAS191
    """
    if not isinstance(target, Target):
        raise TypeError(f"target must be an impactlink.link.Target; got {type(target).__name__}")
    _links.check_link(link)
    if pooling not in POOLINGS:
        raise ModelError(f"pooling must be one of {POOLINGS}; got {pooling!r}")
    frame = target.frame
    if "level" not in frame.columns:
        raise ModelError(f"target {target.name!r} frame lacks the 'level' column")
    covariates = tuple(covariates)
    lacking = [c for c in covariates if c not in frame.columns]
    if lacking:
        raise ModelError(
            f"covariates {lacking} are not columns of target {target.name!r}; "
            f"available: {list(frame.columns)}"
        )
    if pooling in ("region", "county") and "region" not in frame.columns:
        raise ModelError(f"pooling={pooling!r} needs a 'region' column in the target frame")
    if pooling == "county" and COUNTY not in frame.columns:
        raise ModelError("pooling='county' needs a 'county_id' column in the target frame")
    xd = as_feature_dict(x, len(frame))

    notes = []
    season_kind = "none"
    if seasonal:
        if target.grain == "county_week":
            season_kind = "week"
        elif target.grain == "region_month":
            season_kind = "month"
        else:
            notes.append("seasonal terms ignored for an annual target")
    trait_table, trait_names = None, ()
    if traits is not None:
        if COUNTY not in frame.columns:
            raise ModelError("traits need a 'county_id' column in the target frame")
        trait_table, note = standardise_traits(traits, frame[COUNTY])
        trait_names = tuple(trait_table.columns)
        if note:
            notes.append(note)
    spec = DesignSpec(
        features=tuple(xd),
        covariates=covariates,
        seasonal=season_kind,
        traits=trait_names,
        trait_table=trait_table,
    )
    Xall = spec.build(xd, frame, len(frame))
    y = pd.to_numeric(frame["level"], errors="coerce").to_numpy(dtype=float)
    K = target.n_levels - 1
    common = dict(
        kind=target.kind, target=target.name, impact=target.impact,
        horizon_weeks=int(target.horizon_weeks), meta=dict(meta or {}), link=link,
        levels=tuple(target.levels), grain=target.grain, role=target.role, rule=target.rule,
    )
    if K < 1:
        return _failed(spec, f"target has {target.n_levels} level(s); need at least 2",
                       pooling=pooling, **common)
    if target.kind == "binary" and K != 1:
        raise ModelError(
            f"target {target.name!r} is binary but has {target.n_levels} levels "
            f"{target.levels}; expected 2 (or kind='ordinal')"
        )
    bad = np.isfinite(y) & ((y < 0) | (y > K) | (y != np.round(y)))
    if bad.any():
        raise ModelError(
            f"target {target.name!r} has levels {sorted(set(y[bad]))} outside 0..{K} "
            f"(levels {target.levels})"
        )
    base_note = "; ".join(notes)

    if pooling == "all":
        return _fit_one(Xall, y, K, spec, pooling="all", note=base_note, **common)

    regions = frame["region"].astype(str).to_numpy()
    members = {}
    # loop over regions: a handful of fits, one per region
    for r in sorted(pd.unique(regions)):
        rows = regions == r
        members[r] = _fit_one(Xall[rows].reset_index(drop=True), y[rows], K, spec,
                              pooling="all", note=base_note, **common)
    whole = _fit_one(Xall, y, K, spec, pooling="all", note=base_note, **common)
    failed = [r for r, m in members.items() if not m.ok]
    if pooling == "region":
        reason = base_note
        if failed:
            reason = "; ".join(
                [s for s in (base_note, "no model for region(s) " + ", ".join(
                    f"{r} ({members[r].reason})" for r in failed)) if s]
            )
        ok = len(failed) < len(members)
        if not ok:
            reason = "no region could be fitted: " + reason
        return replace(whole, ok=ok, reason=reason, pooling="region", members=members,
                       method=whole.method if ok else "none")

    from impactlink.models.pooling import county_partial_pooling

    return county_partial_pooling(whole, members, Xall, y, frame, note=base_note)


def _failed(spec: DesignSpec, reason: str, *, pooling: str, **common) -> ImpactModel:
    return ImpactModel(
        ok=False, reason=reason, method="none", params=pd.Series(dtype=float),
        cov=pd.DataFrame(), n=0, events=0, predictors=(), pooling=pooling, design=spec,
        **common,
    )


def _fit_one(
    Xall: pd.DataFrame, y: np.ndarray, K: int, spec: DesignSpec, *, pooling: str, note: str,
    **common,
) -> ImpactModel:
    """One unpooled fit on complete rows, with all failure checks."""
    link, kind = common["link"], common["kind"]
    keep = np.isfinite(y) & np.isfinite(Xall.to_numpy(dtype=float)).all(axis=1)
    X = Xall[keep].reset_index(drop=True)
    yk = y[keep].astype(np.int64)
    n = int(keep.sum())
    counts = tuple(int((yk == k).sum()) for k in range(K + 1))
    events = n - counts[0] if n else 0
    primary = spec.features[0]
    xr = (float(X[primary].min()), float(X[primary].max())) if n else (np.nan, np.nan)
    notes = [note] if note else []

    def fail(reason):
        m = _failed(spec, reason, pooling=pooling, **common)
        return replace(m, n=n, events=events, level_counts=counts, x_range=xr)

    if n == 0:
        return fail("no rows with a complete set of predictors")
    if events == 0:
        return fail(f"no events: none of {n} rows has an impact (level >= 1)")
    if counts[0] == 0:
        return fail(f"every one of {n} rows is an impact; nothing to contrast")
    if min(events, counts[0]) < MIN_EVENTS:
        return fail(f"too few rows to fit: {events} impact and {counts[0]} non-impact rows "
                    f"(need at least {MIN_EVENTS} of each)")
    empty = [common["levels"][k] for k in range(1, K + 1) if counts[k] == 0]
    if empty:
        return fail(f"level(s) {empty} never occur in the fitted rows; merge them with a "
                    "neighbouring level or fit a binary target")
    sd = X.std(ddof=0)
    # constant up to rounding: sd below 1e-10 of the column's magnitude
    flat = sd <= 1e-10 * np.maximum(1.0, X.abs().max())
    const_feat = [f for f in spec.features if flat[f]]
    if const_feat:
        return fail(f"constant predictor: feature(s) {const_feat} take one value in all rows")
    const_other = [c for c in X.columns if c not in spec.features and flat[c]]
    if const_other:
        notes.append(f"constant column(s) {const_other} dropped")
        X = X.drop(columns=const_other)
    if n <= X.shape[1] + K + 1:
        return fail(f"{n} rows for {X.shape[1] + K} parameters")
    spec = replace(spec, columns=tuple(X.columns),
                   reference={c: float(X[c].mean()) for c in X.columns})

    Xn = X.to_numpy(dtype=float)
    sd_used = sd[list(X.columns)].to_numpy()
    fit = _solve(Xn, yk, K, link, ridge=0.0)
    method = "glm_binomial" if kind == "binary" else "ordered_model"
    sep = separation_symptom(fit["beta"], fit["cuts"], fit["cov"], fit["converged"], sd_used)
    if sep:
        fit = _solve(Xn, yk, K, link, ridge=slope_precision(sd_used))
        cov_ok = np.all(np.isfinite(fit["cov"])) and np.all(np.diag(fit["cov"]) > 0)
        if not (fit["converged"] and cov_ok):
            return fail(f"{sep}; the ridge-penalised refit did not converge either")
        notes.append(f"{sep}; refitted with a ridge penalty (normal prior sd {PRIOR_SD} per "
                     "two sd of each predictor), intervals are approximate")
        method = "ridge_cumulative_link"
    names = list(X.columns) + [f"cut_{k}" for k in range(1, K + 1)]
    return ImpactModel(
        ok=True, reason="; ".join(notes), method=method,
        params=pd.Series(np.concatenate([fit["beta"], fit["cuts"]]), index=names),
        cov=pd.DataFrame(fit["cov"], index=names, columns=names), n=n, events=events,
        predictors=tuple(X.columns), pooling=pooling, design=spec, x_range=xr,
        level_counts=counts, loglik=float(fit["loglik"]), **common,
    )


def _solve(X: np.ndarray, y: np.ndarray, K: int, link: str, *, ridge) -> dict:
    """One fit by the batch solver, returned in threshold form (beta, cuts, cov).

    The solver's cut-points theta_k of P(level <= k) = F(theta_k - x'b) are the thresholds
    c_{k+1} of P(level >= k+1) = F(x'b - c_{k+1}); its coefficient order (cut-points, slopes)
    is turned into (slopes, cut-points).
    """
    p = X.shape[1]
    res = fit_cumlogit_batch(X[None], y[None].astype(float), None, n_levels=K + 1, link=link,
                             ridge=ridge, max_iter=MAX_ITER, tol=TOL, covariance=True)
    assert res.cov is not None
    order = np.r_[np.arange(K, K + p), np.arange(K)]
    theta = res.coef[0][order]
    cov = res.cov[0][np.ix_(order, order)]
    return {"beta": theta[:p], "cuts": theta[p:], "cov": cov, "loglik": float(res.loglik[0]),
            "converged": bool(res.converged[0])}
