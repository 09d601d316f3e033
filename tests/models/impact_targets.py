"""Hand-built targets for the model tests (no linking stage needed)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.link.target import Target


def make_target(level, *, county_id=None, region=None, season=None, kind=None, levels=None,
                grain="county_week", extra=None, name="test_impact") -> Target:
    """A Target whose frame holds ``level`` and whatever keys the test needs."""
    level = np.asarray(level, dtype=int)
    n = level.size
    if county_id is None:
        county_id = np.array([f"c{i % 5}" for i in range(n)])
    if region is None:
        region = np.array(["north"] * n)
    if season is None:
        season = (np.arange(n) % 52) + 1
    time = pd.Timestamp("2001-01-01") + pd.to_timedelta(7 * np.arange(n), unit="D")
    frame = pd.DataFrame(
        {
            "unit_id": np.asarray(county_id, dtype=object),
            "county_id": np.asarray(county_id, dtype=object),
            "region": np.asarray(region, dtype=object),
            "time": time,
            "year": time.year,
            "season": np.asarray(season),
            "level": level,
        }
    )
    for k, v in (extra or {}).items():
        frame[k] = v
    if levels is None:
        K = max(1, int(level.max()))
        levels = ("none", "impact") if K == 1 else tuple(f"level{k}" for k in range(K + 1))
    if kind is None:
        kind = "binary" if len(levels) == 2 else "ordinal"
    return Target(name=name, impact=name.split(":")[0], kind=kind, grain=grain, role="state",
                  frame=frame, levels=tuple(levels))


def simulate_binary(n, *, slope=-1.5, intercept=-1.0, seed=0):
    """x ~ N(0, 1); P(impact) = expit(intercept + slope * x)."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    p = 1.0 / (1.0 + np.exp(-(intercept + slope * x)))
    y = (rng.uniform(size=n) < p).astype(int)
    return x, y
