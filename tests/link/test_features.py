"""Index values aligned to target rows: lags, ISO season weeks, windows, region weights.

Reference for ISO weeks: ISO 8601-1:2019, via Python's ``datetime.date.fromisocalendar``.
"""

from __future__ import annotations

import datetime as dt
import pickle

import numpy as np
import pandas as pd
import pytest
from link_fixtures import cube_from, mondays

from impactlink.indices.timegrid import iso_week_start as iso_week_monday
from impactlink.link import (
    FeatureRule,
    LinkError,
    Target,
    area_weights,
    feature_matrix,
    feature_values,
)
from impactlink.link.features import feature_reader


def _week_target(times, counties, *, rule=None, role="state") -> Target:
    fr = pd.DataFrame({"unit_id": counties, "county_id": counties, "region": "r",
                       "time": pd.to_datetime(times), "year": 0, "season": 0, "level": 0})
    return Target(name="t", impact="t", kind="binary", grain="county_week", role=role, frame=fr,
                  levels=("no", "yes"), rule=rule or FeatureRule())


def _grid_cube(weeks, county_ids):
    """Value = 1000 * week position + county position, so the read position is visible."""
    nw, nc = len(weeks), len(county_ids)
    return cube_from(weeks, county_ids, 1000 * np.arange(nw)[:, None] + np.arange(nc)[None, :])


def test_lag_alignment_across_a_53_week_year():
    # ISO 2020 has 53 weeks (datetime.date.isocalendar): week 53 is 2020-12-28
    assert dt.date.fromisocalendar(2020, 53, 1) == dt.date(2020, 12, 28)
    weeks = mondays("2020-11-30", 12)
    cube = _grid_cube(weeks, ("a", "b"))
    t = _week_target(["2021-01-04", "2020-12-28", "2021-01-06"], ["a", "b", "a"])
    # 2021-01-04 is position 5; 2020-12-28 position 4; a Wednesday maps to its Monday
    np.testing.assert_array_equal(feature_values(t, cube, "spi", 4, 0), [5000, 4001, 5000])
    # lag 1 from ISO 2021-W01 is ISO 2020-W53 (not 2020-W52)
    np.testing.assert_array_equal(feature_values(t, cube, "spi", 4, 1), [4000, 3001, 4000])
    assert weeks[4].isocalendar()[:2] == (2020, 53)
    # off the grid -> NaN
    assert np.isnan(feature_values(t, cube, "spi", 4, 6)).all()


def test_onset_rows_read_the_value_known_at_forecast_time():
    weeks = mondays("2030-01-07", 10)
    cube = _grid_cube(weeks, ("a",))
    t = _week_target(["2030-02-04"], ["a"], role="onset")
    # row week t (position 4); with lag 2 the value is from week t - 2, never from t + 1 .. t + L
    assert feature_values(t, cube, "spi", 4, 2).tolist() == [2000]


def test_many_targets_and_lags_each_read_their_own_cells():
    # the rows' cube cells are kept for the last few (target, lag) reads; targets of the same
    # size made one after another (freed arrays' addresses are reused) and more lags than are
    # kept must each read the cell given by the grid value 1000 * week + county
    weeks = mondays("2030-01-07", 30)
    cube = _grid_cube(weeks, ("a", "b", "c"))
    for start in range(6):
        t = _week_target([str(weeks[start + 10].date()), str(weeks[start + 12].date())],
                         ["b", "c"])
        for lag in (0, 3, 1, 5, 2, 4, 0, 3):
            want = [1000 * (start + 10 - lag) + 1, 1000 * (start + 12 - lag) + 2]
            assert feature_values(t, cube, "spi", 4, lag).tolist() == want
        del t


def test_iso_week_monday_matches_fromisocalendar():
    years = np.arange(2000, 2041)
    for w in (1, 26, 52):
        got = iso_week_monday(years, w)
        want = [pd.Timestamp(dt.date.fromisocalendar(int(y), w, 1)) for y in years]
        assert list(got) == want
    got53 = iso_week_monday(years, 53)
    for y, g in zip(years, got53):
        try:
            want = dt.date.fromisocalendar(int(y), 53, 1)
        except ValueError:  # the year has 52 weeks: fall back to week 52
            want = dt.date.fromisocalendar(int(y), 52, 1)
        assert g == pd.Timestamp(want)


def _year_target(years, counties, rule):
    fr = pd.DataFrame({"unit_id": counties, "county_id": counties, "region": "r",
                       "time": pd.to_datetime([f"{y}-01-01" for y in years]), "year": years,
                       "season": rule.season_week, "level": 0})
    return Target(name="y", impact="y", kind="ordinal", grain="county_year", role="annual",
                  frame=fr, levels=("n", "s"), rule=rule)


def test_season_week_window_min_and_mean():
    weeks = mondays("2019-12-30", 60)  # 2019-12-30 is ISO 2020-W01
    vals = np.sin(np.arange(60) / 3.0)[:, None] * np.array([[1.0, 2.0]])
    cube = cube_from(weeks, ("a", "b"), vals)
    rule = FeatureRule(reference="season_week", season_week=10, window_weeks=4, window_stat="min")
    t = _year_target([2020, 2020], ["a", "b"], rule)
    # ISO 2020-W10 is position 9; lag 2 -> window positions 4..7
    want = vals[4:8].min(axis=0)
    np.testing.assert_allclose(feature_values(t, cube, "spi", 4, 2), want)
    rule_m = FeatureRule(reference="season_week", season_week=10, window_weeks=4,
                         window_stat="mean")
    np.testing.assert_allclose(feature_values(_year_target([2020], ["b"], rule_m), cube, "spi", 4,
                                              0), [vals[6:10, 1].mean()])


def test_window_with_a_missing_week_is_missing():
    weeks = mondays("2019-12-30", 20)
    vals = np.ones((20, 1))
    vals[7] = np.nan
    cube = cube_from(weeks, ("a",), vals)
    rule = FeatureRule(reference="season_week", season_week=10, window_weeks=3, window_stat="mean")
    t = _year_target([2020, 2020], ["a", "a"], rule)
    out = feature_values(t, cube, "spi", 4, 0)
    assert np.isnan(out[0])
    assert feature_values(t, cube, "spi", 4, 3)[0] == 1.0


def test_region_month_weighted_mean(counties):
    """Area weights 0.25 / 0.75 (north) and 0.5 / 0.5 (south) from the hand-built squares."""
    weeks = mondays("2029-12-31", 10)
    ids = ("a", "b", "c", "d")
    vals = np.tile(np.array([[4.0, 8.0, 1.0, 3.0]]), (10, 1))
    vals[:, 0] += np.arange(10)  # county a changes week by week
    cube = cube_from(weeks, ids, vals)
    w = area_weights(counties)
    rule = FeatureRule(reference="month_end", weights=w)
    fr = pd.DataFrame({"unit_id": ["north", "south"], "region": ["north", "south"],
                       "time": pd.to_datetime(["2030-01-01", "2030-02-01"]), "year": 2030,
                       "season": [1, 2], "level": 0})
    t = Target(name="p", impact="p", kind="ordinal", grain="region_month", role="monthly",
               frame=fr, levels=("n", "s"), rule=rule)
    # last week starting in January 2030: Monday 2030-01-28, position 4
    got = feature_values(t, cube, "spi", 4, 0)
    np.testing.assert_allclose(got, [0.25 * (4 + 4) + 0.75 * 8, 0.5 * 1 + 0.5 * 3])
    # lag 1: position 3 for north
    np.testing.assert_allclose(feature_values(t, cube, "spi", 4, 1)[0], 0.25 * 7 + 0.75 * 8)
    # a county without a value is left out and the weights renormalised; under half -> NaN
    vals2 = vals.copy()
    vals2[:, 0] = np.nan
    cube2 = cube_from(weeks, ids, vals2)
    assert feature_values(t, cube2, "spi", 4, 0)[0] == 8.0
    vals2[:, 1] = np.nan
    vals2[:, 0] = 1.0
    assert np.isnan(feature_values(t, cube_from(weeks, ids, vals2), "spi", 4, 0)[0])


def test_feature_matrix_stacks_candidates():
    weeks = mondays("2030-01-07", 10)
    cube = _grid_cube(weeks, ("a",))
    t = _week_target(["2030-02-04"], ["a"])
    m = feature_matrix(t, cube, [("spi", 4, 0), ("spi", 4, 3)])
    assert m.tolist() == [[4000, 1000]]


def test_unknown_county_is_missing():
    weeks = mondays("2030-01-07", 5)
    t = _week_target(["2030-01-14"], ["zz"])
    assert np.isnan(feature_values(t, _grid_cube(weeks, ("a",)), "spi", 4, 0)).all()


def test_errors():
    weeks = mondays("2030-01-07", 5)
    cube = _grid_cube(weeks, ("a",))
    t = _week_target(["2030-01-14"], ["a"])
    with pytest.raises(LinkError, match="lag_weeks must be >= 0"):
        feature_values(t, cube, "spi", 4, -1)
    with pytest.raises(KeyError, match="no index 'spei'"):
        feature_values(t, cube, "spei", 4, 0)
    with pytest.raises(LinkError, match="candidates is empty"):
        feature_matrix(t, cube, [])
    with pytest.raises(ValueError, match="ISO week must be 1..53"):
        iso_week_monday([2020], 54)
    bad = Target(name="r", impact="r", kind="binary", grain="region_month", role="monthly",
                 frame=t.frame, levels=("n", "y"), rule=FeatureRule(reference="month_end"))
    with pytest.raises(LinkError, match="no rule.weights"):
        feature_values(bad, cube, "spi", 4, 0)


def test_same_target_against_cubes_on_different_grids():
    """Cached row positions are per cube grid: a cube starting 2 weeks later shifts by 2."""
    t = _week_target(["2030-02-04", "2030-02-11"], ["a", "a"])
    c1 = _grid_cube(mondays("2030-01-07", 10), ("a",))
    c2 = _grid_cube(mondays("2030-01-21", 10), ("b", "a"))
    assert feature_values(t, c1, "spi", 4, 0).tolist() == [4000, 5000]
    assert feature_values(t, c2, "spi", 4, 0).tolist() == [2001, 3001]
    assert feature_values(t, c1, "spi", 4, 1).tolist() == [3000, 4000]


def _region_values_broadcast(target, cube, index, scale, lag):
    """The earlier form of the region read, kept as the reference: a (rows x window x
    counties) array, the weights of each row's region broadcast over it."""
    rule = target.rule
    arr = cube.get(index, scale)
    ref = (pd.to_datetime(target.frame["time"]) + pd.offsets.MonthEnd(0)).dt.normalize()
    ref_pos = np.array([int(np.flatnonzero(cube.weeks <= r)[-1]) for r in ref]) - lag
    w = max(rule.window_weeks, 1)
    win = ref_pos[:, None] - (w - 1) + np.arange(w)[None, :]
    ok = (win >= 0) & (win < arr.shape[0])
    vals = np.where(ok[:, :, None], arr[np.clip(win, 0, arr.shape[0] - 1)], np.nan)
    v = vals[:, -1] if w == 1 else getattr(np, rule.window_stat)(vals, axis=1)
    wts = rule.weights
    regions = sorted(wts["region"].unique())
    W = np.zeros((len(regions), len(cube.county_ids)))
    for reg, cid, wt in wts[["region", "county_id", "weight"]].itertuples(index=False):
        W[regions.index(reg), list(cube.county_ids).index(cid)] = wt
    out = np.full(len(v), np.nan)
    for i, reg in enumerate(target.frame["region"]):
        if reg not in regions:
            continue
        wr = W[regions.index(reg)]
        have = np.isfinite(v[i])
        den = (wr * have).sum()
        if den > 0 and den >= 0.5 * wr.sum():
            out[i] = (np.where(have, v[i], 0.0) * wr).sum() / den
    return out


@pytest.mark.parametrize("window,stat", [(1, "value"), (3, "min"), (4, "mean")])
def test_region_values_match_the_broadcast_form(window, stat):
    """Region sums as (windows x counties) @ (counties x regions) products give the values
    of the per-row broadcast over all counties, with missing weeks, gaps in the grid's
    start, a region of no county and lags; random weights and values, seed 7."""
    rng = np.random.default_rng(7)
    weeks = mondays("2029-11-05", 40)
    ids = tuple(f"c{i}" for i in range(9))
    vals = rng.normal(size=(40, 9))
    vals[rng.random((40, 9)) < 0.15] = np.nan
    vals[:, 8] = np.nan                                  # one county never has a value
    cube = cube_from(weeks, ids, vals)
    regions = ["r1", "r1", "r1", "r2", "r2", "r3", "r3", "r3", "r3"]
    raw = rng.uniform(0.1, 1.0, size=9)
    wts = pd.DataFrame({"region": regions, "county_id": ids, "weight": raw})
    wts["weight"] /= wts.groupby("region")["weight"].transform("sum")
    months = pd.date_range("2029-11-01", "2030-07-01", freq="MS")
    fr = pd.DataFrame({"time": np.repeat(months, 4),
                       "region": np.tile(["r1", "r2", "r3", "zz"], len(months))})
    fr["unit_id"] = fr["region"]
    fr["year"], fr["season"], fr["level"] = fr["time"].dt.year, fr["time"].dt.month, 0
    rule = FeatureRule(reference="month_end", weights=wts, window_weeks=window,
                       window_stat=stat)
    t = Target(name="p", impact="p", kind="ordinal", grain="region_month", role="monthly",
               frame=fr, levels=("n", "s"), rule=rule)
    for lag in (0, 2, 5):
        got = feature_values(t, cube, "spi", 4, lag)
        want = _region_values_broadcast(t, cube, "spi", 4, lag)
        assert np.isfinite(want).sum() > len(fr) // 3         # the case is not all missing
        np.testing.assert_array_equal(np.isnan(got), np.isnan(want))
        np.testing.assert_allclose(got, want, rtol=1e-13, atol=0)
        # the picklable reader the candidate grid sends to workers reads the same values
        reader = pickle.loads(pickle.dumps(feature_reader(t, cube)))
        np.testing.assert_array_equal(reader("spi", 4, lag), got)


def test_feature_reader_pickles_without_the_frame():
    # a week target: the reader holds the rows' week and county positions, not the frame
    weeks = mondays("2030-01-07", 30)
    ids = tuple(f"c{i}" for i in range(5))
    cube = _grid_cube(weeks, ids)
    times = np.repeat(pd.date_range("2030-02-04", periods=20, freq="7D"), 5)
    t = _week_target(times, list(ids) * 20)
    t.frame["note"] = "a long free-text field the workers never need " * 4
    rd = feature_reader(t, cube)
    assert len(pickle.dumps(rd.rows)) < len(pickle.dumps(t.frame)) / 4
    for lag in (0, 3, 9):
        np.testing.assert_array_equal(pickle.loads(pickle.dumps(rd))("spi", 4, lag),
                                      feature_values(t, cube, "spi", 4, lag))
    with pytest.raises(KeyError, match="no index 'spei' at scale 4"):
        rd("spei", 4, 0)


def test_defined_rows_from_spans_equal_reading_every_candidate():
    # spin-ups of different lengths per county and array, lags and windows: the rows the
    # spans call defined are exactly those where every candidate reads a value
    rng = np.random.default_rng(3)
    weeks = mondays("2029-01-01", 80)
    ids = tuple(f"c{i}" for i in range(6))
    arrays = {}
    for k, (ix, sc) in enumerate([("spi", 4), ("spi", 26), ("spei", 13)]):
        a = rng.normal(size=(80, 6))
        for c in range(6):
            a[: rng.integers(0, 30), c] = np.nan         # spin-up
            a[80 - rng.integers(0, 5 + k):, c] = np.nan  # record ends early
        arrays[(ix, sc)] = a
    arrays[("spei", 13)][:, 5] = np.nan                  # a county with no value at all
    from impactlink.indices.cube import IndexCube

    cube = IndexCube(weeks, ids, arrays)
    times = np.repeat(weeks[10:75], 7)
    counties = list(ids + ("zz",)) * 65                  # a county the cube lacks
    cands = [(ix, sc, lg) for (ix, sc) in arrays for lg in (0, 3, 8)]
    for rule in (FeatureRule(), FeatureRule(window_weeks=3, window_stat="min")):
        t = _week_target(times, counties, rule=rule)
        rd = feature_reader(t, cube)
        want = np.all([np.isfinite(rd(*c)) for c in cands], axis=0)
        assert 0 < want.sum() < want.size
        np.testing.assert_array_equal(rd.defined_rows(cands), want)
    gapped = dict(arrays)
    gapped[("spi", 4)] = arrays[("spi", 4)].copy()
    gapped[("spi", 4)][50, 2] = np.nan                   # a gap inside a record: no shortcut
    assert feature_reader(t, IndexCube(weeks, ids, gapped)).defined_rows(cands) is None
