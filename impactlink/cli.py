"""The ``impactlink`` command line. It wires stages together and holds no science.

Heavy libraries are imported inside the commands that need them, so ``impactlink --help``
stays instant.
"""

from __future__ import annotations

import argparse
import sys

STAGE_COMMANDS = {
    "indices": "compute drought indices at every time scale (writes indices.parquet)",
    "audit": "audit threshold ladders county by county (writes audit.csv)",
    "link": "turn impact records into targets with aligned index features (writes panel.parquet)",
    "rank": "fit impact models and rank index x time scale x lag out of sample (writes skill.csv)",
    "outlook": "chance of each impact now and at each lag ahead (writes outlook.csv)",
    "triggers": "replay and score a trigger plan against impacts, tune its thresholds "
                "(writes trigger_plan_*.csv, triggers.csv)",
    "contrast": "explain why two counties fared differently: exposure, sensitivity, "
                "unexplained (writes contrast.csv)",
    "run": "run every stage and write the report",
}


#: Example of each command, shown under its help (``impactlink COMMAND --help``).
EXAMPLES = {
    "scenario": "impactlink scenario --out vellmora/",
    "init": "impactlink init my_data/      # finds the tables, writes my_data/impactlink.toml",
    "check": "impactlink check my_data/     # counts, rejected rows by reason, a verdict",
    "indices": "impactlink indices my_data/",
    "audit": "impactlink audit my_data/",
    "link": "impactlink link my_data/",
    "rank": "impactlink rank my_data/ --jobs 2",
    "outlook": "impactlink outlook my_data/",
    "triggers": "impactlink triggers my_data/plan.toml   # the project is my_data/impactlink.toml",
    "contrast": "impactlink contrast my_data/ --counties Tovova Brambeth --period 2011-2013",
    "run": "impactlink run my_data/ --out results/",
    "report": "impactlink report results/",
    "demo": "impactlink demo              # writes reports/demo/report.html",
}


def _sub(sub, name: str, helptext: str) -> argparse.ArgumentParser:  # noqa: ANN001
    """A subcommand whose --help shows a description and an example."""
    return sub.add_parser(
        name, help=helptext,
        description=helptext[0].upper() + helptext[1:] + ". Results are statistical "
        "associations, not causes; decisions rest with the responsible authorities.",
        epilog=f"example:\n  {EXAMPLES[name]}",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="impactlink",
        description=(
            "Link drought indices to drought impacts: impact models, out-of-sample skill, "
            "trigger audits and a self-contained report. Results show statistical association, "
            "not causation; decisions rest with the responsible authorities."
        ),
    )
    p.add_argument("--version", action="store_true", help="print the version and exit")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    s = _sub(sub, "scenario", "generate the fictional demonstration scenario")
    s.add_argument("--seed", type=int, default=20261202, help="random seed (default 20261202)")
    s.add_argument("--out", required=True, help="folder to write the scenario tables into")
    s.add_argument("--counties", type=int, default=60,
                   help="number of counties, 10 to 3143 (default 60: the committed scenario)")

    s = _sub(sub, "init", "write a commented project file for the tables in a folder")
    s.add_argument("folder", help="folder holding counties, climate, notices, ... files")
    s.add_argument("--force", action="store_true", help="overwrite an existing impactlink.toml")

    s = _sub(sub, "check", "read and validate every input table; print a summary")
    s.add_argument("project", help="project file (TOML) or a folder holding impactlink.toml")
    s.add_argument("--out", help="also write rejected_rows.csv and manifest.json here")
    s.add_argument("--force", action="store_true", help=_FORCE_HELP)

    for name, helptext in STAGE_COMMANDS.items():
        s = _sub(sub, name, helptext)
        s.add_argument("project", help="project file (TOML) or a folder holding impactlink.toml"
                       + ("; or a trigger plan file (the project is impactlink.toml beside it)"
                          if name == "triggers" else ""))
        _run_options(s)
        if name in ("triggers", "run"):
            s.add_argument("--plan", metavar="PLAN.toml", default=None,
                           help="replay and score this trigger plan (overrides [triggers] plan)")
        if name in ("contrast", "run"):
            s.add_argument("--counties", nargs=2, metavar=("A", "B"), default=None,
                           help="explain these two counties (ids or names; B may be 'region')")
            s.add_argument("--period", metavar="YYYY-YYYY", default=None,
                           help="years to compare, e.g. 2011-2013 (default: the drought year)")

    s = _sub(sub, "report", "rebuild report.html from an existing run folder")
    s.add_argument("run_dir", help="a folder written by `impactlink run`, or the project file "
                   "(or project folder) whose output folder it is")
    s.add_argument("--quiet", action="store_true", help="no progress lines")
    s.add_argument("--force", action="store_true", help=_FORCE_HELP)

    s = _sub(sub, "demo", "run everything on the fictional scenario into reports/demo")
    s.add_argument("--out", help="output folder (default reports/demo)")
    s.add_argument("--jobs", type=int, default=1, help="worker processes (default 1)")
    s.add_argument("--quiet", action="store_true", help="no progress lines")
    s.add_argument("--force", action="store_true", help=_FORCE_HELP)
    return p


def _run_options(s: argparse.ArgumentParser) -> None:
    s.add_argument("--out", help="output folder (default: the project's output_dir)")
    s.add_argument("--jobs", type=int, default=None, help="worker processes for independent work")
    s.add_argument(
        "--dask", metavar="ADDRESS", default=None,
        help="run model grids on a Dask scheduler at ADDRESS ('local' starts a local cluster)",
    )
    s.add_argument("--quiet", action="store_true", help="no progress lines")
    s.add_argument("--force", action="store_true", help=_FORCE_HELP)


_FORCE_HELP = (
    "write into an existing output folder that impactlink did not write "
    "(its other files are kept)"
)


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.version:
        from impactlink import __version__

        print(__version__)
        return 0
    if not args.command:
        parser.print_help()
        return 0
    import warnings

    from impactlink.errors import ImpactlinkError, user_message, warning_line

    def _one_line(message, category, filename, lineno, file=None, line=None):  # noqa: ANN001
        print(warning_line(message, category), file=sys.stderr)

    warnings.showwarning = _one_line  # a warning is one line in the tool's voice
    try:
        return _dispatch(args)
    except KeyboardInterrupt as exc:  # Ctrl-C, or SIGTERM during a run (RunInterrupted)
        print("impactlink: interrupted; earlier results are left as they were", file=sys.stderr)
        return 128 + int(getattr(exc, "signum", 2))
    except ImpactlinkError as exc:  # a user's mistake: one line, no traceback
        print(user_message(exc), file=sys.stderr)
        return 2
    # any other exception is a bug and keeps its traceback


def _dispatch(args: argparse.Namespace) -> int:
    cmd = args.command
    if cmd == "scenario":
        from impactlink.scenario import generate

        paths = generate(args.out, seed=args.seed, counties=args.counties)
        for name, path in paths.items():
            print(f"{name}: {path}")
        return 0
    if cmd == "init":
        from impactlink.pipeline import init_project

        path = init_project(args.folder, force=args.force)
        print(f"wrote {path}")
        print(f"next: impactlink check {path}  then  impactlink run {path}")
        return 0
    if cmd == "check":
        from impactlink.pipeline import check_project

        summary = check_project(args.project, out=args.out, force=args.force)
        _print_check(summary, args.project)
        return 0 if summary.ok else 1
    if cmd == "report":
        from impactlink.pipeline import rebuild_report
        from impactlink.progress import Reporter

        path = rebuild_report(args.run_dir, progress=Reporter(quiet=args.quiet),
                              force=args.force)
        print(f"report: {path}")
        return 0
    if cmd == "demo":
        from impactlink.pipeline import run_demo

        result = run_demo(out=args.out, jobs=args.jobs, quiet=args.quiet, force=args.force)
        for path in result.written:
            print(f"wrote {path}")
        print(f"report: {result.out_dir / 'report.html'}")
        return 0
    from impactlink.pipeline import run_project

    result = run_project(
        _project_with_options(args),
        until=cmd,
        out=args.out,
        jobs=args.jobs,
        dask_address=args.dask,
        quiet=args.quiet,
        force=args.force,
    )
    for path in result.written:
        print(f"wrote {path}")
    return 0


def _print_check(summary, project: str) -> None:  # noqa: ANN001  (CheckSummary; lazy pandas)
    """Per-table counts in at most 100 columns, reasons, warnings, and a verdict line."""
    import textwrap

    t = summary.tables
    width = {"table": 14, "file": 34}
    print(f"{'table':<14} {'file':<34} {'read':>9} {'used':>9} {'rejected':>9} {'counties':>8}")
    for r in t.itertuples(index=False):
        name = str(r.file)
        name = name if len(name) <= width["file"] else "..." + name[-(width["file"] - 3):]
        counties = "" if r.counties is None or str(r.counties) in ("<NA>", "nan") else r.counties
        print(f"{str(r.table):<14} {name:<34} {r.rows_read:>9,} {r.rows_used:>9,} "
              f"{r.rows_rejected:>9,} {counties!s:>8}")
    if len(summary.rejected_by_reason):
        print("\nrejected rows by reason (all listed in rejected_rows.csv with file and row):")
        for r in summary.rejected_by_reason.itertuples(index=False):
            line = f"{r.table}: {r.rows:,} x {r.reason}"
            print(textwrap.fill(line, width=100, subsequent_indent="    "))
    for w in summary.warnings:
        print(textwrap.fill(f"warning: {w}", width=100, subsequent_indent="    "))
    for path in summary.written:
        print(f"wrote {path}")
    read = int(t["rows_read"].sum())
    rejected = int(t["rows_rejected"].sum())
    print(f"all tables read: {read:,} rows, {read - rejected:,} used, {rejected:,} rejected "
          f"with reasons. next: impactlink run {project}")


def _project_with_options(args: argparse.Namespace):  # noqa: ANN202
    """The project, with --plan / --counties / --period laid over its settings."""
    import dataclasses
    from pathlib import Path

    from impactlink.project import load_project

    path = Path(args.project)
    plan = getattr(args, "plan", None)
    if args.command == "triggers" and path.is_file() and _is_trigger_plan(path):
        plan, path = str(path.resolve()), path.parent
    project = load_project(path, output_dir=args.out)
    if plan:
        project = dataclasses.replace(project, triggers=dataclasses.replace(
            project.triggers, plan=str(Path(plan).resolve())))
    counties, period = getattr(args, "counties", None), getattr(args, "period", None)
    if counties or period:
        c = project.contrast
        project = dataclasses.replace(project, contrast=dataclasses.replace(
            c, counties=tuple(counties) if counties else c.counties, period=period or c.period))
    return project


def _is_trigger_plan(path) -> bool:  # noqa: ANN001
    import tomllib

    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return False
    return "stage" in raw and "project" not in raw


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
