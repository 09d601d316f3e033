"""Daily weather of the scenario world: precipitation, minimum and maximum temperature.

Precipitation follows a first-order two-state Markov chain for wet/dry days with gamma
wet-day amounts (Richardson 1981; Wilks 1999), with a seasonal cycle and a west -> east
gradient from semi-arid to humid. A persistent, spatially correlated wetness anomaly
``z`` (monthly AR(1) plus a yearly AR(1), both with a Gaussian correlation over the
distance between county centroids) modulates the wet-day probability and the mean wet-day
amount, which is what makes regional drought years. Temperature has a seasonal cycle, a
small warming trend, AR(1) daily noise and couples to dryness (hotter in dry spells and on
dry days, larger diurnal range).

References
----------
Richardson, C. W. (1981). Stochastic simulation of daily precipitation, temperature, and
solar radiation. Water Resources Research, 17(1), 182-190. doi:10.1029/WR017i001p00182

Wilks, D. S. (1999). Interannual variability and extreme-value characteristics of several
stochastic daily precipitation models. Agricultural and Forest Meteorology, 93(3),
153-169. doi:10.1016/S0168-1923(98)00125-7

Banerjee, S., Gelfand, A. E., Finley, A. O., & Sang, H. (2008). Gaussian predictive process
models for large spatial data sets. Journal of the Royal Statistical Society B, 70(4),
825-848. doi:10.1111/j.1467-9868.2008.00663.x

Finley, A. O., Sang, H., Banerjee, S., & Gelfand, A. E. (2009). Improving the performance
of predictive process modeling for large datasets. Computational Statistics & Data
Analysis, 53(8), 2873-2884. doi:10.1016/j.csda.2008.09.008

Notes
-----
Elementwise work runs in blocks of days (:data:`DAY_BLOCK`) so that temporaries stay small
at any world size; random numbers are drawn for the whole record in the same order as an
unblocked computation, so blocking does not change a single value. The default 60-county
world draws spatially correlated noise with the exact Cholesky factor of the correlation
matrix; a scaled world uses the modified predictive process (Banerjee et al. 2008; Finley
et al. 2009): a low-rank factor through a grid of knots spaced a third of the correlation
length apart, plus independent noise that restores unit variance at every county. That
keeps the national world (3 143 counties) at a few seconds instead of an n-cubed factor
and an (days x n x n) product.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from ._geography import Geography

START = "1981-01-01"
END = "2025-12-31"

# ---- precipitation parameters (documented in scenario_data/README.md)
P_WET_WEST, P_WET_EAST = 0.12, 0.27  # mean wet-day probability
AMOUNT_WEST_MM, AMOUNT_EAST_MM = 5.5, 8.5  # mean wet-day amount
SEASONAL_AMP_WEST, SEASONAL_AMP_EAST = 0.70, 0.35  # relative amplitude of p_wet cycle
PEAK_DOY_WEST, PEAK_DOY_EAST = 168.0, 140.0  # day of year of the wettest season
GAMMA_SHAPE = 0.75
PERSISTENCE = 0.25  # r in p11 = r + (1 - r) p, p01 = (1 - r) p
Z_ON_PWET = 0.35  # p_wet multiplied by exp(0.35 z)
Z_ON_AMOUNT = 0.15  # mean amount multiplied by exp(0.15 z)

# ---- anomaly field
PHI_MONTH, L_MONTH_KM = 0.80, 260.0
PHI_YEAR, L_YEAR_KM = 0.45, 450.0
W_YEAR, W_MONTH = 0.6, 0.8  # W_YEAR**2 + W_MONTH**2 = 1
#: Planted drought at the end of the record: offset of z in the south-west, Mar-Dec 2025.
PLANTED_2025_OFFSET = -1.8
PLANTED_2025_CENTRE_KM = (150.0, 80.0)
PLANTED_2025_RADIUS_KM = 250.0

# ---- temperature parameters
TREND_C_PER_YEAR = 0.03
T_DRY_COUPLING = 0.9  # tmean += -0.9 z
T_WET_DAY, T_DRY_DAY = -1.2, 0.4
T_NOISE_L_KM = 500.0  # correlation length of the daily temperature noise
#: Days per block of elementwise work (about 9 MB per temporary at 3 143 counties).
DAY_BLOCK = 366


@dataclass(frozen=True)
class Weather:
    """Daily weather, arrays shaped (days, counties); values rounded to 0.1 as shipped."""

    dates: pd.DatetimeIndex
    precip_mm: np.ndarray
    tmin_c: np.ndarray
    tmax_c: np.ndarray
    z_month: np.ndarray  # (months, counties) wetness anomaly, negative = dry
    months: pd.DatetimeIndex


def simulate_weather(geo: Geography, rng: np.random.Generator) -> Weather:
    """Simulate 1981-2025 daily weather for every county (vectorised over counties)."""
    dates = pd.date_range(START, END, freq="D")
    months = pd.date_range(START, END, freq="MS")
    z_month = _anomaly_field(geo, months, rng)
    month_of_day = np.asarray((dates.year - 1981) * 12 + dates.month - 1)
    # z of a day = z_month[month_of_day] (a step function within a month), built per block.
    precip, wet = _precipitation(geo, dates, z_month, month_of_day, rng)
    tmin, tmax = _temperature(geo, dates, z_month, month_of_day, wet, rng)
    return Weather(dates, precip, tmin, tmax, z_month, months)


def _blocks(n: int):
    """Slices of :data:`DAY_BLOCK` rows covering ``range(n)``."""
    return [slice(a, min(a + DAY_BLOCK, n)) for a in range(0, n, DAY_BLOCK)]


def _gaussian_chol(centroids_km: np.ndarray, length_km: float) -> np.ndarray:
    """Cholesky factor of a Gaussian correlation over distance, with a 2 % nugget."""
    d = np.linalg.norm(centroids_km[:, None, :] - centroids_km[None, :, :], axis=-1)
    c = 0.98 * np.exp(-((d / length_km) ** 2)) + 0.02 * np.eye(len(d))
    return np.linalg.cholesky(c)


def _knot_factor(centroids_km: np.ndarray, length_km: float
                 ) -> tuple[np.ndarray, np.ndarray] | None:
    """Modified predictive-process factor of the same correlation as :func:`_gaussian_chol`.

    Returns ``(f, sd)``: ``f`` (sites, knots) with ``f @ f.T`` the low-rank part through a
    grid of knots spaced ``length_km / 3`` apart (Banerjee et al. 2008), and ``sd`` (sites,)
    the standard deviation of the independent part that makes every variance 1 (Finley et
    al. 2009). None when the knots would outnumber half the sites.
    """
    lo = centroids_km.min(axis=0) - 0.5 * length_km
    hi = centroids_km.max(axis=0) + 0.5 * length_km
    step = length_km / 3.0
    gx = np.arange(lo[0], hi[0] + step, step)
    gy = np.arange(lo[1], hi[1] + step, step)
    if gx.size * gy.size > len(centroids_km) // 2:
        return None  # short correlation length: the exact factor is cheaper
    knots = np.column_stack([a.ravel() for a in np.meshgrid(gx, gy, indexing="ij")])

    def corr(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        d2 = ((a[:, None, :] - b[None, :, :]) ** 2).sum(axis=-1)
        return 0.98 * np.exp(-d2 / length_km**2)

    k_mm = corr(knots, knots) + 1e-6 * np.eye(len(knots))
    chol = np.linalg.cholesky(k_mm)
    f = np.linalg.solve(chol, corr(centroids_km, knots).T).T  # K_nm L^-T
    sd = np.sqrt(np.clip(1.0 - (f**2).sum(axis=1), 0.0, None))
    return f, sd


def correlated_normal(rng: np.random.Generator, n_rows: int, centroids_km: np.ndarray,
                      length_km: float, *, exact: bool) -> np.ndarray:
    """(n_rows, sites) standard normals with a Gaussian correlation ``exp(-(d / L)^2)``.

    ``exact=True`` (the default world) uses the Cholesky factor; otherwise the modified
    predictive process of :func:`_knot_factor`.
    """
    factor = None if exact else _knot_factor(centroids_km, length_km)
    if factor is None:
        return rng.standard_normal((n_rows, len(centroids_km))) @ _gaussian_chol(
            centroids_km, length_km).T
    f, sd = factor
    out = rng.standard_normal((n_rows, f.shape[1])) @ f.T
    out += rng.standard_normal((n_rows, len(centroids_km))) * sd[None, :]
    return out


def _ar1(innov: np.ndarray, phi: float) -> np.ndarray:
    """Stationary unit-variance AR(1) along axis 0 from unit-variance innovations."""
    return lfilter([np.sqrt(1.0 - phi**2)], [1.0, -phi], innov, axis=0)


def _anomaly_field(geo: Geography, months: pd.DatetimeIndex, rng: np.random.Generator
                   ) -> np.ndarray:
    """Monthly wetness anomaly z (months, counties), about N(0, 1), negative = dry."""
    n_years = len(months) // 12
    burn = 36
    exact = geo.scale == 1.0
    e_m = correlated_normal(rng, len(months) + burn, geo.centroids_km, L_MONTH_KM,
                            exact=exact)
    e_y = correlated_normal(rng, n_years + 10, geo.centroids_km, L_YEAR_KM, exact=exact)
    monthly = _ar1(e_m, PHI_MONTH)[burn:]
    yearly = _ar1(e_y, PHI_YEAR)[10:]
    z = W_YEAR * yearly[np.arange(len(months)) // 12] + W_MONTH * monthly
    # Planted drought at the end of the record (south-west, March-December 2025).
    # A scaled world scales the centre and radius with its size (Geography.scale).
    cx, cy = PLANTED_2025_CENTRE_KM
    cx, cy, radius = cx * geo.scale, cy * geo.scale, PLANTED_2025_RADIUS_KM * geo.scale
    dist2 = (geo.centroids_km[:, 0] - cx) ** 2 + (geo.centroids_km[:, 1] - cy) ** 2
    weight = np.exp(-dist2 / (2.0 * radius**2))
    planted = (months.year == 2025) & (months.month >= 3)
    z[planted] += PLANTED_2025_OFFSET * weight
    return z


def _precipitation(geo: Geography, dates: pd.DatetimeIndex, z_month: np.ndarray,
                   month_of_day: np.ndarray, rng: np.random.Generator
                   ) -> tuple[np.ndarray, np.ndarray]:
    g = geo.west_east[None, :]
    doy_all = dates.day_of_year.to_numpy()[:, None].astype(float)
    p_mean = P_WET_WEST + (P_WET_EAST - P_WET_WEST) * g
    amp = SEASONAL_AMP_WEST + (SEASONAL_AMP_EAST - SEASONAL_AMP_WEST) * g
    peak = PEAK_DOY_WEST + (PEAK_DOY_EAST - PEAK_DOY_WEST) * g
    shape = (len(dates), g.shape[1])
    u = rng.random(shape)
    wet = np.empty(shape, dtype=bool)
    precip = rng.gamma(GAMMA_SHAPE, 1.0, size=shape)  # drawn after u, as one draw
    state = np.zeros(shape[1], dtype=bool)
    for blk in _blocks(shape[0]):  # blocks of days: the same values, small temporaries
        z = z_month[month_of_day[blk]]
        doy = doy_all[blk]
        season = np.cos(2.0 * np.pi * (doy - peak) / 365.25)
        p = np.clip(p_mean * (1.0 + amp * season) * np.exp(Z_ON_PWET * z), 0.005, 0.9)
        amount = (AMOUNT_WEST_MM + (AMOUNT_EAST_MM - AMOUNT_WEST_MM) * g) * (
            1.0 + 0.35 * np.cos(2.0 * np.pi * (doy - 195.0) / 365.25)) * np.exp(
            Z_ON_AMOUNT * z)
        p11 = PERSISTENCE + (1.0 - PERSISTENCE) * p
        p01 = (1.0 - PERSISTENCE) * p
        ub = u[blk]
        wb = wet[blk]
        # Loop over days (a Markov chain is a recursion in time); vectorised over counties.
        for t in range(ub.shape[0]):
            if blk.start == 0 and t == 0:
                state = ub[0] < p[0]
            else:
                state = ub[t] < np.where(state, p11[t], p01[t])
            wb[t] = state
        gam = precip[blk] * (amount / GAMMA_SHAPE)
        precip[blk] = np.round(np.where(wb, 0.2 + gam, 0.0), 1)
    return precip, precip > 0


def _temperature(geo: Geography, dates: pd.DatetimeIndex, z_month: np.ndarray,
                 month_of_day: np.ndarray, wet: np.ndarray, rng: np.random.Generator
                 ) -> tuple[np.ndarray, np.ndarray]:
    g = geo.west_east[None, :]
    lat = geo.lat_deg[None, :]
    doy_all = dates.day_of_year.to_numpy()[:, None].astype(float)
    years_all = (dates.year.to_numpy()[:, None] - 1981) + doy_all / 365.25
    t_annual = 10.5 - 0.9 * (lat - 40.9) + 0.8 * g
    amp = 13.5 - 1.0 * g
    noise = _ar1(correlated_normal(rng, len(dates), geo.centroids_km, T_NOISE_L_KM,
                                   exact=geo.scale == 1.0), 0.75)
    tmax = rng.normal(0.0, 1.0, noise.shape)  # the diurnal-range noise, one draw
    tmin = noise  # reused in place, block by block
    for blk in _blocks(len(dates)):  # blocks of days: the same values, small temporaries
        z = z_month[month_of_day[blk]]
        doy = doy_all[blk]
        wb = wet[blk]
        season = np.cos(2.0 * np.pi * (doy - 200.0) / 365.25)
        winter = 0.5 * (1.0 - season)  # 1 in mid-winter, 0 in mid-summer
        nb = noise[blk] * (2.4 + 1.4 * winter)
        tmean = (t_annual + amp * season + TREND_C_PER_YEAR * years_all[blk]
                 - T_DRY_COUPLING * z + np.where(wb, T_WET_DAY, T_DRY_DAY) + nb)
        dtr = (15.0 - 4.0 * g) * np.where(wb, 0.6, 1.0) + 1.0 * np.maximum(-z, 0.0)
        dtr = dtr + tmax[blk]
        dtr = np.maximum(dtr, 1.0)
        tmax[blk] = np.round(tmean + 0.5 * dtr, 1)
        tmin[blk] = np.round(tmean - 0.5 * dtr, 1)
    return tmin, tmax
