"""Restriction notices -> county-week levels, onset and escalation risk sets.

Reference for week arithmetic: ISO 8601-1:2019 (weeks start on Monday; week 1 holds 4 January),
as implemented by Python's ``datetime.date.isocalendar``. Level painting and risk sets are also
checked against a plain per-week loop written from the definitions (cross-implementation).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from link_fixtures import lonlat_of, mondays

from impactlink.link import (
    LinkError,
    OpenNoticeWarning,
    build_targets,
    notice_levels,
    risk_set,
)
from impactlink.project import ImpactSpec


def _notices(**cols) -> pd.DataFrame:
    n = len(cols["notice_id"])
    base = {"issuer": ["Brambeth Waterworks"] * n, "county_id": ["a"] * n,
            "end_date": [None] * n}
    base.update(cols)
    df = pd.DataFrame(base)
    df["start_date"] = pd.to_datetime(df["start_date"])
    df["end_date"] = pd.to_datetime(df["end_date"])
    return df


def _state(res, county="a"):
    st = [t for t in res.targets if t.role == "state"][0].frame
    return st[st["county_id"] == county].set_index("time")


def _spec(**opts):
    return ImpactSpec("restrictions", "notices", opts)


# ----------------------------------------------------------------------------- worked example
def test_worked_example_one_notice_becomes_county_week_levels(counties):
    """The README/docstring example: Wed 2031-07-09 .. Tue 2031-07-22, level 2."""
    weeks = mondays("2031-06-30", 5)
    nt = _notices(notice_id=["n1"], start_date=["2031-07-09"], end_date=["2031-07-22"],
                  level=[2])
    res = build_targets(_spec(horizon_weeks=[2]), {"notices": nt}, counties=counties,
                        weeks=weeks, lags_weeks=(0,))
    st = _state(res)
    assert st["level"].tolist() == [0, 2, 2, 2, 0]
    onset = [t for t in res.targets if t.name == "restrictions:onset:2w"][0].frame
    a = onset[onset["county_id"] == "a"]
    # only the week of 06-30 is at risk with two covered weeks after it (5-week record)
    assert a["time"].tolist() == [pd.Timestamp("2031-06-30")]
    assert a["level"].tolist() == [1]
    # the other counties have no notice: at risk with no onset
    assert set(onset.loc[onset["county_id"] != "a", "level"]) == {0}
    assert res.reconciliation.loc[0, ["records", "used"]].tolist() == [1, 1]


def test_one_row_per_county_week_in_coverage(counties):
    weeks = mondays("2030-01-07", 30)
    nt = _notices(notice_id=["n1"], start_date=["2030-02-01"], end_date=["2030-03-01"],
                  level=[1])
    res = build_targets(_spec(), {"notices": nt}, counties=counties, weeks=weeks)
    st = res.targets[0].frame
    assert len(st) == 30 * 4
    assert not st.duplicated(["county_id", "time"]).any()


# ----------------------------------------------------------------------------- named cases
def test_still_open_notice_stays_in_force_to_end_of_record_and_is_flagged(counties):
    weeks = mondays("2030-01-07", 12)
    nt = _notices(notice_id=["n1"], start_date=["2030-02-05"], level=[1])
    with pytest.warns(OpenNoticeWarning, match="no end date"):
        res = build_targets(_spec(), {"notices": nt}, counties=counties, weeks=weeks)
    st = _state(res)
    first = pd.Timestamp("2030-02-03") + pd.Timedelta(days=1)  # Monday of the start week
    assert (st.loc[st.index >= first, "level"] == 1).all()
    assert (st.loc[st.index < first, "level"] == 0).all()
    assert st.loc[st.index >= first, "open_end"].all()
    assert not st.loc[st.index < first, "open_end"].any()
    assert any("no end date" in w for w in res.warnings)


def test_still_open_notice_with_cap(counties):
    weeks = mondays("2030-01-07", 12)
    nt = _notices(notice_id=["n1"], start_date=["2030-02-04"], level=[1])
    with pytest.warns(OpenNoticeWarning, match="at most 3 weeks"):
        res = build_targets(_spec(open_end_cap_weeks=3), {"notices": nt}, counties=counties,
                            weeks=weeks)
    st = _state(res)
    # Monday start, 3 weeks = 21 days in force: weeks of 02-04, 02-11, 02-18
    assert st.loc[st["level"] > 0].index.strftime("%m-%d").tolist() == ["02-04", "02-11", "02-18"]


def test_overlapping_notices_of_one_issuer_merge_to_the_highest_level(counties):
    weeks = mondays("2030-01-07", 10)
    nt = _notices(notice_id=["n1", "n2"], start_date=["2030-01-14", "2030-01-28"],
                  end_date=["2030-02-24", "2030-02-10"], level=[1, 3])
    res = build_targets(_spec(), {"notices": nt}, counties=counties, weeks=weeks)
    st = _state(res)
    assert st["level"].tolist() == [0, 1, 1, 3, 3, 1, 1, 0, 0, 0]
    assert st["notices_in_force"].tolist() == [0, 1, 1, 2, 2, 1, 1, 0, 0, 0]
    # one merged episode, not two
    assert res.targets[0].provenance["episodes"]["episodes"] == 1
    assert st["episode_weeks"].tolist() == [0, 1, 2, 3, 4, 5, 6, 0, 0, 0]


def test_open_notice_is_superseded_by_the_issuers_next_notice(counties):
    weeks = mondays("2030-01-07", 8)
    nt = _notices(notice_id=["n1", "n2", "n3"],
                  start_date=["2030-01-14", "2030-01-28", "2030-02-11"], level=[2, 1, 0])
    res = build_targets(_spec(), {"notices": nt}, counties=counties, weeks=weeks)
    st = _state(res)
    # n1 (stage 2) ends the day before n2 (stage 1) starts; n3 (level 0) lifts n2
    assert st["level"].tolist() == [0, 2, 2, 1, 1, 0, 0, 0]
    assert not st["open_end"].any()
    assert res.reconciliation.loc[0, "used"] == 3


def test_snapshot_list_rebuilds_episodes(counties):
    weeks = mondays("2030-01-07", 10)
    sn = pd.DataFrame({
        "date": pd.to_datetime(["2030-01-07", "2030-01-21", "2030-02-04", "2030-02-18"]),
        "issuer": "Ossith Water Authority", "county_id": "b", "stage": [0, 2, 1, 0]})
    res = build_targets(_spec(), {"notice_snapshots": sn}, counties=counties, weeks=weeks)
    st = _state(res, "b")
    assert st["level"].tolist() == [0, 0, 2, 2, 1, 1, 0, 0, 0, 0]
    rec = res.reconciliation.set_index("table").loc["notice_snapshots"]
    assert (rec["records"], rec["used"], rec["rejected"]) == (4, 4, 0)


def test_snapshot_gap_longer_than_hold_is_not_filled(counties):
    weeks = mondays("2030-01-07", 10)
    sn = pd.DataFrame({"date": pd.to_datetime(["2030-01-07", "2030-03-04"]),
                       "issuer": "Ossith", "county_id": "b", "stage": [1, 0]})
    with pytest.warns(UserWarning, match="gap"):
        res = build_targets(_spec(snapshot_hold_weeks=3), {"notice_snapshots": sn},
                            counties=counties, weeks=weeks)
    assert _state(res, "b")["level"].tolist() == [1, 1, 1, 0, 0, 0, 0, 0, 0, 0]


def test_coverage_gap_weeks_are_unknown_not_zero(counties):
    weeks = mondays("2030-01-07", 10)
    nt = _notices(notice_id=["n1", "n2"], start_date=["2030-01-14", "2030-02-18"],
                  end_date=["2030-01-20", "2030-02-20"], level=[1, 1], county_id=["a", "a"])
    cov = pd.DataFrame({"source": "notices", "county_id": ["a", "a", "b", "c", "d"],
                        "start_date": pd.to_datetime(["2030-01-07", "2030-02-25", "2030-01-07",
                                                      "2030-01-07", "2030-01-07"]),
                        "end_date": pd.to_datetime(["2030-02-03", "2030-03-17", "2030-03-17",
                                                    "2030-03-17", "2030-03-17"])})
    res = build_targets(_spec(horizon_weeks=[1]), {"notices": nt, "coverage": cov},
                        counties=counties, weeks=weeks, lags_weeks=(1,))
    st = _state(res)
    # weeks 02-04 .. 02-24 (positions 4-6) are outside coverage: absent, not level 0
    assert st.index.strftime("%m-%d").tolist() == ["01-07", "01-14", "01-21", "01-28", "02-25",
                                                   "03-04", "03-11"]
    assert st["level"].tolist() == [0, 1, 0, 0, 0, 0, 0]
    # the persistence just after the gap is unknown
    assert np.isnan(st.loc["2030-02-25", "persistence_1"])
    # time since the last episode is unknown across the gap
    assert np.isnan(st.loc["2030-02-25", "weeks_since_end"])
    assert st.loc["2030-01-28", "weeks_since_end"] == 2
    # n2 lies wholly in the gap: outside coverage, and the manifest counts add up
    rec = res.reconciliation.iloc[0]
    assert (rec["records"], rec["used"], rec["outside_coverage"], rec["rejected"]) == (2, 1, 1, 0)
    onset = [t for t in res.targets if t.name == "restrictions:onset:1w"][0].frame
    a = onset[onset["county_id"] == "a"]
    # no at-risk week whose next week is unknown (01-28 -> 02-04 is in the gap)
    assert pd.Timestamp("2030-01-28") not in set(a["time"])
    assert len(st) + 3 == 10


def test_non_drought_cause_is_rejected(counties):
    weeks = mondays("2030-01-07", 6)
    nt = _notices(notice_id=["n1", "n2", "n3"], start_date=["2030-01-08"] * 3,
                  end_date=["2030-01-20"] * 3, level=[1, 2, 3],
                  cause=["Drought", "main break", None])
    res = build_targets(_spec(), {"notices": nt}, counties=counties, weeks=weeks)
    assert _state(res)["level"].tolist() == [3, 3, 0, 0, 0, 0]
    assert res.rejected["reason"].str.contains("not drought").sum() == 1
    assert res.rejected["value"].tolist() == ["main break"]
    rec = res.reconciliation.iloc[0]
    assert rec["records"] == rec["used"] + rec["rejected"] + rec["outside_coverage"] == 3


def test_point_located_notices_join_to_counties(counties):
    weeks = mondays("2030-01-07", 4)
    lon_c, lat_c = lonlat_of(counties, "c")
    nt = pd.DataFrame({"notice_id": ["p1", "p2"], "issuer": ["Kestova Utilities", "far"],
                       "lon": [lon_c, 0.0], "lat": [lat_c, 0.0],
                       "start_date": pd.to_datetime(["2030-01-14", "2030-01-14"]),
                       "end_date": pd.to_datetime(["2030-01-20", "2030-01-20"]),
                       "level": [1, 1]})
    res = build_targets(_spec(), {"notices": nt}, counties=counties, weeks=weeks)
    assert _state(res, "c")["level"].tolist() == [0, 1, 0, 0]
    assert _state(res, "a")["level"].sum() == 0
    assert res.rejected["reason"].str.contains("cannot place").sum() == 1


def test_issuer_located_through_water_systems(counties):
    weeks = mondays("2030-01-07", 4)
    lon_d, lat_d = lonlat_of(counties, "d")
    nt = pd.DataFrame({"notice_id": ["w1"], "issuer": ["SYS-7"], "county_id": [None],
                       "start_date": pd.to_datetime(["2030-01-14"]),
                       "end_date": pd.to_datetime(["2030-01-20"]), "level": [2]})
    ws = pd.DataFrame({"system_id": ["SYS-7"], "lon": [lon_d], "lat": [lat_d]})
    res = build_targets(_spec(), {"notices": nt, "water_systems": ws}, counties=counties,
                        weeks=weeks)
    assert _state(res, "d")["level"].tolist() == [0, 2, 0, 0]


def test_unknown_county_and_bad_level_are_rejected_with_reasons(counties):
    weeks = mondays("2030-01-07", 4)
    nt = _notices(notice_id=["n1", "n2", "n3"], start_date=["2030-01-08"] * 3,
                  end_date=["2030-01-10", "2030-01-10", "2030-01-01"], level=[1, 9, 1],
                  county_id=["zz", "a", "a"])
    res = build_targets(_spec(ladder=["advisory", "mandatory"]), {"notices": nt},
                        counties=counties, weeks=weeks)
    reasons = sorted(res.rejected["reason"])
    assert any("not in the counties layer" in r for r in reasons)
    assert any("level outside 0..2" in r for r in reasons)
    assert any("end_date is before start_date" in r for r in reasons)
    assert res.targets[0].levels == ("none", "advisory", "mandatory")


def test_iso_53_week_year_season_and_year(counties):
    # ISO 2026 has 53 weeks (28 Dec 2026 is in week 53), from datetime.date.isocalendar
    assert dt.date(2026, 12, 28).isocalendar()[:2] == (2026, 53)
    weeks = mondays("2026-12-21", 3)
    nt = _notices(notice_id=["n1"], start_date=["2026-12-30"], end_date=["2026-12-31"],
                  level=[1])
    res = build_targets(_spec(episodic=False), {"notices": nt}, counties=counties, weeks=weeks)
    st = _state(res)
    assert st["year"].tolist() == [2026, 2026, 2027]
    assert st["season"].tolist() == [52, 52, 1]  # week 53 pooled with 52 (DESIGN.md)
    assert st["level"].tolist() == [0, 1, 0]
    assert len(res.targets) == 1


# ----------------------------------------------------------------------------- arrays
def _naive_levels(s, e, c, lv, nw, nc):
    out = np.zeros((nw, nc), dtype=int)
    for si, ei, ci, li in zip(s, e, c, lv):
        for w in range(max(si, 0), min(ei, nw - 1) + 1):
            out[w, ci] = max(out[w, ci], li)
    return out


def test_notice_levels_matches_a_per_week_loop():
    rng = np.random.default_rng(3)
    nw, nc, n = 60, 5, 80
    s = rng.integers(-5, nw, n)
    e = s + rng.integers(0, 12, n)
    c = rng.integers(0, nc, n)
    lv = rng.integers(1, 5, n)
    got = notice_levels(s, e, c, lv, nw=nw, nc=nc)
    np.testing.assert_array_equal(got, _naive_levels(s, e, c, lv, nw, nc))


def test_risk_set_episode_removes_county_until_it_ends():
    level = np.array([0, 0, 1, 1, 2, 0, 0, 0, 1, 0])[:, None]
    cov = np.ones_like(level, dtype=bool)
    at, ev = risk_set(level, cov, horizon_weeks=2, role="onset")
    # weeks 2-4 are in the episode: not at risk; the last 2 weeks lack a known outcome
    assert at[:, 0].tolist() == [True, True, False, False, False, True, True, True, False, False]
    assert ev[:, 0].tolist() == [True, True, False, False, False, False, True, True, False, False]


def test_risk_set_escalation_counts_only_from_a_lower_level():
    level = np.array([0, 1, 1, 2, 3, 3, 1, 0, 0])[:, None]
    cov = np.ones_like(level, dtype=bool)
    at, ev = risk_set(level, cov, horizon_weeks=1, role="escalation", top_level=3)
    # at risk only inside an episode below the top level (weeks 1, 2, 3, 6)
    assert np.flatnonzero(at[:, 0]).tolist() == [1, 2, 3, 6]
    # events: 1 -> 1 no, 1 -> 2 yes, 2 -> 3 yes, 1 -> 0 no
    assert np.flatnonzero(ev[:, 0]).tolist() == [2, 3]


def test_risk_set_onset_level_two():
    level = np.array([0, 1, 1, 2, 2, 1, 0])[:, None]
    at, ev = risk_set(level, np.ones_like(level, dtype=bool), horizon_weeks=1, onset_level=2)
    assert np.flatnonzero(at[:, 0]).tolist() == [0, 1, 2, 5]
    assert np.flatnonzero(ev[:, 0]).tolist() == [2]


def _naive_risk(level, cov, h, k):
    nw = len(level)
    at = np.zeros(nw, bool)
    ev = np.zeros(nw, bool)
    for t in range(nw):
        if t + h >= nw or not cov[t] or not all(cov[t + 1:t + h + 1]):
            continue
        if level[t] < k:
            at[t] = True
            ev[t] = any(level[u] >= k and level[u - 1] < k for u in range(t + 1, t + h + 1))
    return at, ev


def test_risk_set_matches_a_per_week_loop_with_gaps():
    rng = np.random.default_rng(11)
    level = np.repeat(rng.integers(0, 3, 40), 3)
    cov = rng.random(len(level)) > 0.1
    for h in (1, 4, 13):
        at, ev = risk_set(level[:, None], cov[:, None], horizon_weeks=h, onset_level=1)
        nat, nev = _naive_risk(level, cov, h, 1)
        np.testing.assert_array_equal(at[:, 0], nat)
        np.testing.assert_array_equal(ev[:, 0], nev)


# ----------------------------------------------------------------------------- scale
def test_scenario_sized_record_reconciles(counties):
    """~60 counties x 45 years of weeks with hundreds of notices: one row per county-week."""
    import geopandas as gpd
    from shapely.geometry import box

    ids = [f"{i:03d}" for i in range(60)]
    geo = gpd.GeoDataFrame({"county_id": ids, "region": [f"r{i % 5}" for i in range(60)]},
                           geometry=[box(i * 1e4, 1.8e6, (i + 1) * 1e4, 1.81e6) for i in range(60)],
                           crs="EPSG:5070")
    weeks = mondays("1981-01-05", 45 * 52)
    rng = np.random.default_rng(5)
    n = 400
    start = weeks[0] + pd.to_timedelta(rng.integers(0, len(weeks) * 7, n), unit="D")
    end = start + pd.to_timedelta(rng.integers(7, 200, n), unit="D")
    end = end.where(rng.random(n) > 0.02, pd.NaT)
    nt = pd.DataFrame({"notice_id": [f"n{i}" for i in range(n)],
                       "issuer": [f"u{i % 90}" for i in range(n)],
                       "county_id": rng.choice(ids, n), "start_date": start, "end_date": end,
                       "level": rng.integers(1, 4, n)})
    with pytest.warns(OpenNoticeWarning):
        res = build_targets(_spec(open_end_cap_weeks=26), {"notices": nt}, counties=geo,
                            weeks=weeks, lags_weeks=(0, 4, 13))
    st = res.targets[0].frame
    assert len(st) == len(weeks) * 60
    rec = res.reconciliation.iloc[0]
    assert rec["records"] == n == rec["used"] + rec["rejected"] + rec["outside_coverage"]
    onset = [t for t in res.targets if t.name == "restrictions:onset:13w"][0]
    assert onset.provenance["at_risk"] == len(onset.frame)
    assert (onset.frame["state"] == 0).all()


# ----------------------------------------------------------------------------- errors
def test_errors_name_the_problem(counties):
    weeks = mondays("2030-01-07", 4)
    with pytest.raises(LinkError, match="unknown option"):
        build_targets(_spec(horizon=[4]), {"notices": _notices(
            notice_id=["n"], start_date=["2030-01-08"], level=[1])}, counties=counties,
            weeks=weeks)
    with pytest.raises(LinkError, match="needs a notices or notice_snapshots table"):
        build_targets(_spec(), {}, counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="onset_level must be between 1 and 1"):
        build_targets(_spec(onset_level=3), {"notices": _notices(
            notice_id=["n"], start_date=["2030-01-08"], end_date=["2030-01-09"], level=[1])},
            counties=counties, weeks=weeks)
    with pytest.raises(LinkError, match="not a Monday"):
        build_targets(_spec(), {"notices": _notices(
            notice_id=["n"], start_date=["2030-01-08"], level=[1])}, counties=counties,
            weeks=pd.date_range("2030-01-08", periods=3, freq="7D"))
    with pytest.raises(LinkError, match="role must be"):
        risk_set(np.zeros((3, 1)), np.ones((3, 1), bool), horizon_weeks=1, role="start")
    with pytest.raises(LinkError, match="horizon_weeks must be >= 1"):
        risk_set(np.zeros((3, 1)), np.ones((3, 1), bool), horizon_weeks=0)
