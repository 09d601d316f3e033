"""Benchmark of the real Iowa record end to end, side by side with an earlier revision.

For each revision (this checkout, and ``--old REV``, checked out with ``git worktree`` into the
work folder), a fresh folder receives only the five raw public files of the shared real data
(Quick Stats county corn yields, division precipitation and mean temperature, division Palmer
index, county-to-division table, county TopoJSON), then a fresh Python process runs
``impactlink init DIR`` and another ``impactlink run DIR --quiet`` with that revision's code
on ``PYTHONPATH``. The revisions run one after the other in the same call, alternating when
``--repeat`` is above 1, so both see the same machine and load.

Recorded per revision and repeat: wall time of ``init`` and of ``run`` (seconds), CPU seconds
of the ``run`` process (user + system, from :func:`resource.getrusage` of children: on a busy
machine the steadier measure of the work), peak resident memory of the ``run`` process, the
run's own seconds per stage (``timings_s`` in ``manifest.json``) and the answer for corn
(best candidate and its selection-aware skill interval, from ``skill_summary.csv``), so a
speed-up is never bought with a different answer unnoticed.

Run:  .venv/bin/python benchmarks/bench_iowa.py [--old a9b9c5f] [--repeat 1]
      [--workdir /tmp/bench_iowa] [--out-json bench_iowa.json]
The real data are read from ``../shared/realdata`` (or ``IMPACTLINK_REALDATA``) and copied
only into the work folder, never into the repository. Results go to stdout and the JSON
file; copy them into ``benchmarks/README.md``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import shutil
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
RAW = ("iowa/nass_quickstats_corn_grain_yield_county_1926-2023.csv",
       "iowa/climdiv_monthly_precip_tavg_1895-2022.csv", "iowa/climdiv_pdsi_1895-2022.csv",
       "iowa/county_to_climdiv.csv", "us/counties-10m.json")
CLI = "import sys; from impactlink.cli import main; raise SystemExit(main(sys.argv[1:]))"
ANSWER = ("target", "best_index", "best_scale_months", "best_end_month", "best_lag_weeks",
          "rpss", "rpss_lo", "rpss_hi", "nested_rpss", "nested_lo", "nested_hi")


def realdata() -> Path:
    """The shared real-data folder (exits with the reason when it is absent)."""
    root = Path(os.environ.get("IMPACTLINK_REALDATA", ROOT.parent / "shared" / "realdata"))
    if not (root / "iowa").is_dir():
        sys.exit(f"real data not found at {root}; set IMPACTLINK_REALDATA")
    return root


def checkout(rev: str, workdir: Path) -> Path:
    """A detached worktree of ``rev`` inside ``workdir`` (reused when already there)."""
    tree = workdir / f"tree_{rev}"
    if not tree.is_dir():
        subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", "-f", str(tree),
                        rev], check=True, capture_output=True)
    return tree


def _timed(cmd: list[str], env: dict[str, str]) -> tuple[float, float, int]:
    """Wall seconds, CPU seconds and peak RSS (bytes) of one child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    done = subprocess.run(cmd, env=env, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        sys.exit(f"{' '.join(cmd[-3:])} failed ({done.returncode}):\n{done.stdout[-2000:]}"
                 f"\n{done.stderr[-2000:]}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, after.ru_maxrss * 1024  # ru_maxrss is in KiB on Linux


def run_once(code: Path, folder: Path, data: Path) -> dict:
    """init + run of the raw Iowa files with the code at ``code``; the measurements."""
    if folder.exists():
        shutil.rmtree(folder)
    folder.mkdir(parents=True)
    for rel in RAW:
        shutil.copy(data / rel, folder / Path(rel).name)
    env = dict(os.environ, PYTHONPATH=str(code), PYTHONHASHSEED="0")
    py = [sys.executable, "-c", CLI]
    init_wall, _, _ = _timed(py + ["init", str(folder)], env)
    run_wall, run_cpu, peak = _timed(py + ["run", str(folder), "--quiet"], env)
    outs = [p.parent for p in folder.rglob("manifest.json")]
    manifest = json.loads((outs[0] / "manifest.json").read_text(encoding="utf-8"))
    answer = {}
    summary = outs[0] / "skill_summary.csv"
    if summary.is_file():
        import pandas as pd

        frame = pd.read_csv(summary)
        first = frame.iloc[0]
        answer = {k: (first[k].item() if hasattr(first[k], "item") else first[k])
                  for k in ANSWER if k in frame.columns}
    return {"init_s": round(init_wall, 2), "run_s": round(run_wall, 2),
            "run_cpu_s": round(run_cpu, 2), "peak_rss_mb": round(peak / 2**20),
            "stages_s": {k: round(float(v), 2) for k, v in manifest.get("timings_s", {}).items()},
            "corn": answer}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--old", default="a9b9c5f", help="earlier revision to compare (git ref)")
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--workdir", type=Path, default=Path("/tmp/bench_iowa"))
    ap.add_argument("--out-json", type=Path, default=None)
    args = ap.parse_args(argv)
    data = realdata()
    args.workdir.mkdir(parents=True, exist_ok=True)
    revisions = {"old": checkout(args.old, args.workdir), "current": ROOT}
    load = os.getloadavg()
    results: dict[str, list[dict]] = {name: [] for name in revisions}
    for rep in range(args.repeat):
        for name, code in revisions.items():
            res = run_once(code, args.workdir / f"iowa_{name}", data)
            results[name].append(res)
            print(f"[{rep + 1}/{args.repeat}] {name}: init {res['init_s']} s, run "
                  f"{res['run_s']} s wall, {res['run_cpu_s']} CPU s, {res['peak_rss_mb']} MB",
                  flush=True)
    head = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "--short", "HEAD"],
                          capture_output=True, text=True).stdout.strip()
    record = {"machine": {"cpus": os.cpu_count(), "python": platform.python_version(),
                          "platform": platform.platform(), "loadavg_start": load,
                          "loadavg_end": os.getloadavg()},
              "revisions": {"old": args.old, "current": head}, "results": results}
    stages = sorted({s for runs in results.values() for r in runs for s in r["stages_s"]},
                    key=lambda s: -max(r["stages_s"].get(s, 0) for v in results.values()
                                       for r in v))
    print(f"\n| seconds (best of {args.repeat}) | old ({args.old}) | current ({head}) |")
    print("|---|---:|---:|")
    for row, get in [("init wall", lambda r: r["init_s"]), ("run wall", lambda r: r["run_s"]),
                     ("run CPU", lambda r: r["run_cpu_s"])] + [
            (f"stage {s}", lambda r, s=s: r["stages_s"].get(s, float("nan"))) for s in stages]:
        print(f"| {row} | {min(get(r) for r in results['old']):.1f} | "
              f"{min(get(r) for r in results['current']):.1f} |")
    for name in revisions:
        print(f"{name} corn answer: {results[name][0]['corn']}")
    print(f"load average at start {load}, at end {os.getloadavg()}")
    if args.out_json:
        args.out_json.write_text(json.dumps(record, indent=2, default=str), encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
