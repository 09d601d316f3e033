"""The fitted impact model: :class:`ImpactModel`, its parameters and its coefficient table.

Prediction (linear predictors and their delta-method variances) is in
:mod:`impactlink.models.predict`; fitting in :mod:`impactlink.models.fit`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from impactlink.errors import ModelError
from impactlink.link.target import FeatureRule
from impactlink.models import _links
from impactlink.models._design import DesignSpec
from impactlink.models.predict import check_ci, linear_predictor
from impactlink.schema import COUNTY

__all__ = ["ImpactModel"]


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
        ``"glm_binomial"`` (binary target: the binomial GLM), ``"ordered_model"`` (ordinal
        target: the cumulative link model), both by maximum likelihood;
        ``"ridge_cumulative_link"`` (the ridge-penalised fallback after separation);
        ``"none"`` (no fit). All are fitted by
        :func:`impactlink.models.batch.fit_cumlogit_batch`. County pooling appends
        ``"+county_random_intercept"``.
    params : pandas.Series
        Slopes (one per predictor) then thresholds ``cut_1..cut_K``.
    cov : pandas.DataFrame
        Covariance of ``params``: the inverse of the observed information (minus the
        Hessian of the log-likelihood; of the penalised one for the ridge fallback).
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
        lp, _ = linear_predictor(self, x_new, frame)
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
        check_ci(ci)
        from scipy import special

        z = special.ndtri(0.5 + ci / 2.0)
        lp, var = linear_predictor(self, x_new, frame)
        sd = np.sqrt(np.maximum(var, 0.0))
        return _links.cdf(lp - z * sd, self.link), _links.cdf(lp + z * sd, self.link)

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
                        "unit": g[COUNTY].to_numpy(),
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

