"""Output safety: whole-folder publishing, refusals before any write, identical bytes.

The rules checked here are the tool's own contract (reports/README.md): a run replaces its
output folder only when complete, never writes over folders it did not write, and gives
byte-identical tables for the same inputs and seed (common practice for reproducible runs).
"""

import hashlib
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from scenario_runs import SCENARIO, quick_scenario_project

from impactlink.cli import main
from impactlink.errors import ProjectError
from impactlink.pipeline import run_project
from impactlink.pipeline.publish import MARKER

ROOT = Path(__file__).resolve().parents[2]


def _reduced_toml(folder: Path, output_dir: str) -> Path:
    """The committed scenario's project file, reduced, with tables read from scenario_data."""
    text = (SCENARIO / "impactlink.toml").read_text()
    text = text.replace('data_dir = "."', f'data_dir = "{SCENARIO.as_posix()}"')
    text = text.replace('output_dir = "../reports/scenario"', f'output_dir = "{output_dir}"')
    # the audit ladders and the example trigger plan use SPI-13 and SPEI-26
    text = text.replace("scales_weeks = [4, 8, 13, 26, 39, 52, 104]", "scales_weeks = [4, 13, 26]")
    text = text.replace('plan = "trigger_plan.toml"',
                        f'plan = "{(SCENARIO / "trigger_plan.toml").as_posix()}"')
    assert str(SCENARIO) in text and output_dir in text and "[4, 13, 26]" in text
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "impactlink.toml"
    path.write_text(text)
    return path


def _listing(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_sigterm_during_a_parquet_write_keeps_previous_results(scenario_run, tmp_path):
    previous = tmp_path / "results"
    shutil.copytree(scenario_run[0], previous)
    assert (previous / MARKER).is_file()
    before = _listing(previous)
    project = _reduced_toml(tmp_path / "project", str(previous))
    env = {**os.environ, "PYTHONPATH": str(ROOT), "IMPACTLINK_TEST_SLOW_WRITE_S": "120"}
    proc = subprocess.Popen([sys.executable, "-m", "impactlink.cli", "run", str(project), "--quiet"],
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    staged = tmp_path / f".impactlink-tmp-results-{proc.pid}"
    deadline = time.monotonic() + 600  # a bound against a hang, not a timing check
    while not (staged / "indices.parquet").exists():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the run never reached the indices.parquet write"
        time.sleep(0.2)
    proc.send_signal(signal.SIGTERM)  # the writer is sleeping inside the Parquet write
    _out, err = proc.communicate(timeout=120)
    assert proc.returncode == 128 + signal.SIGTERM, err
    assert "interrupted" in err
    assert _listing(previous) == before  # previous results intact, nothing added
    assert sorted(p.name for p in tmp_path.iterdir()) == ["project", "results"]  # no temp folder


def test_output_folder_above_the_project_is_refused_before_writing(tmp_path, capsys):
    parent = tmp_path / "shared"
    (parent / "notes").mkdir(parents=True)
    (parent / "notes" / "minutes.txt").write_text("committee minutes\n")
    (parent / "budget.csv").write_text("item,amount\npumps,100\n")
    project = _reduced_toml(parent / "project", "..")
    before = _listing(parent)
    assert main(["run", str(project), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("impactlink: error:") and "input folder" in err
    assert _listing(parent) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["shared"]


def test_root_and_home_are_refused(tmp_path):
    for out in ("/", str(Path.home())):
        project = quick_scenario_project(Path(out))
        with pytest.raises(ProjectError, match="root or your home folder"):
            run_project(project, out=out, quiet=True)


def test_foreign_folder_needs_force_and_keeps_its_files(tmp_path):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "keep.txt").write_text("not written by impactlink\n")
    project = quick_scenario_project(out)
    with pytest.raises(ProjectError, match="--force"):
        run_project(project, until="indices", out=out, quiet=True)
    assert sorted(p.name for p in out.iterdir()) == ["keep.txt"]
    run_project(project, until="indices", out=out, quiet=True, force=True)
    names = {p.name for p in out.iterdir()}
    assert {"keep.txt", "indices.parquet", "manifest.json", MARKER} <= names
    assert not list(tmp_path.glob(".impactlink-*"))


def test_two_runs_give_identical_tables(scenario_run, tmp_path):
    # manifest.json (created_utc, timings_s), report.html (shows the manifest), figures/*.png
    # and counties.gpkg (SQLite page layout) are not tables and are not compared
    first = scenario_run[0]
    run_project(quick_scenario_project(tmp_path), until="run", out=tmp_path, quiet=True)
    a = {k: v for k, v in _listing(first).items() if k.endswith((".csv", ".parquet"))}
    b = {k: v for k, v in _listing(tmp_path).items() if k.endswith((".csv", ".parquet"))}
    assert "indices.parquet" in a and "skill.csv" in a
    assert a == b
