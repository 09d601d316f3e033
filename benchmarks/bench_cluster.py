"""The candidate grid on a Dask cluster of one worker and of two, side by side, same run.

Invented data (the synthetic panel of ``bench_skill.py``: planted signal, weekly restriction
state). For each engine the same ``rank_candidates`` call runs on the same target: in-process,
then on a ``distributed.LocalCluster`` on loopback with 1 worker, then with 2 workers (one
thread each, separate processes). The tables must be identical (seeded per task); the script
prints wall times, the speed-up of 2 workers over 1, and writes a JSON result.

Run:  .venv/bin/python benchmarks/bench_cluster.py [--counties 300] [--years 25]
      [--out-json bench_cluster.json]
Nothing here is a test; no test depends on timing.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
import warnings
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_skill import LAGS, SCALES, features_for, make_panel  # noqa: E402

INDICES = ("spi", "spei", "eddi")


def _grid(target, features, *, dask_address=None):
    from impactlink.skill import rank_candidates

    cands = [(i, s, lg) for i in INDICES for s in SCALES for lg in LAGS]
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = rank_candidates(target, features, cands, n_boot=200, seed=1,
                              dask_address=dask_address)
    return time.perf_counter() - t0, res


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--counties", type=int, default=300)
    ap.add_argument("--years", type=int, default=25)
    ap.add_argument("--out-json", default="bench_cluster.json")
    args = ap.parse_args()
    from distributed import Client, LocalCluster

    arrays, targets = make_panel(args.counties, args.years, seed=0)
    target, wp, ct = targets[1]  # weekly restriction state
    features = features_for(arrays, wp, ct)
    print(f"{platform.platform()}, {os.cpu_count()} CPUs, load {os.getloadavg()}; "
          f"{len(target.frame):,} rows, {len(INDICES) * len(SCALES) * len(LAGS)} candidates",
          flush=True)
    out: dict = {"counties": args.counties, "years": args.years, "rows": len(target.frame),
                 "load_before": os.getloadavg()}
    wall, ref = _grid(target, features)
    out["in_process_s"] = round(wall, 2)
    print(f"in-process        {wall:7.1f} s", flush=True)
    for n in (1, 2):
        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                          host="127.0.0.1", dashboard_address="127.0.0.1:0") as cluster, \
                Client(cluster) as client:
            client.wait_for_workers(n)
            wall, res = _grid(target, features, dask_address=cluster.scheduler_address)
        pd.testing.assert_frame_equal(ref.table, res.table)  # identical whatever the engine
        out[f"workers_{n}_s"] = round(wall, 2)
        print(f"dask, {n} worker(s)  {wall:7.1f} s  (same table as in-process)", flush=True)
    out["speedup_2_over_1"] = round(out["workers_1_s"] / out["workers_2_s"], 2)
    out["load_after"] = os.getloadavg()
    print(f"speed-up of 2 workers over 1: {out['speedup_2_over_1']:.2f}x", flush=True)
    Path(args.out_json).write_text(json.dumps(out, indent=1), encoding="utf-8")


if __name__ == "__main__":
    main()
