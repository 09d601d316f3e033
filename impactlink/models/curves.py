"""Impact curves: P(level >= k) over a grid of index values, with pointwise intervals.

Also the index values at which a curve crosses given probabilities (10 %, 25 %, 50 % by
default), with intervals from where the interval band crosses the same probability.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.errors import ModelError
from impactlink.models import _links
from impactlink.models.predict import check_ci, lp_var
from impactlink.models.result import ImpactModel

__all__ = ["impact_curves", "crossings", "plot_impact_curves", "CURVE_COLUMNS",
           "CROSSING_COLUMNS"]

CURVE_COLUMNS = (
    "impact", "target", "index", "scale_weeks", "lag_weeks", "model", "pooling", "unit",
    "level_k", "level_label", "x", "prob", "prob_lo", "prob_hi",
)
CROSSING_COLUMNS = (
    "impact", "target", "index", "scale_weeks", "lag_weeks", "model", "pooling", "unit",
    "level_k", "level_label", "prob_level", "x_cross", "x_lo", "x_hi", "note",
)

#: Points of the default curve grid over the observed range of the primary feature.
N_GRID = 101


def impact_curves(
    model: ImpactModel,
    *,
    grid: np.ndarray | None = None,
    ci: float = 0.90,
    meta: dict | None = None,
    counties: bool = False,
) -> pd.DataFrame:
    """Probability of each impact level over a grid of index values.

    Parameters
    ----------
    model : ImpactModel
    grid : ndarray, optional
        Values of the primary index feature (unitless index value). Default: 101 points
        over the range observed in the fitted rows.
    ci : float
        Coverage of the pointwise interval (default 0.90).
    meta : dict, optional
        Candidate metadata copied into the frame (``index``, ``scale_weeks``, ``lag_weeks``,
        ``model``, ...); overrides ``model.meta``.
    counties : bool
        For ``pooling="county"``: also one curve per county (its shrunken deviation added).

    Returns
    -------
    pandas.DataFrame
        Columns ``CURVE_COLUMNS`` plus any extra ``meta`` keys; one row per unit, level k
        (1..K) and grid value. ``unit`` is ``"all"``, a region, or a county id. Empty when
        the model is not ok.

    Notes
    -----
    Other predictors are held at their mean over the fitted rows (seasonal harmonics at their
    mean, i.e. an average season; standardised traits at 0 on average; covariates such as
    persistence at their mean). Intervals are pointwise delta-method intervals on the
    linear predictor (see :meth:`ImpactModel.predict_interval`). Under the index convention
    (negative = dry) the probability usually rises as x falls.
    """
    check_ci(ci)
    if not isinstance(model, ImpactModel):
        raise TypeError(f"model must be an ImpactModel; got {type(model).__name__}")
    info = {**model.meta, **(meta or {})}
    if not model.ok:
        return pd.DataFrame(columns=list(CURVE_COLUMNS))
    x = _grid(model, grid)
    from scipy import special

    z = special.ndtri(0.5 + ci / 2.0)
    parts = []
    for unit, lp, var in _unit_predictors(model, x, counties=counties):
        sd = np.sqrt(np.maximum(var, 0.0))
        K = lp.shape[1]
        parts.append(
            pd.DataFrame(
                {
                    "unit": unit,
                    "level_k": np.repeat(np.arange(1, K + 1), x.size),
                    "level_label": np.repeat(np.asarray(model.levels[1:], dtype=object),
                                             x.size),
                    "x": np.tile(x, K),
                    "prob": _links.cdf(lp, model.link).T.ravel(),
                    "prob_lo": _links.cdf(lp - z * sd, model.link).T.ravel(),
                    "prob_hi": _links.cdf(lp + z * sd, model.link).T.ravel(),
                }
            )
        )
    out = pd.concat(parts, ignore_index=True)
    return _decorate(out, model, info, CURVE_COLUMNS)


def crossings(
    model: ImpactModel,
    *,
    probs: tuple[float, ...] = (0.10, 0.25, 0.50),
    ci: float = 0.90,
    meta: dict | None = None,
    counties: bool = False,
    n_grid: int = 2001,
) -> pd.DataFrame:
    """Index values at which P(level >= k) crosses each probability in ``probs``.

    Parameters
    ----------
    model : ImpactModel
    probs : tuple of float
        Probabilities in (0, 1).
    ci : float
        Coverage of the pointwise band whose crossings bound ``x_cross``.
    meta, counties
        As in :func:`impact_curves`.
    n_grid : int
        Points searched over the observed range of the primary feature.

    Returns
    -------
    pandas.DataFrame
        Columns ``CROSSING_COLUMNS``: per unit, level k and probability, the crossing
        ``x_cross`` and the interval ``[x_lo, x_hi]``. NaN with a ``note`` where the curve (or
        a band edge) does not cross within the observed range.

    Notes
    -----
    The crossing solves F(eta_k(x)) = p, i.e. eta_k(x) = F^-1(p), by linear interpolation
    of eta_k(x) - F^-1(p) on the grid (exact for a model linear in x). The interval is where
    the lower and upper band curves cross p: inverting a pointwise confidence band, in the
    spirit of Fieller's interval for a ratio (Fieller 1954). Only the observed range is
    searched, so no crossing is extrapolated.

    References
    ----------
    Fieller, E. C. (1954). Some problems in interval estimation. Journal of the Royal
    Statistical Society B 16(2), 175-185.
    """
    check_ci(ci)
    if not isinstance(model, ImpactModel):
        raise TypeError(f"model must be an ImpactModel; got {type(model).__name__}")
    probs = tuple(float(p) for p in probs)
    if not probs or any(not (0.0 < p < 1.0) for p in probs):
        raise ModelError(f"probs must be probabilities strictly between 0 and 1; got {probs}")
    info = {**model.meta, **(meta or {})}
    if not model.ok:
        return pd.DataFrame(columns=list(CROSSING_COLUMNS))
    from scipy import special

    z = special.ndtri(0.5 + ci / 2.0)
    x = _grid(model, None, n=n_grid)
    lo_x, hi_x = x[0], x[-1]
    rows = []
    for unit, lp, var in _unit_predictors(model, x, counties=counties):
        sd = np.sqrt(np.maximum(var, 0.0))
        for k in range(lp.shape[1]):  # a few levels x a few probabilities
            for p in probs:
                target = float(_links.ppf(p, model.link))
                xc = _first_crossing(x, lp[:, k] - target)
                a = _first_crossing(x, lp[:, k] - z * sd[:, k] - target)
                b = _first_crossing(x, lp[:, k] + z * sd[:, k] - target)
                notes = []
                if np.isnan(xc):
                    side = "above" if _links.cdf(lp[0, k], model.link) > p else "below"
                    notes.append(f"the curve stays {side} {p:g} over the observed range "
                                 f"[{lo_x:.3g}, {hi_x:.3g}]")
                ends = [v for v in (a, b) if np.isfinite(v)]
                if np.isfinite(xc) and len(ends) < 2:
                    notes.append("the interval reaches beyond the observed range")
                if len(ends) == 2:
                    x_lo, x_hi = min(ends), max(ends)
                elif len(ends) == 1 and np.isfinite(xc):
                    x_lo, x_hi = (ends[0], np.nan) if ends[0] <= xc else (np.nan, ends[0])
                else:
                    x_lo = x_hi = np.nan
                rows.append({"unit": unit, "level_k": k + 1, "level_label": model.levels[k + 1],
                             "prob_level": p, "x_cross": xc, "x_lo": x_lo, "x_hi": x_hi,
                             "note": "; ".join(notes)})
    return _decorate(pd.DataFrame(rows), model, info, CROSSING_COLUMNS)


def plot_impact_curves(curves: pd.DataFrame, *, title: str | None = None, max_units: int = 12):
    """Figure of impact curves with their interval bands, one panel per unit.

    Parameters
    ----------
    curves : pandas.DataFrame
        Output of :func:`impact_curves` for one candidate (one model).
    title : str, optional
    max_units : int
        Panels drawn at most (units beyond are left out, in sorted order).

    Returns
    -------
    matplotlib.figure.Figure
    """
    need = {"unit", "level_k", "level_label", "x", "prob", "prob_lo", "prob_hi"}
    lacking = sorted(need - set(curves.columns))
    if lacking:
        raise ModelError(f"curves lacks column(s) {lacking}; pass the output of impact_curves")
    from matplotlib.figure import Figure

    units = sorted(curves["unit"].astype(str).unique())[:max_units]
    ncol = min(3, max(1, len(units)))
    nrow = int(np.ceil(len(units) / ncol)) if units else 1
    fig = Figure(figsize=(4.2 * ncol, 3.2 * nrow), layout="constrained")
    axes = fig.subplots(nrow, ncol, squeeze=False).ravel()
    levels = sorted(curves["level_k"].unique()) if len(curves) else []
    shades = _palette(len(levels))
    for ax, unit in zip(axes, units):
        cu = curves[curves["unit"].astype(str) == unit]
        for colour, k in zip(shades, levels):
            c = cu[cu["level_k"] == k].sort_values("x")
            label = f"{c['level_label'].iloc[0]} or worse" if len(levels) > 1 else str(
                c["level_label"].iloc[0])
            ax.fill_between(c["x"], c["prob_lo"], c["prob_hi"], color=colour, alpha=0.25,
                            linewidth=0)
            ax.plot(c["x"], c["prob"], color=colour, label=label)
        ax.set_ylim(0, 1)
        ax.set_xlabel("index value (negative = dry)")
        ax.set_ylabel("probability")
        ax.set_title(unit if len(units) > 1 else (title or unit), fontsize=9)
        ax.grid(alpha=0.3)
    for ax in axes[len(units):]:
        ax.set_visible(False)
    if units:
        axes[0].legend(fontsize=7, loc="best")
    if title and len(units) > 1:
        fig.suptitle(title)
    return fig


# ------------------------------------------------------------------ private steps
def _grid(model: ImpactModel, grid, *, n: int = N_GRID) -> np.ndarray:
    if grid is not None:
        g = np.asarray(grid, dtype=float).reshape(-1)
        if g.size == 0 or not np.all(np.isfinite(g)):
            raise ModelError("grid must be a non-empty array of finite index values")
        return np.sort(g)
    lo, hi = model.x_range
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi <= lo:
        raise ModelError(f"model has no usable range of its index feature ({model.x_range}); "
                         "pass grid=...")
    return np.linspace(lo, hi, n)


def _unit_predictors(model: ImpactModel, x: np.ndarray, *, counties: bool):
    """Yield (unit, lp (n, K), var (n, K)) for each unit of the model."""
    if model.pooling == "all" or not model.members:
        yield "all", *_reference_lp(model, x)
        return
    per_region = {}
    for r, m in model.members.items():
        if m.ok:
            per_region[r] = _reference_lp(m, x)
            yield r, *per_region[r]
    if model.pooling == "county" and counties and model.groups is not None:
        for row in model.groups.itertuples(index=False):  # one curve per county, on request
            if row.region not in per_region:
                continue
            lp, var = per_region[row.region]
            yield row.county_id, lp + row.deviation, var + row.deviation_sd**2


def _reference_lp(m: ImpactModel, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    ref = m.spec.reference or {}
    primary = m.spec.features[0]
    Xd = np.column_stack([
        x if c == primary else np.full(x.size, ref.get(c, 0.0)) for c in m.predictors
    ])
    return lp_var(m, Xd)


def _first_crossing(x: np.ndarray, g: np.ndarray) -> float:
    """First x where g changes sign (linear interpolation); NaN if none."""
    s = np.sign(g)
    idx = np.flatnonzero(s[:-1] * s[1:] <= 0)
    idx = idx[~((s[idx] == 0) & (s[idx + 1] == 0))]
    if idx.size == 0:
        return np.nan
    i = idx[0]
    if g[i] == g[i + 1]:
        return float(x[i])
    return float(x[i] - g[i] * (x[i + 1] - x[i]) / (g[i + 1] - g[i]))


def _decorate(out: pd.DataFrame, model: ImpactModel, info: dict, columns) -> pd.DataFrame:
    out = out.copy()
    out["impact"] = info.get("impact", model.impact)
    out["target"] = info.get("target", model.target)
    out["index"] = info.get("index", model.design.features[0] if model.design else "")
    out["scale_weeks"] = info.get("scale_weeks", np.nan)
    out["lag_weeks"] = info.get("lag_weeks", np.nan)
    out["model"] = info.get("model", f"{model.kind}_{model.link}")
    out["pooling"] = model.pooling
    extra = [k for k in info if k not in columns and k not in out.columns]
    for k in extra:
        out[k] = info[k]
    return out[list(columns) + extra].reset_index(drop=True)


def _palette(n: int) -> list[str]:
    """Our own sequence: teal for the mildest level through to deep plum for the worst."""
    base = ["#2a9d8f", "#e9a23b", "#c8553d", "#6d2e46", "#3d405b"]
    return (base * (n // len(base) + 1))[:n]
