"""End to end on the committed fictional scenario, with a reduced candidate grid.

These tests check the wiring (every stage runs, the run folder is complete, counts
reconcile, the same seed gives the same numbers); the science of each stage is tested
against outside references in its own test folder.
"""

import json
import tomllib
from pathlib import Path

import pandas as pd
import pytest

from impactlink.pipeline import init_project, run_project
from impactlink.project import project_from_dict

ROOT = Path(__file__).resolve().parents[1]
SCENARIO = ROOT / "scenario_data"


def _quick_project(out: Path):
    raw = tomllib.loads((SCENARIO / "impactlink.toml").read_text())
    raw["project"]["output_dir"] = str(out)
    raw["indices"]["scales_weeks"] = [4, 13, 26]
    raw["link"]["lags_weeks"] = [0, 4]
    raw["skill"].update(n_boot=20, challenger=False, pairs=False)
    for lad in raw["audit"]:
        lad["n_boot"] = 20
    raw["impacts"] = {k: v for k, v in raw["impacts"].items() if k in ("restrictions", "maize_shortfall")}
    raw["impacts"]["restrictions"]["horizon_weeks"] = [13]
    return project_from_dict(raw, base=SCENARIO, path=SCENARIO / "impactlink.toml")


@pytest.fixture(scope="module")
def quick_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("run")
    project = _quick_project(out)
    result = run_project(project, until="run", out=out, quiet=True)
    return out, result


def test_run_folder_is_complete(quick_run):
    out, result = quick_run
    for name in ("manifest.json", "rejected_rows.csv", "indices.parquet", "audit.csv",
                 "panel.parquet", "reconciliation.csv", "skill.csv", "skill_summary.csv",
                 "curves.csv", "outlook.csv", "triggers.csv", "contrast.csv", "counties.gpkg",
                 "report.html"):
        assert (out / name).exists(), name
    assert set(result.timings_s) >= {"inputs", "indices", "link", "rank", "report"}


def test_manifest_counts_reconcile(quick_run):
    out, _ = quick_run
    m = json.loads((out / "manifest.json").read_text())
    assert m["inputs"], "no inputs listed"
    for row in m["inputs"]:
        assert row["rows_read"] == row["rows_used"] + row["rows_rejected"], row
        assert len(row["sha256"]) == 64
    rejected = pd.read_csv(out / "rejected_rows.csv")
    for row in m["impacts"]:
        assert row["records"] == row["used"] + row["rejected"] + row["outside_coverage"], row
    # every input row rejected by the reader is listed once per row in rejected_rows.csv
    inputs_rej = rejected[rejected["table"].isin([r["table"] for r in m["inputs"]])]
    assert inputs_rej.drop_duplicates(["table", "file", "row"]).shape[0] >= m["rows_total"]["rejected"]
    assert m["seed"] == 20261202 and m["versions"]["numpy"]


def test_notice_panel_has_one_row_per_county_week_in_coverage(quick_run):
    out, _ = quick_run
    panel = pd.read_parquet(out / "panel.parquet")
    state = panel[panel["target"] == "restrictions:state"]
    assert not state.duplicated(["unit_id", "time"]).any()
    assert state["level"].between(0, 3).all()


def test_report_answers_and_cautions(quick_run):
    out, _ = quick_run
    html = (out / "report.html").read_text()
    assert "statistical association" in html and "not cause" in html
    assert "responsible authorities" in html
    summary = pd.read_csv(out / "skill_summary.csv")
    assert {"restrictions:state", "restrictions:onset:13w"} <= set(summary["target"])


def test_same_seed_same_numbers(quick_run, tmp_path):
    out, _ = quick_run
    project = _quick_project(tmp_path)
    run_project(project, until="rank", out=tmp_path, quiet=True)
    a = pd.read_csv(out / "skill.csv")
    b = pd.read_csv(tmp_path / "skill.csv")
    pd.testing.assert_frame_equal(a, b)


def test_init_writes_a_project_that_loads(tmp_path):
    for f in ("counties.geojson", "climate.parquet", "notices.csv", "traits.csv"):
        (tmp_path / f).write_bytes((SCENARIO / f).read_bytes())
    path = init_project(tmp_path)
    raw = tomllib.loads(path.read_text())
    assert raw["tables"] == {"climate": "climate.parquet", "counties": "counties.geojson",
                             "notices": "notices.csv", "traits": "traits.csv"}
    assert raw["impacts"]["restrictions"]["source"] == "notices"
    with pytest.raises(FileExistsError, match="--force"):
        init_project(tmp_path)
