"""Standardization of accumulated series, vectorised over counties and periods of the year.

Every function takes an accumulated series ``x`` of shape ``(T, C)`` (time steps x
counties), the period of the year of each row (``period``, ints ``0 .. G-1``: ISO week
1-52 with week 53 pooled into 52, or calendar month) and a boolean calibration mask of
shape ``(T,)``. Each (period of year, county) pair gets its own distribution, fitted on
the calibration rows only; all ``G x C`` fits run at once with closed-form or
L-moment estimators, then every row is transformed to the standard normal scale.
"""

from __future__ import annotations

import warnings
from typing import Literal

import numpy as np
from scipy import special

from impactlink.errors import IndicesError
from impactlink.indices.distributions import (  # noqa: F401  (moved; re-exported for callers)
    _trigamma,
    calibration_samples,
    fit_gamma,
    fit_gev,
    fit_glo,
    sample_pwms,
)

from .errors import IndexFitWarning

__all__ = [
    "standardize_gamma",
    "standardize_loglogistic",
    "standardize_gev",
    "standardize_empirical",
    "to_percentile",
    "calibration_samples",
    "sample_pwms",
    "fit_gamma",
    "fit_glo",
    "fit_gev",
    "DEFAULT_CLIP",
]

#: Standardized values are clipped to +-3.09, the normal quantiles of probabilities
#: 0.001 and 0.999 (common practice; the same bound as the reference library
#: climate-indices).
DEFAULT_CLIP = 3.09

#: Plotting-position constants a in p = (r - a) / (n + 1 - 2a).
PLOTTING_POSITIONS = {"gringorten": 0.44, "tukey": 1.0 / 3.0, "weibull": 0.0}


def to_percentile(values):
    """Map standardized values (normal scale) to percentiles 0-100: ``100 * Phi(z)``.

    Parameters
    ----------
    values : array_like
        Standard-normal values (SPI, SPEI, ...). NaN stays NaN.

    Returns
    -------
    numpy.ndarray
        Percentile [0-100].

    Examples
    --------
    >>> float(to_percentile(0.0))
    50.0
    """
    return 100.0 * special.ndtr(np.asarray(values, dtype=float))


# --------------------------------------------------------------------------- helpers
def _at_rows(param, period):
    """Gather a (G, C) parameter to (T, C) by the period of each row."""
    return param[period]


def _finish(p, clip):
    """Probability -> normal scale (in place when ``p`` is a float array), clipped to +-clip."""
    p = np.asarray(p, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        z = special.ndtri(p, out=p) if p.ndim else special.ndtri(p)
    if clip is not None:
        np.clip(z, -clip, clip, out=z)
    return z


def _warn_failed(n_failed, n_total, what):
    if n_failed:
        warnings.warn(
            f"{what}: {n_failed} of {n_total} (week-of-year x county) fits failed or had too "
            "few calibration values; their index values are NaN",
            IndexFitWarning,
            stacklevel=3,
        )


# --------------------------------------------------------------------------- SPI
def standardize_gamma(
    x,
    period,
    calib,
    *,
    n_periods: int,
    estimator: Literal["mle", "thom"] = "mle",
    zero_handling: Literal["center_of_mass", "mixture"] = "center_of_mass",
    min_positive: int = 3,
    min_samples: int = 10,
    clip: float | None = DEFAULT_CLIP,
    return_params: bool = False,
):
    """Standardized Precipitation Index transform (gamma with a point mass at zero).

    Parameters
    ----------
    x : ndarray, shape (T, C)
        Accumulated precipitation (any unit; must be >= 0). NaN = missing.
    period : ndarray of int, shape (T,)
        Period of the year of each row (0 .. n_periods-1).
    calib : ndarray of bool, shape (T,)
        Calibration rows.
    n_periods : int
        52 for weekly data, 12 for monthly data.
    estimator : {"mle", "thom"}
        Gamma estimator, see :func:`fit_gamma`.
    zero_handling : {"center_of_mass", "mixture"}
        How a zero accumulation is scored. ``"mixture"``: ``H(0) = q``, the top of the
        probability mass at zero (McKee et al. 1993; Guttman 1999). ``"center_of_mass"``
        (default, recommended by Stagge et al. 2015): ``H(0) = q / 2``, the centre of that
        mass, so an all-zero week is not scored as if it were the wettest of the dry
        weeks. Positive values use ``H(x) = q + (1 - q) G(x)`` either way.
    min_positive : int
        Minimum number of positive calibration values for a gamma fit. In groups with
        fewer (very dry climates) positive values are scored at the centre of the positive
        probability mass, ``H = q + (1 - q) / 2``, so the index stays finite; an
        :class:`IndexFitWarning` gives the count.
    min_samples : int
        Minimum number of valid calibration values per (period of year, county).
    clip : float or None
        Results are clipped to ``[-clip, clip]``.
    return_params : bool
        Also return ``dict(alpha=, beta=, q=, n=)`` of shape (n_periods, C).

    Returns
    -------
    z : ndarray, shape (T, C)

    Notes
    -----
    ``q = n_0 / n`` is the share of exact zeros among the ``n`` valid calibration values
    (Guttman 1999; "zero" means exactly 0, so a change of units never changes ``q``).
    The gamma ``G`` is fitted to the positive values only (Stagge et al. 2015).

    References
    ----------
    McKee, T. B., Doesken, N. J. and Kleist, J. (1993). The relationship of drought
    frequency and duration to time scales. 8th Conference on Applied Climatology, AMS,
    179-184.
    Guttman, N. B. (1999). Accepting the Standardized Precipitation Index: a calculation
    algorithm. JAWRA 35(2), 311-322. https://doi.org/10.1111/j.1752-1688.1999.tb03592.x
    Stagge, J. H., Tallaksen, L. M., Gudmundsson, L., Van Loon, A. F. and Stahl, K. (2015).
    Candidate distributions for climatological drought indices (SPI and SPEI).
    International Journal of Climatology 35(13), 4027-4040. https://doi.org/10.1002/joc.4267
    World Meteorological Organization (2012). Standardized Precipitation Index User Guide
    (WMO-No. 1090). Geneva.
    """
    x = np.asarray(x, dtype=float)
    samples, n = calibration_samples(x, period, calib, n_periods)
    n_zero = np.sum(samples == 0.0, axis=1)
    positive = np.where(samples > 0.0, samples, np.nan)
    n_pos = n - n_zero
    alpha, beta = fit_gamma(positive, estimator=estimator)
    enough = n >= min_samples
    fit_ok = enough & (n_pos >= min_positive) & np.isfinite(alpha) & np.isfinite(beta)
    alpha = np.where(fit_ok, alpha, np.nan)
    beta = np.where(fit_ok, beta, np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        q = np.where(enough, n_zero / n, np.nan)
    n_fallback = int(np.sum(~fit_ok & enough))
    if n_fallback:
        warnings.warn(
            f"SPI gamma: {n_fallback} of {fit_ok.size} (period of year x county) groups have "
            f"fewer than {min_positive} positive calibration values; their positive values are "
            "scored at the centre of the positive mass, H = q + (1 - q) / 2",
            IndexFitWarning, stacklevel=2,
        )

    # transform, in place where possible: these (T, C) passes dominate the cost
    q_t = _at_rows(q, period)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.divide(x, _at_rows(beta, period))  # x >= 0 (accumulated precipitation)
        p = special.gammainc(_at_rows(alpha, period), p, out=p)
    if not fit_ok.all():
        p[~_at_rows(fit_ok, period)] = 0.5
    p *= 1.0 - q_t
    p += q_t
    zero = x == 0.0
    p[zero] = (q_t[zero] / 2.0) if zero_handling == "center_of_mass" else q_t[zero]
    z = _finish(p, clip)
    if return_params:
        return z, {"alpha": alpha, "beta": beta, "q": q, "n": n}
    return z


# --------------------------------------------------------------------------- SPEI
def _bounded_power(x, period, xi, alpha, k):
    """``arg**(1/k)`` with ``arg = 1 - k (x - xi) / alpha``, gathered by period, (T, C).

    Shared by the generalized logistic and GEV CDFs (Hosking's parameterisation): GLO
    ``F = 1 / (1 + arg**(1/k))``, GEV ``F = exp(-arg**(1/k))``. Beyond the bound of the
    support (``arg <= 0``) the power is set to +inf for ``k < 0`` (lower bound: F = 0) and to
    0 for ``k > 0`` (upper bound: F = 1). ``|k| >= 1e-7`` always (the fits substitute 1e-7).
    """
    c = -k / alpha
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        t = np.subtract(x, xi[period])
        t *= c[period]
        t += 1.0
        bad = t <= 0.0
        np.power(t, (1.0 / k)[period], out=t)
    if bad.any():
        t[bad] = np.where(k < 0, np.inf, 0.0)[period][bad]
    return t


def _glo_cdf(x, xi, alpha, k, period=None):
    if period is None:  # scalar / already-gathered parameters
        period = ()
        xi, alpha, k = (np.asarray(v, dtype=float) for v in (xi, alpha, k))
    t = _bounded_power(x, period, xi, alpha, k)
    t += 1.0
    return np.reciprocal(t, out=t)


def _gev_cdf(x, xi, alpha, k, period=None):
    if period is None:
        period = ()
        xi, alpha, k = (np.asarray(v, dtype=float) for v in (xi, alpha, k))
    t = _bounded_power(x, period, xi, alpha, k)
    np.negative(t, out=t)
    return np.exp(t, out=t)


def _standardize_lmoment(x, period, calib, n_periods, fitter, cdf, min_samples, clip, what,
                         return_params):
    x = np.asarray(x, dtype=float)
    samples, n = calibration_samples(x, period, calib, n_periods)
    b0, b1, b2 = sample_pwms(samples, n)
    xi, alpha, k = fitter(b0, b1, b2)
    enough = n >= min_samples
    ok = enough & np.isfinite(k)
    for arr in (xi, alpha, k):
        arr[~ok] = np.nan
    _warn_failed(int(np.sum(enough & ~ok)), ok.size, what)
    p = cdf(x, xi, alpha, k, period)
    z = _finish(p, clip)
    if return_params:
        return z, {"xi": xi, "alpha": alpha, "k": k, "n": n}
    return z


def standardize_loglogistic(x, period, calib, *, n_periods: int, min_samples: int = 10,
                            clip: float | None = DEFAULT_CLIP, return_params: bool = False):
    """SPEI transform: three-parameter log-logistic fitted by unbiased PWMs.

    Parameters
    ----------
    x : ndarray, shape (T, C)
        Accumulated climatic water balance P - PET [mm] (any sign).
    period, calib, n_periods, min_samples, clip, return_params
        As in :func:`standardize_gamma`.

    Returns
    -------
    z : ndarray, shape (T, C)

    Notes
    -----
    Log-logistic CDF ``F(x) = [1 + (alpha / (x - gamma))**beta]**-1`` (Vicente-Serrano et
    al. 2010, eq. 3) with parameters from the unbiased PWMs (Begueria et al. 2014),
    computed in Hosking's generalized-logistic parameterisation (see :func:`fit_glo`).
    Values beyond the fitted bound get probability 0 (or 1) and are clipped.

    References
    ----------
    Vicente-Serrano, S. M., Begueria, S. and Lopez-Moreno, J. I. (2010). A multiscalar
    drought index sensitive to global warming: the Standardized Precipitation
    Evapotranspiration Index. Journal of Climate 23(7), 1696-1718.
    https://doi.org/10.1175/2009JCLI2909.1
    Begueria, S., Vicente-Serrano, S. M., Reig, F. and Latorre, B. (2014). Standardized
    precipitation evapotranspiration index (SPEI) revisited: parameter fitting,
    evapotranspiration models, tools, datasets and drought monitoring. International
    Journal of Climatology 34(10), 3001-3023. https://doi.org/10.1002/joc.3887
    Hosking, J. R. M. (1986). The theory of probability weighted moments. IBM Research
    Report RC12210.
    """
    return _standardize_lmoment(x, period, calib, n_periods, fit_glo, _glo_cdf, min_samples,
                                clip, "SPEI log-logistic", return_params)


def standardize_gev(x, period, calib, *, n_periods: int, min_samples: int = 10,
                    clip: float | None = DEFAULT_CLIP, return_params: bool = False):
    """SPEI transform with the generalized extreme value distribution (L-moments).

    Stagge et al. (2015) found the GEV a better fit than the log-logistic for SPEI at
    short accumulation periods in Europe; offered as an alternative.

    References
    ----------
    Hosking, J. R. M., Wallis, J. R. and Wood, E. F. (1985). Estimation of the generalized
    extreme-value distribution by the method of probability-weighted moments.
    Technometrics 27(3), 251-261.
    Stagge, J. H. et al. (2015), see :func:`standardize_gamma`.
    """
    return _standardize_lmoment(x, period, calib, n_periods, fit_gev, _gev_cdf, min_samples,
                                clip, "SPEI GEV", return_params)


# --------------------------------------------------------------------------- empirical
def standardize_empirical(
    x,
    period,
    calib,
    *,
    n_periods: int,
    plotting_position: Literal["gringorten", "tukey", "weibull"] = "gringorten",
    min_samples: int = 10,
    clip: float | None = DEFAULT_CLIP,
):
    """Non-parametric standardization by plotting positions within each period of year.

    Parameters
    ----------
    x : ndarray, shape (T, C)
        Any indicator (soil moisture, streamflow, accumulated PET ...). Larger = larger.
    period, calib, n_periods, min_samples, clip
        As in :func:`standardize_gamma`.
    plotting_position : {"gringorten", "tukey", "weibull"}
        ``p = (r - a) / (n + 1 - 2a)`` with ``a`` = 0.44 (Gringorten 1963), 1/3 (Tukey;
        used for EDDI by Hobbins et al. 2016) or 0 (Weibull).

    Returns
    -------
    z : ndarray, shape (T, C)
        ``Phi^-1(p)``, increasing with ``x``.

    Notes
    -----
    ``r`` is the rank of the value among the ``n`` calibration values of its period of
    year (ties get their mid-rank). A value outside the calibration period is ranked as
    if it were added to the calibration sample (``n + 1`` values), so every value gets a
    plotting position strictly inside (0, 1).

    References
    ----------
    Gringorten, I. I. (1963). A plotting rule for extreme probability paper. Journal of
    Geophysical Research 68(3), 813-814. https://doi.org/10.1029/JZ068i003p00813
    Hobbins, M. T., Wood, A., McEvoy, D. J., Huntington, J. L., Morton, C., Anderson, M.
    and Hain, C. (2016). The Evaporative Demand Drought Index. Part I. Journal of
    Hydrometeorology 17(6), 1745-1761. https://doi.org/10.1175/JHM-D-15-0121.1
    """
    if plotting_position not in PLOTTING_POSITIONS:
        raise IndicesError(
            f"plotting_position={plotting_position!r}; expected one of "
            f"{sorted(PLOTTING_POSITIONS)}"
        )
    a = PLOTTING_POSITIONS[plotting_position]
    x = np.asarray(x, dtype=float)
    z = np.full(x.shape, np.nan)
    denom_shift = 1.0 - 2.0 * a
    for g in range(n_periods):  # loop over periods of the year; each step covers all counties
        rows_cal = np.flatnonzero((period == g) & calib)
        rows_out = np.flatnonzero((period == g) & ~calib)
        if rows_cal.size == 0:
            continue
        # calibration values: ranks from one sort (ties -> mid-rank)
        raw = x[rows_cal]  # (m, C)
        order = np.argsort(raw, axis=0, kind="stable")  # NaN last
        srt = np.take_along_axis(raw, order, axis=0)
        n = np.sum(~np.isnan(srt), axis=0).astype(float)  # (C,)
        m = srt.shape[0]
        j = np.arange(m)[:, None]
        same = srt[1:] == srt[:-1]
        start = np.vstack([np.ones((1, srt.shape[1]), bool), ~same])
        stop = np.vstack([~same, np.ones((1, srt.shape[1]), bool)])
        less = np.maximum.accumulate(np.where(start, j, 0), axis=0)
        leq = np.minimum.accumulate(np.where(stop, j, m)[::-1], axis=0)[::-1] + 1
        r_sorted = (less + leq + 1) / 2.0  # 1-based mid-rank
        r = np.empty_like(r_sorted)
        np.put_along_axis(r, order, r_sorted, axis=0)
        with np.errstate(invalid="ignore", divide="ignore"):
            p = (r - a) / (n + denom_shift)
        p[np.isnan(raw) | (n < min_samples)[None, :]] = np.nan
        z[rows_cal] = _finish(p, clip)
        if rows_out.size == 0:
            continue
        # other values: ranked as if added to the calibration sample (n + 1 values)
        xs = x[rows_out]
        cnt_less = np.zeros(xs.shape, dtype=np.int16)
        cnt_leq = np.zeros(xs.shape, dtype=np.int16)
        hit = np.empty(xs.shape, dtype=bool)
        for sj in srt[: int(n.max(initial=0))]:  # sorted calibration values (<= ~35)
            np.less(sj, xs, out=hit)
            cnt_less += hit
            np.less_equal(sj, xs, out=hit)
            cnt_leq += hit
        r = (cnt_less + cnt_leq + 2) / 2.0  # mid-rank among ties incl. the value itself
        with np.errstate(invalid="ignore", divide="ignore"):
            p = (r - a) / (n + 1.0 + denom_shift)
        p[np.isnan(xs) | (n < min_samples)[None, :]] = np.nan
        z[rows_out] = _finish(p, clip)
    return z
