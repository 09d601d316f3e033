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
    month_of_day = (dates.year - 1981) * 12 + dates.month - 1
    z = z_month[month_of_day]  # (days, counties), step function within a month
    precip, wet = _precipitation(geo, dates, z, rng)
    tmin, tmax = _temperature(geo, dates, z, wet, rng)
    return Weather(dates, precip, tmin, tmax, z_month, months)


def _gaussian_chol(centroids_km: np.ndarray, length_km: float) -> np.ndarray:
    """Cholesky factor of a Gaussian correlation over distance, with a 2 % nugget."""
    d = np.linalg.norm(centroids_km[:, None, :] - centroids_km[None, :, :], axis=-1)
    c = 0.98 * np.exp(-((d / length_km) ** 2)) + 0.02 * np.eye(len(d))
    return np.linalg.cholesky(c)


def _ar1(innov: np.ndarray, phi: float) -> np.ndarray:
    """Stationary unit-variance AR(1) along axis 0 from unit-variance innovations."""
    return lfilter([np.sqrt(1.0 - phi**2)], [1.0, -phi], innov, axis=0)


def _anomaly_field(geo: Geography, months: pd.DatetimeIndex, rng: np.random.Generator
                   ) -> np.ndarray:
    """Monthly wetness anomaly z (months, counties), about N(0, 1), negative = dry."""
    nc = len(geo.county_ids)
    n_years = len(months) // 12
    burn = 36
    e_m = rng.standard_normal((len(months) + burn, nc)) @ _gaussian_chol(
        geo.centroids_km, L_MONTH_KM).T
    e_y = rng.standard_normal((n_years + 10, nc)) @ _gaussian_chol(
        geo.centroids_km, L_YEAR_KM).T
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


def _precipitation(geo: Geography, dates: pd.DatetimeIndex, z: np.ndarray,
                   rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    g = geo.west_east[None, :]
    doy = dates.day_of_year.to_numpy()[:, None].astype(float)
    p_mean = P_WET_WEST + (P_WET_EAST - P_WET_WEST) * g
    amp = SEASONAL_AMP_WEST + (SEASONAL_AMP_EAST - SEASONAL_AMP_WEST) * g
    peak = PEAK_DOY_WEST + (PEAK_DOY_EAST - PEAK_DOY_WEST) * g
    season = np.cos(2.0 * np.pi * (doy - peak) / 365.25)
    p = np.clip(p_mean * (1.0 + amp * season) * np.exp(Z_ON_PWET * z), 0.005, 0.9)
    amount = (AMOUNT_WEST_MM + (AMOUNT_EAST_MM - AMOUNT_WEST_MM) * g) * (
        1.0 + 0.35 * np.cos(2.0 * np.pi * (doy - 195.0) / 365.25)) * np.exp(Z_ON_AMOUNT * z)
    p11 = PERSISTENCE + (1.0 - PERSISTENCE) * p
    p01 = (1.0 - PERSISTENCE) * p
    u = rng.random(p.shape)
    wet = np.empty(p.shape, dtype=bool)
    state = u[0] < p[0]
    wet[0] = state
    # Loop over days (a Markov chain is a recursion in time); vectorised over counties.
    for t in range(1, len(dates)):
        state = u[t] < np.where(state, p11[t], p01[t])
        wet[t] = state
    gam = rng.gamma(GAMMA_SHAPE, 1.0, size=p.shape) * (amount / GAMMA_SHAPE)
    precip = np.where(wet, 0.2 + gam, 0.0)
    precip = np.round(precip, 1)
    return precip, precip > 0


def _temperature(geo: Geography, dates: pd.DatetimeIndex, z: np.ndarray, wet: np.ndarray,
                 rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    g = geo.west_east[None, :]
    lat = geo.lat_deg[None, :]
    doy = dates.day_of_year.to_numpy()[:, None].astype(float)
    years = (dates.year.to_numpy()[:, None] - 1981) + doy / 365.25
    t_annual = 10.5 - 0.9 * (lat - 40.9) + 0.8 * g
    amp = 13.5 - 1.0 * g
    season = np.cos(2.0 * np.pi * (doy - 200.0) / 365.25)
    winter = 0.5 * (1.0 - season)  # 1 in mid-winter, 0 in mid-summer
    noise = _ar1(rng.standard_normal(z.shape) @ _gaussian_chol(geo.centroids_km, 500.0).T,
                 0.75) * (2.4 + 1.4 * winter)
    tmean = (t_annual + amp * season + TREND_C_PER_YEAR * years - T_DRY_COUPLING * z
             + np.where(wet, T_WET_DAY, T_DRY_DAY) + noise)
    dtr = (15.0 - 4.0 * g) * np.where(wet, 0.6, 1.0) + 1.0 * np.maximum(-z, 0.0)
    dtr = dtr + rng.normal(0.0, 1.0, z.shape)
    dtr = np.maximum(dtr, 1.0)
    tmax = np.round(tmean + 0.5 * dtr, 1)
    tmin = np.round(tmean - 0.5 * dtr, 1)
    return tmin, tmax
