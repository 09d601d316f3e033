"""Hand-made cubes and plans shared by the trigger-plan tests."""

import numpy as np
import pandas as pd

from impactlink.indices.cube import IndexCube
from impactlink.triggers import parse_trigger_plan


def cube_of(*series, weeks_start="2001-01-01", index="spi", scale=13, extra=None):
    """IndexCube whose ("spi", 13) columns are the given series (one per county)."""
    arr = np.column_stack([np.asarray(s, dtype=float) for s in series])
    weeks = pd.date_range(weeks_start, periods=arr.shape[0], freq="7D")
    ids = tuple(f"9{i:04d}" for i in range(1, arr.shape[1] + 1))
    arrays = {(index, scale): arr}
    for key, a in (extra or {}).items():
        arrays[key] = np.asarray(a, dtype=float).reshape(arr.shape)
    return IndexCube(weeks=weeks, county_ids=ids, arrays=arrays)


def counties_of(cube, regions=None):
    regions = regions or ["north"] * len(cube.county_ids)
    return pd.DataFrame({"county_id": list(cube.county_ids), "region": regions})


def one_indicator_plan(*stages, unit="county", score=None, **plan_keys):
    """Plan over indicator "x" (spi at 13 weeks); each stage a dict of stage keys whose rule
    is given by ``enter``/``exit`` (value kind) unless ``rule`` is given."""
    raw_stages = []
    for i, st in enumerate(stages, start=1):
        st = dict(st)
        rule = st.pop("rule", None) or [{"indicator": "x", "enter": st.pop("enter"),
                                         "exit": st.pop("exit")}]
        raw_stages.append({"name": st.pop("name", f"s{i}"), "rule": rule, **st})
    raw = {"plan": {"name": "test", "unit": unit, **plan_keys},
           "indicators": {"x": {"index": "spi", "scale_weeks": 13}},
           "stage": raw_stages}
    if score:
        raw["score"] = score
    return parse_trigger_plan(raw, source="test.toml")
