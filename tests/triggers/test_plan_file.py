"""Trigger-plan files: the shipped example parses; every bad key is reported at once."""

from pathlib import Path

import pytest

from impactlink.errors import TriggerError
from impactlink.triggers import load_trigger_plan, parse_trigger_plan

EXAMPLE = Path(__file__).resolve().parents[2] / "scenario_data" / "trigger_plan.toml"


def test_example_plan_has_three_stages_two_indicators_and_a_staged_exit():
    plan = load_trigger_plan(EXAMPLE)
    assert plan.stage_names == ("watch", "conserve", "curtail")
    assert {i.name for i in plan.indicators} == {"spei26", "spi13"}
    assert [s.combine for s in plan.stages] == ["any", "k_of_n", "weights"]
    # staged exit: every stage needs more weeks to leave than to enter, and a minimum stay
    assert all(s.exit_weeks > s.enter_weeks and s.min_weeks > 0 for s in plan.stages)
    conserve = plan.stages[1]
    assert (conserve.enter_weeks, conserve.enter_window, conserve.k) == (3, 4, 2)
    assert conserve.rules[0].overrides[0].months == (6, 7, 8)
    assert plan.stages[2].rules[0].overrides[0].region == "Tallgrit"
    assert plan.scoring.exposure == "water_systems" and plan.tuning.stage == "conserve"


def _raw():
    return {
        "plan": {"name": "p"},
        "indicators": {"x": {"index": "spi", "scale_weeks": 13}},
        "stage": [{"name": "watch", "rule": [{"indicator": "x", "enter": -1.0, "exit": -0.5}]}],
    }


def test_every_problem_is_listed_in_one_line_naming_file_and_key():
    raw = _raw()
    raw["plan"]["unit"] = "state"
    raw["plan"]["colour"] = "blue"
    raw["stage"][0]["combine"] = "most"
    raw["stage"][0]["rule"][0].update(indicator="y", exit=-2.0)
    with pytest.raises(TriggerError) as err:
        parse_trigger_plan(raw, source="plans/vellmora.toml")
    msg = str(err.value)
    assert "\n" not in msg
    assert msg.startswith("plans/vellmora.toml: 5 problems in the trigger plan")
    for part in [
        "key plan.unit: 'state'; write one of county, region, counties",
        "key plan.colour: unknown key",
        'key stage[1] ("watch").combine: \'most\'; write one of all, any, k_of_n, weights',
        'key stage[1] ("watch").rule[1].indicator: \'y\' is not defined',
        "write an exit threshold at or above the entry threshold",
    ]:
        assert part in msg


@pytest.mark.parametrize(
    "edit, fragment",
    [
        (lambda r: r["stage"][0].update(combine="k_of_n"), "k: missing; write k = 2"),
        (lambda r: r["stage"][0].update(combine="k_of_n", k=3), "3 but the stage has 1 rules"),
        (lambda r: r["stage"][0].update(combine="weights"), "min_weight: missing"),
        (lambda r: r["stage"][0].update(enter_weeks=3, enter_window=2),
         "enter_window: 2 < enter_weeks 3"),
        (lambda r: r["stage"][0].update(exit_weeks=0), "exit_weeks: 0; write a whole number >= 1"),
        (lambda r: r["stage"][0]["rule"][0].update(kind="percentile", enter=-1.0),
         "write percentiles in 0-100"),
        (lambda r: r["stage"][0]["rule"][0].pop("enter"), "enter: missing"),
        (lambda r: r["indicators"]["x"].pop("scale_weeks"), "scale_weeks: missing"),
        (lambda r: r["plan"].update(unit="counties"), "plan.counties: missing"),
        (lambda r: r.update(score={"exposure": "wells"}), "score.exposure: 'wells'"),
        (lambda r: r.update(tune={"stage": "none", "rule": "x", "candidates": [1.0]}),
         "tune.stage: 'none'; write one of ['watch']"),
        (lambda r: r.update(tune={"stage": "watch", "rule": "x", "candidates": [],
                                  "cost_loss_ratio": 2.0}), "cost_loss_ratio: 2.0"),
        (lambda r: r["stage"][0]["rule"][0].update(override=[{"months": [13], "enter": -1.2}]),
         "months: [13]; write months as numbers 1-12"),
        (lambda r: r["stage"].append(dict(r["stage"][0])), "repeated names"),
        (lambda r: r.update(tune={"stage": "watch", "rule": "x", "candidates": [1.0],
                                  "enter_weeks": [0, 2]}), "tune.enter_weeks: [0, 2]"),
        (lambda r: r.update(tune={"stage": "watch", "rule": "x", "candidates": [1.0],
                                  "once_in_years": 0}), "tune.once_in_years: 0.0"),
        (lambda r: r["plan"].update(unit_name=3), "plan.unit_name: 3; write a string"),
    ],
)
def test_each_key_is_checked(edit, fragment):
    raw = _raw()
    edit(raw)
    with pytest.raises(TriggerError, match="test.toml: ") as err:
        parse_trigger_plan(raw, source="test.toml")
    assert fragment in str(err.value)


def test_file_errors(tmp_path):
    with pytest.raises(TriggerError, match="trigger-plan file not found"):
        load_trigger_plan(tmp_path / "absent.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[plan\nname = 1\n")
    with pytest.raises(TriggerError, match="bad.toml: not valid TOML"):
        load_trigger_plan(bad)
