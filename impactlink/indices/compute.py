"""The ``indices`` stage entry point: tidy climate rows -> :class:`IndexCube`."""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import Literal

import numpy as np
import pandas as pd

from impactlink.indices._pet_grid import (  # noqa: F401  (moved; re-exported for callers)
    _day_table,
    _latitudes,
    _period_day_mean,
    _pet_grid,
)
from impactlink.schema import COUNTY

from .cube import IndexCube
from .errors import IndexCalibrationWarning, IndicesError, IndicesWarning
from .standardize import (
    DEFAULT_CLIP,
    standardize_empirical,
    standardize_gamma,
    standardize_gev,
    standardize_loglogistic,
)
from .timegrid import (
    _monday_days,
    accumulate,
    accumulate_many,
    build_grid,
    calibration_mask,
    detect_cadence,
    grid_values,
    grid_years,
    period_of_year,
)

__all__ = ["compute_indices", "compute_pet", "standardized_indices", "DEFAULT_SCALES_WEEKS",
           "DEFAULT_SCALES_MONTHS"]

DEFAULT_SCALES_WEEKS = (4, 8, 13, 26, 39, 52, 104)
DEFAULT_SCALES_MONTHS = (1, 2, 3, 6, 9, 12, 24)
KNOWN_INDICES = ("spi", "spei", "eddi")


def compute_indices(
    climate: pd.DataFrame,
    *,
    latitude_deg: pd.Series,
    indicators: pd.DataFrame | None = None,
    scales_weeks: Sequence[int] = DEFAULT_SCALES_WEEKS,
    scales_months: Sequence[int] = DEFAULT_SCALES_MONTHS,
    indices: Sequence[str] = KNOWN_INDICES,
    pet_method: Literal["hargreaves", "thornthwaite"] = "hargreaves",
    use_supplied_pet: bool = True,
    calibration: tuple[int, int] = (1991, 2020),
    min_calibration_years: int = 20,
    min_valid_days: int = 6,
    spi_estimator: Literal["mle", "thom"] = "mle",
    spi_zero_handling: Literal["center_of_mass", "mixture"] = "center_of_mass",
    spei_distribution: Literal["log-logistic", "gev"] = "log-logistic",
    eddi_sign: Literal["dry_negative", "dry_positive"] = "dry_negative",
    indicator_scales: Sequence[int] = (0,),
    clip: float = DEFAULT_CLIP,
    n_threads: int | None = None,
    progress: Callable[[str], None] | None = None,
) -> IndexCube:
    """Compute SPI, SPEI, EDDI and standardized indicators for every county and scale.

    Parameters
    ----------
    climate : pandas.DataFrame
        Columns ``county_id`` (str), ``date``, ``precip_mm`` and optionally ``tmin_c``,
        ``tmax_c``, ``tmean_c``, ``pet_mm``. Rows are daily, weekly or monthly (detected
        from the spacing of dates). Missing values are NaN, never sentinels.
    latitude_deg : pandas.Series
        county_id -> latitude [degrees north]; needed for computed PET.
    indicators : pandas.DataFrame, optional
        Columns ``county_id``, ``date``, ``indicator``, ``value``. Each indicator is
        averaged to the grid (weekly or monthly mean) and standardized non-parametrically
        (Gringorten plotting positions by period of year), stored under its own name.
    scales_weeks : sequence of int
        Accumulation scales [weeks] for daily or weekly input.
    scales_months : sequence of int
        Accumulation scales [months] used instead when the input is monthly (the cube
        then has a monthly cadence; its ``weeks`` axis holds month starts and
        ``provenance["cadence"] == "monthly"``).
    indices : sequence of {"spi", "spei", "eddi"}
    pet_method : {"hargreaves", "thornthwaite"}
        PET when it is computed: Hargreaves-Samani (needs ``tmin_c``, ``tmax_c``) or
        Thornthwaite (needs ``tmean_c``, or ``tmin_c`` and ``tmax_c``).
    use_supplied_pet : bool
        When ``climate`` has a ``pet_mm`` column with values, use it instead of computing.
    calibration : (int, int)
        First and last calibration year (inclusive). When the record does not cover it,
        the full record is used and :class:`IndexCalibrationWarning` is issued.
    min_calibration_years : int
        Fewer calibration years is an :class:`IndicesError`.
    min_valid_days : int
        Daily input: a week with fewer valid days is missing (NaN), never zero. Weekly
        totals from 6 of 7 days are scaled by 7/6.
    spi_estimator, spi_zero_handling
        See :func:`impactlink.indices.standardize.standardize_gamma`.
    spei_distribution : {"log-logistic", "gev"}
        Log-logistic by unbiased PWMs (default) or GEV by L-moments.
    eddi_sign : {"dry_negative", "dry_positive"}
        ``"dry_negative"`` (default) stores EDDI with the cube's convention (negative =
        dry, i.e. high evaporative demand), which is the negative of published EDDI;
        ``"dry_positive"`` keeps the sign of Hobbins et al. (2016).
    indicator_scales : sequence of int
        Scales for supplied indicators: 0 = as supplied; N > 0 = mean over the trailing N
        steps before standardizing.
    clip : float
        All standardized values are clipped to ``[-clip, clip]``.
    n_threads : int, optional
        Threads over blocks of counties (default up to 2); results do not depend on it.
    progress : callable, optional
        Called with a short line of text at each step.

    Returns
    -------
    IndexCube
        Arrays ``(index, scale)`` of shape (weeks, counties). ``provenance`` holds, per
        index, the method, estimator, zero handling, calibration period and clip range.

    Raises
    ------
    IndicesError
        Missing columns, negative precipitation, duplicate rows, too short a record, no
        latitude for a county.
    """
    say = progress or (lambda _msg: None)
    indices = tuple(indices)
    unknown = [i for i in indices if i not in KNOWN_INDICES]
    if unknown:
        raise IndicesError(f"indices: unknown {unknown}; expected a subset of {KNOWN_INDICES}")
    clim = _check_climate(climate)
    cadence = detect_cadence(clim.loc[clim[COUNTY] == clim[COUNTY].iloc[0], "date"])
    grid, tpos, cpos = build_grid(clim[COUNTY], clim["date"], cadence)
    say(f"indices: {len(clim)} {cadence} rows -> {grid.shape[0]} {grid.step} steps x "
        f"{grid.shape[1]} counties")
    scales = tuple(int(s) for s in (scales_months if grid.step == "monthly" else scales_weeks))
    if not scales or min(scales) < 1:
        raise IndicesError(f"scales: {scales}; expected positive integers")

    precip = _precip_grid(clim, grid, tpos, cpos, min_valid_days)
    needs_pet = any(i in indices for i in ("spei", "eddi"))
    pet, pet_info = (None, {"method": "none"})
    if needs_pet:
        pet, pet_info = _pet_grid(clim, grid, tpos, cpos, latitude_deg, pet_method,
                                  use_supplied_pet, min_valid_days)
        if pet is None:
            warnings.warn(
                "climate: no pet_mm and no temperature columns (tmin_c/tmax_c/tmean_c); SPEI "
                "and EDDI are skipped. Supply temperatures or pet_mm to compute them.",
                IndicesWarning, stacklevel=2,
            )
            indices = tuple(i for i in indices if i == "spi")
    del tpos, cpos  # the rows' grid positions: 0.8 GB on a national daily table
    say(f"indices: PET {pet_info['method']}")
    cal, cal_note = _resolve_calibration(precip, grid, calibration, min_calibration_years)
    arrays, provenance = standardized_indices(
        precip, pet, grid.times, step=grid.step, scales=scales, indices=indices,
        calibration=cal, spi_estimator=spi_estimator, spi_zero_handling=spi_zero_handling,
        spei_distribution=spei_distribution, eddi_sign=eddi_sign, clip=clip,
        n_threads=n_threads, progress=say,
    )
    for name in provenance:
        provenance[name]["calibration_note"] = cal_note
        if name in ("spei", "eddi"):
            provenance[name]["pet"] = pet_info
    if indicators is not None and len(indicators):
        ind_arrays, ind_prov = _indicator_arrays(indicators, grid, cal, indicator_scales, clip, say)
        arrays.update(ind_arrays)
        provenance.update(ind_prov)
    provenance["cadence"] = grid.step
    provenance["input_cadence"] = cadence
    provenance["scale_unit"] = "months" if grid.step == "monthly" else "weeks"
    provenance["calibration"] = list(cal)
    return IndexCube(weeks=grid.times, county_ids=grid.county_ids, arrays=arrays,
                     provenance=provenance)


def compute_pet(
    climate: pd.DataFrame,
    *,
    latitude_deg: pd.Series,
    pet_method: Literal["hargreaves", "thornthwaite"] = "hargreaves",
    use_supplied_pet: bool = False,
    min_valid_days: int = 6,
) -> pd.DataFrame:
    """PET per county and grid step, as used by :func:`compute_indices`.

    Parameters are as in :func:`compute_indices` (by default the PET is computed even
    when ``pet_mm`` is present).

    Returns
    -------
    pandas.DataFrame
        Columns ``county_id``, ``week`` (ISO-week Monday, or month start for monthly
        input) and ``pet_mm`` [mm per step].
    """
    clim = _check_climate(climate)
    cadence = detect_cadence(clim.loc[clim[COUNTY] == clim[COUNTY].iloc[0], "date"])
    grid, tpos, cpos = build_grid(clim[COUNTY], clim["date"], cadence)
    pet, _ = _pet_grid(clim, grid, tpos, cpos, latitude_deg, pet_method, use_supplied_pet,
                       min_valid_days)
    if pet is None:
        raise IndicesError(
            "climate: no temperature columns (tmin_c/tmax_c/tmean_c) and no pet_mm; PET "
            "cannot be computed"
        )
    nt, nc = grid.shape
    return pd.DataFrame({
        COUNTY: np.tile(np.asarray(grid.county_ids, dtype=object), nt),
        "week": np.repeat(grid.times.values, nc),
        "pet_mm": pet.ravel(),
    })


def standardized_indices(
    precip: np.ndarray,
    pet: np.ndarray | None,
    times: pd.DatetimeIndex,
    *,
    step: Literal["weekly", "monthly"] = "weekly",
    scales: Sequence[int] = DEFAULT_SCALES_WEEKS,
    indices: Sequence[str] = KNOWN_INDICES,
    calibration: tuple[int, int] = (1991, 2020),
    spi_estimator: Literal["mle", "thom"] = "mle",
    spi_zero_handling: Literal["center_of_mass", "mixture"] = "center_of_mass",
    spei_distribution: Literal["log-logistic", "gev"] = "log-logistic",
    eddi_sign: Literal["dry_negative", "dry_positive"] = "dry_negative",
    clip: float = DEFAULT_CLIP,
    n_threads: int | None = None,
    progress: Callable[[str], None] | None = None,
) -> tuple[dict[tuple[str, int], np.ndarray], dict]:
    """Array-level core of :func:`compute_indices` on a regular grid.

    Parameters
    ----------
    precip, pet : ndarray, shape (T, C)
        Precipitation and PET totals per step [mm]; NaN = missing. ``pet`` may be None
        when ``indices`` asks for neither SPEI nor EDDI.
    times : pandas.DatetimeIndex, length T
        ISO-week Mondays (``step="weekly"``) or month starts (``step="monthly"``).
    n_threads : int, optional
        Counties are split into this many blocks computed in threads (default: up to 2,
        the CPU count). Results do not depend on it.

    Returns
    -------
    arrays : dict
        ``{(index, scale): ndarray (T, C)}``.
    provenance : dict
        Per index: method, estimator, zero handling, calibration, clip range.
    """
    lacking_pet = [i for i in indices if i in ("spei", "eddi")]
    if pet is None and lacking_pet:
        raise IndicesError(
            f"pet: None, but indices {lacking_pet} need PET totals; pass pet as an array of "
            "shape (T, C) [mm] or leave SPEI and EDDI out of indices"
        )
    say = progress or (lambda _msg: None)
    period, n_periods = period_of_year(times, step)
    years = grid_years(times, step)
    calib = calibration_mask(years, calibration)
    prov: dict = {}
    unit = "months" if step == "monthly" else "weeks"
    common = {"calibration": list(calibration), "clip": [-clip, clip],
              "grouping": ("calendar month" if step == "monthly" else
                           "ISO week of year, week 53 pooled with week 52"),
              "scales": list(scales), "scale_unit": unit}
    if "spi" in indices:
        prov["spi"] = {**common, "method": "SPI, gamma with a point mass at zero (McKee et al. "
                       "1993; Guttman 1999)", "distribution": "gamma",
                       "estimator": ("maximum likelihood (Newton from Thom 1958)"
                                     if spi_estimator == "mle" else "Thom (1958) approximation"),
                       "zero_handling": (
                           "H(x)=q+(1-q)G(x); zeros scored at q/2, centre of the zero mass "
                           "(Stagge et al. 2015)" if spi_zero_handling == "center_of_mass"
                           else "H(x)=q+(1-q)G(x); zeros scored at q")}
    if "spei" in indices:
        prov["spei"] = {**common, "method": "SPEI on accumulated P - PET (Vicente-Serrano et al. "
                        "2010)", "distribution": spei_distribution,
                        "estimator": ("unbiased probability-weighted moments (Begueria et al. "
                                      "2014)" if spei_distribution == "log-logistic"
                                      else "L-moments (Hosking et al. 1985)"),
                        "zero_handling": "not applicable"}
    if "eddi" in indices:
        prov["eddi"] = {**common, "method": "EDDI, non-parametric on accumulated PET (Hobbins et "
                        "al. 2016)", "distribution": "empirical",
                        "estimator": "Tukey plotting positions by period of year",
                        "zero_handling": "ties share their mid-rank",
                        "sign": ("negative = high evaporative demand (dry); the negative of "
                                 "published EDDI" if eddi_sign == "dry_negative"
                                 else "positive = high evaporative demand (dry), as published")}
    nt, nc = precip.shape
    arrays = {(name, int(s)): np.empty((nt, nc)) for name in indices for s in scales}
    workers = max(1, min(int(n_threads or min(2, os.cpu_count() or 1)), nc))
    slices = [sl for sl in np.array_split(np.arange(nc), workers) if sl.size]

    def run(chunk_no: int, cols: np.ndarray) -> None:
        # One block of counties: every index and scale, written into the shared outputs.
        # Blocks run in threads; numpy and scipy.special release the GIL in these kernels.
        sl = slice(int(cols[0]), int(cols[-1]) + 1)
        tell = say if chunk_no == 0 else (lambda _msg: None)
        p = np.ascontiguousarray(precip[:, sl])
        if "spi" in indices:
            for s, acc in accumulate_many(p, scales, nonnegative=True):
                tell(f"indices: SPI {s} {unit}")
                arrays[("spi", s)][:, sl] = standardize_gamma(
                    acc, period, calib, n_periods=n_periods, estimator=spi_estimator,
                    zero_handling=spi_zero_handling, clip=clip)
        if pet is None:  # checked above: then neither SPEI nor EDDI was asked for
            return
        e = np.ascontiguousarray(pet[:, sl])
        if "spei" in indices:
            fn = standardize_loglogistic if spei_distribution == "log-logistic" else standardize_gev
            for s, acc in accumulate_many(p - e, scales):
                tell(f"indices: SPEI {s} {unit}")
                arrays[("spei", s)][:, sl] = fn(acc, period, calib, n_periods=n_periods, clip=clip)
        if "eddi" in indices:
            for s, acc in accumulate_many(e, scales, nonnegative=True):
                tell(f"indices: EDDI {s} {unit}")
                z = standardize_empirical(acc, period, calib, n_periods=n_periods,
                                          plotting_position="tukey", clip=clip)
                if eddi_sign == "dry_negative":
                    np.negative(z, out=z)
                arrays[("eddi", s)][:, sl] = z

    if len(slices) == 1:
        run(0, slices[0])
    else:
        with ThreadPoolExecutor(max_workers=len(slices)) as pool:
            list(pool.map(run, range(len(slices)), slices))
    return arrays, prov


# --------------------------------------------------------------------------- private steps
_REQUIRED = (COUNTY, "date", "precip_mm")
_NUMERIC = ("precip_mm", "tmin_c", "tmax_c", "tmean_c", "pet_mm")


def _check_climate(climate: pd.DataFrame) -> pd.DataFrame:
    if not isinstance(climate, pd.DataFrame):
        raise IndicesError(f"climate: got {type(climate).__name__}; expected a DataFrame")
    missing = [c for c in _REQUIRED if c not in climate.columns]
    if missing:
        raise IndicesError(
            f"climate: missing column(s) {missing}; found {list(climate.columns)}. The climate "
            "table needs county_id, date, precip_mm (optional tmin_c, tmax_c, tmean_c, pet_mm)."
        )
    if len(climate) == 0:
        raise IndicesError("climate: the table has no rows")
    cols = [c for c in (COUNTY, "date", *_NUMERIC) if c in climate.columns]
    out = climate[cols]  # copy-on-write: a column is copied only where it is converted
    if not pd.api.types.is_string_dtype(out[COUNTY].dtype):
        out[COUNTY] = out[COUNTY].astype(str)
    try:
        if not pd.api.types.is_datetime64_any_dtype(out["date"].dtype):
            out["date"] = pd.to_datetime(out["date"])
    except (ValueError, TypeError) as exc:
        raise IndicesError(f"climate: column 'date' could not be read as dates ({exc})") from None
    for c in _NUMERIC:
        if c in out.columns and out[c].dtype != np.float64:
            out[c] = pd.to_numeric(out[c], errors="coerce").astype(float)
    p = out["precip_mm"].to_numpy()
    if np.any(p < 0):
        bad = int(np.sum(p < 0))
        raise IndicesError(
            f"climate: {bad} negative precip_mm value(s) (min {np.nanmin(p)}); precipitation "
            "must be >= 0 and missing values empty (NaN), not sentinels such as -999"
        )
    return out


def _precip_grid(clim, grid, tpos, cpos, min_valid_days):
    vals = clim["precip_mm"].to_numpy(dtype=float)
    if grid.cadence == "daily":
        arr, _ = grid_values(vals, tpos, cpos, grid.shape, how="sum",
                             min_count=min_valid_days, scale_to=7.0)
        return arr
    _check_unique(tpos, cpos, grid)
    arr, _ = grid_values(vals, tpos, cpos, grid.shape, how="sum", unique=True)
    return arr


def _check_unique(tpos, cpos, grid):
    flat = tpos * grid.shape[1] + cpos
    counts = np.bincount(flat, minlength=grid.shape[0] * grid.shape[1])
    if counts.max(initial=0) > 1:
        k = int(np.argmax(counts))
        t, c = divmod(k, grid.shape[1])
        raise IndicesError(
            f"climate: {int(np.sum(counts > 1))} {grid.step} step(s) have more than one "
            f"{grid.cadence} row, e.g. county {grid.county_ids[c]!r} at "
            f"{grid.times[t].date()} ({int(counts[k])} rows). Remove duplicate rows."
        )


def _resolve_calibration(precip, grid, calibration, min_years):
    if len(calibration) != 2 or int(calibration[0]) > int(calibration[1]):
        raise IndicesError(f"calibration: {calibration!r}; expected (first_year, last_year)")
    years = grid_years(grid.times, grid.step)
    has_data = np.any(~np.isnan(precip), axis=1)
    yrs = np.unique(years[has_data])
    if yrs.size == 0:
        raise IndicesError("climate: precip_mm has no valid value")
    c0, c1 = int(calibration[0]), int(calibration[1])
    if c0 >= yrs.min() and c1 <= yrs.max():
        cal, note = (c0, c1), f"calibration {c0}-{c1} as requested"
    else:
        cal = (int(yrs.min()), int(yrs.max()))
        note = (f"record {cal[0]}-{cal[1]} does not cover the requested calibration {c0}-{c1}; "
                "the full record is used")
        warnings.warn(f"calibration: {note}", IndexCalibrationWarning, stacklevel=3)
    n_years = int(np.sum((yrs >= cal[0]) & (yrs <= cal[1])))
    if n_years < min_years:
        raise IndicesError(
            f"calibration: only {n_years} year(s) with data in {cal[0]}-{cal[1]}; at least "
            f"{min_years} are needed (min_calibration_years). Supply a longer climate record "
            "or lower min_calibration_years (fits on short records are unreliable)."
        )
    return cal, note


def _indicator_arrays(indicators, grid, cal, scales, clip, say):
    missing = [c for c in (COUNTY, "date", "indicator", "value") if c not in indicators.columns]
    if missing:
        raise IndicesError(
            f"indicators: missing column(s) {missing}; expected county_id, date, indicator, value"
        )
    # positions from codes of the distinct ids, integer day numbers and one factorized
    # name column: no copy of the table and no Python object per row (a national weekly
    # table of two indicators holds about 15 M rows)
    codes, uniq = pd.factorize(indicators[COUNTY])
    at = pd.Index(grid.county_ids).get_indexer(pd.Index(uniq).astype(str))
    cpos = np.where(codes >= 0, at[np.maximum(codes, 0)], -1)
    del codes
    d = pd.DatetimeIndex(pd.to_datetime(indicators["date"]))
    if grid.step == "weekly":
        tpos = _monday_days(d)
        tpos -= int(_monday_days(grid.times[:1])[0])
        tpos //= 7
    else:
        tpos = ((d.year - grid.times[0].year) * 12 + d.month - grid.times[0].month).to_numpy()
    del d
    value = pd.to_numeric(indicators["value"], errors="coerce").to_numpy(dtype=float)
    keep = (tpos >= 0) & (tpos < grid.shape[0]) & (cpos >= 0)
    name_code, names = pd.factorize(indicators["indicator"], sort=True)
    period, n_periods = period_of_year(grid.times, grid.step)
    calib = calibration_mask(grid_years(grid.times, grid.step), cal)
    arrays, prov = {}, {}
    for k, name in enumerate(names):  # loop over indicators (a handful)
        key = str(name).strip().lower().replace(" ", "_")
        rows = np.flatnonzero(keep & (name_code == k))
        sub_t = tpos[rows].astype(np.int64)
        sub_c = cpos[rows].astype(np.int64)
        vals = value[rows]
        base, _ = grid_values(vals, sub_t, sub_c, grid.shape, how="mean")
        for s in scales:
            say(f"indices: indicator {key} scale {s}")
            x = base if int(s) == 0 else accumulate(base, int(s), how="mean")
            arrays[(key, int(s))] = standardize_empirical(
                x, period, calib, n_periods=n_periods, plotting_position="gringorten", clip=clip)
        prov[key] = {"method": "non-parametric standardization of a supplied indicator",
                     "distribution": "empirical", "estimator": "Gringorten (1963) plotting "
                     "positions by period of year, mapped to the normal scale",
                     "zero_handling": "ties share their mid-rank", "calibration": list(cal),
                     "clip": [-clip, clip], "scales": [int(s) for s in scales],
                     "scale_meaning": "0 = step mean as supplied; N = mean over trailing N steps"}
    return arrays, prov
