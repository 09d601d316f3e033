"""Impact models: logistic (binary) and proportional-odds (ordinal) regression on index features.

One public entry point, :func:`fit_impact_model`, returns an :class:`ImpactModel` that
predicts P(level >= k) with intervals. Fits that cannot be made (no events, constant
predictor, non-convergence) end as ``ok=False`` with the reason; fits that diverge
because of separation are refitted with a light ridge penalty and say so.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from impactlink.errors import ModelError
from impactlink.link.target import FeatureRule, Target
from impactlink.models import _links
from impactlink.models._design import (
    DesignSpec,
    as_feature_dict,
    standardise_traits,
)

__all__ = ["ImpactModel", "fit_impact_model", "SEPARATION_LIMIT", "POOLINGS"]

POOLINGS = ("all", "region", "county")

#: A slope whose effect per standard deviation of its predictor exceeds this (on the
#: link scale; e^10 ~ 22000 as an odds ratio) is taken as a symptom of separation.
SEPARATION_LIMIT = 10.0

#: Fewest impact rows (and fewest non-impact rows) a model is fitted on.
MIN_EVENTS = 3


@dataclass(frozen=True)
class ImpactModel:
    """A fitted impact model (or the record of why it could not be fitted).

    The model is written for every kind of target as

        P(level >= k | x) = F(x' beta + u_j - c_k),   k = 1..K,

    with F the logistic (``link="logit"``) or standard normal (``"probit"``) distribution
    function, thresholds c_1 < ... < c_K and, for ``pooling="county"``, a county deviation u_j
    (0 otherwise). For a binary target K = 1 and c_1 is minus the usual intercept.

    Attributes
    ----------
    ok : bool
        False when no usable fit exists; then ``reason`` says why and predictions are NaN.
    reason : str
        Why the fit failed, or notes on a fit that succeeded with a remedy (penalised fit
        after separation, dropped constant columns, failed regions); "" otherwise.
    method : str
        ``"glm_binomial"`` (statsmodels GLM), ``"ordered_model"`` (statsmodels OrderedModel),
        ``"ridge_cumulative_link"`` (penalised fallback), ``"none"``.
    params : pandas.Series
        Slopes (one per predictor) then thresholds ``cut_1..cut_K``.
    cov : pandas.DataFrame
        Covariance of ``params``.
    n, events : int
        Rows fitted and rows with an impact (level >= 1) among them.
    levels : tuple of str
        Level labels 0..K.
    link : {"logit", "probit"}
    predictors : tuple of str
        Predictor names in the order of the slopes; the first is the primary index feature.
    pooling : {"all", "region", "county"}
    kind : {"binary", "ordinal"}
    target, impact : str
        Target name and impact name.
    design : DesignSpec
        Builds predictor columns for new rows.
    x_range : tuple of float
        Observed range of the primary feature in the fitted rows.
    level_counts : tuple of int
        Rows at each level 0..K.
    members : dict
        For ``pooling="region"``: region -> model. For ``"county"``: region -> the parent
        model its counties are shrunk toward (the region model, or the all-county model where
        the region model failed).
    groups : pandas.DataFrame or None
        For ``pooling="county"``: one row per county with ``county_id, region, n, events,
        deviation, deviation_sd, shrinkage_weight, parent``.
    tau : float
        Estimated between-county standard deviation of the deviations (``"county"`` only).
    horizon_weeks : int
        Copied from the target (onset window), for the outlook.
    grain, role, rule
        Copied from the target, so the outlook can align new index values the same way.
    meta : dict
        Candidate metadata (index, scale_weeks, lag_weeks, ...) passed by the caller.
    loglik : float
        Log-likelihood of the fit (unpenalised).
    """

    ok: bool
    reason: str
    method: str
    params: pd.Series
    cov: pd.DataFrame
    n: int
    events: int
    levels: tuple[str, ...]
    link: str
    predictors: tuple[str, ...]
    pooling: str = "all"
    kind: str = "binary"
    target: str = ""
    impact: str = ""
    design: DesignSpec | None = None
    x_range: tuple[float, float] = (np.nan, np.nan)
    level_counts: tuple[int, ...] = ()
    members: dict = field(default_factory=dict)
    groups: pd.DataFrame | None = None
    tau: float = np.nan
    horizon_weeks: int = 0
    meta: dict = field(default_factory=dict)
    loglik: float = np.nan
    grain: str = "county_week"
    role: str = "state"
    rule: FeatureRule | None = None

    # ------------------------------------------------------------ parameters
    @property
    def n_cuts(self) -> int:
        """K, the number of impact levels above 0."""
        return len(self.levels) - 1

    @property
    def beta(self) -> np.ndarray:
        return self.params.to_numpy()[: len(self.predictors)]

    @property
    def cuts(self) -> np.ndarray:
        return self.params.to_numpy()[len(self.predictors):]

    @property
    def spec(self) -> DesignSpec:
        """The :class:`DesignSpec` of the fit; an error when the model was built without one."""
        if self.design is None:
            raise ModelError(
                f"model {self.target or self.impact or '(unnamed)'!r} has design=None; it "
                "cannot build predictors for new rows. Fit it with fit_impact_model."
            )
        return self.design

    # ------------------------------------------------------------ prediction
    def predict(self, x_new, *, frame: pd.DataFrame | None = None) -> np.ndarray:
        """P(level >= k) for k = 1..K.

        Parameters
        ----------
        x_new : ndarray (n,) or dict of name -> ndarray (n,)
            Index feature values (the names used at fit time; a plain array for one feature).
        frame : pandas.DataFrame, optional
            One row per value with the other columns the model needs: covariates,
            ``season`` (seasonal models), ``county_id`` (traits, county pooling),
            ``region`` (region or county pooling).

        Returns
        -------
        ndarray (n, K)
            Probabilities; NaN where the model is not ok or a predictor is missing.
        """
        lp, _ = self._linear_predictor(x_new, frame)
        return _links.cdf(lp, self.link)

    def predict_interval(
        self, x_new, *, frame: pd.DataFrame | None = None, ci: float = 0.90
    ) -> tuple[np.ndarray, np.ndarray]:
        """Pointwise ``ci`` interval of P(level >= k): arrays ``(lo, hi)`` of shape (n, K).

        Notes
        -----
        Delta method on the linear predictor: with g = (x, -e_k) and coefficient covariance
        V, the linear predictor eta_k = x'beta - c_k has variance g'Vg; the interval is
        F(eta_k -+ z sqrt(g'Vg)) with z the (1+ci)/2 normal quantile. Working on the linear
        predictor keeps the interval inside (0, 1) (a standard Wald construction; Agresti 2013). For county
        pooling the posterior variance of the county deviation is added (its covariance with
        the parent coefficients is neglected). Deterministic: no simulation, no seed.

        References
        ----------
        Agresti, A. (2013). Categorical Data Analysis, 3rd ed. Wiley, Hoboken NJ.
        """
        _check_ci(ci)
        from scipy import special

        z = special.ndtri(0.5 + ci / 2.0)
        lp, var = self._linear_predictor(x_new, frame)
        sd = np.sqrt(np.maximum(var, 0.0))
        return _links.cdf(lp - z * sd, self.link), _links.cdf(lp + z * sd, self.link)

    def _linear_predictor(self, x_new, frame) -> tuple[np.ndarray, np.ndarray]:
        xd = as_feature_dict(x_new, name=self.design.features[0] if self.design else "x")
        n = len(next(iter(xd.values())))
        K = self.n_cuts
        if self.pooling == "all" or not self.members:
            if not self.ok:
                return np.full((n, K), np.nan), np.full((n, K), np.nan)
            Xd = self.spec.build(xd, frame, n).to_numpy(dtype=float)
            return _lp_var(self, Xd)
        if frame is None or "region" not in frame.columns:
            raise ModelError(
                f"a model with pooling={self.pooling!r} needs frame with a 'region' column"
            )
        lp = np.full((n, K), np.nan)
        var = np.full((n, K), np.nan)
        regions = frame["region"].astype(str).to_numpy()
        # loop over regions (a handful), each vectorised over its rows
        for r, member in self.members.items():
            rows = np.flatnonzero(regions == r)
            if rows.size == 0 or not member.ok:
                continue
            sub_x = {k: np.asarray(v)[rows] for k, v in xd.items()}
            sub_f = frame.iloc[rows].reset_index(drop=True)
            Xd = member.design.build(sub_x, sub_f, rows.size).to_numpy(dtype=float)
            lp[rows], var[rows] = _lp_var(member, Xd)
        if self.pooling == "county":
            if "county_id" not in frame.columns:
                raise ModelError("a model with pooling='county' needs a 'county_id' column in frame")
            if self.groups is None:
                raise ModelError(
                    "a model with pooling='county' has groups=None; it cannot add county "
                    "deviations. Fit it with fit_impact_model(..., pooling='county')."
                )
            g = self.groups.set_index("county_id")
            ids = frame["county_id"].astype(str)
            u = np.array(ids.map(g["deviation"]).to_numpy(dtype=float))
            u_sd = np.array(ids.map(g["deviation_sd"]).to_numpy(dtype=float))
            unseen = np.isnan(u)
            u[unseen] = 0.0
            u_sd[unseen] = self.tau if np.isfinite(self.tau) else 0.0
            lp = lp + u[:, None]
            var = var + (u_sd**2)[:, None]
        return lp, var

    # ------------------------------------------------------------ tidy output
    def to_frame(self) -> pd.DataFrame:
        """Coefficient table: unit, term, estimate, std_error and the model's provenance.

        One block per unit (``"all"``, or each region for region and county pooling), then
        for county pooling one ``county_deviation`` row per county (posterior mode and sd);
        the events each county rests on and its shrinkage weight are in :attr:`groups`.
        """
        parts = []
        if self.pooling in ("region", "county") and self.members:
            for r, m in self.members.items():
                parts.append(_coef_table(m, unit=r))
        else:
            parts.append(_coef_table(self, unit="all"))
        if self.groups is not None and len(self.groups):
            g = self.groups
            parts.append(
                pd.DataFrame(
                    {
                        "unit": g["county_id"].to_numpy(),
                        "term": "county_deviation",
                        "estimate": g["deviation"].to_numpy(),
                        "std_error": g["deviation_sd"].to_numpy(),
                    }
                )
            )
        out = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
        out.insert(0, "target", self.target)
        out.insert(0, "impact", self.impact)
        for k in ("index", "scale_weeks", "lag_weeks"):
            if k in self.meta:
                out[k] = self.meta[k]
        out["link"] = self.link
        out["pooling"] = self.pooling
        out["method"] = self.method
        out["ok"] = self.ok
        out["reason"] = self.reason
        out["n"] = self.n
        out["events"] = self.events
        out["tau"] = self.tau
        return out


def _coef_table(m: ImpactModel, *, unit: str) -> pd.DataFrame:
    if len(m.params) == 0:
        return pd.DataFrame({"unit": [unit], "term": [""], "estimate": [np.nan],
                             "std_error": [np.nan]})
    se = np.sqrt(np.clip(np.diag(m.cov.to_numpy(dtype=float)), 0, None))
    return pd.DataFrame(
        {"unit": unit, "term": m.params.index, "estimate": m.params.to_numpy(),
         "std_error": se}
    )


def _lp_var(m: ImpactModel, Xd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Linear predictors eta_k = x'beta - c_k and their delta-method variances, (n, K)."""
    p = len(m.predictors)
    V = m.cov.to_numpy(dtype=float)
    Vbb, Vbc, Vcc = V[:p, :p], V[:p, p:], V[p:, p:]
    eta = Xd @ m.beta if p else np.zeros(Xd.shape[0])
    lp = eta[:, None] - m.cuts[None, :]
    quad = np.einsum("ij,jk,ik->i", Xd, Vbb, Xd) if p else np.zeros(Xd.shape[0])
    var = quad[:, None] - 2.0 * (Xd @ Vbc) + np.diag(Vcc)[None, :]
    return lp, var


def _check_ci(ci: float) -> None:
    if not (0.0 < float(ci) < 1.0):
        raise ModelError(f"ci must be strictly between 0 and 1 (e.g. 0.90); got {ci!r}")


# ====================================================================== fitting
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
        Binary: GLM Binomial with this link. Ordinal: OrderedModel with ``distr=link``.
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
    TypeError, ValueError
        For impossible requests: not a Target, unknown link or pooling, feature length not
        matching the frame, a covariate column the frame lacks, region pooling without a
        ``region`` column.

    Notes
    -----
    Binary targets: logistic regression, logit P(level >= 1) = b_0 + x'b (McCullagh and
    Nelder 1989, Ch. 4), fitted by IRLS (statsmodels GLM). Ordinal targets: the cumulative
    link (proportional-odds) model logit P(level <= k-1) = c_k - x'b (McCullagh 1980),
    fitted by maximum likelihood (statsmodels OrderedModel). Both are stored in the form
    P(level >= k) = F(x'b - c_k); a two-level ordinal fit equals the logistic fit.

    Separation (the impact rows and the others split perfectly or almost perfectly along
    a predictor) sends maximum-likelihood slopes to infinity. It is detected when the fit
    does not converge, a standard error is not finite, or a slope exceeds
    ``SEPARATION_LIMIT`` per standard deviation of its predictor. The model is then refitted
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
    if pooling == "county" and "county_id" not in frame.columns:
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
        if "county_id" not in frame.columns:
            raise ModelError("traits need a 'county_id' column in the target frame")
        trait_table, note = standardise_traits(traits, frame["county_id"])
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
    # loop over regions: a handful of statsmodels fits, one per region
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

    fit = _fit_statsmodels(X, yk, K, link, kind)
    method = fit["method"]
    sep = _separation_symptom(fit, sd[list(X.columns)].to_numpy())
    if sep:
        from impactlink.models._penalised import PRIOR_SD, fit_cumulative

        pen = fit_cumulative(X.to_numpy(dtype=float), yk, K, link, prior_sd=PRIOR_SD)
        cov_ok = np.all(np.isfinite(pen["cov"])) and np.all(np.diag(pen["cov"]) > 0)
        if not (pen["converged"] and cov_ok):
            return fail(f"{sep}; the ridge-penalised refit did not converge either")
        notes.append(f"{sep}; refitted with a ridge penalty (normal prior sd {PRIOR_SD} per "
                     "two sd of each predictor), intervals are approximate")
        fit = {"beta": pen["beta"], "cuts": pen["cuts"], "cov": pen["cov"],
               "loglik": pen["loglik"], "converged": True}
        method = "ridge_cumulative_link"
    names = list(X.columns) + [f"cut_{k}" for k in range(1, K + 1)]
    return ImpactModel(
        ok=True, reason="; ".join(notes), method=method,
        params=pd.Series(np.concatenate([fit["beta"], fit["cuts"]]), index=names),
        cov=pd.DataFrame(fit["cov"], index=names, columns=names), n=n, events=events,
        predictors=tuple(X.columns), pooling=pooling, design=spec, x_range=xr,
        level_counts=counts, loglik=float(fit["loglik"]), **common,
    )


def _fit_statsmodels(X: pd.DataFrame, y: np.ndarray, K: int, link: str, kind: str) -> dict:
    """Maximum-likelihood fit through statsmodels, returned in threshold form."""
    import statsmodels.api as sm

    p = X.shape[1]
    caught = []
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        try:
            if kind == "binary":
                lk = sm.families.links.Logit() if link == "logit" else sm.families.links.Probit()
                exog = np.column_stack([np.ones(len(y)), X.to_numpy(dtype=float)])
                res = sm.GLM(y.astype(float), exog, family=sm.families.Binomial(link=lk)).fit(
                    maxiter=100
                )
                b = np.asarray(res.params)
                V = np.asarray(res.cov_params())
                # threshold form: (beta, c_1) with c_1 = -intercept
                T = np.zeros((p + 1, p + 1))
                T[:p, 1:] = np.eye(p)
                T[p, 0] = -1.0
                theta, cov = T @ b, T @ V @ T.T
                converged = bool(res.converged)
                method = "glm_binomial"
            else:
                from statsmodels.miscmodels.ordinal_model import OrderedModel

                from impactlink.models._penalised import fit_cumulative

                endog = pd.Series(pd.Categorical(y, categories=range(K + 1), ordered=True))
                mod = OrderedModel(endog, X.reset_index(drop=True), distr=link)
                # Starting values from our analytic-gradient solver: OrderedModel's own BFGS
                # then needs a few iterations instead of ~30 (4x faster on 1e5 rows); the
                # reported estimates are still statsmodels' maximum.
                start = fit_cumulative(X.to_numpy(dtype=float), y, K, link, prior_sd=None,
                                       covariance=False)["theta"]
                if not np.all(np.isfinite(start)):
                    start = None
                res = mod.fit(method="bfgs", disp=False, maxiter=2000, gtol=1e-8,
                              start_params=start)
                raw = np.asarray(res.params)
                V = np.asarray(res.cov_params())
                t = raw[p:]
                cuts = np.cumsum(np.concatenate([[t[0]], np.exp(t[1:])]))
                J = np.zeros((p + K, p + K))
                J[:p, :p] = np.eye(p)
                for k in range(K):  # K is small (a few levels)
                    J[p + k, p] = 1.0
                    J[p + k, p + 1: p + k + 1] = np.exp(t[1: k + 1])
                theta = np.concatenate([raw[:p], cuts])
                cov = J @ V @ J.T
                converged = bool(res.mle_retvals.get("converged", False))
                method = "ordered_model"
            loglik = float(res.llf)
        except (np.linalg.LinAlgError, ValueError, FloatingPointError) as exc:
            return {"beta": np.full(p, np.nan), "cuts": np.full(K, np.nan),
                    "cov": np.full((p + K, p + K), np.nan), "loglik": np.nan,
                    "converged": False, "method": "none", "error": str(exc), "warnings": []}
        caught = [str(x.message) for x in w]
    return {"beta": theta[:p], "cuts": theta[p:], "cov": cov, "loglik": loglik,
            "converged": converged, "method": method, "warnings": caught}


def _separation_symptom(fit: dict, sd: np.ndarray) -> str:
    """Text naming the symptom of (quasi-)separation or failed convergence, or ""."""
    if "error" in fit:
        return f"maximum-likelihood fit failed ({fit['error']})"
    beta, cov = fit["beta"], fit["cov"]
    se = np.sqrt(np.diag(cov)) if np.all(np.isfinite(cov)) else np.array([np.nan])
    sep_warn = [m for m in fit["warnings"] if "separation" in m.lower()]
    if sep_warn:
        return "perfect or quasi-complete separation (statsmodels warned)"
    if not np.all(np.isfinite(beta)) or not np.all(np.isfinite(fit["cuts"])):
        return "non-finite coefficients (separation)"
    scaled = np.abs(beta) * sd
    if np.any(scaled > SEPARATION_LIMIT):
        return (f"slope of {scaled.max():.1f} per sd of its predictor exceeds "
                f"{SEPARATION_LIMIT:g} (separation)")
    if not np.all(np.isfinite(se)) or np.any(se <= 0):
        return "standard errors not finite (separation or a singular design)"
    if not fit["converged"]:
        return "maximum-likelihood fit did not converge"
    return ""

