"""run_trigger_plan: the stage in one call on a small hand-made world."""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from impactlink.errors import TriggerError
from impactlink.link.target import Target
from impactlink.triggers import MEMO_COLUMNS, REPLAY_COLUMNS, SCORE_COLUMNS, run_trigger_plan
from impactlink.triggers.plan import PlanTuning
from tests.triggers.plan_cases import counties_of, cube_of, one_indicator_plan


def _world(n_years=8, seed=0):
    rng = np.random.default_rng(seed)
    n = 52 * n_years
    x = np.empty((n, 3))
    x[0] = 0.0
    for t in range(1, n):
        x[t] = 0.9 * x[t - 1] + np.sqrt(0.19) * rng.standard_normal(3)
    cube = cube_of(*x.T)
    level = (x <= -1.0).astype(int)
    rows = pd.DataFrame({
        "unit_id": np.tile(cube.county_ids, n), "county_id": np.tile(cube.county_ids, n),
        "region": np.tile(["a", "a", "b"], n), "time": np.repeat(cube.weeks, 3),
        "year": np.repeat(cube.weeks.year, 3), "season": 1, "level": level.ravel(),
    })
    target = Target(name="restrictions:state", impact="restrictions", kind="binary",
                    grain="county_week", role="state", frame=rows, levels=("no", "yes"))
    counties = counties_of(cube, ["a", "a", "b"])
    systems = pd.DataFrame({"system_id": ["W1"], "county_id": [cube.county_ids[0]]})
    plan = one_indicator_plan(
        dict(name="watch", enter=-0.8, exit=-0.5, enter_weeks=2, exit_weeks=3),
        dict(name="act", enter=-1.2, exit=-0.9, enter_weeks=2, exit_weeks=3, min_weeks=4),
        score={"impact": "restrictions", "window_weeks": 4, "exposure": "water_systems"},
    )
    plan = replace(plan, tuning=PlanTuning(stage="act", rule="x", candidates=(-1.4, -1.0),
                                           enter_weeks=(1, 2), n_boot=20,
                                           local_percentile=10.0))
    return plan, cube, [target], counties, systems


def test_run_writes_every_frame_and_only_exposed_counties_are_scored():
    plan, cube, targets, counties, systems = _world()
    res = run_trigger_plan(plan, cube=cube, targets=targets, counties=counties,
                           water_systems=systems, seed=5)
    frames = res.frames()
    assert set(frames) == {
        "trigger_plan_replay.csv", "trigger_plan_changes.csv", "trigger_plan_timeline.csv",
        "trigger_plan_scores.csv", "trigger_plan_leads.csv", "trigger_plan_decades.csv",
        "trigger_plan_memo.csv", "trigger_plan_tuning.csv", "trigger_plan_tuned.csv",
        "trigger_plan_tuning_folds.csv", "trigger_plan_uniform_local.csv"}
    assert tuple(frames["trigger_plan_replay.csv"].columns) == REPLAY_COLUMNS
    assert tuple(frames["trigger_plan_scores.csv"].columns) == SCORE_COLUMNS
    assert tuple(res.memo.columns) == MEMO_COLUMNS and len(res.memo) == 2
    assert res.settings["exposed_units"] == 1
    # region b holds only a county without water systems: nothing counted there
    t = res.scores.table
    b = t[(t["by"] == "region") & (t["group"] == "b")]
    assert (b[["hits", "false_alarms", "misses", "correct_negatives",
               "entries_without_impact"]].to_numpy() == 0).all()
    # tidy frames: scalar columns only
    for name, f in frames.items():
        for c in f.columns:
            assert not f[c].map(lambda v: isinstance(v, (list, tuple, dict, np.ndarray))).any(), (
                name, c)
    assert res.tuning.curve["chosen"].sum() == 1


def test_same_inputs_and_seed_give_identical_tables():
    def run():
        plan, cube, targets, counties, systems = _world()
        return run_trigger_plan(plan, cube=cube, targets=targets, counties=counties,
                                water_systems=systems, seed=5)

    a, b = run(), run()
    for name, frame in a.frames().items():
        assert frame.to_csv(index=False) == b.frames()[name].to_csv(index=False), name


def test_run_errors_name_the_plan_key():
    plan, cube, targets, counties, systems = _world(n_years=4)
    with pytest.raises(TriggerError, match="key score.exposure: 'water_systems' needs the"):
        run_trigger_plan(plan, cube=cube, targets=targets, counties=counties)
    with pytest.raises(TriggerError, match="key score.impact: 'restrictions' has no weekly"):
        run_trigger_plan(plan, cube=cube, targets=[], counties=counties, water_systems=systems)


def test_an_audit_ladder_replays_as_a_plan():
    # the project's [[audit]] ladder (one index, one threshold per stage) becomes a plan; with
    # one-week rules the stage is the number of thresholds at or above the value (by hand)
    from impactlink.project import AuditLadder
    from impactlink.triggers import plan_from_ladder, replay_plan

    ladder = AuditLadder(name="spi13_classes", index="spi", scale_weeks=13, kind="value",
                         thresholds=(-1.0, -1.5, -2.0), stages=("a", "b", "c"))
    plan = plan_from_ladder(ladder, entry_weeks=1, exit_weeks=1)
    x = np.array([0.0, -1.2, -1.7, -2.4, -1.6, -0.3])
    cube = cube_of(x)
    rep = replay_plan(plan, cube=cube, counties=counties_of(cube))
    # descent is one stage a week: -1.6 after -2.4 steps down to b, -0.3 steps down to a only
    assert rep.stage[:, 0].tolist() == [0, 1, 2, 3, 2, 1]
    with pytest.raises(TriggerError, match=r"\[\[audit\]\] bad: 1 problem"):
        plan_from_ladder(AuditLadder(name="bad", kind="percentile", thresholds=(-1.0,),
                                     stages=("a",)))
