"""A small synthetic world with a planted signal, for the skill tests (invented data)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.link.target import Target

INDICES = ("spi", "spei", "soil")
SCALES = (4, 13, 26)
LAGS = (1, 4)


def world(seed=0, *, n_counties=12, n_years=14, spin_weeks=40):
    """Weekly index arrays (weeks, counties) for every (index, scale).

    Each index is a rolling mean of its own weekly driver (drivers correlated 0.5 with a
    shared regional driver), standardised, so candidates are related but distinct.
    """
    rng = np.random.default_rng(seed)
    n_weeks = spin_weeks + 52 * n_years
    shared = rng.normal(size=(n_weeks, 1)) + 0.5 * rng.normal(size=(n_weeks, n_counties))
    arrays = {}
    for ix in INDICES:
        drv = 0.5 * shared + rng.normal(size=(n_weeks, n_counties))
        cs = np.cumsum(np.vstack([np.zeros((1, n_counties)), drv]), axis=0)
        for s in SCALES:
            a = np.full((n_weeks, n_counties), np.nan)
            a[s - 1:] = (cs[s:] - cs[:-s]) / s
            a = (a - np.nanmean(a)) / np.nanstd(a)
            arrays[(ix, s)] = a
    return arrays, n_weeks, spin_weeks


def _frame(n_weeks, spin, n_counties, start_year=2001):
    t = np.arange(spin, n_weeks)
    week_pos = np.repeat(t, n_counties)
    county = np.tile(np.arange(n_counties), t.size)
    year = start_year + (week_pos - spin) // 52
    season = (week_pos - spin) % 52 + 1
    return pd.DataFrame({
        "unit_id": [f"c{c:02d}" for c in county],
        "county_id": [f"c{c:02d}" for c in county],
        "region": np.where(county < n_counties // 2, "north", "south"),
        "time": pd.Timestamp("2001-01-01") + pd.to_timedelta(7 * (week_pos - spin), unit="D"),
        "year": year, "season": season,
    }), week_pos, county


def features_for(arrays, week_pos, county):
    def features(index, scale, lag):
        a = arrays[(index, scale)]
        w = week_pos - lag
        out = np.full(week_pos.size, np.nan)
        ok = w >= 0
        out[ok] = a[w[ok], county[ok]]
        return out
    return features


def planted_target(seed=0, *, kind="binary", planted=("spi", 13, 1), slope=-1.6,
                   n_counties=12, n_years=14):
    """Impacts drawn from a logistic (or cumulative-logit) model of one planted candidate."""
    arrays, n_weeks, spin = world(seed, n_counties=n_counties, n_years=n_years)
    fr, week_pos, county = _frame(n_weeks, spin, n_counties)
    feats = features_for(arrays, week_pos, county)
    z = feats(*planted)
    rng = np.random.default_rng(seed + 100)
    if kind == "binary":
        p = 1 / (1 + np.exp(-(-1.5 + slope * z)))
        level = (rng.random(z.size) < p).astype(int)
        levels = ("none", "impact")
    else:
        latent = -slope * z + rng.logistic(size=z.size)
        level = np.searchsorted(np.array([1.2, 2.6, 3.8]), latent)
        levels = ("none", "minor", "moderate", "severe")
    fr["level"] = level
    tgt = Target(name=f"synthetic:{kind}", impact="synthetic", kind=kind, grain="county_week",
                 role="annual" if kind == "binary" else "monthly", frame=fr, levels=levels)
    return tgt, feats


def episode_targets(seed=0, *, planted=("spei", 13, 1), slope=-1.8, mean_weeks=10,
                    n_counties=12, n_years=14):
    """Episodes planted by a hazard on one candidate, lasting ~``mean_weeks`` weeks.

    Returns the state target (level = in an episode; ``persistence_<L>`` = state L weeks
    before) and the onset target (rows not in an episode the week before; level = an
    episode starts this week), plus the features callable.
    """
    arrays, n_weeks, spin = world(seed, n_counties=n_counties, n_years=n_years)
    fr, week_pos, county = _frame(n_weeks, spin, n_counties)
    feats = features_for(arrays, week_pos, county)
    ix, sc, lg = planted
    a = arrays[(ix, sc)]
    rng = np.random.default_rng(seed + 200)
    state = np.zeros((n_weeks, n_counties), dtype=int)
    onset = np.zeros((n_weeks, n_counties), dtype=int)
    # the Markov chain runs week by week (each step is vectorised over counties)
    for t in range(max(sc, lg + sc), n_weeks):
        z = a[t - lg]
        hazard = 1 / (1 + np.exp(-(-3.4 + slope * z)))
        start = (state[t - 1] == 0) & (rng.random(n_counties) < hazard)
        stay = (state[t - 1] == 1) & (rng.random(n_counties) > 1 / mean_weeks)
        state[t] = (start | stay).astype(int)
        onset[t] = start.astype(int)
    st = fr.copy()
    st["level"] = state[week_pos, county]
    for L in LAGS:
        st[f"persistence_{L}"] = state[week_pos - L, county].astype(float)
    state_t = Target(name="synthetic:state", impact="synthetic", kind="binary",
                     grain="county_week", role="state", frame=st, levels=("none", "episode"))
    at_risk = state[week_pos - 1, county] == 0
    on = fr.copy()
    on["level"] = onset[week_pos, county]
    for L in LAGS:
        on[f"persistence_{L}"] = state[week_pos - L, county].astype(float)
    on = on[at_risk].reset_index(drop=True)
    wp, ct = week_pos[at_risk], county[at_risk]
    onset_t = Target(name="synthetic:onset", impact="synthetic", kind="binary",
                     grain="county_week", role="onset", frame=on, levels=("none", "onset"))
    return state_t, feats, onset_t, features_for(arrays, wp, ct)


def candidates():
    return [(i, s, lg) for i in INDICES for s in SCALES for lg in LAGS]
