"""Benchmark of a national run end to end: scenario generation, then every pipeline stage.

For each size (counties), a fresh Python process generates the fictional world with
``impactlink.scenario.generate(..., counties=N)``, writes a project file beside it (the
settings of ``scenario_data/impactlink.toml``: SPI, SPEI and EDDI at seven scales, four
impact kinds, leave-one-year-out, 200 bootstrap replicates, triggers, contrast, report) and
runs ``impactlink.pipeline.run_project(..., until="run")``. Wall time per stage comes from the
run's own timings (``RunResult.timings_s``, also in ``manifest.json``); peak memory per stage
is the largest memory sampled every 100 ms inside that stage's time window (the resident set
size; with ``--jobs`` worker processes, the proportional set size of the process and its
workers, so pages the forked workers share are counted once; psutil when installed, else
``/proc/self/status``), and CPU seconds (user + system, all threads of the process and of
its workers) over the same window: on a busy machine CPU time is the steadier measure of
the work, wall time the honest measure of the wait. The growth exponent ``b`` of
``time ~ a * N**b`` is a least-squares line through ``(log N, log time)`` over the sizes run
(two sizes or more).

Run:  .venv/bin/python benchmarks/bench_national.py                  # quick: 500 counties
      .venv/bin/python benchmarks/bench_national.py --sizes 500 1500 3143 --jobs 2
      .venv/bin/python benchmarks/bench_national.py --grid-speedup 500  # 1 vs 2 Dask workers
      (--jobs: the client's threads for the leading candidates' row predictions, the same for
      both)
      [--out-json result.json] [--workdir /tmp/bench_national]
Results go to stdout and to the JSON file; copy them into benchmarks/README_national.md.
The data are invented (the fictional state of Vellmora); nothing here is a test.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
TEMPLATE = ROOT / "scenario_data" / "impactlink.toml"
SEED = 20261202


def _rss_bytes(kids=None) -> int:
    """Memory of this process and its worker processes (``--jobs``): the proportional set
    size (PSS: pages shared by forked workers counted once, split between them) where psutil
    can read it, else this process's resident set size. ``kids``: the live workers, when the
    caller has listed them."""
    try:
        import psutil

        me = psutil.Process()
        kids = me.children(recursive=True) if kids is None else kids
        if not kids:
            return int(me.memory_info().rss)
        total = 0
        for p in (me, *kids):
            try:
                total += int(p.memory_full_info().pss)
            except (psutil.Error, AttributeError):
                total += int(p.memory_info().rss) if p is me else 0
        return total
    except ImportError:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) * 1024
    return 0


def _cpu_seconds(kids=None) -> float:
    """User + system CPU seconds of this process, its finished workers and its live ones."""
    t = os.times()
    total = t.user + t.system + t.children_user + t.children_system
    try:
        import psutil

        for p in psutil.Process().children(recursive=True) if kids is None else kids:
            try:
                c = p.cpu_times()
                total += c.user + c.system
            except psutil.Error:
                pass
    except ImportError:
        pass
    return total


def _children() -> list:
    try:
        import psutil

        return psutil.Process().children(recursive=True)
    except ImportError:
        return []


class _Sampler(threading.Thread):
    """Samples this process's memory and CPU time every ``every`` seconds.

    The sampler's own cost is kept small, since it shares the cores with the run: the
    workers are listed once per sample, and while workers are alive (their PSS needs the
    kernel to walk every page table) samples are taken every ``every_with_workers`` seconds.
    """

    def __init__(self, every: float = 0.1, every_with_workers: float = 0.5) -> None:
        super().__init__(daemon=True)
        self.every = every
        self.every_with_workers = every_with_workers
        self.samples: list[tuple[float, int, float]] = []
        self._stop_event = threading.Event()

    def run(self) -> None:
        while not self._stop_event.is_set():
            kids = _children()
            self.samples.append((time.perf_counter(), _rss_bytes(kids), _cpu_seconds(kids)))
            self._stop_event.wait(self.every_with_workers if kids else self.every)

    def stop(self) -> None:
        self._stop_event.set()
        self.join()

    def peak(self, t0: float, t1: float) -> float:
        """Peak RSS (MB) of the samples in [t0, t1]."""
        vals = [r for t, r, _ in self.samples if t0 <= t <= t1]
        return round(max(vals) / 2**20, 1) if vals else float("nan")

    def cpu(self, t0: float, t1: float) -> float:
        """CPU seconds (user + system, all threads) used between the samples nearest t0, t1."""
        inside = [c for t, _, c in self.samples if t0 <= t <= t1]
        return round(inside[-1] - inside[0], 2) if len(inside) > 1 else 0.0


def _project_file(world: Path) -> Path:
    """The scenario project settings, with the stage-word issuer of this world."""
    text = TEMPLATE.read_text(encoding="utf-8")
    import pandas as pd

    notices = pd.read_csv(world / "notices.csv", dtype=str)
    words = notices.loc[~notices["level"].str.fullmatch(r"\d+"), "issuer"].unique()
    if len(words) != 1:
        raise RuntimeError(f"{world}/notices.csv: expected one issuer with stage words, "
                           f"found {list(words)}")
    text = re.sub(r'^"[^"]+" = \{ caution', f'"{words[0]}" = {{ caution', text, flags=re.M)
    text = text.replace('output_dir = "../reports/scenario"', 'output_dir = "run"')
    plan = re.search(r'^plan = "([^"]+)"', text, flags=re.M)
    if plan:  # the example plan names no county; its one regional override gets a region
        plan_text = (TEMPLATE.parent / plan.group(1)).read_text(encoding="utf-8")
        geo = json.loads((world / "counties.geojson").read_text(encoding="utf-8"))
        region = sorted({f["properties"]["region"] for f in geo["features"]})[0]
        plan_text = re.sub(r'^region = "[^"]+"', f'region = "{region}"', plan_text,
                           flags=re.M)
        (world / plan.group(1)).write_text(plan_text, encoding="utf-8")
    path = world / "impactlink.toml"
    path.write_text(text, encoding="utf-8")
    return path


def run_one(n: int, workdir: Path, jobs: int) -> dict:
    """Generate a world of ``n`` counties and run the pipeline; return timings and memory."""
    from impactlink.pipeline import run_project
    from impactlink.scenario import generate

    world = workdir / f"world_{n}"
    sampler = _Sampler()
    sampler.start()
    t0 = time.perf_counter()
    generate(world, seed=SEED, counties=n)
    t1 = time.perf_counter()
    stages = {"scenario": {"wall_s": round(t1 - t0, 2), "cpu_s": sampler.cpu(t0, t1),
                           "peak_rss_mb": sampler.peak(t0, t1)}}
    project = _project_file(world)
    t_run = time.perf_counter()
    result = run_project(project, until="run", out=world / "run", jobs=jobs, quiet=True)
    t_end = time.perf_counter()
    sampler.stop()
    start = t_run
    for stage, secs in result.timings_s.items():  # stages run back to back, in this order
        stages[stage] = {"wall_s": round(secs, 2), "cpu_s": sampler.cpu(start, start + secs),
                         "peak_rss_mb": sampler.peak(start, start + secs)}
        start += secs
    return {
        "counties": n,
        "jobs": jobs,
        "stages": stages,
        "run_wall_s": round(t_end - t_run, 2),
        "total_wall_s": round(t_end - t0, 2),
        "peak_rss_mb": round(max(r for _, r, _ in sampler.samples) / 2**20, 1),
        "load_average_at_end": [round(x, 2) for x in os.getloadavg()],
    }


def grid_speedup(n: int, workdir: Path, workers: tuple[int, ...] = (1, 2),
                 targets: int = 0, jobs: int = 1) -> dict:
    """The rank stage (the candidate grid of every target) on local Dask clusters.

    One world of ``n`` counties, the stages up to ``link`` in this process, then
    :func:`impactlink.pipeline.stages.rank` once per cluster size: a real
    ``distributed.LocalCluster`` of that many single-threaded worker processes on loopback.
    ``targets`` > 0 keeps only the first ``targets`` targets; ``jobs`` is the client's threads
    for the leading candidates' row predictions (as ``impactlink run --dask ADDRESS --jobs
    N``; the same for every cluster size, so only the workers differ). Returns the wall time
    of each size, the speed-up of the largest over one worker, and whether the skill tables agree.
    """
    import dataclasses

    import distributed
    import pandas as pd

    from impactlink.pipeline import run_project, stages
    from impactlink.scenario import generate

    world = workdir / f"world_{n}"
    if not (world / "climate.parquet").exists():
        generate(world, seed=SEED, counties=n)
    project = _project_file(world)
    state = run_project(project, until="link", out=world / "run_link", quiet=True).state
    lk = state.link
    if targets > 0:
        lk = dataclasses.replace(lk, targets=lk.targets[:targets])
    out: dict = {"counties": n, "targets": [t.name for t in lk.targets], "client_threads": jobs,
                 "wall_s": {}}
    tables = {}
    for k in workers:
        with distributed.LocalCluster(n_workers=k, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address="127.0.0.1:0"
                                      ) as cluster:
            with distributed.Client(cluster) as client:
                client.wait_for_workers(k)
                t0 = time.perf_counter()
                res = stages.rank(state.project, state.inputs, state.indices, lk,
                                  lambda _line: None, jobs=jobs,
                                  dask_address=cluster.scheduler_address)
                out["wall_s"][k] = round(time.perf_counter() - t0, 2)
        tables[k] = res.skill
    first, last = workers[0], workers[-1]
    out["speedup"] = round(out["wall_s"][first] / out["wall_s"][last], 3)
    try:
        pd.testing.assert_frame_equal(tables[first], tables[last])
        out["tables_equal"] = True
    except AssertionError:
        out["tables_equal"] = False
    out["load_average_at_end"] = [round(x, 2) for x in os.getloadavg()]
    return out


def growth_exponent(sizes: list[int], seconds: list[float]) -> float | None:
    """Least-squares slope of log(seconds) on log(sizes); None with fewer than two sizes."""
    if len(sizes) < 2:
        return None
    b, _ = np.polyfit(np.log(np.asarray(sizes, float)), np.log(np.asarray(seconds, float)), 1)
    return round(float(b), 3)


def main(argv: list[str] | None = None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[500],
                    help="county counts to run (default: 500; the full set is 500 1500 3143)")
    ap.add_argument("--jobs", type=int, default=1, help="local processes for the pipeline")
    ap.add_argument("--workdir", type=Path, default=None,
                    help="where the worlds and runs are written (default: a temporary folder)")
    ap.add_argument("--out-json", type=Path, default=None,
                    help="JSON result file (default: bench_national.json in the workdir)")
    ap.add_argument("--grid-speedup", type=int, default=None, metavar="N",
                    help="instead: time the rank stage of an N-county world on local Dask "
                         "clusters of 1 and 2 workers")
    ap.add_argument("--grid-targets", type=int, default=0,
                    help="with --grid-speedup: only the first this many targets (0: all)")
    ap.add_argument("--one", type=int, default=None, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    workdir = args.workdir or Path(tempfile.mkdtemp(prefix="bench_national_"))
    workdir.mkdir(parents=True, exist_ok=True)
    if args.grid_speedup is not None:
        res = grid_speedup(args.grid_speedup, workdir, targets=args.grid_targets,
                           jobs=args.jobs)
        print(json.dumps(res))
        out_json = args.out_json or workdir / "bench_grid_speedup.json"
        out_json.write_text(json.dumps(res, indent=2) + "\n", encoding="utf-8")
        return res
    if args.one is not None:  # child process: one size, result as JSON on the last line
        print(json.dumps(run_one(args.one, workdir, args.jobs)))
        return {}

    results = []
    for n in args.sizes:  # a fresh process per size, so peak memory is per size
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        proc = subprocess.run([sys.executable, __file__, "--one", str(n), "--jobs",
                               str(args.jobs), "--workdir", str(workdir)],
                              capture_output=True, text=True, env=env, check=False)
        if proc.returncode != 0:
            print(proc.stderr[-4000:], file=sys.stderr)
            raise SystemExit(f"size {n} failed (exit {proc.returncode})")
        res = json.loads(proc.stdout.strip().splitlines()[-1])
        results.append(res)
        print(f"\n{n} counties: total {res['total_wall_s']} s, peak {res['peak_rss_mb']} MB")
        print(f"{'stage':<10} {'wall s':>9} {'CPU s':>9} {'peak MB':>9}")
        for stage, v in res["stages"].items():
            print(f"{stage:<10} {v['wall_s']:>9.2f} {v['cpu_s']:>9.2f} {v['peak_rss_mb']:>9.1f}")

    sizes = [r["counties"] for r in results]
    exponents = {"total": growth_exponent(sizes, [r["total_wall_s"] for r in results])}
    for stage in results[0]["stages"]:
        exponents[stage] = growth_exponent(
            sizes, [max(r["stages"][stage]["wall_s"], 1e-3) for r in results])
    out = {
        "machine": {"platform": platform.platform(), "python": platform.python_version(),
                    "cpus": os.cpu_count(),
                    "load_average_at_end": [round(x, 2) for x in os.getloadavg()]},
        "seed": SEED,
        "results": results,
        "growth_exponent": exponents,
    }
    print("\ngrowth exponent b in time ~ N**b:", json.dumps(exponents))
    out_json = args.out_json or workdir / "bench_national.json"
    out_json.write_text(json.dumps(out, indent=2) + "\n", encoding="utf-8")
    print(f"wrote {out_json}")
    return out


if __name__ == "__main__":
    main()
