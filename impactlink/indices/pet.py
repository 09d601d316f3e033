"""Potential evapotranspiration (PET): Hargreaves-Samani and Thornthwaite, vectorised.

All functions broadcast over numpy arrays, so one call covers every county and every
time step (typical shapes: ``(days,)`` for the day of year and ``(counties,)`` for
latitude, giving ``(days, counties)``).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "extraterrestrial_radiation",
    "daylight_hours",
    "hargreaves_samani",
    "thornthwaite",
    "thornthwaite_heat_index",
]

#: Solar constant [MJ m-2 min-1] (FAO-56, eq. 21).
SOLAR_CONSTANT = 0.0820
#: Conversion of an energy flux [MJ m-2 day-1] to an equivalent evaporation [mm day-1]
#: (FAO-56, eq. 20: 1 / lambda with lambda = 2.45 MJ kg-1).
MJ_TO_MM = 0.408


def _solar_geometry(day_of_year, latitude_deg):
    """Inverse relative distance, declination and sunset hour angle (FAO-56 eqs 23-25)."""
    j = np.asarray(day_of_year, dtype=float)
    phi = np.radians(np.asarray(latitude_deg, dtype=float))
    dr = 1.0 + 0.033 * np.cos(2.0 * np.pi * j / 365.0)
    delta = 0.409 * np.sin(2.0 * np.pi * j / 365.0 - 1.39)
    # eq. 25; the argument is clipped to [-1, 1] so polar day/night stay defined
    # (FAO-56 does not treat latitudes beyond the polar circles).
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1.0, 1.0))
    return phi, dr, delta, ws


def extraterrestrial_radiation(day_of_year, latitude_deg):
    """Daily extraterrestrial radiation Ra [MJ m-2 day-1] (FAO-56, eq. 21).

    Parameters
    ----------
    day_of_year : array_like of int
        Day of the year J, 1 (1 January) to 365 or 366.
    latitude_deg : array_like of float
        Latitude [degrees north; south is negative]. Degrees, not radians.

    Returns
    -------
    numpy.ndarray
        Ra [MJ m-2 day-1], broadcast shape of the inputs.

    Notes
    -----
    ``Ra = (24*60/pi) Gsc dr [ws sin(phi) sin(delta) + cos(phi) cos(delta) sin(ws)]``
    with ``Gsc = 0.0820`` MJ m-2 min-1, ``dr = 1 + 0.033 cos(2 pi J / 365)`` (eq. 23),
    ``delta = 0.409 sin(2 pi J / 365 - 1.39)`` (eq. 24) and
    ``ws = arccos(-tan(phi) tan(delta))`` (eq. 25).

    References
    ----------
    Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
    guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
    FAO, Rome.

    Examples
    --------
    >>> round(float(extraterrestrial_radiation(246, -20.0)), 1)  # FAO-56 Example 8
    32.2
    """
    phi, dr, delta, ws = _solar_geometry(day_of_year, latitude_deg)
    return (
        (24.0 * 60.0 / np.pi)
        * SOLAR_CONSTANT
        * dr
        * (ws * np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.sin(ws))
    )


def daylight_hours(day_of_year, latitude_deg):
    """Maximum possible duration of sunshine N [hours] (FAO-56, eq. 34: N = 24 ws / pi).

    Parameters
    ----------
    day_of_year : array_like of int
        Day of the year, 1-366.
    latitude_deg : array_like of float
        Latitude [degrees north].

    Returns
    -------
    numpy.ndarray
        Day length [hours].

    References
    ----------
    Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). FAO Irrigation and
    Drainage Paper 56, eq. 34.
    """
    _, _, _, ws = _solar_geometry(day_of_year, latitude_deg)
    return 24.0 / np.pi * ws


def hargreaves_samani(tmin_c, tmax_c, ra_mj, *, tmean_c=None):
    """Reference evapotranspiration by Hargreaves and Samani (1985) [mm day-1].

    Parameters
    ----------
    tmin_c, tmax_c : array_like
        Daily (or period-mean daily) minimum and maximum air temperature [deg C].
    ra_mj : array_like
        Extraterrestrial radiation [MJ m-2 day-1] (see :func:`extraterrestrial_radiation`;
        for a week or month pass the mean over its days).
    tmean_c : array_like, optional
        Mean temperature [deg C]; default ``(tmin_c + tmax_c) / 2`` as in FAO-56.

    Returns
    -------
    numpy.ndarray
        ET0 [mm day-1]; NaN where ``tmax_c < tmin_c`` or any input is NaN.

    Notes
    -----
    FAO-56 eq. 52: ``ET0 = 0.0023 (Tmean + 17.8) (Tmax - Tmin)**0.5 Ra``, with Ra expressed
    as evaporation [mm day-1] (``0.408 * Ra`` in MJ m-2 day-1, eq. 20). Negative results
    (very cold air) are set to 0.

    References
    ----------
    Hargreaves, G. H. and Samani, Z. A. (1985). Reference crop evapotranspiration from
    temperature. Applied Engineering in Agriculture 1(2), 96-99.
    Allen, R. G. et al. (1998). FAO Irrigation and Drainage Paper 56, eq. 52.
    """
    tmin = np.asarray(tmin_c, dtype=float)
    tmax = np.asarray(tmax_c, dtype=float)
    tmean = (tmin + tmax) / 2.0 if tmean_c is None else np.asarray(tmean_c, dtype=float)
    rng = tmax - tmin
    with np.errstate(invalid="ignore"):
        et0 = 0.0023 * (tmean + 17.8) * np.sqrt(np.where(rng >= 0, rng, np.nan))
        et0 = et0 * MJ_TO_MM * np.asarray(ra_mj, dtype=float)
    return np.where(np.isnan(et0), np.nan, np.maximum(et0, 0.0))


def thornthwaite_heat_index(monthly_mean_tc):
    """Annual heat index I and exponent a of Thornthwaite (1948).

    Parameters
    ----------
    monthly_mean_tc : array_like, shape (12, ...)
        Climatological mean temperature of each calendar month [deg C].

    Returns
    -------
    heat_index, exponent : numpy.ndarray
        ``I = sum_m (T_m / 5)**1.514`` over months with ``T_m > 0`` and
        ``a = 6.75e-7 I**3 - 7.71e-5 I**2 + 1.792e-2 I + 0.49239``.
    """
    t = np.maximum(np.asarray(monthly_mean_tc, dtype=float), 0.0)
    heat = np.sum((t / 5.0) ** 1.514, axis=0)
    a = 6.75e-7 * heat**3 - 7.71e-5 * heat**2 + 1.792e-2 * heat + 0.49239
    return heat, a


def thornthwaite(tmean_c, heat_index, exponent, mean_daylight_h, n_days):
    """Potential evapotranspiration by Thornthwaite (1948) over a period [mm].

    Parameters
    ----------
    tmean_c : array_like
        Mean air temperature of the period (week or month) [deg C].
    heat_index, exponent : array_like
        From :func:`thornthwaite_heat_index` (per county).
    mean_daylight_h : array_like
        Mean day length over the days of the period [hours] (:func:`daylight_hours`).
    n_days : array_like
        Number of days in the period (7 for a week, 28-31 for a month).

    Returns
    -------
    numpy.ndarray
        PET of the period [mm]; 0 where the mean temperature is at or below 0 deg C.

    Notes
    -----
    ``PET = 16 (N / 12) (d / 30) (10 T / I)**a`` [mm], Thornthwaite (1948), where the
    original monthly formula is scaled by the number of days ``d`` of the period, so a
    week uses ``d = 7``. The heat index is computed from climatological monthly means
    (common practice, also done by the reference library climate-indices). No
    correction for T > 26.5 deg C is applied (Thornthwaite's nomogram table is not used).

    References
    ----------
    Thornthwaite, C. W. (1948). An approach toward a rational classification of climate.
    Geographical Review 38(1), 55-94. https://doi.org/10.2307/210739
    """
    t = np.maximum(np.asarray(tmean_c, dtype=float), 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        pet = (
            16.0
            * (np.asarray(mean_daylight_h, dtype=float) / 12.0)
            * (np.asarray(n_days, dtype=float) / 30.0)
            * (10.0 * t / heat_index) ** exponent
        )
    return pet
