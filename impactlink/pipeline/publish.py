"""The one place that writes a run folder: tables, map layers and ``manifest.json``.

Results are published whole. A run writes into a temporary folder beside the output
folder (``<parent>/.impactlink-tmp-<name>-<pid>``) and renames it into place only when
every file is complete, so an interrupted run (Ctrl-C, SIGTERM, a crash) leaves the
previous results as they were. Before anything is written, :func:`guard_output` refuses
output folders that would put other files at risk.

A stage command (``impactlink rank`` ...) that runs only part of the pipeline into an
existing run folder keeps that folder's other results: the folder is copied into the
temporary folder first, the stage's tables overwrite their own files, and the whole
folder is swapped in at the end.
"""

from __future__ import annotations

import contextlib
import json
import os
import platform
import shutil
import signal
import threading
import time
from collections.abc import Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink import __version__
from impactlink.errors import ProjectError
from impactlink.project import Project
from impactlink.schema import COUNTY

from .state import CubeFile, PanelFile, Run

__all__ = ["MARKER", "RunInterrupted", "guard_output", "staged_folder", "write_tables",
           "write_layers", "write_manifest"]

MARKER = ".impactlink-run"
"""Marker file in every folder the tool wrote; only such folders are replaced without --force."""

TMP_PREFIX = ".impactlink-tmp-"
_SLOW_WRITE_ENV = "IMPACTLINK_TEST_SLOW_WRITE_S"  # test hook: seconds to sleep in each Parquet write


class RunInterrupted(KeyboardInterrupt):
    """A run stopped by SIGTERM (or SIGINT): the temporary folder is removed, results kept."""

    def __init__(self, signum: int) -> None:
        super().__init__(f"stopped by signal {signal.Signals(signum).name}")
        self.signum = signum


# ----------------------------------------------------------------------------- safety
def guard_output(out_dir: Path, project: Project | None, *, force: bool = False) -> Path:
    """Check that ``out_dir`` is safe to publish into; return it resolved.

    Raises
    ------
    ProjectError
        If ``out_dir`` is ``/`` or the home folder; if it is, or contains, the project
        folder or a folder holding an input table; if it exists as a file; or if it is an
        existing non-empty folder this tool did not write (no ``.impactlink-run`` marker)
        and ``force`` is not set.
    """
    out = Path(os.path.abspath(Path(out_dir).expanduser()))
    real = out.resolve()
    if real == Path(real.anchor) or real == Path.home().resolve():
        raise ProjectError(
            f"output folder {out} is the file-system root or your home folder; "
            "set [project] output_dir (or --out) to a folder of its own"
        )
    protected: set[Path] = set()
    if project is not None:
        if project.path is not None:
            protected.add(Path(project.path).resolve().parent)
        protected.add(Path(project.data_dir).resolve())
        protected.update(Path(p).resolve().parent for p in project.tables.values())
    for folder in sorted(protected):
        if folder == real or real in folder.parents:
            raise ProjectError(
                f"output folder {out} is or contains the input folder {folder}; a run replaces "
                "its output folder whole, so choose a folder of its own (e.g. a new subfolder)"
            )
    if real.exists() and not real.is_dir():
        raise ProjectError(f"output folder {out} exists and is a file; give a folder path")
    if real.is_dir() and any(real.iterdir()) and not is_run_folder(real) and not force:
        raise ProjectError(
            f"output folder {out} holds files this tool did not write (no {MARKER} marker); "
            "choose an empty or new folder, or pass --force (force=True) to write into it "
            "(its other files are kept)"
        )
    return real


def is_run_folder(folder: Path) -> bool:
    """True for a folder this tool wrote: it has the marker, or an impactlink manifest."""
    if (folder / MARKER).is_file():
        return True
    manifest = folder / "manifest.json"
    try:  # run folders written before the marker existed
        return "impactlink_version" in json.loads(manifest.read_text(encoding="utf-8"))
    except (OSError, ValueError, TypeError):
        return False


@contextlib.contextmanager
def staged_folder(out_dir: Path, *, keep_existing: bool) -> Iterator[Path]:
    """Yield a temporary folder beside ``out_dir``; move it into place on success.

    ``keep_existing`` copies the current contents of ``out_dir`` into the temporary folder
    first (stage commands, and ``--force`` over a foreign folder). On any exception,
    including SIGTERM (turned into :class:`RunInterrupted` while the block runs in the main
    thread) and Ctrl-C, the temporary folder is removed and ``out_dir`` is left untouched.
    """
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    tmp = out_dir.parent / f"{TMP_PREFIX}{out_dir.name}-{os.getpid()}"
    if tmp.exists():
        shutil.rmtree(tmp)
    with _sigterm_aborts():
        try:
            if keep_existing and out_dir.is_dir():
                shutil.copytree(out_dir, tmp, symlinks=True)
            else:
                tmp.mkdir()
            yield tmp
            (tmp / MARKER).write_text(
                "written by impactlink; this folder is replaced whole by the next run\n",
                encoding="utf-8")
            _swap_in(tmp, out_dir)
        finally:
            if tmp.exists():
                with _signals_blocked():  # a second Ctrl-C must not leave half the folder
                    shutil.rmtree(tmp, ignore_errors=True)


def _swap_in(tmp: Path, out_dir: Path) -> None:
    """Rename ``tmp`` to ``out_dir``; the old folder is removed only after the new one is in."""
    old = out_dir.parent / f".impactlink-old-{out_dir.name}-{os.getpid()}"
    with _signals_blocked():
        if out_dir.exists():
            os.replace(out_dir, old)
        os.replace(tmp, out_dir)
        if old.exists():
            shutil.rmtree(old, ignore_errors=True)


@contextlib.contextmanager
def _signals_blocked() -> Iterator[None]:
    """Hold SIGINT and SIGTERM until the block ends (they are delivered afterwards)."""
    blocked = {signal.SIGINT, signal.SIGTERM}
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, blocked)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, previous)


@contextlib.contextmanager
def _sigterm_aborts() -> Iterator[None]:
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def _abort(signum: int, _frame: Any) -> None:
        raise RunInterrupted(signum)

    previous = signal.signal(signal.SIGTERM, _abort)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


# ----------------------------------------------------------------------------- writers
def write_tables(folder: Path, tables: dict[str, pd.DataFrame | CubeFile | PanelFile], *,
                 months_of: dict[str, int] | None = None) -> list[Path]:
    """Write each frame by its file name: ``.csv`` or ``.parquet``, deterministic bytes.

    CSV: no index, ``\\n`` line ends. Parquet: pyarrow, no index, snappy, no timestamps in
    the file, so the same frame gives the same bytes. With ``months_of`` (a monthly input:
    ``"index:scale_weeks"`` -> months, from the cube's provenance) every table with
    ``index`` and ``scale_weeks`` columns also gets ``scale_months`` beside them, so monthly
    time scales are read in months. A :class:`~.state.CubeFile` is written by
    :func:`write_cube_parquet`, a :class:`~.state.PanelFile` by :func:`write_panel_parquet`.
    """
    written = []
    for name, frame in tables.items():
        if isinstance(frame, CubeFile):
            write_cube_parquet(frame, folder / name)
            written.append(folder / name)
            continue
        if isinstance(frame, PanelFile):
            write_panel_parquet(frame, folder / name)
            written.append(folder / name)
            continue
        if months_of:
            frame = with_scale_months(frame, months_of)
        path = folder / name
        if name.endswith(".parquet"):
            _write_parquet(frame, path)
        else:
            frame.to_csv(path, index=False, lineterminator="\n")
        written.append(path)
    return written


def with_scale_months(frame: pd.DataFrame, months_of: dict[str, int]) -> pd.DataFrame:
    """``frame`` with ``scale_months`` after ``scale_weeks`` (and ``scale2_months``)."""
    out = frame
    for idx_col, wk_col, mo_col in (("index", "scale_weeks", "scale_months"),
                                    ("index2", "scale2_weeks", "scale2_months"),
                                    ("best_index", "best_scale_weeks", "best_scale_months")):
        if idx_col in out.columns and wk_col in out.columns and mo_col not in out.columns:
            weeks = pd.to_numeric(out[wk_col], errors="coerce")
            keys = out[idx_col].astype(str) + ":" + weeks.astype("Int64").astype(str)
            months = keys.map(months_of).astype("Int64")
            out = out.copy()
            out.insert(out.columns.get_loc(wk_col) + 1, mo_col, months)
    return out


def _write_parquet(frame: pd.DataFrame, path: Path) -> None:
    frame.to_parquet(path, index=False, engine="pyarrow", compression="snappy")
    _test_delay()


def write_cube_parquet(file: CubeFile, path: Path) -> None:
    """``indices.parquet`` straight from the cube: one row group per (index, time scale), so
    a national cube (3,143 counties x 2,400 weeks x 21 keys, about 160 M rows) is never one
    frame in memory; a key costs one (weeks x counties) block.

    Rows and columns are those of :meth:`IndexCube.to_frame` (county_id, week, index,
    scale_weeks, value; week-major, counties in cube order). ``index`` is dictionary-encoded
    (read as a category); ``value`` is float32: index values are standard-normal scores or
    percentiles, and float32's 24-bit significand (about 7 significant digits, IEEE 754) is
    far finer than any threshold read from them; it halves the file. The stages work on the
    float64 cube, never on this file.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    cube = file.cube
    nw, nc = len(cube.weeks), len(cube.county_ids)
    keys = cube.keys
    names = pa.array(sorted({k[0] for k in keys}), pa.string())
    code = {n: i for i, n in enumerate(names.to_pylist())}
    county = pa.array(list(cube.county_ids), pa.string()).take(
        pa.array(np.tile(np.arange(nc, dtype=np.int32), nw)))
    week = pa.array(np.repeat(cube.weeks.values, nc))
    schema = pa.schema([(COUNTY, pa.string()), (file.time_col, week.type),
                        ("index", pa.dictionary(pa.int32(), pa.string())),
                        (file.scale_col, pa.int16()), ("value", pa.float32())])
    with pq.ParquetWriter(path, schema, compression="snappy") as writer:
        for key in keys:
            n = nw * nc
            index = pa.DictionaryArray.from_arrays(
                pa.array(np.full(n, code[key[0]], np.int32)), names)
            scale = pa.array(np.full(n, key[1], np.int16))
            value = pa.array(np.asarray(cube.arrays[key], np.float32).ravel(), from_pandas=True)
            writer.write_table(pa.Table.from_arrays([county, week, index, scale, value],
                                                    schema=schema))
    _test_delay()


def write_panel_parquet(file: PanelFile, path: Path) -> None:
    """``panel.parquet`` one target at a time (a row group each), never the whole panel as
    one frame (about 6 GB at 3,143 counties).

    Rows and columns are those of :func:`impactlink.link.panel_frame`: the panel columns,
    then every other column in order of first appearance, null where a target lacks it;
    integer columns of different widths are widened to the widest (as ``pandas.concat``
    does). The column types come from a first pass over the targets.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    from impactlink.link import panel_frame

    def part(target: Any) -> pa.Table:
        return pa.Table.from_pandas(panel_frame([target]), preserve_index=False)

    schema = pa.unify_schemas([part(t).schema for t in file.targets],
                              promote_options="permissive").remove_metadata()
    with pq.ParquetWriter(path, schema, compression="snappy") as writer:
        for target in file.targets:
            table = part(target)
            cols = [table.column(f.name).cast(f.type) if f.name in table.column_names
                    else pa.nulls(table.num_rows, f.type) for f in schema]
            writer.write_table(pa.Table.from_arrays(cols, schema=schema))
    _test_delay()


def _test_delay() -> None:
    delay = os.environ.get(_SLOW_WRITE_ENV)
    if delay:  # lets a test interrupt a run while it writes
        time.sleep(float(delay))


def write_layers(folder: Path, run: Run) -> None:
    """The ``counties`` and ``best_candidate`` layers of counties.gpkg for GIS users.

    The report stage adds the ``audit`` and ``outlook`` layers from their tables, so a run
    folder rebuilt with ``impactlink report`` gets them too.
    """
    if run.inputs is None:
        return
    counties = run.inputs.bundle.tables["counties"]
    path = folder / "counties.gpkg"
    if path.exists():
        path.unlink()
    base = counties[[c for c in (COUNTY, "county_name", "region", "geometry") if c in counties]]
    base.to_file(path, layer="counties", driver="GPKG")
    local = run.rank.local if run.rank is not None else None
    if local is not None and len(local):
        # one row per county and target: best candidate, its skill and the events it rests on
        unit = local[local["level"] == "unit"].rename(columns={"unit": COUNTY})
        layer = base.merge(unit.drop(columns=["level"]), on=COUNTY, how="inner")
        if len(layer):
            layer.to_file(path, layer="best_candidate", driver="GPKG")


def write_manifest(folder: Path, run: Run, timings: dict[str, float], warnings: list[str]) -> Path:
    """``manifest.json``: inputs and checksums, row counts, settings, versions, timings.

    The manifest is the only file with a wall-clock time (``created_utc``) and seconds per
    stage; no table carries them, so tables stay byte-identical between runs.
    """
    project = run.project
    inputs = []
    if run.inputs is not None:
        bundle = run.inputs.bundle
        for row in bundle.counts.to_dict("records"):
            row["sha256"] = bundle.checksums.get(str(row.get("file", "")), "")
            inputs.append({k: _jsonable(v) for k, v in row.items()})
    recon = run.link.reconciliation if run.link is not None else None
    targets = run.link.targets if run.link is not None else ()
    cube = run.indices.cube if run.indices is not None else None
    manifest = {
        "impactlink_version": __version__,
        "created_utc": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "project": project.settings_dict(),
        # the committed fictional scenario: the report shows a banner that the data are invented
        "scenario": (Path(project.data_dir).resolve()
                     == (Path(__file__).resolve().parents[2] / "scenario_data").resolve()),
        "seed": project.seed,
        "inputs": inputs,
        "rows_total": {
            "read": int(sum(r.get("rows_read", 0) for r in inputs)),
            "used": int(sum(r.get("rows_used", 0) for r in inputs)),
            "rejected": int(sum(r.get("rows_rejected", 0) for r in inputs)),
        },
        "impacts": [] if recon is None or recon.empty else [
            {k: _jsonable(v) for k, v in r.items()} for r in recon.to_dict("records")
        ],
        "targets": [
            {"target": t.name, "role": t.role, "grain": t.grain, "rows": len(t.frame),
             "events": t.events,
             # onset / escalation targets: the explicit risk set (county-weeks at risk)
             "rows_at_risk": _jsonable(t.provenance.get("at_risk")),
             "flags": _jsonable(t.provenance.get("flags", [])),
             # yields: the trend used and, with trend = "auto", every candidate's held-out error
             **{k: _jsonable(t.provenance[k]) for k in ("trend", "trend_errors", "season_end_weeks")
                if k in t.provenance},
             **({"season_end_weeks": list(t.rule.season_end_weeks)}
                if getattr(t.rule, "season_end_weeks", ()) else {})}
            for t in targets
        ],
        # text keys respelt to match (case, whitespace, Unicode form), per table and column
        "key_normalisation": _jsonable(run.link.key_normalisation) if run.link is not None
        else {},
        "indices": {str(k): _jsonable(v) for k, v in getattr(cube, "provenance", {}).items()},
        "versions": _versions(),
        "timings_s": timings,
        "warnings": list(warnings),
    }
    path = folder / "manifest.json"
    path.write_text(json.dumps(manifest, indent=2, default=str), encoding="utf-8")
    return path


def _versions() -> dict[str, str]:
    import importlib.metadata as md

    out = {"python": platform.python_version()}
    for pkg in ("numpy", "pandas", "scipy", "scikit-learn", "statsmodels", "geopandas",
                "shapely", "pyarrow", "matplotlib"):
        try:
            out[pkg] = md.version(pkg)
        except md.PackageNotFoundError:
            pass
    return out


def _jsonable(v: Any) -> Any:
    if v is None or v is pd.NaT or v is pd.NA:
        return None
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return None if np.isnan(v) else float(v)
    if isinstance(v, (pd.Timestamp, datetime)):
        return v.strftime("%Y-%m-%d")
    if isinstance(v, dict):
        return {str(k): _jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, float) and np.isnan(v):
        return None
    return v
