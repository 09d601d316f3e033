"""Benchmark of the ``indices`` stage on a synthetic national panel (not a test).

3,143 counties x 45 years of weekly precipitation and temperature (synthetic, seeded):
SPI, SPEI and EDDI at the seven default scales (4, 8, 13, 26, 39, 52, 104 weeks), with
wall time and peak memory (max RSS of a fresh process per part), side by side with the
general-purpose libraries from PyPI:

* climate-indices (vectorised over cells, native code; its fastest mode is the time-major
  spatial block ``spatial_time_major=True``). It has no weekly cadence, so it is run on the
  same panel aggregated to months (3,143 x 540 months, scales 1, 2, 3, 6, 9, 12, 24 months)
  next to impactlink on the *same monthly* data; values are compared there.
* spei (per-series: one scipy MLE fit per week of year and series) and standard-precip
  (per-series, scipy fits per period): too slow for the panel, so they are timed on a
  subset of counties at one scale and extrapolated linearly to 3,143 counties x 7 scales
  (stated in the output).

Usage (about 3-5 minutes on 2 cores)::

    python benchmarks/bench_indices.py            # everything
    python benchmarks/bench_indices.py --counties 300   # smaller panel for a quick look

Each part runs in its own subprocess so that its peak memory is measured alone.
"""

from __future__ import annotations

import argparse
import json
import logging
import os
import resource
import subprocess
import sys
import time
import warnings

import numpy as np
import pandas as pd

N_COUNTIES = 3143
N_YEARS = 45
START = "1980-01-07"  # a Monday
SCALES_W = (4, 8, 13, 26, 39, 52, 104)
SCALES_M = (1, 2, 3, 6, 9, 12, 24)


# --------------------------------------------------------------------------- data
def weekly_panel(n_counties: int, n_years: int = N_YEARS, seed: int = 2026):
    """Synthetic weekly panel: arrays (T, C) of precip [mm], tmin, tmax [C]; latitudes."""
    rng = np.random.default_rng(seed)
    weeks = pd.date_range(START, periods=int(round(n_years * 365.25 / 7)), freq="7D")
    t = len(weeks)
    lat = rng.uniform(25.0, 49.0, n_counties)
    aridity = rng.uniform(0.0, 1.0, n_counties)  # 0 humid .. 1 arid
    doy = weeks.day_of_year.to_numpy()[:, None]
    season = 1.0 + 0.4 * np.sin(2 * np.pi * (doy - 100) / 365.25)
    shape = 0.6 + 0.8 * (1 - aridity)
    scale = (8.0 + 25.0 * (1 - aridity)) / shape
    precip = rng.gamma(shape, 1.0, (t, n_counties)) * scale * season
    precip[rng.random((t, n_counties)) < 0.05 + 0.45 * aridity] = 0.0
    tmean = (25.0 - 0.45 * (lat - 25.0)) + 11.0 * np.sin(2 * np.pi * (doy - 110) / 365.25) \
        + rng.normal(0, 2.0, (t, n_counties)) + 0.02 * np.arange(t)[:, None] / 52
    dtr = 8.0 + 6.0 * aridity
    return weeks, precip, tmean - dtr / 2, tmean + dtr / 2, lat


def weekly_frame(weeks, precip, tmin, tmax, ids):
    t, c = precip.shape
    return pd.DataFrame({
        "county_id": np.tile(np.asarray(ids, dtype=object), t),
        "date": np.repeat(weeks.values, c),
        "precip_mm": precip.ravel(), "tmin_c": tmin.ravel(), "tmax_c": tmax.ravel(),
    })


def monthly_arrays(weeks, precip, pet):
    """Aggregate weekly arrays to calendar months (week assigned by its Thursday)."""
    thursday = weeks + pd.Timedelta(days=3)
    key = (thursday.year - thursday.year[0]) * 12 + thursday.month - 1
    first = int(key[0])
    # drop partial leading/trailing months so full years start in January
    years = thursday.year.unique()
    y0, y1 = years[1], years[-2]
    keep = (thursday.year >= y0) & (thursday.year <= y1)
    k = (key[keep] - (y0 - thursday.year[0]) * 12 - 0 * first).to_numpy()
    k = k - k.min()
    n = int(k.max()) + 1
    out = []
    for arr in (precip, pet):
        s = np.zeros((n, arr.shape[1]))
        np.add.at(s, k, arr[keep])
        out.append(s)
    times = pd.date_range(f"{y0}-01-01", periods=n, freq="MS")
    return times, out[0], out[1], int(y0)


def _quiet():
    logging.disable(logging.CRITICAL)
    warnings.simplefilter("ignore")
    try:
        import structlog

        structlog.configure(wrapper_class=structlog.make_filtering_bound_logger(logging.CRITICAL))
    except ImportError:
        pass


# --------------------------------------------------------------------------- parts
def part_ours_weekly(n):
    from impactlink.indices import compute_indices

    weeks, p, tmin, tmax, lat = weekly_panel(n)
    ids = [f"{i:05d}" for i in range(n)]
    frame = weekly_frame(weeks, p, tmin, tmax, ids)
    del p, tmin, tmax
    t0, c0 = time.perf_counter(), time.process_time()
    cube = compute_indices(frame, latitude_deg=pd.Series(lat, index=ids), scales_weeks=SCALES_W)
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    nan_share = float(np.mean([np.isnan(a).mean() for a in cube.arrays.values()]))
    return {"wall_s": wall, "cpu_s": cpu, "arrays": len(cube.arrays), "weeks": len(cube.weeks),
            "rows_in": len(frame), "nan_share": nan_share}


def _monthly_inputs(n):
    from impactlink.indices.pet import extraterrestrial_radiation, hargreaves_samani

    weeks, p, tmin, tmax, lat = weekly_panel(n)
    doy = (weeks + pd.Timedelta(days=3)).day_of_year.to_numpy()[:, None]
    pet = hargreaves_samani(tmin, tmax, extraterrestrial_radiation(doy, lat[None, :])) * 7.0
    return monthly_arrays(weeks, p, pet)


def part_ours_monthly(n):
    from impactlink.indices import standardized_indices

    times, pm, petm, y0 = _monthly_inputs(n)
    t0, c0 = time.perf_counter(), time.process_time()
    arrays, _ = standardized_indices(pm, petm, times, step="monthly", scales=SCALES_M,
                                     spi_estimator="thom", eddi_sign="dry_positive")
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    np.savez_compressed(os.environ["BENCH_TMP"] + "/ours_monthly.npz",
                        **{f"{k[0]}_{k[1]}": v[:, :200] for k, v in arrays.items()})
    return {"wall_s": wall, "cpu_s": cpu}


def part_climate_indices(n):
    _quiet()
    np.seterr(all="ignore")
    from climate_indices import compute as cc
    from climate_indices import indices as ci

    times, pm, petm, y0 = _monthly_inputs(n)
    y1 = y0 + len(times) // 12 - 1
    cal = (1991, 2020)
    out = {}
    t0, c0 = time.perf_counter(), time.process_time()
    for s in SCALES_M:
        out[f"spi_{s}"] = ci.spi(pm[:, :, None], s, ci.Distribution.gamma, y0, *cal,
                                 cc.Periodicity.monthly, spatial_time_major=True,
                                 zero_handling="center_of_mass")[:, :, 0]
        out[f"spei_{s}"] = ci.spei(pm[:, :, None], petm[:, :, None], s,
                                   ci.Distribution.loglogistic, cc.Periodicity.monthly, y0, *cal,
                                   spatial_time_major=True)[:, :, 0]
        out[f"eddi_{s}"] = ci.eddi(petm[:, :, None], s, y0, *cal, cc.Periodicity.monthly,
                                   spatial_time_major=True)[:, :, 0]
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    np.savez_compressed(os.environ["BENCH_TMP"] + "/ci_monthly.npz",
                        **{k: v[:, :200] for k, v in out.items()})
    np.save(os.environ["BENCH_TMP"] + "/ci_years.npy", times.year.to_numpy())
    return {"wall_s": wall, "cpu_s": cpu, "years": [y0, y1]}


def part_spei_lib(n_sub):
    """spei (PyPI) per series: SPI-13 and SPEI-13 on n_sub counties, weekly grouping."""
    _quiet()
    np.seterr(all="ignore")
    import scipy.stats as scs
    import spei as sp

    weeks, p, tmin, tmax, lat = weekly_panel(N_COUNTIES)
    from impactlink.indices.pet import extraterrestrial_radiation, hargreaves_samani

    doy = (weeks + pd.Timedelta(days=3)).day_of_year.to_numpy()[:, None]
    pet = hargreaves_samani(tmin, tmax, extraterrestrial_radiation(doy, lat[None, :])) * 7.0
    t0, c0 = time.perf_counter(), time.process_time()
    for j in range(n_sub):  # the library works on one series at a time
        ps = pd.Series(p[:, j], index=weeks)
        sp.spi(ps, dist=scs.gamma, timescale=13, fit_freq="W")
        sp.spei(ps - pd.Series(pet[:, j], index=weeks), dist=scs.fisk, timescale=13,
                fit_freq="W")
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    return {"wall_s": wall, "cpu_s": cpu, "series": n_sub, "indices": 2, "scales": 1}


def part_standard_precip(n_sub):
    """standard-precip (PyPI) per series: SPI-13 on n_sub counties, weekly periods."""
    _quiet()
    from standard_precip import spi as spmod

    weeks, p, *_ = weekly_panel(N_COUNTIES)
    t0, c0 = time.perf_counter(), time.process_time()
    for j in range(n_sub):  # one series per call
        df = pd.DataFrame({"date": weeks, "precip": p[:, j]})
        spmod.SPI().calculate(df, "date", "precip", freq="W", scale=13, fit_type="mle",
                              dist_type="gam")
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    return {"wall_s": wall, "cpu_s": cpu, "series": n_sub, "indices": 1, "scales": 1}


PARTS = {"ours_weekly": part_ours_weekly, "ours_monthly": part_ours_monthly,
         "climate_indices": part_climate_indices, "spei_lib": part_spei_lib,
         "standard_precip": part_standard_precip}


def run_part(name, arg, tmp):
    env = dict(os.environ, BENCH_TMP=tmp)
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, __file__, "--part", name, "--arg", str(arg)],
                          capture_output=True, text=True, env=env)
    total = time.perf_counter() - t0
    if proc.returncode != 0:
        return {"error": proc.stderr.strip().splitlines()[-1:] or ["failed"], "process_s": total}
    res = json.loads(proc.stdout.strip().splitlines()[-1])
    res["process_s"] = total
    return res


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--part")
    ap.add_argument("--arg", type=int, default=N_COUNTIES)
    ap.add_argument("--counties", type=int, default=N_COUNTIES)
    ap.add_argument("--subset", type=int, default=8, help="counties for per-series libraries")
    args = ap.parse_args()
    if args.part:
        _quiet()
        res = PARTS[args.part](args.arg)
        res["peak_rss_gb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2
        print(json.dumps(res))
        return
    import tempfile

    n = args.counties
    tmp = tempfile.mkdtemp(prefix="bench_indices_")
    print(f"# indices benchmark: {n} counties x {N_YEARS} years, cores={os.cpu_count()}")
    res = {}
    for name, arg in (("ours_weekly", n), ("ours_monthly", n), ("climate_indices", n),
                      ("spei_lib", args.subset), ("standard_precip", args.subset)):
        res[name] = run_part(name, arg, tmp)
        print(f"{name:16s} {json.dumps(res[name])}", flush=True)

    print("\n## Results")
    ow = res["ours_weekly"]
    print(f"load average at the end: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores "
          "(CPU seconds are the fairer comparison on a shared machine)")
    print(f"impactlink weekly, SPI+SPEI+EDDI x 7 scales ({n} counties): "
          f"{ow['wall_s']:.1f} s wall, {ow['cpu_s']:.1f} s CPU (process incl. data generation "
          f"{ow['process_s']:.1f} s), peak RSS {ow['peak_rss_gb']:.2f} GB")
    om, cim = res["ours_monthly"], res["climate_indices"]
    if "wall_s" in cim:
        print(f"monthly panel, same data, SPI+SPEI+EDDI x 7 scales: impactlink "
              f"{om['wall_s']:.2f} s wall / {om['cpu_s']:.2f} s CPU, climate-indices "
              f"{cim['wall_s']:.2f} s wall / {cim['cpu_s']:.2f} s CPU -> impactlink takes "
              f"{om['wall_s'] / cim['wall_s']:.2f} x (wall) / {om['cpu_s'] / cim['cpu_s']:.2f} x "
              "(CPU) the library's time; peak RSS "
              f"{om['peak_rss_gb']:.2f} GB vs {cim['peak_rss_gb']:.2f} GB")
        per_w = cim["cpu_s"] * 52.18 / 12
        print(f"climate-indices extrapolated to weekly (CPU x 52.18/12 values; it has no weekly "
              f"cadence): {per_w:.1f} s CPU -> ratio impactlink weekly / climate-indices "
              f"{ow['cpu_s'] / per_w:.2f}")
        a = np.load(tmp + "/ours_monthly.npz")
        b = np.load(tmp + "/ci_monthly.npz")
        yrs = np.load(tmp + "/ci_years.npy")
        cal = (yrs >= 1991) & (yrs <= 2020)
        for idx in ("spi", "spei", "eddi"):
            d_all = max(np.nanmax(np.abs(a[f"{idx}_{s}"] - b[f"{idx}_{s}"])) for s in SCALES_M)
            d_cal = max(np.nanmax(np.abs(a[f"{idx}_{s}"] - b[f"{idx}_{s}"])[cal])
                        for s in SCALES_M)
            print(f"  max |impactlink - climate-indices| {idx} (first 200 counties, 7 scales): "
                  f"all months {d_all:.2e}, calibration months 1991-2020 {d_cal:.2e}")
    for name, label in (("spei_lib", "spei"), ("standard_precip", "standard-precip")):
        r = res[name]
        if "wall_s" not in r:
            print(f"{label}: failed: {r.get('error')}")
            continue
        per_series_index_scale = r["cpu_s"] / (r["series"] * r["indices"] * r["scales"])
        full = per_series_index_scale * N_COUNTIES * 3 * len(SCALES_W) * n / N_COUNTIES
        print(f"{label}: {r['cpu_s']:.1f} s CPU for {r['series']} series x {r['indices']} index "
              f"x 1 scale -> extrapolated to {n} counties x 3 indices x 7 scales: {full:.0f} s "
              f"CPU ({full / 3600:.1f} h) -> impactlink is {full / ow['cpu_s']:.0f} x faster")


if __name__ == "__main__":
    main()
