"""Benchmark of the trigger-plan stage: the scenario's example plan on 60 counties x ~2,300 weeks.

Times replay (the stage walk over all counties), scoring, the tuning search (every candidate
threshold x entry weeks replayed through the whole ladder, 200 year-block bootstrap replicates,
leave-one-year-out) and uniform vs local, on a synthetic 60-county panel of AR(1) indicators
(invented data). ``--scenario`` runs the same on the fictional scenario (pipeline up to the
link stage first; that part is not timed).

Run:  .venv/bin/python benchmarks/bench_triggers.py [--scenario] [--repeat 3]
Target: the example plan replays for 60 counties in well under 5 s.
"""

from __future__ import annotations

import argparse
import platform
import time
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.indices.cube import IndexCube
from impactlink.triggers import (
    load_trigger_plan,
    replay_plan,
    score_plan,
    tune_stage,
    uniform_vs_local,
)

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "scenario_data" / "trigger_plan.toml"
REGIONS = ("Ambrel", "Midreach", "Quillow", "Serrowmere", "Tallgrit")


def synthetic(n_counties: int = 60, n_weeks: int = 2349, seed: int = 0):
    rng = np.random.default_rng(seed)

    def ar1(phi):
        x = np.empty((n_weeks, n_counties))
        x[0] = rng.standard_normal(n_counties)
        e = rng.standard_normal((n_weeks, n_counties)) * np.sqrt(1 - phi**2)
        for t in range(1, n_weeks):
            x[t] = phi * x[t - 1] + e[t]
        return x

    spei, spi = ar1(0.97), ar1(0.9)
    weeks = pd.date_range("1981-01-05", periods=n_weeks, freq="7D")
    ids = tuple(f"9{i:04d}" for i in range(n_counties))
    cube = IndexCube(weeks=weeks, county_ids=ids, arrays={("spei", 26): spei, ("spi", 13): spi})
    counties = pd.DataFrame({"county_id": ids,
                             "region": [REGIONS[i % len(REGIONS)] for i in range(n_counties)]})
    level = (spei + 0.5 * rng.standard_normal(spei.shape) < -1.2).astype(float)
    level[: 52 * 14] = np.nan  # impact record from the 15th year, like the scenario's notices
    exposed = rng.random(n_counties) < 34 / 60
    return cube, counties, level, exposed


def scenario():
    import tomllib

    from impactlink.pipeline import run_project
    from impactlink.project import project_from_dict
    from impactlink.triggers import impact_grid

    s = ROOT / "scenario_data"
    raw = tomllib.loads((s / "impactlink.toml").read_text())
    raw["indices"]["scales_weeks"] = [13, 26]
    raw["impacts"] = {"restrictions": raw["impacts"]["restrictions"]}
    raw["impacts"]["restrictions"]["horizon_weeks"] = [13]
    out = Path("/tmp/impactlink_bench_triggers")
    raw["project"]["output_dir"] = str(out)
    st = run_project(project_from_dict(raw, base=s, path=s / "impactlink.toml"), until="link",
                     out=out, quiet=True).state
    cube = st["cube"]
    target = next(t for t in st["targets"] if t.impact == "restrictions" and t.role == "state")
    have = set(st["bundle"].tables["water_systems"]["county_id"].astype(str))
    exposed = np.array([c in have for c in cube.county_ids])
    return cube, st["bundle"].tables["counties"], impact_grid(target, cube.weeks,
                                                             cube.county_ids), exposed


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--scenario", action="store_true")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    plan = load_trigger_plan(PLAN)
    cube, counties, level, exposed = scenario() if args.scenario else synthetic()
    print(f"python {platform.python_version()} on {platform.machine()}; "
          f"{len(cube.county_ids)} counties x {len(cube.weeks)} weeks; "
          f"{'scenario' if args.scenario else 'synthetic'} data")
    timings: dict[str, list[float]] = {k: [] for k in ("replay", "score", "tune", "uniform")}
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        rep = replay_plan(plan, cube=cube, counties=counties)
        t1 = time.perf_counter()
        score_plan(rep, level, exposed=exposed)
        t2 = time.perf_counter()
        tune_stage(rep, level, plan.tuning, exposed=exposed, seed=1)
        t3 = time.perf_counter()
        uniform_vs_local(rep, level, plan.tuning, exposed=exposed)
        t4 = time.perf_counter()
        for k, v in zip(timings, (t1 - t0, t2 - t1, t3 - t2, t4 - t3), strict=True):
            timings[k].append(v)
    n_cand = len(plan.tuning.candidates) * len(plan.tuning.enter_weeks)
    for k, v in timings.items():
        extra = f" ({n_cand} candidates, {plan.tuning.n_boot} replicates)" if k == "tune" else ""
        print(f"{k:8s} best {min(v):6.3f} s  median {np.median(v):6.3f} s{extra}")


if __name__ == "__main__":
    main()
