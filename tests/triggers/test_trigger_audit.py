"""The trigger stage in one call: triggers.csv rows, timelines, impact grid from a Target."""

import numpy as np
import pandas as pd
import pytest

from impactlink.errors import TriggerError
from impactlink.link.target import Target
from impactlink.triggers import TRIGGER_COLUMNS, audit_triggers, impact_grid

WEEKS = pd.date_range("2010-01-04", periods=52 * 8, freq="7D")
IDS = ["c01", "c02", "c03", "c04"]


def _data(seed=0):
    rng = np.random.default_rng(seed)
    x = np.empty((len(WEEKS), 4))
    x[0] = rng.standard_normal(4)
    for t in range(1, len(WEEKS)):
        x[t] = 0.9 * x[t - 1] + np.sqrt(0.19) * rng.standard_normal(4)
    lev = (x <= np.array([-1.2, -1.2, -0.6, -0.6])).astype(float)
    lev[:20, 3] = np.nan
    return x, lev


def test_triggers_csv_rows():
    x, lev = _data()
    res = audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, regions=["n", "n", "s", "s"],
                         index="spi", scale_weeks=13)
    df = res.to_frame()
    assert tuple(df.columns) == TRIGGER_COLUMNS
    assert len(df) == 2 * (len(IDS) + 1)
    assert set(df["scope"]) == {"uniform", "local"}
    pooled = df[df["county_id"] == "all"].set_index("scope")
    uni = df[(df["scope"] == "uniform") & (df["county_id"] != "all")]
    assert uni["threshold"].nunique() == 1
    assert pooled.loc["uniform", "threshold"] == uni["threshold"].iloc[0]
    assert np.isnan(pooled.loc["local", "threshold"])
    # pooled events are the sum over counties
    assert pooled.loc["uniform", "events"] == uni["events"].sum()
    assert (df["index"] == "spi").all() and (df["scale_weeks"] == 13).all()
    assert df["cv_peirce_skill"].notna().all()


def test_timeline_frame():
    x, lev = _data()
    res = audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, timeline_counties=["c02", "c04"])
    tl = res.timeline_frame()
    assert set(tl["county_id"]) == {"c02", "c04"}
    assert len(tl) == 2 * 2 * len(WEEKS)
    one = tl[(tl["county_id"] == "c04") & (tl["scope"] == "uniform")]
    np.testing.assert_array_equal(one["index_value"], x[:, 3])
    assert one["impact_level"].isna().sum() == 20
    auto = audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, timeline_counties=2)
    assert auto.timeline["county_id"].nunique() == 2


def test_impact_grid_from_a_county_week_target():
    rows = pd.DataFrame(
        {
            "unit_id": ["c01", "c01", "c02"],
            "county_id": ["c01", "c01", "c02"],
            "region": ["n", "n", "n"],
            "time": pd.to_datetime(["2010-01-04", "2010-01-13", "2010-01-11"]),
            "year": [2010, 2010, 2010],
            "season": [1, 2, 2],
            "level": [0, 2, 1],
        }
    )
    target = Target(name="restrictions", impact="restrictions", kind="ordinal",
                    grain="county_week", role="state", frame=rows, levels=("none", "a", "b"))
    grid = impact_grid(target, WEEKS[:3], IDS[:3])
    expected = np.array([[0, np.nan, np.nan], [2, 1, np.nan], [np.nan, np.nan, np.nan]])
    np.testing.assert_array_equal(grid, expected)
    yearly = Target(name="maize", impact="maize", kind="binary", grain="county_year",
                    role="annual", frame=rows, levels=("no", "yes"))
    with pytest.raises(TriggerError, match="county_week target"):
        impact_grid(yearly, WEEKS, IDS)


def test_audit_errors():
    x, lev = _data()
    with pytest.raises(TriggerError, match="county_ids has 3 entries"):
        audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS[:3])
    with pytest.raises(TriggerError, match="local_scope"):
        audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, local_scope="state")
    with pytest.raises(TriggerError, match="not among the county_ids"):
        audit_triggers(x, lev, weeks=WEEKS, county_ids=IDS, timeline_counties=["zz"])
