"""Per-county grouping helpers of the plausibility checks: the county column as integer
codes, and the cadence of each county's rows (daily, weekly, monthly).

Every check groups a table by county; on a national daily climate table (52 M rows) hashing
the county text once per check costs seconds each, so the checks share one categorical
(:func:`with_county_codes`) and the cadence works on integer codes and day numbers alone.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.schema import COUNTY, DATE

__all__ = ["CADENCE_DAYS", "county_cadence", "with_county_codes", "county_key"]

CADENCE_DAYS = {"daily": (1, 1), "weekly": (7, 7), "monthly": (28, 31)}


def with_county_codes(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its county column as a categorical (text categories, sorted), so every
    check groups on integer codes instead of hashing the county text again (on a national
    daily climate table of 52 M rows, each text grouping costs seconds)."""
    if COUNTY not in frame.columns or isinstance(frame[COUNTY].dtype, pd.CategoricalDtype):
        return frame
    return frame.assign(**{COUNTY: pd.Categorical(frame[COUNTY].astype(str))})


def county_key(frame: pd.DataFrame) -> pd.Series:
    """The county column for grouping: the categorical as it is, else as text."""
    c = frame[COUNTY]
    return c if isinstance(c.dtype, pd.CategoricalDtype) else c.astype(str)


def county_cadence(frame: pd.DataFrame) -> pd.Series:
    """Cadence of each county's rows: "daily", "weekly", "monthly" or "irregular".

    The most common step in days between consecutive distinct dates (the shortest of equally
    common ones), so gaps (a missing week or month) do not change it: 1 daily, 7 weekly, 28-31
    monthly; a county with one date is "daily" (nothing to judge).
    """
    cat = pd.Categorical(county_key(frame))
    code = cat.codes.astype(np.int64)
    day = pd.to_datetime(frame[DATE]).to_numpy().astype("datetime64[D]").astype(np.int64)
    order = np.lexsort((day, code))  # county, then date; distinct (county, date) pairs kept
    c, t = code[order], day[order]
    first = np.r_[True, (c[1:] != c[:-1]) | (t[1:] != t[:-1])]
    c, t = c[first], t[first]
    same = c[1:] == c[:-1]
    sc, st = c[1:][same], (t[1:] - t[:-1])[same]  # steps in days within each county
    span = int(st.max(initial=0)) + 1
    key, n = np.unique(sc * span + st, return_counts=True)  # one key per (county, step)
    kc, ks = key // span, key % span
    pick = np.lexsort((ks, -n, kc))  # per county: the most common step, the shortest of ties
    pc, ps = kc[pick], ks[pick]
    top = np.r_[True, pc[1:] != pc[:-1]] if pc.size else np.zeros(0, bool)
    present = np.unique(c)
    step = pd.Series(ps[top].astype(float), index=pc[top]).reindex(present).fillna(1.0)
    med = pd.Series(step.to_numpy(), index=pd.Index(cat.categories[present].astype(str)))
    out = pd.Series("irregular", index=med.index, dtype=object)
    for name, (lo, hi) in CADENCE_DAYS.items():
        out[(med >= lo) & (med <= hi)] = name
    return out
