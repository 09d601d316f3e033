"""Benchmark of the skill stage: the full candidate grid on synthetic panels.

Grid: 6 indices x 7 time scales x 6 lags (252 candidates), two-predictor pairs, the boosted
challenger, leave-one-year-out, 200 bootstrap replicates, for 3 impact kinds (an ordinal
county-year shortfall class, a weekly restriction state with persistence, and weekly
restriction onsets). Panels: a 60-county state and a 3,143-county national panel, 25 years,
with a planted signal (invented data; nothing here comes from other stages except the
Target dataclass). Also times the histogram path against the exact unbinned fit.

Run:  /work/venv/bin/python benchmarks/bench_skill.py [--panel state|national|both]
      [--jobs 2] [--years 25] [--skip-exact]
Results go to stdout; copy them into benchmarks/README_skill.md.
"""

from __future__ import annotations

import argparse
import os
import platform
import time
import warnings

import numpy as np
import pandas as pd

from impactlink.link.target import Target

INDICES = ("spi", "spei", "eddi", "soil_moisture", "streamflow", "vpd")
SCALES = (4, 8, 13, 26, 39, 52, 104)
LAGS = (0, 1, 2, 4, 8, 13)
SPIN = 104 + 13


def make_panel(n_counties: int, n_years: int, seed: int = 0):
    """Weekly index arrays (weeks, counties) per (index, scale) and three targets."""
    rng = np.random.default_rng(seed)
    n_weeks = SPIN + 52 * n_years
    n_regions = max(1, n_counties // 20)
    region_of = rng.integers(0, n_regions, n_counties)
    regional = rng.normal(size=(n_weeks, n_regions)).astype(np.float32)
    arrays = {}
    for ix in INDICES:
        drv = (0.7 * regional[:, region_of]
               + rng.normal(size=(n_weeks, n_counties)).astype(np.float32))
        cs = np.cumsum(np.vstack([np.zeros((1, n_counties), np.float32), drv]), axis=0,
                       dtype=np.float64)
        for s in SCALES:
            a = np.full((n_weeks, n_counties), np.nan)
            a[s - 1:] = (cs[s:] - cs[:-s]) / np.sqrt(s)
            a /= np.nanstd(a[SPIN:])
            arrays[(ix, s)] = a
    # planted: restrictions driven by SPEI-13 at lag 2, shortfall by soil moisture 26 weeks
    z = arrays[("spei", 13)]
    state = np.zeros((n_weeks, n_counties), dtype=np.int8)
    onset = np.zeros_like(state)
    for t in range(SPIN - 8, n_weeks):  # Markov chain in time, vectorised over counties
        h = 1 / (1 + np.exp(-(-3.6 - 1.6 * z[t - 2])))
        start = (state[t - 1] == 0) & (rng.random(n_counties) < h)
        stay = (state[t - 1] == 1) & (rng.random(n_counties) > 0.1)
        state[t] = start | stay
        onset[t] = start
    weeks = np.arange(SPIN, n_weeks)
    wk = np.repeat(weeks, n_counties)
    ct = np.tile(np.arange(n_counties), weeks.size)
    ids = np.array([f"{c:05d}" for c in range(n_counties)])
    regions = np.array([f"r{r:02d}" for r in range(n_regions)])
    base = pd.DataFrame({
        "unit_id": ids[ct], "county_id": ids[ct], "region": regions[region_of[ct]],
        "time": pd.Timestamp("2000-01-03") + pd.to_timedelta(7 * (wk - SPIN), unit="D"),
        "year": 2000 + (wk - SPIN) // 52, "season": (wk - SPIN) % 52 + 1,
    })
    st = base.assign(level=state[wk, ct])
    for L in LAGS:
        st[f"persistence_{L}"] = state[wk - max(L, 1), ct].astype(float)
    risk = state[wk - 1, ct] == 0
    on = base[risk].assign(level=onset[wk[risk], ct[risk]])
    for L in LAGS:
        on[f"persistence_{L}"] = state[wk[risk] - max(L, 1), ct[risk]].astype(float)
    # annual ordinal shortfall class (4 levels) from soil moisture 26 weeks at ISO week 30
    yr = np.arange(n_years)
    wa = SPIN + 52 * yr + 29
    wy = np.repeat(wa, n_counties)
    cy = np.tile(np.arange(n_counties), yr.size)
    lat = -1.5 * arrays[("soil_moisture", 26)][wy, cy] + rng.logistic(size=wy.size)
    ann = pd.DataFrame({
        "unit_id": ids[cy], "county_id": ids[cy], "region": regions[region_of[cy]],
        "time": pd.to_datetime([f"{2000 + y}-01-01" for y in np.repeat(yr, n_counties)]),
        "year": 2000 + np.repeat(yr, n_counties), "season": 1,
        "level": np.searchsorted(np.array([0.8, 2.2, 3.5]), lat),
    })
    targets = [
        (Target("shortfall", "shortfall", "ordinal", "county_year", "annual", ann,
                ("none", "minor", "moderate", "severe")), wy, cy),
        (Target("restrictions:state", "restrictions", "binary", "county_week", "state",
                st.reset_index(drop=True), ("none", "in_force")), wk, ct),
        (Target("restrictions:onset", "restrictions", "binary", "county_week", "onset",
                on.reset_index(drop=True), ("none", "onset")), wk[risk], ct[risk]),
    ]
    return arrays, targets


def features_for(arrays, week_pos, county):
    def features(index, scale, lag):
        return arrays[(index, scale)][week_pos - lag, county]
    return features


def run_grid(arrays, targets, *, jobs, n_boot=200, label=""):
    from impactlink.skill import rank_candidates

    cands = [(i, s, lg) for i in INDICES for s in SCALES for lg in LAGS]
    total = 0.0
    for tgt, wp, ct in targets:
        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = rank_candidates(tgt, features_for(arrays, wp, ct), cands, n_boot=n_boot,
                                  jobs=jobs, seed=1)
        dt = time.perf_counter() - t0
        total += dt
        s = res.summary.iloc[0]
        print(f"{label} {tgt.name:22s} rows {len(tgt.frame):>9,d}  rows in table "
              f"{len(res.table):4d}  {dt:7.1f} s  best {s.best_index} {s.best_scale_weeks}w "
              f"lag {s.best_lag_weeks}w  rpss {s.naive_rpss:.3f} (nested {s.nested_rpss:.3f})",
              flush=True)
    print(f"{label} total {total:.1f} s", flush=True)
    return total


def exact_vs_histogram(arrays, targets, n_cands=6):
    """Time leave-one-year-out fits: exact unbinned rows vs the histogram path."""
    import statsmodels.api as sm

    from impactlink.skill import _engine as E

    tgt, wp, ct = targets[1]
    y = tgt.frame["level"].to_numpy()
    years = tgt.frame["year"].to_numpy()
    uy, blk = np.unique(years, return_inverse=True)
    cands = [("spei", s, 2) for s in SCALES[:n_cands]]
    t0 = time.perf_counter()
    for c in cands:
        x = features_for(arrays, wp, ct)(*c)
        for f in range(uy.size):
            m = blk != f
            sm.Logit(y[m], sm.add_constant(x[m])).fit(disp=0)
    t_exact = time.perf_counter() - t0
    layout = E.make_layout(np.arange(uy.size), np.arange(uy.size), uy.size, 2, k_inner=0,
                           n_boot=0, seed=0)
    t0 = time.perf_counter()
    hists = []
    for c in cands:
        x = features_for(arrays, wp, ct)(*c)
        hists.append(E.build_hist(blk, y, [x], E.bin_codes(x, 200), np.zeros(x.size, int),
                                  n_blocks=uy.size, n_bins_total=200, n_cells=1, n_levels=2))
    E.fit_chunk(hists, layout, use_cells=False, jobs_subset="main")
    t_hist = time.perf_counter() - t0
    print(f"exact vs histogram ({len(cands)} candidates x {uy.size} folds, {y.size:,d} rows): "
          f"exact {t_exact:.1f} s, histogram {t_hist:.2f} s, speed-up {t_exact / t_hist:.0f}x")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--panel", default="both", choices=["state", "national", "both"])
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--years", type=int, default=25)
    ap.add_argument("--skip-exact", action="store_true")
    a = ap.parse_args()
    print(f"machine: {platform.platform()}, {os.cpu_count()} cores, jobs={a.jobs}")
    if a.panel in ("state", "both"):
        t0 = time.perf_counter()
        arrays, targets = make_panel(60, a.years)
        print(f"state panel built in {time.perf_counter() - t0:.1f} s")
        run_grid(arrays, targets, jobs=a.jobs, label="state")
        if not a.skip_exact:
            exact_vs_histogram(arrays, targets)
    if a.panel in ("national", "both"):
        t0 = time.perf_counter()
        arrays, targets = make_panel(3143, a.years)
        print(f"national panel built in {time.perf_counter() - t0:.1f} s")
        run_grid(arrays, targets, jobs=a.jobs, label="national")


if __name__ == "__main__":
    main()
