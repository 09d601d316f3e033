"""Yield shortfall against a trend fitted without the target year.

Cross-implementation references: ``numpy.polyfit`` (linear and quadratic least squares) and
``statsmodels.nonparametric.lowess`` / ``statsmodels.RLM`` refitted on the same series with the
target year left out, one fit per year (the slow, obvious way).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from impactlink.link import LinkError, build_targets, loo_trend, shortfall_level
from impactlink.project import ImpactSpec


def _series(n=30, seed=0):
    rng = np.random.default_rng(seed)
    years = np.arange(1990, 1990 + n, dtype=float)
    y = 5.0 + 0.08 * (years - 1990) + rng.normal(0, 0.3, n)
    return years, y


@pytest.mark.parametrize("deg,trend", [(1, "linear"), (2, "quadratic")])
def test_loo_polynomial_matches_numpy_polyfit_without_the_year(deg, trend):
    x, y = _series()
    got = loo_trend(x, y, trend=trend)
    want = [np.polyval(np.polyfit(np.delete(x, i), np.delete(y, i), deg), x[i])
            for i in range(len(x))]
    # same least-squares problem; differences are rounding only (centred design)
    np.testing.assert_allclose(got, want, rtol=1e-9)


def test_loo_lowess_matches_statsmodels_refit_without_the_year():
    from statsmodels.nonparametric.smoothers_lowess import lowess

    x, y = _series(25, seed=1)
    got = loo_trend(x, y, trend="lowess", frac=0.5)
    for i in (0, 7, 24):
        keep = np.arange(len(x)) != i
        want = lowess(y[keep], x[keep], frac=0.5, it=0, xvals=x[i:i + 1])[0]
        assert got[i] == pytest.approx(want, rel=1e-12)
    # robust: statsmodels' robustifying iterations (it=3)
    got_r = loo_trend(x, y, trend="lowess", frac=0.5, robust=True)
    keep = np.arange(len(x)) != 7
    assert got_r[7] == pytest.approx(lowess(y[keep], x[keep], frac=0.5, it=3,
                                            xvals=x[7:8])[0], rel=1e-12)


def test_loo_lowess_reproduces_a_straight_line():
    """Local linear fits reproduce a line exactly (Cleveland 1979, sec. 2)."""
    x = np.arange(1990, 2015, dtype=float)
    y = 3.0 + 0.25 * (x - 1990)
    np.testing.assert_allclose(loo_trend(x, y, trend="lowess", frac=0.4), y, rtol=1e-10)


def test_robust_trend_matches_statsmodels_rlm_and_resists_an_outlier():
    import statsmodels.api as sm

    x, y = _series(20, seed=2)
    y[5] -= 3.0  # a disaster year
    got = loo_trend(x, y, trend="linear", robust=True)
    xc = x - x.mean()
    X = np.column_stack([np.ones_like(xc), xc])
    keep = np.arange(20) != 9
    fit = sm.RLM(y[keep], X[keep], M=sm.robust.norms.HuberT()).fit()
    assert got[9] == pytest.approx(X[9] @ fit.params, rel=1e-10)
    true9 = 5.0 + 0.08 * 9
    ols = loo_trend(x, y, trend="linear")
    assert abs(got[9] - true9) < abs(ols[9] - true9)


def test_own_year_cannot_bend_its_own_trend():
    x = np.arange(2000, 2020, dtype=float)
    y = 100 + 2 * (x - 2000)
    y[10] = 0.7 * y[10]  # a 30 % shortfall
    exp = loo_trend(x, y, trend="linear")
    # the other years are exactly linear, so the expected yield is the line itself
    assert exp[10] == pytest.approx(100 + 2 * 10, rel=1e-12)
    assert 100 * (y[10] - exp[10]) / exp[10] == pytest.approx(-30.0)


def test_shortfall_classes():
    assert shortfall_level(np.array([-50, 0, 9.99, 10, 20, 29.9, 30, 80]),
                           [10, 20, 30]).tolist() == [0, 0, 0, 1, 2, 2, 3, 3]


def _yields_table():
    rows = []
    for c, slope in (("a", 1.0), ("b", 2.0)):
        for yr in range(2000, 2016):
            v = 50 + slope * (yr - 2000)
            if c == "a" and yr == 2008:
                v *= 0.75  # planted 25 % shortfall
            rows.append((c, yr, "hay", "irrigated", v))
    df = pd.DataFrame(rows, columns=["county_id", "year", "crop", "practice", "yield"])
    extra = pd.DataFrame({"county_id": ["a", "b", "zz", "a"], "year": [2016, 2016, 2010, 2017],
                          "crop": ["hay", "hay", "hay", "oats"],
                          "practice": ["irrigated"] * 4, "yield": [np.nan, 82.0, 60.0, 3.0]})
    return pd.concat([df, extra], ignore_index=True)


def test_planted_shortfall_is_recovered_and_records_reconcile(counties):
    ys = _yields_table()
    spec = ImpactSpec("hay_loss", "yields", {"crop": "hay", "binary_pct": 20,
                                             "class_pct": [10, 20, 30]})
    res = build_targets(spec, {"yields": ys}, counties=counties,
                        weeks=pd.date_range("2000-01-03", periods=900, freq="7D"))
    names = [t.name for t in res.targets]
    assert names == ["hay_loss:hay:irrigated", "hay_loss:hay:irrigated:shortfall_20pct"]
    ordinal, binary = res.targets
    fr = ordinal.frame.set_index(["county_id", "year"])
    assert fr.loc[("a", 2008), "departure_pct"] == pytest.approx(-25.0)
    assert fr.loc[("a", 2008), "level"] == 2
    assert binary.frame["level"].sum() == 1
    assert ordinal.events == 1
    # no season_week given: the end of the window is searched over ISO weeks 22-40, every 2
    assert ordinal.rule.reference == "season_week" and ordinal.rule.season_week == 40
    assert ordinal.rule.season_end_weeks == tuple(range(22, 41, 2))
    # withheld value rejected (not imputed), unknown county rejected, oats not selected
    rec = res.reconciliation.iloc[0]
    assert (rec["records"], rec["used"], rec["rejected"], rec["outside_coverage"],
            rec["not_selected"]) == (35, 33, 2, 0, 1)
    assert set(res.rejected["reason"]) == {"yield missing or withheld (not imputed)",
                                           "county_id not in the counties layer"}
    assert ("a", 2016) not in fr.index


def test_years_outside_coverage_are_excluded(counties):
    ys = _yields_table()
    cov = pd.DataFrame({"source": ["yields"], "region": ["north"],
                        "start_date": pd.to_datetime(["2000-01-01"]),
                        "end_date": pd.to_datetime(["2012-12-31"])})
    res = build_targets(ImpactSpec("hay_loss", "yields", {"crop": "hay"}),
                        {"yields": ys, "coverage": cov}, counties=counties,
                        weeks=pd.date_range("2000-01-03", periods=10, freq="7D"))
    rec = res.reconciliation.iloc[0]
    assert rec["records"] == rec["used"] + rec["rejected"] + rec["outside_coverage"]
    # a: 2013-2015 (its 2016 value is missing: rejected first); b: 2013-2016
    assert rec["outside_coverage"] == 3 + 4
    assert res.targets[0].frame["year"].max() == 2012


def test_too_short_series_is_rejected(counties):
    ys = pd.DataFrame({"county_id": "a", "year": range(2000, 2006), "crop": "oats",
                       "yield": np.linspace(3, 4, 6)})
    res = build_targets(ImpactSpec("oats", "yields", {}), {"yields": ys}, counties=counties,
                        weeks=pd.date_range("2000-01-03", periods=10, freq="7D"))
    assert (res.rejected["reason"] == "fewer than 10 other years to fit a trend").sum() == 6
    assert res.reconciliation.iloc[0]["used"] == 0


def test_errors(counties):
    weeks = pd.date_range("2000-01-03", periods=10, freq="7D")
    ys = _yields_table()
    with pytest.raises(LinkError, match="trend must be auto, linear, quadratic or lowess"):
        build_targets(ImpactSpec("x", "yields", {"trend": "cubic"}), {"yields": ys},
                      counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="needs a yields table"):
        build_targets(ImpactSpec("x", "yields", {}), {}, counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match=r"the yields table: no row has \[impacts.x\] crop = 'rye'"):
        build_targets(ImpactSpec("x", "yields", {"crop": "rye"}), {"yields": ys},
                      counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="need at least 3 years"):
        loo_trend(np.array([1.0, 2.0]), np.array([1.0, 2.0]))


def _curved_yields(seed=3):
    """Planted-signal panel: four counties on a quadratic technology trend with noise."""
    rng = np.random.default_rng(seed)
    years = np.arange(1960, 2010)
    rows = [(c, int(yr), "corn grain", "all",
             40.0 + 0.02 * (yr - 1960) ** 2 + rng.normal(0, 2.0))
            for c in ("a", "b", "c", "d") for yr in years]
    return pd.DataFrame(rows, columns=["county_id", "year", "crop", "practice", "yield"])


def test_auto_trend_is_chosen_by_held_out_error_and_recorded(counties):
    from impactlink.link.yields import AUTO_TRENDS

    ys = _curved_yields()
    res = build_targets(ImpactSpec("corn", "yields", {"trend": "auto"}), {"yields": ys},
                        counties=counties, weeks=pd.date_range("1960-01-04", periods=10,
                                                               freq="7D"))
    ordinal = res.targets[0]
    prov = ordinal.provenance
    errs = pd.DataFrame(prov["trend_errors"])
    assert prov["trend_requested"] == "auto"
    assert errs["trend"].tolist() == [t.name for t in AUTO_TRENDS]  # every candidate reported
    assert errs["chosen"].sum() == 1 and errs.loc[errs["chosen"], "rank"].item() == 1
    assert prov["trend"] == errs.loc[errs["rank"] == 1, "trend"].item()
    # a bending trend is not left to the straight line
    assert prov["trend"] != "linear"
    assert errs.set_index("trend").loc["quadratic", "rmse"] < errs.set_index(
        "trend").loc["linear", "rmse"]
    # the expected yield is the chosen trend refitted without the year: for a quadratic,
    # numpy.polyfit on the other years (reference implementation); for LOWESS, statsmodels
    fr = ordinal.frame[ordinal.frame["county_id"] == "a"].sort_values("year")
    g = ys[ys["county_id"] == "a"]
    x, y = g["year"].to_numpy(float), g["yield"].to_numpy(float)
    if prov["trend"] == "quadratic":
        want = [np.polyval(np.polyfit(np.delete(x, i), np.delete(y, i), 2), x[i])
                for i in range(len(x))]
    else:
        from statsmodels.nonparametric.smoothers_lowess import lowess

        span = float(prov["trend"].split("_")[1])
        want = [lowess(np.delete(y, i), np.delete(x, i), frac=span, it=0,
                       xvals=x[i:i + 1])[0] for i in range(len(x))]
    np.testing.assert_allclose(fr["expected_yield"].to_numpy(), want, rtol=1e-6)


def test_explicit_trends_still_work_beside_auto(counties):
    ys = _curved_yields()
    weeks = pd.date_range("1960-01-04", periods=10, freq="7D")
    lin = build_targets(ImpactSpec("corn", "yields", {"trend": "linear"}), {"yields": ys},
                        counties=counties, weeks=weeks).targets[0]
    assert lin.provenance["trend"] == "linear" and "trend_errors" not in lin.provenance


def test_crop_keys_match_by_normal_form_and_are_not_counted_as_withheld():
    """"Maize ", "MAIZE" and full-width "Ｍａｉｚｅ" are the project's "maize" (NFKC, case,
    surrounding space: Unicode Standard Annex #15); nothing vanishes as withheld."""
    import warnings as _w

    import pandas as pd

    from impactlink.link.yields import link_yields
    from impactlink.project import ImpactSpec

    years = list(range(2000, 2012))
    spellings = ["maize", "Maize ", "MAIZE", "Ｍａｉｚｅ"]
    ys = pd.DataFrame({"county_id": "a", "year": years,
                       "crop": [spellings[i % 4] for i in range(len(years))],
                       "yield": [5.0 + 0.1 * i for i in range(len(years))]})
    counties = pd.DataFrame({"county_id": ["a"], "region": ["r"]})
    spec = ImpactSpec(name="m", source="yields", options={"crop": "maize", "trend": "linear",
                                                           "min_years": 5, "season_week": 31})
    with _w.catch_warnings(record=True) as caught:
        _w.simplefilter("always")
        res = link_yields(spec, {"yields": ys}, counties=counties,
                          weeks=pd.date_range("2000-01-03", periods=700, freq="7D"))
    assert len(res.targets[0].frame) == len(years)
    assert set(res.targets[0].frame["crop"]) == {"maize"}  # the project's spelling
    assert not any("withheld" in str(w.message) for w in caught)
    assert res.rejected.empty
