"""The commands: ``init``, ``check``, ``demo`` and ``run`` (and every stage command).

A run is a short list of stage calls on a typed :class:`~impactlink.pipeline.state.Run`;
:mod:`.publish` writes the results into a temporary folder that replaces the output folder
only when complete. Nothing here prints: the CLI prints what these functions return, and
progress lines go through :class:`impactlink.progress.Reporter`.
"""

from __future__ import annotations

import contextlib
import dataclasses
import time
import warnings as _warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

from impactlink import _malloc
from impactlink.errors import ProjectError
from impactlink.progress import Reporter
from impactlink.project import Project, load_project
from impactlink.project_template import render_project_file

from . import publish, stages
from .state import CheckSummary, Run, RunResult

__all__ = ["run_project", "run_demo", "check_project", "init_project", "rebuild_report", "ORDER", "NEEDS"]

ORDER = ("inputs", "indices", "audit", "link", "rank", "outlook", "triggers", "contrast", "report")
NEEDS = {
    "indices": ("inputs", "indices"),
    "audit": ("inputs", "indices", "audit"),
    "link": ("inputs", "indices", "link"),
    "rank": ("inputs", "indices", "link", "rank"),
    "outlook": ("inputs", "indices", "link", "rank", "outlook"),
    "triggers": ("inputs", "indices", "link", "rank", "triggers"),
    "contrast": ("inputs", "indices", "link", "rank", "contrast"),
    "run": ORDER,
}


def init_project(folder: str | Path, *, force: bool = False) -> Path:
    """Find the tables in ``folder`` and write a commented ``impactlink.toml``.

    Contract files are found by name, downloaded publisher files (Quick Stats, per-zone
    climate and indicators, zone tables, TopoJSON) by their headers; only settings the data
    support are written (see :func:`impactlink.inputs.plan_project`).
    """
    from impactlink.inputs.init_plan import plan_project

    folder = Path(folder)
    if not folder.is_dir():
        raise ProjectError(f"{folder} is not a folder; give the folder that holds your tables")
    target = folder / "impactlink.toml"
    if target.exists() and not force:
        raise ProjectError(f"{target} exists; use --force to overwrite it")
    text = render_project_file(**plan_project(folder), name=folder.resolve().name,
                               output_dir="impactlink_output")
    target.write_text(text, encoding="utf-8")
    return target


def check_project(path: str | Path, *, out: str | Path | None = None,
                  force: bool = False) -> CheckSummary:
    """Read and validate every table; return a per-table summary with rejection reasons.

    A fatal problem raises (the CLI turns it into one error line and exit code 2); rejected
    rows are reported, not fatal. With ``out``, ``rejected_rows.csv`` and ``manifest.json``
    are published there (other results in that run folder are kept).
    """
    from impactlink.inputs import summary_frame

    project = load_project(path)
    _check_plan(project)
    inputs = stages.read(project, lambda _msg: None)
    bundle = inputs.bundle
    reasons = bundle.rejected.groupby(["table", "reason"]).size().rename("rows").reset_index() \
        if len(bundle.rejected) else bundle.rejected.iloc[:0]
    written: list[Path] = []
    if out:
        out_dir = publish.guard_output(Path(out), project, force=force)
        run = Run(project=project, inputs=inputs)
        with publish.staged_folder(out_dir, keep_existing=True) as tmp:
            names = publish.write_tables(tmp, inputs.tables())
            names.append(publish.write_manifest(tmp, run, {}, list(bundle.warnings)))
        written = [out_dir / p.name for p in names]
    return CheckSummary(tables=summary_frame(bundle), rejected_by_reason=reasons,
                        warnings=tuple(bundle.warnings), written=tuple(written))


def rebuild_report(run_dir: str | Path, *, progress: Callable[[str], None] | None = None,
                   force: bool = False) -> Path:
    """Rebuild ``report.html`` (and figures, Parquet copies, layers) of an existing run folder.

    ``run_dir`` is the run folder (holding ``manifest.json``), or the project file or project
    folder whose ``output_dir`` holds it. The folder is copied beside itself, rebuilt there
    and swapped in whole, like a run.
    """
    from impactlink.report import build_report

    folder = _run_folder_of(Path(run_dir))
    if not folder.is_dir():
        return build_report(folder, progress=progress)  # its ReportError names the folder
    out_dir = publish.guard_output(folder, None, force=force)
    with publish.staged_folder(out_dir, keep_existing=True) as tmp:
        build_report(tmp, progress=progress)
    return out_dir / "report.html"


def _run_folder_of(path: Path) -> Path:
    """The run folder meant by ``path``: itself, or the output folder of the project it names."""
    if (path / "manifest.json").is_file():
        return path
    project_file = path / "impactlink.toml" if path.is_dir() else path
    if project_file.suffix == ".toml" and project_file.is_file():
        return load_project(project_file).output_dir
    return path


def run_demo(*, out: str | Path | None = None, jobs: int = 1, quiet: bool = False,
             force: bool = False) -> RunResult:
    """Run every stage on the committed fictional scenario into ``reports/demo``."""
    root = _repo_root()
    out = Path(out) if out else root / "reports" / "demo"
    return run_project(root / "scenario_data" / "impactlink.toml", until="run", out=out,
                       jobs=jobs, quiet=quiet, force=force)


def run_project(
    path: str | Path | Project,
    *,
    until: str = "run",
    out: str | Path | None = None,
    jobs: int | None = None,
    dask_address: str | None = None,
    quiet: bool = False,
    force: bool = False,
) -> RunResult:
    """Run the stages that ``until`` needs and publish their outputs.

    Parameters
    ----------
    path : str, Path or Project
        Project file, folder holding ``impactlink.toml``, or a loaded project.
    until : str
        ``"run"`` for every stage, or a stage command name (``"rank"`` ...): that stage
        and what it needs. A stage command keeps the run folder's other results.
    out : str or Path, optional
        Output folder (default: the project's ``output_dir``).
    jobs, dask_address : optional
        Worker processes / Dask scheduler for the model grids.
    quiet : bool
        No progress lines.
    force : bool
        Write into an existing folder this tool did not write (its other files are kept).

    Returns
    -------
    RunResult
        Paths written (in the final folder), seconds per stage, warnings, the typed state.

    Raises
    ------
    ProjectError
        If the output folder is unsafe (see :func:`.publish.guard_output`); raised before
        anything is written.
    """
    if until not in NEEDS:
        raise ProjectError(f"unknown stage {until!r}; known: {sorted(NEEDS)}")
    project = path if isinstance(path, Project) else load_project(path, output_dir=out)
    if "triggers" in NEEDS[until]:
        _check_plan(project)  # a plan's mistakes are found before any computation
    out_dir = publish.guard_output(Path(out) if out else project.output_dir, project, force=force)
    names = NEEDS[until]
    _malloc.large_blocks_by_mmap()  # freed arrays go back to the system (glibc; else no-op)
    run = Run(project=project, jobs=jobs if jobs is not None else project.jobs,
              dask_address=dask_address)
    reporter = Reporter(quiet=quiet, n_stages=len(names))
    result = RunResult(out_dir=out_dir)
    keep = until != "run" or (force and not publish.is_run_folder(out_dir))
    try:
        with publish.staged_folder(out_dir, keep_existing=keep) as tmp:
            for name in names:
                run = _timed(name, run, tmp, reporter, result)
                # the manifest so far: the report stage reads it from the folder
                manifest = publish.write_manifest(tmp, run, result.timings_s, result.warnings)
            result.written.append(manifest)
    finally:
        reporter.close()
    result.written = [out_dir / p.relative_to(tmp) for p in result.written]
    result.state = run
    return result


def _check_plan(project: Project) -> None:
    if project.triggers.plan:
        from impactlink.triggers import load_trigger_plan

        load_trigger_plan(project.triggers.plan)


def _timed(name: str, run: Run, tmp: Path, reporter: Reporter, result: RunResult) -> Run:
    """Run one stage, publish its tables into ``tmp``, record time and warnings."""
    reporter.stage(name)
    t0 = time.perf_counter()
    in_process_grid = name == "rank" and run.jobs <= 1 and not run.dask_address
    with _warnings.catch_warnings(record=True) as caught, (
            _malloc.reusing_freed_blocks() if in_process_grid else contextlib.nullcontext()):
        # the in-process grid repeats its allocations: freed blocks stay for the next task
        _warnings.simplefilter("always")
        run, written = _STEPS[name](run, tmp, reporter)
    messages = [str(m) for m in getattr(getattr(run, name, None), "warnings", ())]
    messages += [str(w.message) for w in caught]
    for msg in messages:  # kept in the manifest, shown once as a progress line
        if msg not in result.warnings:
            result.warnings.append(msg)
            reporter(f"warning: {msg}")
    _malloc.trim()  # what the stage freed leaves the process before the next one
    result.timings_s[name] = round(time.perf_counter() - t0, 3)
    # a file rewritten by a later stage (rejected_rows.csv: inputs, then link) is listed once
    result.written.extend(p for p in written if p not in result.written)
    return run


# One step per stage: call the stage function, keep its result, publish its tables.
def _set(run: Run, tmp: Path, **result: Any) -> tuple[Run, list[Path]]:
    run = dataclasses.replace(run, **result)
    (value,) = result.values()
    months_of = None
    if run.indices is not None:
        months_of = run.indices.cube.provenance.get("scale_months_of_key")
    return run, publish.write_tables(tmp, value.tables(), months_of=months_of)


def _need(value: Any, name: str) -> Any:
    if value is None:  # a programming bug: NEEDS lists every stage a stage depends on
        raise RuntimeError(f"stage {name} has not run")
    return value


def _inputs(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
    return _set(run, tmp, inputs=stages.read(run.project, say))


def _indices(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
    inputs = _need(run.inputs, "inputs")
    result = stages.indices(run.project, inputs, say)
    # only the indices stage reads the climate rows and the indicators table: later stages
    # work on the cube (a national run: about 2 GB and 0.7 GB)
    run = dataclasses.replace(run, inputs=dataclasses.replace(
        inputs, bundle=inputs.bundle.without("climate", "indicators")))
    return _set(run, tmp, indices=result)


def _audit(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
    return _set(run, tmp, audit=stages.audit(run.project, _need(run.indices, "indices"), say,
                                             jobs=run.jobs))


def _link(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
    res = stages.link(run.project, _need(run.inputs, "inputs"), _need(run.indices, "indices"), say)
    return _set(run, tmp, link=res)


def _rank(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
    res = stages.rank(run.project, _need(run.inputs, "inputs"), _need(run.indices, "indices"),
                      _need(run.link, "link"), say, jobs=run.jobs, dask_address=run.dask_address)
    return _set(run, tmp, rank=res)


def _after_rank(name: str, fn: Callable[..., Any], *, jobs: bool = False
                ) -> Callable[[Run, Path, Reporter], Any]:
    def step(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
        extra = {"jobs": run.jobs} if jobs else {}
        res = fn(run.project, _need(run.inputs, "inputs"), _need(run.indices, "indices"),
                 _need(run.link, "link"), _need(run.rank, "rank"), say, **extra)
        return _set(run, tmp, **{name: res})

    return step


def _report(run: Run, tmp: Path, say: Reporter) -> tuple[Run, list[Path]]:
    from impactlink.report import build_report

    publish.write_layers(tmp, run)
    return run, [build_report(tmp, progress=say)]


_STEPS: dict[str, Callable[[Run, Path, Reporter], tuple[Run, list[Path]]]] = {
    "inputs": _inputs,
    "indices": _indices,
    "audit": _audit,
    "link": _link,
    "rank": _rank,
    "outlook": _after_rank("outlook", stages.outlook, jobs=True),
    "triggers": _after_rank("triggers", stages.triggers, jobs=True),
    "contrast": _after_rank("contrast", stages.contrast, jobs=True),
    "report": _report,
}


def _repo_root() -> Path:
    here = Path(__file__).resolve().parents[2]
    if (here / "scenario_data").is_dir():
        return here
    cwd = Path.cwd()
    if (cwd / "scenario_data").is_dir():
        return cwd
    raise ProjectError(
        "cannot find scenario_data/; run `impactlink demo` from the project's source folder, "
        "or generate the scenario with `impactlink scenario --out DIR` and run "
        "`impactlink run DIR/impactlink.toml`"
    )
