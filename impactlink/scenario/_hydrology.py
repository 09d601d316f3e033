"""County traits, potential evaporation, soil-water bucket, streamflow, and the generator's
own weekly water-balance anomaly that drives every simulated impact.

The generator deliberately does not use ``impactlink.indices``: the impacts are planted on
a simple, documented quantity of its own (a z-score of the accumulated weekly
precipitation minus Hargreaves PET), so that the main pipeline has a known answer to find
with its own, independently written indices.

References
----------
Hargreaves, G. H., & Samani, Z. A. (1985). Reference crop evapotranspiration from
temperature. Applied Engineering in Agriculture, 1(2), 96-99. doi:10.13031/2013.26773

Allen, R. G., Pereira, L. S., Raes, D., & Smith, M. (1998). Crop evapotranspiration:
guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
Rome: FAO.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ._geography import Geography
from ._weather import Weather, correlated_normal

#: Accumulation lengths (weeks) of the internal water-balance anomaly.
WB_SCALES = (4, 8, 13, 26)
CALIBRATION = (1991, 2020)


@dataclass(frozen=True)
class Traits:
    """County characteristics, one value per county (west -> east order)."""

    irrigated_share: np.ndarray  # fraction of cropland irrigated, 0-1
    soil_whc_mm: np.ndarray  # plant-available water holding capacity of the root zone, mm
    groundwater_reliance: np.ndarray  # fraction of public supply drawn from groundwater, 0-1
    cattle_per_km2: np.ndarray  # head of cattle per km2 of county area


@dataclass(frozen=True)
class Hydrology:
    """Daily bucket and streamflow, and the weekly quantities that drive impacts.

    Weekly arrays are shaped (weeks, counties); ``weeks`` are the Mondays of complete ISO
    weeks inside 1981-2025.
    """

    pet_mm: np.ndarray  # daily, (days, counties)
    soil_moisture_mm: np.ndarray  # daily
    streamflow_m3s: np.ndarray  # daily
    weeks: pd.DatetimeIndex
    wbz: dict[int, np.ndarray]  # scale_weeks -> standardized water-balance anomaly
    tmax_z: np.ndarray  # standardized weekly mean tmax


def draw_traits(geo: Geography, rng: np.random.Generator) -> Traits:
    """Spatially smooth county traits with a west -> east tendency."""
    g = geo.west_east
    e = correlated_normal(rng, 4, geo.centroids_km, 150.0, exact=geo.scale == 1.0)
    irr = np.clip(0.03 + 0.38 * (1.0 - g) ** 1.5 + 0.04 * e[0], 0.01, 0.6)
    whc = np.clip(150.0 + 20.0 * g + 40.0 * e[1], 70.0, 240.0)
    gw = np.clip(0.85 - 0.6 * g + 0.12 * e[2], 0.05, 0.98)
    cattle = np.clip(8.0 + 30.0 * np.exp(-(((g - 0.4) / 0.25) ** 2)) + 5.0 * e[3], 2.0, None)
    return Traits(np.round(irr, 3), np.round(whc, 1), np.round(gw, 3), np.round(cattle, 1))


def extraterrestrial_radiation(doy: np.ndarray, lat_deg: np.ndarray) -> np.ndarray:
    """Daily extraterrestrial radiation Ra, MJ m-2 day-1, shape (days, sites).

    Notes
    -----
    FAO-56 Eq. 21 with Eqs. 23 (inverse relative Earth-Sun distance), 24 (solar
    declination) and 25 (sunset hour angle), solar constant 0.0820 MJ m-2 min-1
    (Allen et al. 1998).
    """
    phi = np.deg2rad(np.asarray(lat_deg, dtype=float))[None, :]
    j = np.asarray(doy, dtype=float)[:, None]
    dr = 1.0 + 0.033 * np.cos(2.0 * np.pi * j / 365.0)
    delta = 0.409 * np.sin(2.0 * np.pi * j / 365.0 - 1.39)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1.0, 1.0))
    return (24.0 * 60.0 / np.pi) * 0.0820 * dr * (
        ws * np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.sin(ws))


def hargreaves_pet(tmin_c: np.ndarray, tmax_c: np.ndarray, doy: np.ndarray,
                   lat_deg: np.ndarray) -> np.ndarray:
    """Daily reference evapotranspiration by Hargreaves and Samani (1985), mm/day.

    Parameters
    ----------
    tmin_c, tmax_c : ndarray, shape (days, sites)
        Daily minimum and maximum temperature [deg C].
    doy : ndarray, shape (days,)
        Day of the year [1-366].
    lat_deg : ndarray, shape (sites,)
        Latitude [degrees north].

    Notes
    -----
    ``PET = 0.0023 * 0.408 * Ra * (Tmean + 17.8) * sqrt(Tmax - Tmin)`` with ``Tmean`` the
    mean of ``Tmin`` and ``Tmax``, ``Ra`` from :func:`extraterrestrial_radiation`, and 0.408
    converting MJ m-2 to mm of evaporated water (FAO-56 Eq. 20; FAO-56 Eq. 52 is this
    equation). Negative values are set to 0.
    """
    ra = extraterrestrial_radiation(doy, lat_deg)
    tmean = 0.5 * (tmin_c + tmax_c)
    pet = 0.0023 * 0.408 * ra * (tmean + 17.8) * np.sqrt(np.maximum(tmax_c - tmin_c, 0.0))
    return np.maximum(pet, 0.0)


def simulate_hydrology(geo: Geography, wx: Weather, traits: Traits) -> Hydrology:
    """Bucket, streamflow and weekly water-balance anomalies (no randomness)."""
    pet = hargreaves_pet(wx.tmin_c, wx.tmax_c, wx.dates.day_of_year.to_numpy(), geo.lat_deg)
    soil, flow = _bucket_and_flow(wx.precip_mm, pet, traits.soil_whc_mm, geo.area_km2)
    i0 = (7 - wx.dates[0].weekday()) % 7  # first Monday
    n_weeks = (len(wx.dates) - i0) // 7
    weeks = wx.dates[i0: i0 + 7 * n_weeks: 7]
    wb = weekly_sum(wx.precip_mm - pet, i0, n_weeks)
    woy = _week_of_year(weeks)
    calib = (weeks.year >= CALIBRATION[0]) & (weeks.year <= CALIBRATION[1])
    wbz = {k: _standardize(_rolling_sum(wb, k), woy, calib) for k in WB_SCALES}
    tmax_w = weekly_sum(wx.tmax_c, i0, n_weeks) / 7.0
    return Hydrology(pet, soil, flow, weeks, wbz, _standardize(tmax_w, woy, calib))


def weekly_sum(daily: np.ndarray, i0: int, n_weeks: int) -> np.ndarray:
    """Sum complete 7-day blocks starting at day index ``i0`` -> (weeks, counties)."""
    block = daily[i0: i0 + 7 * n_weeks]
    return block.reshape(n_weeks, 7, daily.shape[1]).sum(axis=1)


def _bucket_and_flow(precip: np.ndarray, pet: np.ndarray, whc: np.ndarray,
                     area_km2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Single-layer bucket (actual ET = PET * W / WHC) feeding two linear reservoirs.

    Notes
    -----
    Per day: quick runoff ``0.2 * max(P - 20, 0)``; the rest enters the bucket; water
    above ``WHC`` overflows, half to a fast reservoir (k = 0.15 / day) and half to a slow
    one (k = 0.01 / day); quick runoff goes to the fast reservoir. Streamflow is the sum of
    reservoir outflows (mm/day) over the county area, converted to m3/s.
    """
    nd, nc = precip.shape
    soil = np.empty((nd, nc))
    q = np.empty((nd, nc))
    w = 0.5 * whc
    fast = np.zeros(nc)
    slow = np.full(nc, 5.0)
    quick_all = 0.2 * np.maximum(precip - 20.0, 0.0)
    infil_all = precip - quick_all
    # Loop over days (the bucket is a recursion in time); vectorised over counties.
    for t in range(nd):
        w = w + infil_all[t]
        over = np.maximum(w - whc, 0.0)
        w = w - over
        w = np.maximum(w - pet[t] * w / whc, 0.0)
        fast = fast + quick_all[t] + 0.5 * over
        slow = slow + 0.5 * over
        out_f = 0.15 * fast
        out_s = 0.01 * slow
        fast -= out_f
        slow -= out_s
        soil[t] = w
        q[t] = out_f + out_s
    flow = q * area_km2[None, :] * 1000.0 / 86400.0
    return soil, flow


def _week_of_year(weeks: pd.DatetimeIndex) -> np.ndarray:
    """ISO week number with week 53 pooled into week 52 (DESIGN.md convention)."""
    woy = weeks.isocalendar().week.to_numpy().astype(np.int64)
    return np.minimum(woy, 52)


def _rolling_sum(x: np.ndarray, k: int) -> np.ndarray:
    """Trailing k-week sum; the first k - 1 weeks are NaN."""
    c = np.cumsum(np.vstack([np.zeros((1, x.shape[1])), x]), axis=0)
    out = np.full(x.shape, np.nan)
    out[k - 1:] = c[k:] - c[:-k]
    return out


def _standardize(x: np.ndarray, woy: np.ndarray, calib: np.ndarray) -> np.ndarray:
    """z-score per (week of year, county) with mean and SD from the calibration years."""
    out = np.full(x.shape, np.nan)
    # Loop over 52 weeks of the year (not counties); each step is vectorised over counties.
    for w in range(1, 53):
        sel = woy == w
        if not (sel & calib).any():
            continue
        ref = x[sel & calib]
        mu = np.nanmean(ref, axis=0)
        sd = np.nanstd(ref, axis=0, ddof=1)
        out[sel] = (x[sel] - mu) / sd
    return out
