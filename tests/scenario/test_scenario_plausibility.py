"""Plausibility of the committed scenario world (tests of the generator, on its own data).

These are checks that the invented world behaves as documented in scenario_data/README.md:
gradients, coherence of drought years, consistency between tables, and that the planted
drivers are present in the shipped files. They are not tests of the main pipeline.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import shapely
from shapely.geometry import Point, shape

DATA = Path(__file__).resolve().parents[2] / "scenario_data"
ID = {"county_id": str}


# ------------------------------------------------------------------ fixtures
@pytest.fixture(scope="module")
def counties() -> pd.DataFrame:
    fc = json.loads((DATA / "counties.geojson").read_text())
    rows = [{**f["properties"], "geometry": shape(f["geometry"])} for f in fc["features"]]
    df = pd.DataFrame(rows)
    df["lon"] = [g.centroid.x for g in df.geometry]
    df["lat"] = [g.centroid.y for g in df.geometry]
    return df


@pytest.fixture(scope="module")
def climate() -> pd.DataFrame:
    return pd.read_parquet(DATA / "climate.parquet")


@pytest.fixture(scope="module")
def annual_precip(climate) -> pd.DataFrame:
    """(years, counties) annual precipitation totals, mm."""
    c = climate.assign(year=pd.to_datetime(climate["date"]).dt.year)
    return c.pivot_table(index="year", columns="county_id", values="precip_mm", aggfunc="sum")


def _csv(name: str) -> pd.DataFrame:
    return pd.read_csv(DATA / name, dtype=ID)


def _county_of_point(counties: pd.DataFrame, lon: float, lat: float) -> list[str]:
    p = Point(lon, lat)
    return [cid for cid, g in zip(counties["county_id"], counties["geometry"]) if g.covers(p)]


# ------------------------------------------------------------------ map
def test_sixty_fictional_county_codes(counties):
    ids = counties["county_id"]
    assert len(ids) == 60 and ids.is_unique
    assert all(re.fullmatch(r"9\d{4}", c) for c in ids)
    assert counties["county_name"].is_unique


def test_polygons_tile_the_state_without_overlap(counties):
    geoms = list(counties["geometry"])
    assert all(g.is_valid and g.geom_type == "Polygon" for g in geoms)
    union = shapely.union_all(geoms)
    assert union.geom_type == "Polygon"  # one connected state, no holes between counties
    # Overlap would make the sum of areas exceed the union area.
    assert sum(g.area for g in geoms) == pytest.approx(union.area, rel=1e-6)
    # Plausible mid-latitude placement.
    minx, miny, maxx, maxy = union.bounds
    assert 30 < miny < maxy < 50 and -110 < minx < maxx < -85


def test_boundaries_are_not_a_square_grid(counties):
    n_vertices = np.array([len(g.exterior.coords) - 1 for g in counties["geometry"]])
    assert (n_vertices == 4).mean() < 0.2
    assert len(np.unique(n_vertices)) >= 4
    areas = np.array([g.area for g in counties["geometry"]])
    assert areas.std() / areas.mean() > 0.1


def test_regions_are_few_and_contiguous(counties):
    regions = counties.groupby("region")["geometry"].apply(list)
    assert 4 <= len(regions) <= 6
    for name, geoms in regions.items():
        assert shapely.union_all(geoms).geom_type == "Polygon", name


# ------------------------------------------------------------------ climate
def test_climate_is_complete_daily_1981_2025(climate):
    assert list(climate.columns) == ["county_id", "date", "precip_mm", "tmin_c", "tmax_c"]
    dates = pd.to_datetime(climate["date"])
    assert dates.min() == pd.Timestamp("1981-01-01") and dates.max() == pd.Timestamp("2025-12-31")
    assert len(climate) == 60 * 16436
    assert not climate.isna().any().any()
    assert (climate["precip_mm"] >= 0).all()
    assert (climate["tmax_c"] >= climate["tmin_c"]).all()


def test_annual_precipitation_rises_west_to_east(annual_precip, counties):
    mean = annual_precip.mean()
    lon = counties.set_index("county_id")["lon"].reindex(mean.index)
    assert np.corrcoef(lon, mean)[0, 1] > 0.8
    west = mean[lon < lon.quantile(0.2)].mean()
    east = mean[lon > lon.quantile(0.8)].mean()
    assert 300 < west < 550 and 750 < east < 1200  # semi-arid west, humid east (README)


def test_zero_precipitation_weeks_more_common_in_the_west(climate, counties):
    c = climate.assign(week=pd.to_datetime(climate["date"]).dt.to_period("W-SUN"))
    weekly = c.groupby(["county_id", "week"])["precip_mm"].sum()
    zero_share = (weekly == 0).groupby("county_id").mean()
    lon = counties.set_index("county_id")["lon"].reindex(zero_share.index)
    west = zero_share[lon < lon.quantile(0.2)].mean()
    east = zero_share[lon > lon.quantile(0.8)].mean()
    assert west > 0.4 and east < 0.3


def test_drought_years_are_spatially_coherent(annual_precip, counties):
    z = (annual_precip - annual_precip.mean()) / annual_precip.std()
    xy = counties.set_index("county_id")[["lon", "lat"]].reindex(z.columns).to_numpy()
    corr = np.corrcoef(z.to_numpy().T)
    dist = np.hypot((xy[:, None, 0] - xy[None, :, 0]) * 78.0,
                    (xy[:, None, 1] - xy[None, :, 1]) * 111.0)  # km, roughly at 41 deg N
    near = corr[(dist > 0) & (dist < 100)].mean()
    far = corr[dist > 450].mean()
    assert near > 0.6
    assert far < near - 0.2
    # A dry year reaches many counties at once: some year has most of the state below normal.
    assert ((z < -0.5).mean(axis=1) > 0.6).any()


def test_temperature_season_trend_and_drought_coupling(climate):
    c = climate.assign(date=pd.to_datetime(climate["date"]))
    c["tmean"] = 0.5 * (c["tmin_c"] + c["tmax_c"])
    by_month = c.groupby(c["date"].dt.month)["tmean"].mean()
    assert by_month[7] - by_month[1] > 18
    by_year = c.groupby(c["date"].dt.year)["tmean"].mean()
    warming = by_year.loc[2011:2025].mean() - by_year.loc[1981:1995].mean()
    assert 0.4 < warming < 1.6  # planted 0.03 deg C/yr over 30 years = 0.9
    summer = c[c["date"].dt.month.isin([6, 7, 8])]
    m = summer.groupby(["county_id", summer["date"].dt.year]).agg(
        p=("precip_mm", "sum"), t=("tmax_c", "mean"))
    anom = m - m.groupby("county_id").transform("mean")
    assert np.corrcoef(anom["p"], anom["t"])[0, 1] < -0.3  # hotter in dry summers


# ------------------------------------------------------------------ indicators, traits
def test_indicators_weekly_mondays_and_ranges():
    ind = pd.read_parquet(DATA / "indicators.parquet")
    assert set(ind["indicator"]) == {"soil_moisture", "streamflow"}
    dates = pd.to_datetime(ind["date"])
    assert (dates.dt.day_of_week == 0).all()
    assert (ind["value"] >= 0).all() and not ind["value"].isna().any()
    traits = _csv("traits.csv").set_index("county_id")
    soil = ind[ind["indicator"] == "soil_moisture"].groupby("county_id")["value"].max()
    assert (soil <= traits["soil_whc_mm"].reindex(soil.index) + 1e-9).all()


def test_traits_ranges():
    t = _csv("traits.csv")
    assert len(t) == 60
    assert t["irrigated_share"].between(0, 1).all()
    assert t["groundwater_reliance"].between(0, 1).all()
    assert (t["soil_whc_mm"] > 0).all() and (t["cattle_per_km2"] > 0).all()


# ------------------------------------------------------------------ notices
def test_every_notice_resolves_to_one_county_by_point_in_polygon(counties):
    notices = _csv("notices.csv")
    systems = _csv("water_systems.csv")
    assert len(systems) == 40 and systems["system_id"].is_unique
    for lon, lat, cid in systems[["lon", "lat", "county_id"]].itertuples(index=False):
        assert _county_of_point(counties, lon, lat) == [cid]
    by_issuer = systems.set_index("system_name")["county_id"]
    for issuer, lon, lat in notices[["issuer", "lon", "lat"]].drop_duplicates().itertuples(
            index=False):
        assert _county_of_point(counties, lon, lat) == [by_issuer[issuer]]


def test_notice_levels_causes_dates_and_open_notices():
    n = _csv("notices.csv")
    assert n["notice_id"].is_unique
    numeric = n["level"].isin(["1", "2", "3"])
    words = n.loc[~numeric]
    assert words["issuer"].nunique() == 1  # exactly one issuer writes stage words
    assert set(words["level"]) <= {"caution", "cutback", "ration"}
    assert n.loc[n["issuer"] == words["issuer"].iloc[0], "level"].isin(
        ["caution", "cutback", "ration"]).all()
    assert set(n["cause"]) == {"drought", "main_break", "contamination"}
    assert 5 <= (n["cause"] != "drought").sum() <= 20
    start = pd.to_datetime(n["start_date"])
    end = pd.to_datetime(n["end_date"])
    assert (end.dropna() >= start[end.notna()]).all()
    assert end.isna().sum() >= 1  # still in force at the end of 2025
    assert start.max() <= pd.Timestamp("2025-12-31")


def test_one_issuer_has_overlapping_notices():
    n = _csv("notices.csv")
    n = n[n["cause"] == "drought"].assign(start=lambda d: pd.to_datetime(d["start_date"]),
                                          end=lambda d: pd.to_datetime(d["end_date"]))
    overlapping = set()
    for issuer, g in n.sort_values("start").groupby("issuer"):
        prev_end = g["end"].shift()
        if (g["start"] <= prev_end).any():
            overlapping.add(issuer)
    assert len(overlapping) == 1


def test_notices_respect_coverage():
    n = _csv("notices.csv")
    cov = _csv("coverage.csv")
    systems = _csv("water_systems.csv").set_index("system_name")
    start = cov[cov["source"] == "notices"].set_index("county_id")["start_date"]
    assert start.min() == "1995-01-01" and start.max() > "2000-01-01"  # some start late
    county = systems["county_id"].reindex(n["issuer"]).to_numpy()
    assert (n["start_date"].to_numpy() >= start.reindex(county).to_numpy()).all()


def test_snapshot_issuer_is_separate_and_biweekly():
    s = _csv("notice_snapshots.csv")
    n = _csv("notices.csv")
    assert s["issuer"].nunique() == 1
    assert s["issuer"].iloc[0] not in set(n["issuer"])
    assert set(s["stage"]) <= {0, 1, 2, 3} and s["stage"].gt(0).any()
    gaps = pd.to_datetime(s["date"]).diff().dropna().dt.days
    assert (gaps == 14).all()


# ------------------------------------------------------------------ yields and prices
def test_yields_withheld_trend_and_irrigation():
    y = _csv("yields.csv")
    assert set(y["crop"]) == {"maize", "sorghum"} and set(y["unit"]) == {"t_per_ha"}
    assert set(y["practice"]) == {"irrigated", "rainfed"}
    withheld = y["yield"].isna().mean()
    assert 0.0 < withheld < 0.05
    rain = y[(y["crop"] == "maize") & (y["practice"] == "rainfed")]
    early = rain[rain["year"] <= 1990]["yield"].median()
    late = rain[rain["year"] >= 2016]["yield"].median()
    assert late > 1.25 * early  # technology trend: +1.5 % of 1981 level per year
    wide = y.pivot_table(index=["county_id", "year", "crop"], columns="practice",
                         values="yield").dropna()
    assert (wide["irrigated"] > wide["rainfed"]).mean() > 0.95


def _summer_balance_proxy(climate: pd.DataFrame, months: list[int]) -> pd.DataFrame:
    """(year, county) precipitation total over the given months, standardized per county.

    A deliberately crude stand-in for the generator's water balance: summer precipitation
    carries most of the year-to-year variance of P - PET in this world.
    """
    c = climate.assign(date=pd.to_datetime(climate["date"]))
    c = c[c["date"].dt.month.isin(months)]
    tot = c.groupby([c["date"].dt.year.rename("year"), "county_id"])["precip_mm"].sum()
    tot = tot.unstack()
    return (tot - tot.mean()) / tot.std()


def test_planted_driver_rainfed_maize_follows_summer_dryness(climate):
    y = _csv("yields.csv")
    rain = y[(y["crop"] == "maize") & (y["practice"] == "rainfed")].dropna(subset=["yield"])
    wide = rain.pivot(index="year", columns="county_id", values="yield")
    # Remove the technology trend with a per-county linear fit on log yield.
    t = wide.index.to_numpy(float)
    logy = np.log(wide)
    resid = logy.apply(lambda s: s - np.polyval(np.polyfit(t[s.notna()], s.dropna(), 1), t))
    x = _summer_balance_proxy(climate, [6, 7, 8]).reindex(index=resid.index,
                                                           columns=resid.columns)
    a, b = resid.to_numpy(), x.to_numpy()
    ok = np.isfinite(a) & np.isfinite(b)
    r = np.corrcoef(a[ok], b[ok])[0, 1]
    assert r > 0.4


def test_planted_driver_hay_price_follows_regional_dryness(climate, counties):
    p = _csv("prices.csv").assign(date=lambda d: pd.to_datetime(d["date"]))
    pi = _csv("price_index.csv").assign(date=lambda d: pd.to_datetime(d["date"]))
    assert pi["price_index"].iloc[-1] > 2 * pi["price_index"].iloc[0]  # inflation
    real = p.merge(pi, on="date")
    real["log_real"] = np.log(real["price"] * 100 / real["price_index"])
    c = climate.assign(date=pd.to_datetime(climate["date"]))
    c = c.merge(counties[["county_id", "region"]], on="county_id")
    monthly = c.groupby(["region", pd.Grouper(key="date", freq="MS")])["precip_mm"].sum()
    six = monthly.groupby("region").transform(lambda s: s.rolling(6).sum().shift(1))
    six = six.groupby("region").transform(lambda s: (s - s.mean()) / s.std())
    df = real.set_index(["region", "date"]).join(six.rename("p6")).dropna()
    r = np.corrcoef(df["log_real"], df["p6"])[0, 1]
    assert r < -0.2


# ------------------------------------------------------------------ field reports, coverage
def test_field_reports_values_and_coverage():
    f = _csv("field_reports.csv")
    assert set(f["sector"]) == {"crops", "livestock", "water_supply", "wildfire"}
    assert set(f["severity"]) == {1, 2, 3}
    cov = _csv("coverage.csv")
    fr = cov[cov["source"] == "field_reports"].set_index("region")["start_date"]
    counties_ = json.loads((DATA / "counties.geojson").read_text())["features"]
    region_of = {x["properties"]["county_id"]: x["properties"]["region"] for x in counties_}
    start = fr.reindex([region_of[c] for c in f["county_id"]]).to_numpy()
    assert (f["date"].to_numpy() >= start).all()
    assert f["date"].min() >= "2008-01-01"


def test_coverage_rows_have_county_or_region():
    cov = pd.read_csv(DATA / "coverage.csv", dtype=str, keep_default_na=False)
    has_c = cov["county_id"] != ""
    has_r = cov["region"] != ""
    assert (has_c ^ has_r).all()
    assert set(cov["source"]) == {"yields", "prices", "notices", "notice_snapshots",
                                  "field_reports"}
    assert (cov["start_date"] <= cov["end_date"]).all()


# ------------------------------------------------------------------ data dictionary
def test_readme_documents_every_file_and_column():
    readme = (DATA / "README.md").read_text()
    assert "invented for demonstration" in readme
    for p in DATA.iterdir():
        if p.suffix == ".csv":
            assert f"`{p.name}`" in readme, p.name
            for col in pd.read_csv(p, nrows=0).columns:
                assert f"`{col}`" in readme, (p.name, col)
        elif p.suffix == ".parquet":
            assert f"`{p.name}`" in readme, p.name
            for col in pd.read_parquet(p).columns:
                assert f"`{col}`" in readme, (p.name, col)


def test_readme_names_the_quirk_issuers_of_the_shipped_data():
    readme = (DATA / "README.md").read_text()
    n = _csv("notices.csv")
    word_issuer = n.loc[~n["level"].isin(["1", "2", "3"]), "issuer"].iloc[0]
    snap_issuer = _csv("notice_snapshots.csv")["issuer"].iloc[0]
    assert f"**{word_issuer}** writes stage words" in readme
    assert f"**{snap_issuer}**" in readme
