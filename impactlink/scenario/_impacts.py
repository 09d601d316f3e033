"""Impacts planted on the generator's own weekly water-balance anomaly.

Every rule here is written out in ``scenario_data/README.md`` ("Planted drivers"), so the
main pipeline has a known answer to recover. ``wbz[k]`` is the z-score (per ISO week of
year and county, 1991-2020 reference) of the trailing ``k``-week sum of precipitation
minus Hargreaves PET; negative is dry. ``expit`` is the logistic function.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.special import expit

from ._geography import Geography
from ._hydrology import Hydrology, Traits

# ------------------------------------------------------------------- constants
CROPS = ("maize", "sorghum")
#: ISO week whose trailing 13-week water balance drives each crop's yield.
CROP_WEEK = {"maize": 34, "sorghum": 36}
CROP_BASE_WEST = {"maize": 3.2, "sorghum": 2.6}  # t/ha, rainfed, 1981, far west
CROP_BASE_GAIN = {"maize": 3.0, "sorghum": 1.2}  # t/ha added across the west -> east gradient
CROP_TREND = {"maize": 0.015, "sorghum": 0.010}  # share of 1981 level gained per year
CROP_SENS = {"maize": 0.17, "sorghum": 0.11}  # relative loss per unit of -wbz13
IRRIGATED_GAIN = {"maize": 1.45, "sorghum": 1.35}
IRRIGATED_SENS_SHARE = 0.15
SORGHUM_MAX_WEST_EAST = 0.75  # sorghum is grown only west of this position
IRRIGATED_MIN_SHARE = 0.08  # irrigated rows exist where irrigated_share >= this

HAY_BASE = {"Tallgrit": 185.0, "Ambrel": 180.0, "Midreach": 165.0, "Quillow": 150.0,
            "Serrowmere": 155.0}  # usd_per_t in 2020 money
HAY_DRY_COEF = 0.11  # log real price rises 0.11 per unit of -(regional mean wbz26)
PRICE_START = {"default": "1982-01-01", "Serrowmere": "1990-01-01"}

NOTICE_ONSET = (-5.8, 2.6)  # weekly onset hazard expit(a + b S)
NOTICE_END = (-1.2, -1.6)  # weekly end hazard expit(a + b S) after the minimum duration
NOTICE_MIN_WEEKS = 4
NOTICE_LEVEL_THRESHOLDS = (1.0, 1.6)  # S above which level 2 / level 3 apply
NOTICE_ESCALATE_P = 0.35
NOTICE_DEESCALATE_P = 0.25
NOTICE_DEESCALATE_MARGIN = 0.6
GW_BUFFER = 0.5  # S = -wbz26 * (1 - 0.5 * groundwater_reliance)
NOTICE_COVERAGE_START = "1995-01-01"
NOTICE_LATE_REGION = ("Quillow", "2004-01-01")
NOTICE_LATE_COUNTIES_START = "2012-01-01"
SNAPSHOT_START = "2001-01-05"
SNAPSHOT_EVERY_DAYS = 14
#: The issuer that writes its own stage names, and their meaning (levels 1-3).
STAGE_WORDS = {1: "caution", 2: "cutback", 3: "ration"}
OVERLAP_DAYS = 14

SECTORS = ("crops", "livestock", "water_supply", "wildfire")
REPORT_HAZARD = (-4.6, 1.9)  # weekly report probability effort * expit(a + b S)
REPORT_SEVERITY_CUTS = (1.4, 2.2)
REPORT_START = {"default": "2008-01-01", "Serrowmere": "2011-07-01"}
END_DATE = "2025-12-31"


@dataclass(frozen=True)
class Impacts:
    """All impact tables as pandas frames with final column names (not yet formatted)."""

    yields: pd.DataFrame
    prices: pd.DataFrame
    price_index: pd.DataFrame
    notices: pd.DataFrame
    notice_snapshots: pd.DataFrame
    field_reports: pd.DataFrame
    coverage: pd.DataFrame
    roles: dict  # which issuer plays which documented quirk


def region_plan(geo: Geography) -> dict:
    """Hay base price per region and the regions with late coverage.

    The default five regions keep their documented values. In a scaled world, the base
    price falls from 185 (west) to 150 usd/t (east) with the region's mean west -> east
    position; the late price and report region is the most south-eastern one and the late
    notice region the most north-eastern one (by mean centroid, in the local km plane).
    """
    names = sorted(set(geo.regions))
    if set(names) == set(HAY_BASE):
        return {"hay_base": dict(HAY_BASE), "late_south_east": "Serrowmere",
                "late_north_east": NOTICE_LATE_REGION[0]}
    regions = np.array(geo.regions)
    codes = np.searchsorted(np.array(names), regions)
    count = np.bincount(codes)
    g = np.bincount(codes, geo.west_east) / count
    x = np.bincount(codes, geo.centroids_km[:, 0]) / count
    y = np.bincount(codes, geo.centroids_km[:, 1]) / count
    hay = np.round(185.0 - 35.0 * g, 0)
    return {"hay_base": dict(zip(names, hay.tolist())),
            "late_south_east": names[int(np.argmax(x - y))],
            "late_north_east": names[int(np.argmax(x + y))]}


def simulate_impacts(geo: Geography, traits: Traits, hyd: Hydrology,
                     rng: np.random.Generator) -> Impacts:
    """Simulate every impact table (draws from ``rng`` in a fixed order)."""
    yields = _yields(geo, traits, hyd, rng)
    price_index = _price_index(rng)
    prices = _hay_prices(geo, hyd, price_index, rng)
    notices, snapshots, notice_cov, roles = _notices(geo, traits, hyd, rng)
    reports, report_cov = _field_reports(geo, traits, hyd, rng)
    coverage = _coverage(geo, notice_cov, report_cov, roles)
    return Impacts(yields, prices, price_index, notices, snapshots, reports, coverage, roles)


# ------------------------------------------------------------------- yields
def _yields(geo: Geography, traits: Traits, hyd: Hydrology, rng: np.random.Generator
            ) -> pd.DataFrame:
    years = np.arange(1981, 2026)
    g = geo.west_east
    woy = hyd.weeks.isocalendar().week.to_numpy()
    wyear = hyd.weeks.isocalendar().year.to_numpy()
    soil_factor = np.clip(150.0 / traits.soil_whc_mm, 0.7, 1.6)
    year_effect = rng.normal(0.0, 0.03, years.size)  # statewide non-drought year effect
    frames = []
    for crop in CROPS:  # two crops x two practices: four small vectorised blocks
        rows = np.array([np.flatnonzero((wyear == y) & (woy == CROP_WEEK[crop]))[0]
                         for y in years])
        x = hyd.wbz[13][rows]  # (years, counties)
        base = (CROP_BASE_WEST[crop] + CROP_BASE_GAIN[crop] * g)[None, :]
        trend = 1.0 + CROP_TREND[crop] * (years - 1981)[:, None]
        a = CROP_SENS[crop] * soil_factor[None, :]
        for practice in ("rainfed", "irrigated"):
            if practice == "rainfed":
                f = np.where(x < 0, 1.0 + a * x, 1.0 + 0.25 * a * x)
                pot = base
                grown = np.ones(g.size, bool)
            else:
                f = np.where(x < 0, 1.0 + IRRIGATED_SENS_SHARE * a * x, 1.0)
                pot = base * IRRIGATED_GAIN[crop]
                grown = traits.irrigated_share >= IRRIGATED_MIN_SHARE
            if crop == "sorghum":
                grown = grown & (g < SORGHUM_MAX_WEST_EAST)
            f = np.clip(f, 0.1, 1.25)
            noise = np.exp(rng.normal(0.0, 0.07, f.shape) + year_effect[:, None])
            y = np.round(pot * trend * f * noise, 2)
            p_withheld = np.where(practice == "irrigated",
                                  np.where(traits.irrigated_share < 0.12, 0.25, 0.01), 0.01)
            withheld = rng.random(f.shape) < p_withheld[None, :]
            y = np.where(withheld, np.nan, y)
            yy, cc = np.meshgrid(years, np.arange(g.size), indexing="ij")
            keep = grown[cc]
            frames.append(pd.DataFrame({
                "county_id": np.array(geo.county_ids)[cc[keep]],
                "year": yy[keep],
                "crop": crop,
                "practice": practice,
                "yield": y[keep],
                "unit": "t_per_ha",
            }))
    out = pd.concat(frames, ignore_index=True)
    return out.sort_values(["county_id", "year", "crop", "practice"], kind="mergesort"
                           ).reset_index(drop=True)


# ------------------------------------------------------------------- prices
def _price_index(rng: np.random.Generator) -> pd.DataFrame:
    """Monthly general price index, 2020 average = 100."""
    months = pd.date_range("1981-01-01", END_DATE, freq="MS")
    rate = {1981: 0.09, 1982: 0.06, 2021: 0.05, 2022: 0.07, 2023: 0.04, 2024: 0.03,
            2025: 0.028}
    annual = np.array([rate.get(y, 0.04 if y <= 1990 else 0.024) for y in months.year])
    step = np.log1p(annual) / 12.0 + rng.normal(0.0, 0.001, months.size)
    level = np.exp(np.cumsum(step))
    level = 100.0 * level / level[months.year == 2020].mean()
    return pd.DataFrame({"date": months, "price_index": np.round(level, 2)})


def _hay_prices(geo: Geography, hyd: Hydrology, price_index: pd.DataFrame,
                rng: np.random.Generator) -> pd.DataFrame:
    months = pd.DatetimeIndex(price_index["date"])
    regions = np.array(geo.regions)
    plan = region_plan(geo)
    late = plan["late_south_east"]
    # Driver for month m: regional mean wbz26 in the last week (Monday) of month m - 1.
    week_month = hyd.weeks.year * 12 + hyd.weeks.month - 1
    month_key = months.year * 12 + months.month - 1
    last_week = pd.Series(np.arange(len(hyd.weeks))).groupby(week_month).max()
    idx = last_week.reindex(month_key - 1).to_numpy()
    frames = []
    for r in sorted(plan["hay_base"]):  # a loop over regions (about 12 counties each)
        sel = regions == r
        d = np.full(months.size, np.nan)
        ok = ~np.isnan(idx)
        d[ok] = hyd.wbz[26][idx[ok].astype(int)][:, sel].mean(axis=1)  # NaN in spin-up weeks
        d = np.nan_to_num(d, nan=0.0)
        noise = np.zeros(months.size)
        e = rng.normal(0.0, 0.03, months.size)
        noise[0] = e[0] / np.sqrt(1 - 0.85**2)
        for t in range(1, months.size):  # AR(1) over 540 months of one region
            noise[t] = 0.85 * noise[t - 1] + e[t]
        season = 0.04 * np.cos(2 * np.pi * (months.month - 2) / 12.0)
        real = plan["hay_base"][r] * np.exp(-HAY_DRY_COEF * d + season + noise)
        nominal = np.round(real * price_index["price_index"].to_numpy() / 100.0, 2)
        start = pd.Timestamp(PRICE_START["Serrowmere" if r == late else "default"])
        keep = months >= start
        frames.append(pd.DataFrame({"region": r, "date": months[keep], "commodity": "hay",
                                    "price": nominal[keep], "unit": "usd_per_t"}))
    return pd.concat(frames, ignore_index=True)


# ------------------------------------------------------------------- notices
def _notices(geo: Geography, traits: Traits, hyd: Hydrology, rng: np.random.Generator):
    sysd = geo.systems
    ci = sysd["county_index"]
    n_s, n_w = ci.size, len(hyd.weeks)
    stress = -hyd.wbz[26][:, ci] * (1.0 - GW_BUFFER * traits.groundwater_reliance[ci])[None, :]
    stress = np.nan_to_num(stress, nan=0.0)
    level = _notice_levels(stress, rng)
    offsets = rng.integers(0, 5, size=(n_w + 1, n_s))  # weekday of each stage change

    roles = _issuer_roles(geo, level, np.asarray(hyd.weeks.year >= 2004))
    # Coverage: county start dates.
    cov_start = np.full(len(geo.county_ids), np.datetime64(NOTICE_COVERAGE_START))
    late_start = NOTICE_LATE_REGION[1]
    late_r = region_plan(geo)["late_north_east"]
    cov_start[np.array(geo.regions) == late_r] = np.datetime64(late_start)
    candidates = np.unique(ci[np.array(geo.regions)[ci] != late_r])
    n_late = max(2, round(len(geo.county_ids) / 30))  # 2 of the default 60 counties
    late_counties = rng.choice(candidates, size=min(n_late, candidates.size), replace=False)
    cov_start[late_counties] = np.datetime64(NOTICE_LATE_COUNTIES_START)

    weeks = hyd.weeks.values.astype("datetime64[D]")
    rows = []
    # Loop over 40 systems to cut their weekly level series into notices (not a hot path).
    for s in range(n_s):
        if s == roles["snapshot_index"]:
            continue
        lv = level[:, s]
        change = np.flatnonzero(np.diff(np.concatenate([[0], lv, [0]])) != 0)
        for a, b in zip(change[:-1], change[1:]):
            if lv[a] == 0:
                continue
            start = weeks[a] + offsets[a, s]
            if b >= n_w:
                end = None
            else:
                end = weeks[b] + offsets[b, s] - 1
                if s == roles["overlap_index"] and lv[b] > 0:
                    end = end + OVERLAP_DAYS  # this issuer never closes a stage on time
            rows.append((s, start, end, int(lv[a]), "drought"))
    rows += _non_drought_notices(n_s, roles, cov_start[ci], rng)
    notices = _notice_frame(rows, geo, cov_start, roles)
    snapshots = _snapshots(level[:, roles["snapshot_index"]], offsets[:, roles["snapshot_index"]],
                           weeks, sysd["system_name"][roles["snapshot_index"]])
    return notices, snapshots, cov_start, roles


def _notice_levels(stress: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Weekly restriction level (0 = none, 1-3) per system: onset, escalation, end."""
    n_w, n_s = stress.shape
    u = rng.random((n_w, n_s, 4))
    noise = rng.normal(0.0, 0.3, (n_w, n_s))
    t2, t3 = NOTICE_LEVEL_THRESHOLDS
    level = np.zeros((n_w, n_s), dtype=np.int64)
    cur = np.zeros(n_s, dtype=np.int64)
    age = np.zeros(n_s, dtype=np.int64)
    # Loop over weeks (episodes persist: a recursion in time); vectorised over systems.
    for t in range(n_w):
        s = stress[t]
        off = cur == 0
        onset = off & (u[t, :, 0] < expit(NOTICE_ONSET[0] + NOTICE_ONSET[1] * s))
        start_level = 1 + (s + noise[t] > t2) + (s + noise[t] > t3)
        on = ~off
        age = np.where(on, age + 1, 0)
        up_thr = np.where(cur == 1, t2, t3)
        up = on & (cur < 3) & (s > up_thr) & (u[t, :, 1] < NOTICE_ESCALATE_P)
        down_thr = np.where(cur == 3, t3, t2) - NOTICE_DEESCALATE_MARGIN
        down = on & (cur > 1) & (s < down_thr) & (u[t, :, 2] < NOTICE_DEESCALATE_P)
        end = on & (age >= NOTICE_MIN_WEEKS) & (
            u[t, :, 3] < expit(NOTICE_END[0] + NOTICE_END[1] * s))
        new = cur + up - down
        new = np.where(end, 0, new)
        new = np.where(onset, start_level, new)
        age = np.where(onset, 0, age)
        cur = new
        level[t] = cur
    return level


def _issuer_roles(geo: Geography, level: np.ndarray, recent: np.ndarray) -> dict:
    """Pick the issuers that carry documented quirks, deterministically from the levels.

    Snapshot issuer: the eastern system (west_east >= 0.5) with the most weeks under
    restriction. Stage-word issuer and overlap issuer: the two other systems with the most
    changes between two non-zero levels since 2004, in that order (so both quirks show).
    """
    sysd = geo.systems
    g = geo.west_east[sysd["county_index"]]
    weeks_on = (level > 0).sum(axis=0)
    stepped = (np.diff(level, axis=0) != 0) & (level[1:] > 0) & (level[:-1] > 0)
    changes = (stepped & recent[1:, None]).sum(axis=0)
    east = np.flatnonzero(g >= 0.5)
    snapshot = int(east[np.argmax(weeks_on[east])])
    order = [int(i) for i in np.argsort(-changes, kind="stable") if i != snapshot]
    words, overlap = order[0], order[1]
    return {
        "stage_words_index": words,
        "snapshot_index": snapshot,
        "overlap_index": overlap,
        "stage_words_issuer": str(sysd["system_name"][words]),
        "snapshot_issuer": str(sysd["system_name"][snapshot]),
        "overlap_issuer": str(sysd["system_name"][overlap]),
    }


def _non_drought_notices(n_s: int, roles: dict, cov_start: np.ndarray,
                         rng: np.random.Generator) -> list:
    n_break = max(1, round(n_s * 6 / 40))  # 6 and 4 of the default 40 systems
    n_contam = max(1, round(n_s * 4 / 40))
    causes = ["main_break"] * n_break + ["contamination"] * n_contam
    choices = [s for s in range(n_s) if s != roles["snapshot_index"]]
    rows = []
    for cause in causes:  # ten rows
        s = int(rng.choice(choices))
        lo = max(cov_start[s], np.datetime64("1995-01-01"))
        span = int((np.datetime64("2025-10-01") - lo).astype(int))
        start = lo + int(rng.integers(0, span))
        dur = int(rng.integers(2, 11)) if cause == "main_break" else int(rng.integers(5, 21))
        lvl = int(rng.integers(2, 4)) if cause == "main_break" else 3
        rows.append((s, start, start + dur, lvl, cause))
    return rows


def _notice_frame(rows: list, geo: Geography, cov_start: np.ndarray, roles: dict
                  ) -> pd.DataFrame:
    from ._geography import km_to_lonlat

    sysd = geo.systems
    lon, lat = km_to_lonlat(sysd["x_km"], sysd["y_km"], geo.scale)
    s_idx = np.array([r[0] for r in rows])
    start = np.array([r[1] for r in rows], dtype="datetime64[D]")
    end = np.array([r[2] if r[2] is not None else np.datetime64("NaT") for r in rows],
                   dtype="datetime64[D]")
    end = np.where(end > np.datetime64(END_DATE), np.datetime64("NaT"), end)
    lvl = np.array([r[3] for r in rows], dtype=object)
    words = s_idx == roles["stage_words_index"]
    lvl[words] = [STAGE_WORDS[int(v)] for v in lvl[words]]
    df = pd.DataFrame({
        "issuer": sysd["system_name"][s_idx],
        "start_date": start,
        "end_date": end,
        "level": lvl,
        "lon": np.round(lon[s_idx], 5),
        "lat": np.round(lat[s_idx], 5),
        "population_served": sysd["population_served"][s_idx],
        "cause": [r[4] for r in rows],
    })
    covered = start >= cov_start[sysd["county_index"][s_idx]]
    df = df[covered].sort_values(["start_date", "issuer", "cause"], kind="mergesort")
    df.insert(0, "notice_id", [f"RN-{i + 1:05d}" for i in range(len(df))])
    return df.reset_index(drop=True)


def _snapshots(level: np.ndarray, offsets: np.ndarray, weeks: np.ndarray, issuer: str
               ) -> pd.DataFrame:
    """Every 14 days, the stage in force that day (0 = no restriction)."""
    days = np.arange(weeks[0], np.datetime64(END_DATE) + 1)
    change_days = weeks + offsets[: weeks.size]
    # Stage in force on a day = level of the latest week whose change day is <= that day.
    which = np.searchsorted(change_days, days, side="right") - 1
    daily = np.where(which >= 0, level[np.clip(which, 0, None)], 0)
    snap = np.arange(np.datetime64(SNAPSHOT_START), np.datetime64(END_DATE) + 1,
                     SNAPSHOT_EVERY_DAYS)
    stage = daily[(snap - days[0]).astype(int)]
    return pd.DataFrame({"date": snap, "issuer": issuer, "stage": stage})


# ------------------------------------------------------------------- field reports
def _field_reports(geo: Geography, traits: Traits, hyd: Hydrology, rng: np.random.Generator):
    regions = np.array(geo.regions)
    late = region_plan(geo)["late_south_east"]
    start = np.where(regions == late, np.datetime64(REPORT_START["Serrowmere"]),
                     np.datetime64(REPORT_START["default"]))
    weeks = hyd.weeks.values.astype("datetime64[D]")
    woy = hyd.weeks.isocalendar().week.to_numpy()[:, None]
    t_year = (hyd.weeks.year + (hyd.weeks.day_of_year - 1) / 365.25).to_numpy()[:, None]
    effort = np.clip(0.3 + 0.7 * (t_year - 2008.0) / 17.0, 0.3, 1.0)
    covered = weeks[:, None] >= start[None, :]
    c_rel = np.clip(traits.cattle_per_km2 / 20.0, 0.3, 2.0)
    wbz = {k: np.nan_to_num(v, nan=0.0) for k, v in hyd.wbz.items()}
    season_crops = (woy >= 14) & (woy <= 39)
    stress = {
        "crops": np.where(season_crops, -wbz[8], -np.inf),
        "livestock": -wbz[13] * (0.7 + 0.3 * c_rel)[None, :],
        "water_supply": -wbz[26] * (1.0 - GW_BUFFER * traits.groundwater_reliance)[None, :],
        "wildfire": -0.7 * wbz[4] + 0.6 * np.nan_to_num(hyd.tmax_z, nan=0.0),
    }
    frames = []
    for sector in SECTORS:  # four sectors, each vectorised over weeks x counties
        s = stress[sector]
        p = effort * expit(REPORT_HAZARD[0] + REPORT_HAZARD[1] * s)
        hit = (rng.random(s.shape) < p) & covered
        latent = s + rng.normal(0.0, 0.45, s.shape)
        sev = 1 + (latent > REPORT_SEVERITY_CUTS[0]) + (latent > REPORT_SEVERITY_CUTS[1])
        day = rng.integers(0, 7, s.shape)
        wi, ci = np.nonzero(hit)
        frames.append(pd.DataFrame({
            "county_id": np.array(geo.county_ids)[ci],
            "date": weeks[wi] + day[wi, ci],
            "sector": sector,
            "severity": sev[wi, ci].astype(np.int64),
        }))
    out = pd.concat(frames, ignore_index=True)
    out = out[out["date"] <= np.datetime64(END_DATE)]
    out = out.sort_values(["date", "county_id", "sector"], kind="mergesort")
    return out.reset_index(drop=True), start


# ------------------------------------------------------------------- coverage
def _coverage(geo: Geography, notice_start: np.ndarray, report_start: np.ndarray,
              roles: dict) -> pd.DataFrame:
    regions = sorted(set(geo.regions))
    late = region_plan(geo)["late_south_east"]
    rows = []
    for r in regions:  # loops over regions and counties build a small table of strings
        rows.append(("yields", "", r, "1981-01-01", END_DATE))
    for r in regions:
        rows.append(("prices", "", r, PRICE_START["Serrowmere" if r == late else "default"],
                     END_DATE))
    for i, c in enumerate(geo.county_ids):
        rows.append(("notices", c, "", str(notice_start[i]), END_DATE))
    snap_county = geo.county_ids[geo.systems["county_index"][roles["snapshot_index"]]]
    rows.append(("notice_snapshots", snap_county, "", SNAPSHOT_START, END_DATE))
    for r in regions:
        rows.append(("field_reports", "", r,
                     REPORT_START["Serrowmere" if r == late else "default"], END_DATE))
    return pd.DataFrame(rows, columns=["source", "county_id", "region", "start_date",
                                       "end_date"])
