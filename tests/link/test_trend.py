"""The yield trend chosen by leave-one-year-out error (impactlink.link.trend).

Checks: every candidate against statsmodels (OLS, RLM with HuberT / TukeyBiweight, lowess
with and without robustifying iterations) refitted year by year; planted-signal series; and
the real Iowa corn record (../shared/realdata, skipped if absent) against the data README's
standard analysis (a LOWESS trend of span 0.3 of the state mean; the years more than 20 % short).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from realdata_paths import realdata_dir
from statsmodels.nonparametric.smoothers_lowess import lowess

from impactlink.errors import LinkError
from impactlink.link.trend import (
    DEFAULT_TRENDS,
    TrendSpec,
    choose_trend,
    compare_trends,
    loo_trend_panel,
)

QS = "iowa/nass_quickstats_corn_grain_yield_county_1926-2023.csv"


def _reference(x, y, spec: TrendSpec) -> np.ndarray:
    """statsmodels refitted without each year in turn (the slow, obvious way)."""
    out = np.empty(len(x))
    xs = (x - x.mean()) / x.std()
    X = np.vander(xs, 2 if spec.family == "linear" else 3, increasing=True)
    norm = {"huber": sm.robust.norms.HuberT(), "bisquare": sm.robust.norms.TukeyBiweight()}
    for i in range(len(x)):
        keep = np.arange(len(x)) != i
        if spec.family == "lowess":
            out[i] = lowess(y[keep], x[keep], frac=spec.span, it=3 if spec.robust != "none"
                            else 0, xvals=x[i:i + 1])[0]
        elif spec.robust == "none":
            out[i] = X[i] @ sm.OLS(y[keep], X[keep]).fit().params
        else:
            fit = sm.RLM(y[keep], X[keep], M=norm[spec.robust]).fit(tol=1e-12, maxiter=500)
            out[i] = X[i] @ fit.params
    return out


@pytest.fixture(scope="module")
def panel():
    """Three planted county series, 1950-1989, with gaps (seeded)."""
    rng = np.random.default_rng(11)
    yrs = np.arange(1950, 1990)
    base = np.where(yrs < 1962, 50.0, 50.0 + 2.5 * (yrs - 1962))
    v = base[None, :] + rng.normal(0, 6, size=(3, yrs.size))
    v[0, 30] -= 45.0  # a drought year
    v[1, [3, 17, 18]] = np.nan  # withheld years
    return yrs, v


@pytest.mark.parametrize("spec", [*DEFAULT_TRENDS, TrendSpec("quadratic", "bisquare")],
                         ids=lambda s: s.name)
def test_candidates_match_statsmodels_refitted_year_by_year(panel, spec):
    yrs, v = panel
    got = loo_trend_panel(yrs, v, spec, min_years=5)
    for c in range(v.shape[0]):
        m = np.isfinite(v[c])
        ref = _reference(yrs[m].astype(float), v[c, m], spec)
        # same algorithm, different arithmetic order; robust fits stop at a tolerance
        np.testing.assert_allclose(got[c, m], ref, rtol=1e-7, atol=1e-7)
        assert np.isnan(got[c, ~m]).all()


def test_panel_equals_county_by_county(panel):
    yrs, v = panel
    for spec in (TrendSpec("quadratic", "huber"), TrendSpec("lowess", "bisquare", 0.5)):
        whole = loo_trend_panel(yrs, v, spec)
        alone = np.vstack([loo_trend_panel(yrs, v[c:c + 1], spec) for c in range(3)])
        np.testing.assert_array_equal(np.isnan(whole), np.isnan(alone))
        np.testing.assert_allclose(whole, alone, rtol=1e-12, atol=1e-10)


def test_too_few_years_give_no_prediction():
    yrs = np.arange(2000, 2012)
    v = np.full((2, 12), np.nan)
    v[0] = 100 + np.arange(12.0)
    v[1, :6] = 100.0  # only 6 years: 5 others, fewer than min_years=10
    p = loo_trend_panel(yrs, v, TrendSpec("linear"), min_years=10)
    np.testing.assert_allclose(p[0], v[0], atol=1e-9)  # a straight line predicts itself
    assert np.isnan(p[1]).all()


def test_flat_then_rising_record_is_not_given_a_straight_line():
    # planted: flat 40 bu/acre for 15 years, then +2 bu/acre per year (a hybrid-corn-like bend)
    yrs = np.arange(1926, 1986)
    rng = np.random.default_rng(3)
    y = np.where(yrs < 1941, 40.0, 40.0 + 2.0 * (yrs - 1941)) + rng.normal(0, 3, yrs.size)
    choice = compare_trends(yrs, y[None, :])
    assert choice.chosen.family != "linear"
    e = choice.errors.set_index("trend")
    assert e.loc["linear", "rmse"] > 1.2 * e["rmse"].min()
    assert e["rank"].tolist() != [] and sorted(e["rank"]) == list(range(1, len(e) + 1))
    assert e["chosen"].sum() == 1 and e.loc[choice.chosen.name, "rank"] == 1


def test_ties_go_to_the_earlier_candidate():
    yrs = np.arange(1960, 2000)
    y = 80 + 1.5 * (yrs - 1960) + np.tile([3.0, -3.0], 20)
    same = (TrendSpec("quadratic"), TrendSpec("linear"), TrendSpec("quadratic"))
    choice = compare_trends(yrs, y[None, :], candidates=same)
    assert choice.errors["rmse"].iloc[0] == choice.errors["rmse"].iloc[2]
    assert choice.errors["chosen"].tolist()[0] ^ choice.errors["chosen"].tolist()[1]
    assert not choice.errors["chosen"].iloc[2]


def test_robust_trend_resists_one_disaster_year():
    yrs = np.arange(1970, 2010)
    y = 100 + 2.0 * (yrs - 1970) + np.tile([2.0, -2.0], 20)
    y[25] = 20.0  # one crop failure
    ols = loo_trend_panel(yrs, y[None], TrendSpec("linear"))[0]
    hub = loo_trend_panel(yrs, y[None], TrendSpec("linear", "huber"))[0]
    line = 100 + 2.0 * (yrs - 1970)
    others = np.arange(40) != 25
    assert np.abs(hub - line)[others].max() < 0.5 * np.abs(ols - line)[others].max()


def test_choose_trend_per_crop_and_practice(panel):
    yrs, v = panel
    rows = [{"county_id": f"c{c}", "year": int(y), "crop": crop, "practice": "all",
             "yield": v[c, j] * k} for crop, k in (("corn grain", 1.0), ("soybeans", 0.3))
            for c in range(3) for j, y in enumerate(yrs) if np.isfinite(v[c, j])]
    frame = pd.DataFrame(rows).sample(frac=1.0, random_state=1)  # any row order
    cands = (TrendSpec("linear"), TrendSpec("quadratic"), TrendSpec("lowess", span=0.5))
    sel = choose_trend(frame, candidates=cands)
    assert sel.errors[["crop", "practice"]].drop_duplicates().values.tolist() == [
        ["corn grain", "all"], ["soybeans", "all"]]
    assert len(sel.errors) == 6 and set(sel.chosen) == {("corn grain", "all"),
                                                       ("soybeans", "all")}
    corn = frame[(frame["crop"] == "corn grain") & (frame["county_id"] == "c1")]
    spec = sel.chosen[("corn grain", "all")]
    ref = loo_trend_panel(yrs, v[1:2], spec)[0]
    got = sel.expected.loc[corn.index].to_numpy()
    np.testing.assert_allclose(got, ref[np.searchsorted(yrs, corn["year"])], rtol=1e-12)


def test_errors_name_what_is_wrong(panel):
    yrs, v = panel
    with pytest.raises(LinkError, match="distinct and ascending"):
        loo_trend_panel(yrs[::-1], v, TrendSpec("linear"))
    with pytest.raises(LinkError, match=r"values has shape \(3, 40\); expected \(counties, 39\)"):
        loo_trend_panel(yrs[:-1], v, TrendSpec("linear"))
    with pytest.raises(LinkError, match="LOWESS span must be in"):
        loo_trend_panel(yrs, v, TrendSpec("lowess"))
    with pytest.raises(LinkError, match="criterion must be 'rmse' or 'mae'"):
        compare_trends(yrs, v, criterion="r2")  # type: ignore[arg-type]
    with pytest.raises(LinkError, match="no candidate"):
        compare_trends(yrs, v, candidates=())
    with pytest.raises(LinkError, match="more than 10 years"):
        compare_trends(yrs[:5], v[:, :5])
    dup = pd.DataFrame({"county_id": ["a", "a"], "year": [2000, 2000], "yield": [1.0, 2.0],
                        "crop": "corn grain"})
    with pytest.raises(LinkError, match="two yields for one county and year"):
        choose_trend(dup)
    with pytest.raises(LinkError, match=r"no column\(s\) \['yield'\]"):
        choose_trend(dup.drop(columns="yield"))


def test_names():
    assert [s.name for s in DEFAULT_TRENDS] == [
        "linear", "linear_huber", "quadratic", "quadratic_huber", "lowess_0.3",
        "lowess_0.3_robust", "lowess_0.5", "lowess_0.5_robust", "lowess_0.7",
        "lowess_0.7_robust"]


# ------------------------------------------------------------------ real Iowa record
@pytest.fixture(scope="module")
def iowa():
    from impactlink.inputs.formats import read_quickstats

    return read_quickstats(realdata_dir() / QS).frame


def test_iowa_state_mean_trend_bends_and_finds_the_known_short_years(iowa):
    state = iowa.groupby("year")["yield"].mean()
    yrs, y = state.index.to_numpy(), state.to_numpy()
    choice = compare_trends(yrs, y[None, :])
    assert choice.chosen.family != "linear"
    e = choice.errors.set_index("trend")
    assert e.loc["linear", "rmse"] > e.loc[choice.chosen.name, "rmse"]
    dep = 100 * (y - choice.expected[0]) / choice.expected[0]
    short = set(yrs[dep < -20].tolist())
    assert {1936, 1947, 1988, 1983, 2012} <= short  # README's standard analysis
    assert 1993 in short  # the flood year: short, though no drought index should explain it
    # the README's own analysis (statsmodels LOWESS, span 0.3, fitted to all years)
    full = lowess(y, yrs.astype(float), frac=0.3, it=0, return_sorted=False)
    ref = set(yrs[100 * (y - full) / full < -20].tolist())
    assert {1936, 1947, 1993, 1988, 1983, 2012, 1974, 1951} <= ref
    assert ref <= short  # held out, a year cannot soften its own shortfall


def test_iowa_county_panel_trend_is_not_linear(iowa):
    cands = (TrendSpec("linear"), TrendSpec("quadratic"), TrendSpec("lowess", span=0.3),
             TrendSpec("lowess", span=0.5))
    sel = choose_trend(iowa, candidates=cands)
    chosen = sel.chosen[("corn grain", "all")]
    assert chosen.family != "linear"
    assert sel.errors["n"].iloc[0] == len(iowa)  # every county-year with a yield is predicted
    assert sel.expected.notna().all()


def test_docstring_examples_run():
    import doctest

    import impactlink.link.trend as mod

    res = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0 and res.failed == 0
