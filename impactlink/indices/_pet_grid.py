"""Potential evapotranspiration on the index grid (private steps of ``compute_indices``):
latitudes, daily tables and the per-period PET."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .errors import IndicesError
from .pet import (
    daylight_hours,
    extraterrestrial_radiation,
    hargreaves_samani,
    thornthwaite,
    thornthwaite_heat_index,
)
from .timegrid import grid_values

_NUMERIC = ("precip_mm", "tmin_c", "tmax_c", "tmean_c", "pet_mm")


def _latitudes(latitude_deg, county_ids):
    if latitude_deg is None:
        raise IndicesError("latitude_deg: required to compute PET (county_id -> degrees)")
    lat = pd.Series(latitude_deg)
    lat.index = lat.index.astype(str)
    lat = lat[~lat.index.duplicated()]
    missing = [c for c in county_ids if c not in lat.index]
    if missing:
        raise IndicesError(
            f"latitude_deg: no latitude for {len(missing)} county id(s), e.g. {missing[:3]}; "
            "every county in the climate table needs a latitude in degrees"
        )
    out = lat.reindex(list(county_ids)).to_numpy(dtype=float)
    if np.any(~np.isfinite(out)) or np.any(np.abs(out) > 90):
        raise IndicesError(
            f"latitude_deg: values must be finite degrees in [-90, 90]; found range "
            f"[{np.nanmin(out)}, {np.nanmax(out)}]"
        )
    return out


def _day_table(lat, fn):
    """(367, C) table of a solar quantity for day of year 0..366 (row 0 unused)."""
    doy = np.arange(367, dtype=float)[:, None]
    return fn(np.maximum(doy, 1.0), lat[None, :])


def _period_day_mean(table, grid):
    """Mean of a (367, C) day-of-year table over the days of each grid step -> (T, C)."""
    t = grid.times
    if grid.step == "weekly":
        ndays = np.full(len(t), 7)
    else:
        ndays = t.days_in_month.to_numpy()
    total = np.zeros((len(t), table.shape[1]))
    for k in range(int(ndays.max())):  # loop over days within a step (<= 31), not counties
        day = t + pd.Timedelta(days=k)
        use = (k < ndays)[:, None]
        total += np.where(use, table[day.day_of_year.to_numpy()], 0.0)
    return total / ndays[:, None], ndays


#: Daily rows per block of the daily PET (bounds the temporaries on a national table).
_DAILY_BLOCK = 4_000_000


def _daily_hargreaves(clim, cpos, lat):
    """Hargreaves-Samani PET of every daily row, computed in blocks of rows. Ra depends on the
    day of year and the latitude only: one (367, counties) table, read per row (the same
    values, without trigonometry on every daily row)."""
    table = _day_table(lat, extraterrestrial_radiation)
    d = pd.DatetimeIndex(clim["date"])
    tmin, tmax = clim["tmin_c"].to_numpy(float), clim["tmax_c"].to_numpy(float)
    daily = np.empty(len(clim))
    for a in range(0, len(clim), _DAILY_BLOCK):
        b = min(len(clim), a + _DAILY_BLOCK)
        ra = table[d[a:b].day_of_year.to_numpy(), cpos[a:b]]
        daily[a:b] = hargreaves_samani(tmin[a:b], tmax[a:b], ra)
    return daily


def _pet_grid(clim, grid, tpos, cpos, latitude_deg, pet_method, use_supplied_pet, min_valid_days):
    has = {c: (c in clim.columns and clim[c].notna().any()) for c in _NUMERIC}
    if use_supplied_pet and has["pet_mm"]:
        vals = clim["pet_mm"].to_numpy(dtype=float)
        if np.any(vals < 0):
            raise IndicesError("climate: negative pet_mm values; PET must be >= 0 [mm]")
        if grid.cadence == "daily":
            arr, _ = grid_values(vals, tpos, cpos, grid.shape, how="sum",
                                 min_count=min_valid_days, scale_to=7.0)
        else:
            arr, _ = grid_values(vals, tpos, cpos, grid.shape, how="sum", unique=True)
        return arr, {"method": "supplied pet_mm"}
    if not (has["tmin_c"] and has["tmax_c"]) and not has["tmean_c"]:
        return None, {"method": "none"}
    lat = _latitudes(latitude_deg, grid.county_ids)
    if pet_method == "hargreaves":
        if not (has["tmin_c"] and has["tmax_c"]):
            raise IndicesError(
                "pet_method='hargreaves' needs tmin_c and tmax_c in the climate table; only "
                "tmean_c was found. Use pet_method='thornthwaite' or supply pet_mm."
            )
        if grid.cadence == "daily":
            daily = _daily_hargreaves(clim, cpos, lat)
            arr, _ = grid_values(daily, tpos, cpos, grid.shape, how="sum",
                                 min_count=min_valid_days, scale_to=7.0)
        else:
            tmin, _ = grid_values(clim["tmin_c"].to_numpy(float), tpos, cpos, grid.shape,
                                  how="mean", unique=True)
            tmax, _ = grid_values(clim["tmax_c"].to_numpy(float), tpos, cpos, grid.shape,
                                  how="mean", unique=True)
            ra_mean, ndays = _period_day_mean(_day_table(lat, extraterrestrial_radiation), grid)
            arr = hargreaves_samani(tmin, tmax, ra_mean) * ndays[:, None]
        return arr, {"method": "Hargreaves-Samani (1985), FAO-56 eq. 52; Ra from FAO-56 eq. 21"}
    if pet_method == "thornthwaite":
        uniq = grid.cadence != "daily"
        if has["tmean_c"]:
            tmean, _ = grid_values(clim["tmean_c"].to_numpy(float), tpos, cpos, grid.shape,
                                   how="mean", unique=uniq)
        else:
            tm = (clim["tmin_c"].to_numpy(float) + clim["tmax_c"].to_numpy(float)) / 2.0
            tmean, _ = grid_values(tm, tpos, cpos, grid.shape, how="mean", unique=uniq)
        month = (grid.times + pd.Timedelta(days=3)).month.to_numpy() if grid.step == "weekly" \
            else grid.times.month.to_numpy()
        okt = ~np.isnan(tmean)
        with np.errstate(invalid="ignore", divide="ignore"):
            monthly = np.vstack([  # 12 calendar months, vectorised over counties
                np.where(okt & (month == m)[:, None], tmean, 0.0).sum(axis=0)
                / (okt & (month == m)[:, None]).sum(axis=0)
                for m in range(1, 13)])
            heat, expo = thornthwaite_heat_index(monthly)
        n_mean, ndays = _period_day_mean(_day_table(lat, daylight_hours), grid)
        arr = thornthwaite(tmean, heat[None, :], expo[None, :], n_mean, ndays[:, None])
        return arr, {"method": "Thornthwaite (1948); day length from FAO-56 eq. 34; heat index "
                               "from the full-record monthly mean temperatures"}
    raise IndicesError(
        f"pet_method={pet_method!r}; expected 'hargreaves' or 'thornthwaite'"
    )
