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
from scenario_runs import quick_scenario_project

from impactlink.pipeline import init_project, run_project

SCENARIO = Path(__file__).resolve().parents[1] / "scenario_data"


def test_run_folder_is_complete(scenario_run):
    out, result = scenario_run
    for name in ("manifest.json", "rejected_rows.csv", "indices.parquet", "audit.csv", "skill_local.csv",
                 "panel.parquet", "reconciliation.csv", "skill.csv", "skill_summary.csv",
                 "curves.csv", "outlook.csv", "triggers.csv", "contrast.csv", "counties.gpkg",
                 "report.html"):
        assert (out / name).exists(), name
    assert set(result.timings_s) >= {"inputs", "indices", "link", "rank", "report"}


def test_manifest_counts_reconcile(scenario_run):
    out, _ = scenario_run
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


def test_notice_panel_has_one_row_per_county_week_in_coverage(scenario_run):
    out, _ = scenario_run
    panel = pd.read_parquet(out / "panel.parquet")
    state = panel[panel["target"] == "restrictions:state"]
    assert not state.duplicated(["unit_id", "time"]).any()
    assert state["level"].between(0, 3).all()


def test_report_answers_and_cautions(scenario_run):
    out, _ = scenario_run
    html = (out / "report.html").read_text()
    assert "statistical association" in html and "not cause" in html
    assert "responsible authorities" in html
    summary = pd.read_csv(out / "skill_summary.csv")
    assert {"restrictions:state", "restrictions:onset:13w"} <= set(summary["target"])


def test_same_seed_same_numbers(scenario_run, tmp_path):
    out, _ = scenario_run
    project = quick_scenario_project(tmp_path)
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
    from impactlink.errors import ProjectError

    with pytest.raises(ProjectError, match="--force"):
        init_project(tmp_path)


def test_unknown_trait_names_in_models_section_are_a_clear_error(tmp_path):
    import dataclasses
    from types import SimpleNamespace

    from impactlink.errors import ContrastError
    from impactlink.pipeline._stage_parts import _model_options

    project = quick_scenario_project(tmp_path)
    project = dataclasses.replace(project, models=dataclasses.replace(project.models,
                                                                      traits=("aquifer_depth_m",)))
    traits = pd.DataFrame({"county_id": ["90001"], "soil_whc_mm": [120.0]})
    st = SimpleNamespace(bundle=SimpleNamespace(tables={"traits": traits}))
    target = SimpleNamespace(grain="county_week")
    with pytest.raises(ContrastError, match=r"\['aquifer_depth_m'\], which the traits table lacks"):
        _model_options(project, st, target)
    # region-month targets fall back to one model for all units
    assert _model_options(dataclasses.replace(project, models=dataclasses.replace(
        project.models, traits=())), st, SimpleNamespace(grain="region_month"))["pooling"] == "all"


def test_geopackage_has_per_county_layers(scenario_run):
    import pyogrio

    out, _ = scenario_run
    layers = {name for name, _geom in pyogrio.list_layers(out / "counties.gpkg")}
    assert {"counties", "audit", "best_candidate", "outlook"} <= layers
    import geopandas as gpd

    best = gpd.read_file(out / "counties.gpkg", layer="best_candidate")
    assert {"county_id", "target", "index", "scale_weeks", "lag_weeks", "events"} <= set(best.columns)
    assert best["county_id"].isin(gpd.read_file(out / "counties.gpkg", layer="counties")["county_id"]).all()


def test_monthly_climate_runs_through_linking(tmp_path):
    # monthly climate rows keep a monthly cadence in indices.parquet (scales in months) and
    # reach the weekly targets through the month-to-week expansion
    import shutil

    clim = pd.read_parquet(SCENARIO / "climate.parquet")
    clim["date"] = pd.to_datetime(clim["date"]).dt.to_period("M").dt.to_timestamp()
    monthly = clim.groupby(["county_id", "date"], as_index=False).agg(
        precip_mm=("precip_mm", "sum"), tmin_c=("tmin_c", "mean"), tmax_c=("tmax_c", "mean"))
    monthly.to_parquet(tmp_path / "climate.parquet", index=False)
    for f in ("counties.geojson", "notices.csv", "coverage.csv"):
        shutil.copy(SCENARIO / f, tmp_path / f)
    path = init_project(tmp_path)
    text = path.read_text().replace("scales_months = [1, 2, 3, 6, 9, 12, 24]", "scales_months = [3, 6]")
    path.write_text(text)
    result = run_project(path, until="link", out=tmp_path / "out", quiet=True)
    idx = pd.read_parquet(tmp_path / "out" / "indices.parquet")
    assert set(idx["scale_months"]) == {3, 6} and "month" in idx.columns
    cube = result.state.indices.cube
    assert ("spi", 13) in cube.keys and ("spei", 26) in cube.keys  # 3 and 6 months in weeks
    assert (pd.DatetimeIndex(cube.weeks).day_of_week == 0).all()
    panel = pd.read_parquet(tmp_path / "out" / "panel.parquet")
    assert (panel["target"] == "restrictions:state").any()


def test_report_command_takes_the_project_file_and_is_quiet(scenario_run, tmp_path, capsys):
    """`impactlink report PROJECT --quiet` rebuilds the report in the project's output folder."""
    import shutil

    from impactlink.cli import main

    out, _ = scenario_run
    run_copy = tmp_path / "results"
    shutil.copytree(out, run_copy)
    text = (SCENARIO / "impactlink.toml").read_text(encoding="utf-8")
    text = text.replace('data_dir = "."', f"data_dir = {json.dumps(str(SCENARIO))}", 1)
    text = text.replace('output_dir = "../reports/scenario"',
                        f"output_dir = {json.dumps(str(run_copy))}", 1)
    (tmp_path / "impactlink.toml").write_text(text, encoding="utf-8")
    shutil.copy(SCENARIO / "trigger_plan.toml", tmp_path)
    (run_copy / "report.html").unlink()
    capsys.readouterr()
    assert main(["report", str(tmp_path), "--quiet"]) == 0
    got = capsys.readouterr()
    assert got.err == ""
    assert got.out.strip() == f"report: {run_copy / 'report.html'}"
    assert "statistical association" in (run_copy / "report.html").read_text(encoding="utf-8")


def test_the_run_drops_the_climate_rows_once_the_indices_exist(scenario_run):
    """Only the indices stage reads the daily climate rows; the run state keeps their counts
    and checksums but not the rows (memory of a national run)."""
    _, result = scenario_run
    bundle = result.state.inputs.bundle
    assert "climate" not in bundle.tables and "counties" in bundle.tables
    assert "climate" in set(bundle.counts["table"]) and "climate" in bundle.files


def test_outlook_on_threads_equals_in_process(scenario_run):
    """``jobs`` > 1 refits the outlook's lags on threads; the table is the same."""
    from impactlink.pipeline import stages

    _, result = scenario_run
    st = result.state
    args = (st.project, st.inputs, st.indices, st.link, st.rank, lambda _m: None)
    one = stages.outlook(*args).table
    two = stages.outlook(*args, jobs=2).table
    assert len(one) > 0
    pd.testing.assert_frame_equal(one, two)


def test_the_daily_and_indicator_rows_leave_the_run_state_after_the_indices(scenario_run):
    """Only the indices stage reads the climate and indicators tables; their counts stay."""
    out, result = scenario_run
    bundle = result.state.inputs.bundle
    assert "climate" not in bundle.tables and "indicators" not in bundle.tables
    assert {"climate", "indicators"} <= set(bundle.counts["table"])
    assert any(k[0] == "soil_moisture" for k in result.state.indices.cube.keys)
    manifest = json.loads((out / "manifest.json").read_text())
    assert "key_normalisation" in manifest
