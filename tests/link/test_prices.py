"""Real-price anomalies: deflation arithmetic, seasonal baseline, region predictors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from link_fixtures import cube_from, mondays

from impactlink.link import LinkError, build_targets, deflate, feature_values
from impactlink.project import ImpactSpec


def test_deflation_worked_example():
    """Worked example (common practice: real = nominal x I_base / I_t).

    Index 100 in 2030 (base) and 125 in 2035: a nominal price of 200 in 2035 is
    200 x 100 / 125 = 160 in 2030 money; rebasing to 2035 gives 200 x 125 / 125 = 200.
    """
    pi = pd.DataFrame({"date": pd.to_datetime(["2030-06-01", "2035-06-01"]),
                       "price_index": [100.0, 125.0]})
    real, factor = deflate(np.array([200.0]), pd.to_datetime(["2035-06-01"]), pi,
                           base_years=(2030, 2030))
    assert real.tolist() == [160.0] and factor.tolist() == [0.8]
    assert deflate(np.array([200.0]), pd.to_datetime(["2035-06-01"]), pi,
                   base_years=(2035, 2035))[0].tolist() == [200.0]
    # default base: mean index over the whole record (112.5)
    assert deflate(np.array([200.0]), pd.to_datetime(["2035-06-01"]), pi)[0][0] == \
        pytest.approx(200 * 112.5 / 125)
    # a month without an index value cannot be deflated
    assert np.isnan(deflate(np.array([1.0]), pd.to_datetime(["2031-01-01"]), pi)[0][0])
    with pytest.raises(LinkError, match="no positive values in base_years"):
        deflate(np.array([1.0]), pd.to_datetime(["2030-06-01"]), pi, base_years=(1990, 1991))


def _tables(n_years=8):
    months = pd.date_range("2030-01-01", periods=12 * n_years, freq="MS")
    # index rises 1 % a month; nominal hay price tracks it exactly (constant real price 100)
    idx = 100 * 1.01 ** np.arange(len(months))
    pi = pd.DataFrame({"date": months, "price_index": idx})
    price = 100 * idx / idx[:12].mean()
    rows = pd.DataFrame({"region": "north", "date": months + pd.Timedelta(days=14),
                         "commodity": "hay", "price": price})
    spike = (rows["date"].dt.year == 2036) & (rows["date"].dt.month == 7)
    rows.loc[spike, "price"] *= 1.3  # planted 30 % spike in July 2036
    extra = pd.DataFrame({"region": ["nowhere", "north"],
                          "date": pd.to_datetime(["2036-01-10", "2040-01-10"]),
                          "commodity": "hay", "price": [1.0, 1.0]})
    return {"prices": pd.concat([rows, extra], ignore_index=True), "price_index": pi}


def test_planted_spike_and_reconciliation(counties):
    tables = _tables()
    spec = ImpactSpec("hay_price", "prices", {"base_years": [2030, 2030], "baseline_years": 5,
                                              "binary_pct": 20})
    res = build_targets(spec, tables, counties=counties, weeks=mondays("2029-12-30", 10))
    ordinal, binary = res.targets
    fr = ordinal.frame.set_index("time")
    # real price constant at 100 in base money except the spike
    assert fr["real_price"].drop(pd.Timestamp("2036-07-01")).to_numpy() == pytest.approx(100.0)
    assert fr.loc["2036-07-01", "anomaly_pct"] == pytest.approx(30.0)
    assert fr.loc["2036-07-01", "level"] == 2  # edges 10, 25, 50
    assert ordinal.events == 1 and binary.events == 1
    # 2030-2032: fewer than 3 earlier years -> rejected (no seasonal baseline)
    assert fr.index.min() == pd.Timestamp("2033-01-01")
    rec = res.reconciliation.iloc[0]
    assert rec["records"] == 98
    assert rec["records"] == rec["used"] + rec["rejected"] + rec["outside_coverage"]
    reasons = res.rejected["reason"].value_counts()
    assert reasons["region has no counties in the counties layer"] == 1
    assert reasons["no price index for the month"] == 1
    assert rec["used"] == 12 * 5


def test_baseline_is_the_mean_of_the_preceding_years_same_month(counties):
    months = pd.date_range("2030-01-01", periods=12 * 5, freq="MS")
    pi = pd.DataFrame({"date": months, "price_index": 100.0})
    price = np.where(months.month == 3, 10.0 + (months.year - 2030), 10.0)
    tables = {"prices": pd.DataFrame({"region": "south", "date": months, "commodity": "hay",
                                      "price": price}), "price_index": pi}
    res = build_targets(ImpactSpec("p", "prices", {"baseline_years": 3, "min_baseline_years": 3}),
                        tables, counties=counties, weeks=mondays("2029-12-30", 4))
    fr = res.targets[0].frame.set_index("time")
    # March 2034: 14 against mean(11, 12, 13) = 12 -> +16.67 %
    assert fr.loc["2034-03-01", "baseline_price"] == pytest.approx(12.0)
    assert fr.loc["2034-03-01", "anomaly_pct"] == pytest.approx(100 * 2 / 12)


def test_region_predictor_uses_area_weights(counties):
    tables = _tables()
    res = build_targets(ImpactSpec("hp", "prices", {"window_weeks": 1}), tables,
                        counties=counties, weeks=mondays("2029-12-30", 520))
    t = res.targets[0]
    weeks = mondays("2029-12-30", 520)
    vals = np.tile(np.array([[1.0, 5.0, 0.0, 0.0]]), (520, 1))
    cube = cube_from(weeks, ("a", "b", "c", "d"), vals)
    got = feature_values(t, cube, "spi", 4, 0)
    np.testing.assert_allclose(got, 0.25 * 1 + 0.75 * 5)


def test_trait_weights(counties):
    tables = _tables()
    tables["traits"] = pd.DataFrame({"county_id": ["a", "b", "c", "d"],
                                     "hay_acres": [3.0, 1.0, 1.0, 1.0]})
    res = build_targets(ImpactSpec("hp", "prices", {"weight_trait": "hay_acres"}), tables,
                        counties=counties, weeks=mondays("2029-12-30", 4))
    w = res.targets[0].rule.weights.set_index("county_id")["weight"]
    assert w[["a", "b"]].tolist() == [0.75, 0.25]


def test_errors(counties):
    weeks = mondays("2029-12-30", 4)
    with pytest.raises(LinkError, match="needs the prices and price_index"):
        build_targets(ImpactSpec("hp", "prices", {}), {"prices": _tables()["prices"]},
                      counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="weight_trait 'acres' needs a traits table"):
        build_targets(ImpactSpec("hp", "prices", {"weight_trait": "acres"}), _tables(),
                      counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="unknown option"):
        build_targets(ImpactSpec("hp", "prices", {"base_year": 2030}), _tables(),
                      counties=counties, weeks=weeks)
