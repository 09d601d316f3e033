"""A scaled scenario world (300 counties): size, names, regions, every impact, planted driver.

The planted-driver check recomputes the driver from the generated climate with numpy only
(Hargreaves and Samani 1985 PET with FAO-56 extraterrestrial radiation, Allen et al. 1998
Eqs. 21-25; ISO 8601 Monday-Sunday weeks), not with the generator's code, and asks whether
detrended rainfed maize yields follow the documented 13-week water balance ending ISO week 34
(scenario_data/README.md, "Planted drivers") better than neighbouring scales and weeks.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest
import shapely
from shapely.geometry import shape

from impactlink.errors import ProjectError
from impactlink.scenario import SCENARIO_FILES, generate

N = 300
ID = {"county_id": str}


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    return generate(tmp_path_factory.mktemp("world300"), seed=11, counties=N)


@pytest.fixture(scope="module")
def counties(world) -> pd.DataFrame:
    fc = json.loads(world["counties.geojson"].read_text())
    rows = [{**f["properties"], "geometry": shape(f["geometry"])} for f in fc["features"]]
    return pd.DataFrame(rows)


def _csv(world, name: str) -> pd.DataFrame:
    return pd.read_csv(world[name], dtype=ID, keep_default_na=False, na_values=[""])


def test_every_file_and_unique_ids_and_names(world, counties):
    assert list(world) == list(SCENARIO_FILES)
    assert all(p.stat().st_size > 0 for p in world.values())
    assert len(counties) == N
    assert counties["county_id"].is_unique and counties["county_name"].is_unique
    # Five-character codes under the fictional state code 90 (no real state uses 90-99).
    assert all(re.fullmatch(r"9\d{4}", c) for c in counties["county_id"])
    assert not set(counties["region"]) & set(counties["county_name"])


def test_polygons_tile_one_state(counties):
    geoms = list(counties["geometry"])
    assert all(g.is_valid and g.geom_type == "Polygon" for g in geoms)
    union = shapely.union_all(geoms)
    assert sum(g.area for g in geoms) == pytest.approx(union.area, rel=1e-6)


def test_regions_scale_with_the_world(counties):
    sizes = counties.groupby("region").size()
    assert N / 20 <= len(sizes) <= N / 8  # about 12 counties per region
    assert 8 <= sizes.median() <= 16 and sizes.min() >= 4


def test_every_impact_kind_is_present(world, counties):
    yields = _csv(world, "yields.csv")
    assert set(zip(yields["crop"], yields["practice"])) == {
        ("maize", "rainfed"), ("maize", "irrigated"), ("sorghum", "rainfed"),
        ("sorghum", "irrigated")}
    assert yields["county_id"].nunique() == N
    prices = _csv(world, "prices.csv")
    assert set(prices["region"]) == set(counties["region"])
    notices = _csv(world, "notices.csv")
    assert {"drought", "main_break", "contamination"} <= set(notices["cause"])
    systems = _csv(world, "water_systems.csv")
    assert 150 <= len(systems) <= 250 and systems["system_id"].is_unique
    assert systems["system_name"].is_unique
    assert set(notices["issuer"]) <= set(systems["system_name"])
    snaps = _csv(world, "notice_snapshots.csv")
    assert snaps["issuer"].nunique() == 1 and set(snaps["stage"]) <= {0, 1, 2, 3}
    reports = _csv(world, "field_reports.csv")
    assert set(reports["sector"]) == {"crops", "livestock", "water_supply", "wildfire"}
    coverage = _csv(world, "coverage.csv")
    assert set(coverage["source"]) == {"yields", "prices", "notices", "notice_snapshots",
                                       "field_reports"}


def test_water_systems_lie_in_their_county(world, counties):
    systems = _csv(world, "water_systems.csv")
    geom = dict(zip(counties["county_id"], counties["geometry"]))
    polys = np.array([geom[c] for c in systems["county_id"]], dtype=object)
    assert shapely.covers(polys, shapely.points(systems["lon"], systems["lat"])).all()


# ------------------------------------------------------------------ planted driver
def _ra(doy: np.ndarray, lat_deg: np.ndarray) -> np.ndarray:
    """FAO-56 Eq. 21 extraterrestrial radiation (Eqs. 23-25), MJ m-2 day-1, (days, sites)."""
    phi = np.deg2rad(lat_deg)[None, :]
    dr = 1 + 0.033 * np.cos(2 * np.pi * doy[:, None] / 365)
    dec = 0.409 * np.sin(2 * np.pi * doy[:, None] / 365 - 1.39)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(dec), -1, 1))
    return 24 * 60 / np.pi * 0.082 * dr * (ws * np.sin(phi) * np.sin(dec)
                                           + np.cos(phi) * np.cos(dec) * np.sin(ws))


@pytest.fixture(scope="module")
def weekly_balance(world, counties):
    """Weekly (Monday-Sunday) sums of daily P - PET, (weeks, counties), and the Mondays."""
    clim = pd.read_parquet(world["climate.parquet"])
    ids = counties["county_id"].to_numpy()
    lat = np.array([g.centroid.y for g in counties["geometry"]])
    days = pd.DatetimeIndex(np.unique(clim["date"]))
    nd = days.size
    assert (clim["county_id"].to_numpy().reshape(len(ids), nd)[:, 0] == ids).all()
    tmin = clim["tmin_c"].to_numpy().reshape(len(ids), nd).T
    tmax = clim["tmax_c"].to_numpy().reshape(len(ids), nd).T
    precip = clim["precip_mm"].to_numpy().reshape(len(ids), nd).T
    pet = 0.0023 * 0.408 * _ra(days.day_of_year.to_numpy().astype(float), lat) * (
        (tmin + tmax) / 2 + 17.8) * np.sqrt(np.maximum(tmax - tmin, 0))
    wb = precip - np.maximum(pet, 0)
    first_monday = int(np.flatnonzero(days.day_of_week == 0)[0])
    n_w = (nd - first_monday) // 7
    weekly = wb[first_monday: first_monday + 7 * n_w].reshape(n_w, 7, -1).sum(axis=1)
    return days[first_monday: first_monday + 7 * n_w: 7], weekly, ids


def _wbz(weekly_balance, scale: int, end_week: int) -> pd.DataFrame:
    """z-score (1991-2020, per county) of the trailing ``scale``-week P - PET at ISO week
    ``end_week`` of each year, as a (year, county) frame."""
    mondays, weekly, ids = weekly_balance
    acc = pd.DataFrame(weekly).rolling(scale).sum().to_numpy()
    iso = mondays.isocalendar()
    sel = iso.week.to_numpy() == end_week
    frame = pd.DataFrame(acc[sel], index=iso.year.to_numpy()[sel], columns=ids)
    ref = frame.loc[1991:2020]
    return (frame - ref.mean()) / ref.std()


def _maize_shortfall(world) -> pd.DataFrame:
    """Log rainfed maize yield minus its county linear trend, as a (year, county) frame."""
    y = _csv(world, "yields.csv")
    y = y[(y["crop"] == "maize") & (y["practice"] == "rainfed")].dropna(subset=["yield"])
    wide = np.log(y.pivot(index="year", columns="county_id", values="yield"))
    t = wide.index.to_numpy(float) - wide.index.to_numpy(float).mean()
    out = {}
    for cid in wide.columns:  # test code: one trend line per county
        v = wide[cid].to_numpy()
        ok = ~np.isnan(v)
        slope, icpt = np.polyfit(t[ok], v[ok], 1)
        out[cid] = v - (icpt + slope * t)
    return pd.DataFrame(out, index=wide.index)


def test_maize_follows_the_planted_13_week_balance_ending_week_34(world, weekly_balance):
    resid = _maize_shortfall(world)

    def corr(scale: int, week: int) -> float:
        x = _wbz(weekly_balance, scale, week).reindex(index=resid.index,
                                                      columns=resid.columns)
        a, b = x.to_numpy().ravel(), resid.to_numpy().ravel()
        ok = ~np.isnan(a) & ~np.isnan(b)
        return float(np.corrcoef(a[ok], b[ok])[0, 1])

    planted = corr(13, 34)
    others = {(s, w): corr(s, w) for s, w in [(4, 34), (8, 34), (26, 34), (13, 30), (13, 38)]}
    assert planted > 0.4
    assert all(planted > c for c in others.values()), (planted, others)


def test_counties_out_of_range_is_a_project_error(tmp_path):
    with pytest.raises(ProjectError, match="counties must be an integer from 10 to 3143"):
        generate(tmp_path, counties=5000)
    with pytest.raises(ProjectError, match="got 2.5"):
        generate(tmp_path, counties=2.5)


def test_national_map_has_unique_codes_names_and_regions_of_about_twelve():
    from impactlink.scenario._geography import MAX_COUNTIES, build_geography

    geo = build_geography(np.random.default_rng(3), MAX_COUNTIES)
    assert len(set(geo.county_ids)) == len(geo.county_names) == MAX_COUNTIES
    assert len(set(geo.county_names)) == MAX_COUNTIES
    assert all(len(c) == 5 and c[:2] in {f"9{k}" for k in range(7)} for c in geo.county_ids)
    sizes = pd.Series(geo.regions).value_counts()
    assert 8 <= sizes.median() <= 16
    names = set(geo.systems["system_name"])
    assert len(names) == len(geo.systems["system_id"]) > 2000
    assert not {n.split(" ")[0] for n in names} & set(geo.county_names)


def test_low_rank_noise_factor_reproduces_the_gaussian_correlation():
    # The implied covariance f f' + diag(sd^2) of the predictive-process factor against the
    # exact matrix 0.98 exp(-(d/L)^2) + 0.02 I (the definition in scenario_data/README.md).
    from impactlink.scenario._weather import _knot_factor

    pts = np.random.default_rng(0).uniform(0, 2000, (1000, 2))
    f, sd = _knot_factor(pts, 500.0)
    d = np.linalg.norm(pts[:, None] - pts[None], axis=-1)
    exact = 0.98 * np.exp(-((d / 500.0) ** 2)) + 0.02 * np.eye(len(pts))
    assert f.shape[1] < len(pts)
    np.testing.assert_allclose(f @ f.T + np.diag(sd**2), exact, atol=1e-4)
