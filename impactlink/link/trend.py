"""The yield trend is chosen, not assumed: candidates compared by leave-one-year-out error.

A yield record mixes weather with technology (hybrids, fertiliser, planting density), and the
technology trend is rarely a straight line over a long record: Iowa corn was flat until hybrid
seed spread around 1940, then rose. Each candidate trend (:data:`DEFAULT_TRENDS`: linear,
quadratic, LOWESS at a few spans, and robust variants of each) is fitted to every county's
other years and asked to predict the held-out year (folds from
:func:`impactlink.skill.folds.leave_one_year_out`); the candidate with the smallest
prediction error per crop (and practice) is used, and every candidate's error is returned in
a tidy table for the manifest and the report.

All fits are vectorised over counties and folds (batched normal equations, batched
iteratively reweighted least squares, batched local-linear LOWESS); a county's missing years
are masked, never filled.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from impactlink.errors import LinkError
from impactlink.schema import COUNTY, YEAR
from impactlink.skill.folds import leave_one_year_out

__all__ = [
    "TrendSpec",
    "TrendChoice",
    "TrendSelection",
    "DEFAULT_TRENDS",
    "loo_trend_panel",
    "compare_trends",
    "choose_trend",
]

Family = Literal["linear", "quadratic", "lowess"]
Robust = Literal["none", "huber", "bisquare"]
Criterion = Literal["rmse", "mae"]

#: Tuning constants of the M-estimators, 95 % efficient at the normal (Huber 1981; Holland
#: and Welsch 1977) -- the defaults of statsmodels' ``HuberT`` and ``TukeyBiweight``.
HUBER_T = 1.345
BISQUARE_C = 4.685
#: Normal-consistency constant of the median absolute deviation, Phi^-1(3/4).
MAD_NORMAL = 0.6744897501960817


@dataclass(frozen=True)
class TrendSpec:
    """One candidate trend.

    Attributes
    ----------
    family : {"linear", "quadratic", "lowess"}
    robust : {"none", "huber", "bisquare"}
        Polynomials: M-estimation with Huber's or Tukey's bisquare weights (iteratively
        reweighted least squares, MAD scale). LOWESS: ``"bisquare"`` = Cleveland's (1979)
        three robustifying iterations with bisquare weights of the residuals.
    span : float, optional
        LOWESS span: the share of the county's years used for each local fit.
    """

    family: Family
    robust: Robust = "none"
    span: float | None = None

    @property
    def name(self) -> str:
        """``linear``, ``quadratic_huber``, ``lowess_0.3``, ``lowess_0.3_robust``, ..."""
        base = self.family if self.span is None else f"{self.family}_{self.span:g}"
        if self.robust == "none":
            return base
        return f"{base}_robust" if self.family == "lowess" else f"{base}_{self.robust}"


#: Candidates compared by default, simplest first (ties go to the earlier one).
DEFAULT_TRENDS: tuple[TrendSpec, ...] = (
    TrendSpec("linear"), TrendSpec("linear", "huber"),
    TrendSpec("quadratic"), TrendSpec("quadratic", "huber"),
    *(TrendSpec("lowess", r, s) for s in (0.3, 0.5, 0.7) for r in ("none", "bisquare")),  # type: ignore[arg-type]
)


@dataclass(frozen=True)
class TrendChoice:
    """The candidates' errors on one panel and the winner's held-out predictions.

    Attributes
    ----------
    chosen : TrendSpec
    errors : DataFrame
        One line per candidate: ``trend``, ``family``, ``robust``, ``span``, ``n`` (held-out
        predictions compared), ``rmse``, ``mae`` (yield units), ``rmse_pct`` (root mean square
        of the departure from the prediction [%]), ``rank`` (1 = best), ``chosen``.
    expected : ndarray, shape (counties, years)
        Leave-one-year-out prediction of the chosen trend (NaN where no yield or too few
        other years).
    """

    chosen: TrendSpec
    errors: pd.DataFrame
    expected: np.ndarray

    def to_frame(self) -> pd.DataFrame:
        """The error table."""
        return self.errors.copy()


@dataclass(frozen=True)
class TrendSelection:
    """Trend choice per crop and practice of a yields frame.

    Attributes
    ----------
    errors : DataFrame
        The :class:`TrendChoice` error tables stacked, with the group columns first.
    chosen : dict
        Group key (tuple of the ``by`` values) -> chosen :class:`TrendSpec`.
    expected : Series
        Leave-one-year-out expected yield of every input row under its group's chosen trend
        (aligned to the input frame's index; NaN where it cannot be fitted).
    """

    errors: pd.DataFrame
    chosen: dict[tuple[str, ...], TrendSpec]
    expected: pd.Series

    def to_frame(self) -> pd.DataFrame:
        """The error table."""
        return self.errors.copy()


def loo_trend_panel(years, values, spec: TrendSpec, *, min_years: int = 10) -> np.ndarray:
    """Leave-one-year-out trend predictions for many counties at once.

    Parameters
    ----------
    years : array of int, shape (n,)
        Distinct years, ascending.
    values : array of float, shape (counties, n)
        Yields; NaN where a county has no yield that year.
    spec : TrendSpec
    min_years : int, default 10
        Other years a county needs for a prediction.

    Returns
    -------
    ndarray, shape (counties, n)
        :math:`\\hat y_{c,-t}(t)`: the trend fitted to county *c*'s years outside *t*'s fold,
        evaluated at *t*; NaN where :math:`y_{c,t}` is missing or too few years remain.

    Raises
    ------
    LinkError
        Years not distinct and ascending, or shapes that disagree.

    Notes
    -----
    Polynomials solve the weighted normal equations :math:`(X^T W_f X)\\beta_f = X^T W_f y`
    for every county and fold at once; robust variants iterate them with Huber or bisquare
    weights of the residuals scaled by the median absolute deviation (iteratively reweighted
    least squares; Holland and Welsch 1977), as statsmodels ``RLM`` does. LOWESS is the local
    linear smoother of Cleveland (1979) with tricube weights over the nearest
    ``int(span * m)`` of the *m* training years, as in statsmodels ``lowess``.

    References
    ----------
    Cleveland, W. S. (1979). Robust locally weighted regression and smoothing scatterplots.
    Journal of the American Statistical Association 74(368), 829-836.
    https://doi.org/10.1080/01621459.1979.10481038

    Holland, P. W. and Welsch, R. E. (1977). Robust regression using iteratively reweighted
    least-squares. Communications in Statistics - Theory and Methods 6(9), 813-827.
    https://doi.org/10.1080/03610927708827533

    Huber, P. J. (1981). Robust Statistics. Wiley.
    """
    x = np.asarray(years, dtype=float)
    v = np.atleast_2d(np.asarray(values, dtype=float))
    if x.ndim != 1 or v.shape[1] != x.size:
        raise LinkError(f"loo_trend_panel: values has shape {v.shape}; expected (counties, "
                        f"{x.size}) for {x.size} years")
    if x.size > 1 and not np.all(np.diff(x) > 0):
        raise LinkError("loo_trend_panel: years must be distinct and ascending")
    fold = leave_one_year_out(x)
    present = np.isfinite(v)
    train = present[:, None, :] & (fold[None, :] != np.arange(fold.max() + 1)[:, None])[None]
    enough = train.sum(axis=2) >= max(int(min_years), 3)  # (counties, folds)
    if spec.family == "lowess":
        if spec.span is None or not 0 < spec.span <= 1:
            raise LinkError(f"trend {spec.name}: LOWESS span must be in (0, 1], got {spec.span}")
        pred = _lowess_loo(x, v, train, fold, spec.span, robust=spec.robust != "none")
    else:
        pred = _polynomial_loo(x, v, train, fold, 1 if spec.family == "linear" else 2,
                               spec.robust)
    ok = present & enough[:, fold]
    return np.where(ok, pred, np.nan)


def compare_trends(years, values, *, candidates: Sequence[TrendSpec] = DEFAULT_TRENDS,
                   min_years: int = 10, criterion: Criterion = "rmse") -> TrendChoice:
    """Compare candidate trends by leave-one-year-out prediction error; keep the best.

    Lower is better: the criterion is the root mean square (``"rmse"``) or mean absolute
    (``"mae"``) error of the held-out predictions, in yield units, pooled over counties and
    years. Every candidate is scored on the same cells (those every candidate can predict).

    Parameters
    ----------
    years : array of int, shape (n,)
    values : array of float, shape (counties, n)
    candidates : sequence of TrendSpec, default :data:`DEFAULT_TRENDS`
        Ties go to the earlier candidate (list simpler trends first).
    min_years : int, default 10
    criterion : {"rmse", "mae"}, default "rmse"

    Returns
    -------
    TrendChoice

    Examples
    --------
    >>> yrs = np.arange(1950, 1990)
    >>> y = np.where(yrs < 1965, 40.0, 40.0 + 2.0 * (yrs - 1965)) + np.tile([1.0, -1.0], 20)
    >>> compare_trends(yrs, y[None, :]).chosen.family != "linear"
    True
    """
    if criterion not in ("rmse", "mae"):
        raise LinkError(f"trend criterion must be 'rmse' or 'mae', got {criterion!r}")
    if not candidates:
        raise LinkError("compare_trends: no candidate trends given")
    v = np.atleast_2d(np.asarray(values, dtype=float))
    preds = np.stack([loo_trend_panel(years, v, c, min_years=min_years) for c in candidates])
    common = np.isfinite(preds).all(axis=0)
    if not common.any():
        raise LinkError(f"no county has more than {min_years} years with a yield; the trend "
                        "cannot be chosen (lower min_years or supply a longer record)")
    err = preds[:, common] - v[common][None, :]
    pct = 100.0 * err / preds[:, common]
    table = pd.DataFrame({
        "trend": [c.name for c in candidates], "family": [c.family for c in candidates],
        "robust": [c.robust for c in candidates],
        "span": [np.nan if c.span is None else c.span for c in candidates],
        "n": int(common.sum()), "rmse": np.sqrt(np.mean(err**2, axis=1)),
        "mae": np.mean(np.abs(err), axis=1), "rmse_pct": np.sqrt(np.mean(pct**2, axis=1))})
    order = np.argsort(table[criterion].to_numpy(), kind="stable")
    table["rank"] = np.empty(len(order), dtype=np.int64)
    table.loc[order, "rank"] = np.arange(1, len(order) + 1)
    best = int(order[0])
    table["chosen"] = np.arange(len(table)) == best
    return TrendChoice(candidates[best], table, preds[best])


def choose_trend(yields: pd.DataFrame, *, by: Sequence[str] = ("crop", "practice"),
                 candidates: Sequence[TrendSpec] = DEFAULT_TRENDS, min_years: int = 10,
                 criterion: Criterion = "rmse") -> TrendSelection:
    """Choose the trend per crop (and practice) of a yields table and give expected yields.

    Parameters
    ----------
    yields : DataFrame
        ``county_id``, ``year``, ``yield`` and the ``by`` columns present (missing ``by``
        columns are ignored); one row per county and year within a group.
    by : sequence of str, default ("crop", "practice")
    candidates, min_years, criterion
        As in :func:`compare_trends`.

    Returns
    -------
    TrendSelection

    Raises
    ------
    LinkError
        Missing columns, or a county with two yields in one year of a group.
    """
    need = {COUNTY, YEAR, "yield"} - set(yields.columns)
    if need:
        raise LinkError(f"choose_trend: the yields frame has no column(s) {sorted(need)}")
    keys = [k for k in by if k in yields.columns]
    frames, chosen = [], {}
    expected = pd.Series(np.nan, index=yields.index, dtype=float)
    groups = yields.groupby(keys, sort=True, dropna=False) if keys else [((), yields)]
    for key, g in groups:  # one panel per crop and practice (a handful)
        key = tuple(str(k) for k in (key if isinstance(key, tuple) else (key,)))
        if g.duplicated([COUNTY, YEAR]).any():
            raise LinkError(f"choose_trend: group {key} has two yields for one county and year;"
                            " split it by practice or remove the duplicate")
        wide = g.pivot(index=COUNTY, columns=YEAR, values="yield").sort_index(axis=1)
        choice = compare_trends(wide.columns.to_numpy(), wide.to_numpy(float),
                                candidates=candidates, min_years=min_years, criterion=criterion)
        chosen[key] = choice.chosen
        frames.append(choice.errors.assign(**dict(zip(keys, key, strict=True))))
        r = wide.index.get_indexer(g[COUNTY])
        c = wide.columns.get_indexer(g[YEAR])
        expected.loc[g.index] = choice.expected[r, c]
    errors = pd.concat(frames, ignore_index=True)
    errors = errors[[*keys, *[c for c in errors.columns if c not in keys]]]
    return TrendSelection(errors, chosen, expected)


# ----------------------------------------------------------------------- polynomial fits
def _polynomial_loo(x, v, train, fold, degree: int, robust: Robust) -> np.ndarray:
    """Held-out predictions of (robust) polynomial trends; arrays (counties, folds, years)."""
    xs = (x - x.mean()) / (x.std() or 1.0)
    X = np.vander(xs, degree + 1, increasing=True)  # (n, p)
    y = np.where(np.isfinite(v), v, 0.0)[:, None, :]  # (c, 1, n)
    w = train.astype(float)
    A = np.einsum("cfn,np,nq->cfpq", w, X, X)
    full_rank = np.linalg.matrix_rank(A) == X.shape[1]  # weights > 0 keep the rank
    beta = _wls(X, y, w, full_rank)
    if robust != "none":
        active = np.isfinite(beta).all(axis=-1)  # (county, fold) systems still iterating
        for _ in range(200):  # IRLS until every system's coefficients settle
            r = y - np.einsum("cfp,np->cfn", beta, X)
            scale = _masked_median(np.abs(r), train) / MAD_NORMAL
            z = r / np.maximum(scale, 1e-12)[..., None]
            rw = (np.minimum(1.0, HUBER_T / np.maximum(np.abs(z), 1e-300)) if robust == "huber"
                  else np.where(np.abs(z) < BISQUARE_C, (1 - (z / BISQUARE_C) ** 2) ** 2, 0.0))
            new = _wls(X, y, w * rw, full_rank)
            step = np.abs(new - beta).max(axis=-1, initial=0.0)
            beta = np.where(active[..., None], new, beta)  # a settled system stays put
            active &= step > 1e-10 * (1 + np.abs(beta).max(axis=-1, initial=0.0))
            if not active.any():
                break
    return np.einsum("cjp,jp->cj", beta[:, fold, :], X)


def _wls(X, y, w, ok) -> np.ndarray:
    """Weighted least squares per county and fold (batched normal equations).

    ``ok`` marks the (county, fold) systems of full rank; the others give NaN.
    """
    A = np.einsum("cfn,np,nq->cfpq", w, X, X)
    b = np.einsum("cfn,np,cfn->cfp", w, X, np.broadcast_to(y, w.shape))
    p = X.shape[1]
    tiny = 1e-13 * np.trace(A, axis1=-2, axis2=-1)[..., None, None] * np.eye(p)
    A = np.where(ok[..., None, None], A + tiny, np.eye(p))
    beta = np.linalg.solve(A, b[..., None])[..., 0]
    return np.where(ok[..., None], beta, np.nan)


def _masked_median(a, mask) -> np.ndarray:
    """Median over the last axis of the entries in ``mask`` (NaN where none), by one sort."""
    srt = np.sort(np.where(mask, a, np.inf), axis=-1)
    m = mask.sum(axis=-1)
    lo = np.take_along_axis(srt, np.maximum((m - 1) // 2, 0)[..., None], axis=-1)[..., 0]
    hi = np.take_along_axis(srt, np.maximum(m // 2, 0)[..., None], axis=-1)[..., 0]
    return np.where(m > 0, 0.5 * (lo + hi), np.nan)


# ----------------------------------------------------------------------- LOWESS
def _lowess_loo(x, v, train, fold, span: float, *, robust: bool) -> np.ndarray:
    """Held-out LOWESS predictions: fit each fold's training years, evaluate at the fold."""
    x = x - x.mean()  # centred years keep the weighted sums well conditioned
    y = np.where(np.isfinite(v), v, 0.0)
    if not robust:  # every (county, held-out year) in one batch: arrays (c, n_eval, n)
        avail = train[:, fold, :]
        return _local_linear(x, y, _tricube(x, avail, x, span), x)
    out = np.full(v.shape, np.nan)
    for f in range(train.shape[1]):  # one batch over counties per fold (folds ~ years)
        avail = np.broadcast_to(train[:, f, None, :], (v.shape[0], x.size, x.size))
        base = _tricube(x, avail, x, span)  # the neighbourhoods do not change with rw
        rw = np.ones((v.shape[0], x.size))
        for _ in range(3):  # Cleveland's robustifying iterations (statsmodels it=3)
            fit = _local_linear(x, y, base * rw[:, None, :], x, keep_y=True)
            rw = _bisquare_weights(y - fit, train[:, f, :])
        at = fold == f
        out[:, at] = _local_linear(x, y, base[:, at, :] * rw[:, None, :], x[at])
    return out


def _tricube(x, avail, x0, span: float) -> np.ndarray:
    """Tricube weights (1 - (d/h)^3)^3 of the training years around each ``x0``.

    ``avail`` (c, m, n) marks the training years of each evaluation point; the radius *h* is
    the distance to the k-th nearest of the *m* available years, k = int(span * m) clipped
    to [2, m] (statsmodels ``lowess``; Cleveland 1979, sec. 2).
    """
    dist = np.abs(x[None, :] - x0[:, None])  # (m, n), shared by all counties
    d = np.where(avail, dist[None], np.inf)
    m = avail.sum(axis=-1)
    k = np.clip((span * m + 1e-10).astype(np.int64), 2, np.maximum(m, 2))
    d.sort(axis=-1)
    h = np.take_along_axis(d, np.minimum(k - 1, x.size - 1)[..., None], axis=-1)
    u = np.minimum(dist[None] / h, 1.0)
    t = 1.0 - u * u * u
    return t * t * t * avail


def _local_linear(x, y, w, x0, *, keep_y: bool = False) -> np.ndarray:
    """Weighted local linear fit at ``x0`` (Cleveland 1979, eq. 2.1-2.2) from weighted sums.

    ``y`` (c, n), ``w`` (c, m, n) weights of the data for each evaluation point, ``x0`` (m,).
    Where fewer than two points have weight the fit is NaN, or the observed value when
    fitting at the data points (``keep_y``), as statsmodels does.
    """
    ok = (w > 1e-12).sum(axis=-1) >= 2
    s0 = w.sum(axis=-1)
    s0 = np.where(ok, s0, 1.0)
    xbar = (w @ x) / s0
    sq = np.maximum((w @ (x * x)) / s0 - xbar * xbar, 1e-12)
    ybar = np.einsum("cmn,cn->cm", w, y) / s0
    xy = np.einsum("cmn,cn->cm", w, y * x) / s0
    fit = ybar + (x0[None, :] - xbar) * (xy - xbar * ybar) / sq
    if keep_y:
        return np.where(ok, fit, y)
    return np.where(ok, fit, np.nan)


def _bisquare_weights(resid, mask) -> np.ndarray:
    """Cleveland's robustness weights B(r / 6 median|r|) over the training years."""
    a = np.abs(resid)
    med = _masked_median(a, mask)
    with np.errstate(invalid="ignore", divide="ignore"):
        u = np.where(med[..., None] > 0, a / (6.0 * med[..., None]), (a > 0).astype(float))
    u = np.minimum(np.nan_to_num(u, nan=1.0), 1.0)
    return np.where(mask, (1 - u**2) ** 2, 0.0)
