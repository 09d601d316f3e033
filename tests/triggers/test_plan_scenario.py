"""The shipped example plan on the fictional scenario (its own run up to the link stage)."""

from pathlib import Path

import numpy as np
import pytest

from impactlink.report.words_plan import memo_sentence
from impactlink.triggers import impact_grid, run_trigger_plan

PLAN = Path(__file__).resolve().parents[2] / "scenario_data" / "trigger_plan.toml"


@pytest.fixture(scope="module")
def scenario_link(tmp_path_factory):
    """(None, RunResult) of the scenario run up to the link stage (a few seconds)."""
    from scenario_runs import quick_scenario_project

    from impactlink.pipeline import run_project

    out = tmp_path_factory.mktemp("plan_scenario")
    return None, run_project(quick_scenario_project(out), until="link", out=out, quiet=True)


@pytest.fixture(scope="module")
def plan_result(scenario_link):
    _, result = scenario_link
    st = result.state
    tables = st.inputs.bundle.tables
    return run_trigger_plan(PLAN, cube=st.indices.cube, targets=st.link.targets,
                            counties=tables["counties"], water_systems=tables["water_systems"],
                            seed=1)


def test_counties_without_water_systems_bring_no_false_alarms(plan_result, scenario_link):
    _, result = scenario_link
    systems = result.state.inputs.bundle.tables["water_systems"]
    with_systems = set(systems["county_id"].astype(str))
    ids = plan_result.replay.unit_ids
    without = [c for c in ids if c not in with_systems]
    assert len(ids) == 60 and len(without) == 26  # the scenario's README counts
    assert plan_result.settings["exposed_units"] == 34
    leads = plan_result.scores.leads
    assert not set(leads["unit"]) & set(without)
    # every unit-week of the 26 is left out of the weekly table: the pooled counts equal the
    # counts over the 34 alone
    rep = plan_result.replay
    target = next(t for t in result.state.link.targets
                  if t.impact == "restrictions" and t.role == "state")
    lev = impact_grid(target, rep.weeks, ids)
    keep = np.array([c in with_systems for c in ids])
    on = rep.stage >= 1
    known = np.isfinite(lev) & keep
    fa = int((on & known & (lev < 1)).sum())
    row = plan_result.scores.table.query("by == 'all' and stage == 1").iloc[0]
    assert row.false_alarms == fa


def test_memo_sentences_for_every_stage(plan_result):
    sentences = [memo_sentence(r) for r in plan_result.memo.to_dict("records")]
    assert len(sentences) == 3
    assert sentences[1].startswith("Stage conserve would have been entered in ")
    assert "restriction onsets since 1995" in sentences[1]
