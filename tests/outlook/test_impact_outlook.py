"""Outlook: latest index values through fitted models, per county and lag."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import special

from impactlink.indices.cube import IndexCube
from impactlink.link.target import FeatureRule, Target
from impactlink.models import fit_impact_model
from impactlink.outlook import OUTLOOK_COLUMNS, impact_outlook, plot_outlook_map

N_WEEKS = 400
COUNTIES = ("c0", "c1", "c2", "c3", "c4", "c5")
REGIONS = ("hill", "hill", "hill", "plain", "plain", "plain")


def _cube(seed=0):
    rng = np.random.default_rng(seed)
    weeks = pd.date_range("2001-01-01", periods=N_WEEKS, freq="7D")  # Mondays
    arr = rng.normal(size=(N_WEEKS, len(COUNTIES)))
    arr[-3:, 0] = np.nan  # county c0 missing its last three weeks
    return IndexCube(weeks=weeks, county_ids=COUNTIES, arrays={("spi", 8): arr})


def _weekly_target(cube, lag, *, seed=1, role="state", horizon=0, persistence=False):
    """County-week target driven by spi at t - lag (hand-aligned features)."""
    rng = np.random.default_rng(seed)
    arr = cube.get("spi", 8)
    t_pos = np.arange(lag, N_WEEKS)
    wp = np.repeat(t_pos, len(COUNTIES))
    cp = np.tile(np.arange(len(COUNTIES)), t_pos.size)
    x = arr[wp - lag, cp]
    y = (rng.uniform(size=x.size) < special.expit(-1.0 - 1.5 * np.nan_to_num(x))).astype(int)
    time = cube.weeks[wp]
    frame = pd.DataFrame({
        "unit_id": np.asarray(COUNTIES, dtype=object)[cp],
        "county_id": np.asarray(COUNTIES, dtype=object)[cp],
        "region": np.asarray(REGIONS, dtype=object)[cp],
        "time": time, "year": time.year,
        "season": np.minimum(time.isocalendar().week.to_numpy(), 52), "level": y,
    })
    if persistence:
        frame[f"persistence_{lag}"] = (rng.uniform(size=x.size) < 0.3).astype(float)
    t = Target(name=f"restrictions:{role}", impact="restrictions", kind="binary",
               grain="county_week", role=role, frame=frame, levels=("none", "restricted"),
               horizon_weeks=horizon)
    return t, x


def _model(cube, lag, **kw):
    t, x = _weekly_target(cube, lag, **kw)
    fit_kw = {}
    if kw.get("persistence"):
        fit_kw["covariates"] = (f"persistence_{lag}",)
    return fit_impact_model(t, x, meta={"index": "spi", "scale_weeks": 8, "lag_weeks": lag},
                            **fit_kw)


def test_latest_value_predicts_lag_weeks_ahead_by_hand():
    # The lag-L model maps spi at t - L to the impact at t, so the value of the last week W
    # gives the chance at W + L. Checked against model.predict on the cube value by hand.
    cube = _cube()
    models = {("state", 0): _model(cube, 0), ("state", 4): _model(cube, 4)}
    out = impact_outlook(models, cube)
    assert list(out.columns) == list(OUTLOOK_COLUMNS)
    W = cube.weeks[-1]
    assert set(out["as_of_week"]) == {W}
    for lag in (0, 4):
        rows = out[out["lag_weeks"] == lag].set_index("county_id")
        assert set(rows["valid_week"]) == {W + pd.Timedelta(weeks=lag)}
        m = models[("state", lag)]
        expect = m.predict(cube.get("spi", 8)[-1, 1:])[:, 0]
        np.testing.assert_allclose(rows.loc[list(COUNTIES[1:]), "prob"], expect, rtol=1e-12)
        lo, hi = m.predict_interval(cube.get("spi", 8)[-1, 1:])
        np.testing.assert_allclose(rows.loc[list(COUNTIES[1:]), "prob_lo"], lo[:, 0])
        assert np.isnan(rows.loc["c0", "prob"]) and "missing" in rows.loc["c0", "note"]


def test_explicit_as_of_week_uses_that_weeks_values():
    cube = _cube()
    m = _model(cube, 2)
    as_of = cube.weeks[100] + pd.Timedelta(days=3)  # a Thursday: its ISO week is used
    out = impact_outlook({"m": m}, cube, as_of_week=as_of)
    assert set(out["as_of_week"]) == {cube.weeks[100]}
    np.testing.assert_allclose(out["prob"], m.predict(cube.get("spi", 8)[100])[:, 0])


def test_onset_outlook_skips_counties_in_an_episode():
    cube = _cube()
    m = _model(cube, 4, role="onset", horizon=8)
    state = pd.DataFrame({"county_id": ["c1", "c2"], "level": [1, 0]})
    out = impact_outlook({"onset": m}, cube, state=state).set_index("county_id")
    assert set(out["horizon_weeks"]) == {8}
    assert np.isnan(out.loc["c1", "prob"]) and "already in an episode" in out.loc["c1", "note"]
    assert np.isfinite(out.loc["c2", "prob"]) and np.isfinite(out.loc["c3", "prob"])


def test_persistence_covariate_is_read_from_current_state():
    cube = _cube()
    m = _model(cube, 4, persistence=True)
    state = pd.DataFrame({"county_id": list(COUNTIES), "level": [0, 1, 0, 1, 0, 1]})
    out = impact_outlook({"p": m}, cube, state=state).set_index("county_id")
    v = cube.get("spi", 8)[-1, 1:]
    frame = pd.DataFrame({"persistence_4": [1.0, 0.0, 1.0, 0.0, 1.0]})
    np.testing.assert_allclose(out.loc[list(COUNTIES[1:]), "prob"],
                               m.predict(v, frame=frame)[:, 0])
    # without a state the covariate is missing and says so
    bare = impact_outlook({"p": m}, cube)
    assert bare["prob"].isna().all()
    assert bare["note"].str.contains("'persistence_4' not supplied").iloc[1]


def test_failed_model_gives_rows_with_reason():
    cube = _cube()
    t, x = _weekly_target(cube, 0)
    frame = t.frame.assign(level=0)
    empty = Target(name=t.name, impact=t.impact, kind="binary", grain="county_week",
                   role="state", frame=frame, levels=t.levels)
    m = fit_impact_model(empty, x, meta={"index": "spi", "scale_weeks": 8, "lag_weeks": 0})
    out = impact_outlook({"none": m}, cube)
    assert len(out) == len(COUNTIES) and out["prob"].isna().all()
    assert out["note"].str.startswith("model not fitted: no events").all()


def test_pooled_models_need_regions():
    cube = _cube()
    t, x = _weekly_target(cube, 0)
    m = fit_impact_model(t, x, pooling="county",
                         meta={"index": "spi", "scale_weeks": 8, "lag_weeks": 0})
    with pytest.raises(ValueError, match="pass counties="):
        impact_outlook({"m": m}, cube)
    counties = pd.DataFrame({"county_id": COUNTIES, "region": REGIONS})
    out = impact_outlook({"m": m}, cube, counties=counties).set_index("county_id")
    frame = counties.iloc[1:].reset_index(drop=True)
    np.testing.assert_allclose(out.loc[list(COUNTIES[1:]), "prob"],
                               m.predict(cube.get("spi", 8)[-1, 1:], frame=frame)[:, 0])


def test_annual_target_waits_for_its_season_week():
    # An annual target read at ISO week 30 of each year: before week 30 of the current year
    # is observed, the current year's value is unknown and no number is given.
    cube = _cube()
    years = np.repeat(np.arange(2001, 2008), len(COUNTIES))
    cid = np.tile(np.asarray(COUNTIES, dtype=object), 7)
    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"unit_id": cid, "county_id": cid, "region": "hill",
                          "time": pd.to_datetime([f"{y}-01-01" for y in years]),
                          "year": years, "season": 0,
                          "level": (rng.uniform(size=years.size) < 0.4).astype(int)})
    t = Target(name="maize", impact="maize", kind="binary", grain="county_year",
               role="annual", frame=frame, levels=("none", "shortfall"),
               rule=FeatureRule(reference="season_week", season_week=30))
    x = rng.normal(size=years.size)
    m = fit_impact_model(t, x, meta={"index": "spi", "scale_weeks": 8, "lag_weeks": 0})
    assert m.ok
    wk10 = cube.weeks[cube.weeks.year == 2007][9]
    early = impact_outlook({"a": m}, cube, as_of_week=wk10)
    assert early["prob"].isna().all() and early["note"].str.contains("not yet observed").all()
    late = impact_outlook({"a": m}, cube, as_of_week=cube.weeks[cube.weeks.year == 2007][40])
    assert late["prob"].iloc[1:].notna().all()


def test_outlook_error_messages():
    cube = _cube()
    t, x = _weekly_target(cube, 0)
    m = fit_impact_model(t, x)
    with pytest.raises(ValueError, match="meta lacks"):
        impact_outlook({"m": m}, cube)
    with pytest.raises(ValueError, match="ci must be strictly between 0 and 1"):
        impact_outlook({}, cube, ci=0)
    with pytest.raises(TypeError, match="mapping"):
        impact_outlook([m], cube)
    with pytest.raises(TypeError, match="expected ImpactModel"):
        impact_outlook({"m": "model"}, cube)


def test_outlook_map_has_one_panel_per_lag():
    gpd = pytest.importorskip("geopandas")
    from shapely.geometry import box

    cube = _cube()
    models = {0: _model(cube, 0), 4: _model(cube, 4)}
    out = impact_outlook(models, cube)
    geo = gpd.GeoDataFrame({"county_id": COUNTIES},
                           geometry=[box(i, 0, i + 1, 1) for i in range(len(COUNTIES))])
    fig = plot_outlook_map(out, geo, title="restrictions")
    assert sum(a.get_visible() for a in fig.axes if a.get_title()) == 2
    with pytest.raises(ValueError, match="filter it to one target"):
        plot_outlook_map(pd.concat([out, out]), geo)
    with pytest.raises(ValueError, match="outlook lacks column"):
        plot_outlook_map(out.drop(columns="prob"), geo)


def test_two_feature_model_forecasts_to_its_shortest_lag():
    # A model on spi at lags 2 and 6 can forecast only 2 weeks past the latest week.
    cube = _cube()
    t, x2 = _weekly_target(cube, 6)
    arr = cube.get("spi", 8)
    wp = cube.week_position(t.frame["time"])
    cp = cube.county_position(t.frame["county_id"])
    x_lag2 = arr[wp - 2, cp]
    m = fit_impact_model(t, {"spi_lag2": x_lag2, "spi_lag6": x2},
                         meta={"features": {"spi_lag2": ("spi", 8, 2),
                                            "spi_lag6": ("spi", 8, 6)}})
    out = impact_outlook({"pair": m}, cube).set_index("county_id")
    W = cube.weeks[-1]
    assert set(out["lag_weeks"]) == {2} and set(out["valid_week"]) == {W + pd.Timedelta(weeks=2)}
    expect = m.predict({"spi_lag2": arr[-1, 1:], "spi_lag6": arr[-5, 1:]})[:, 0]
    np.testing.assert_allclose(out.loc[list(COUNTIES[1:]), "prob"], expect, rtol=1e-12)
