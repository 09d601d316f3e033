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

__all__ = ["CADENCE_DAYS", "county_cadence", "cadence_table", "with_county_codes", "county_key", "county_sample",
           "first_rows", "SAMPLE_PER_COUNTY"]

CADENCE_DAYS = {"daily": (1, 1), "weekly": (7, 7), "monthly": (28, 31)}
#: Values per county the distribution checks (medians, percentiles, shares) look at: a
#: systematic sample (every k-th row of the county) of a long record; the median of 4,000
#: values has a standard error about 1/60 of the spread (1.25 sigma / sqrt(n), common practice).
SAMPLE_PER_COUNTY = 4000


def with_county_codes(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its county column as a categorical (text categories, sorted), so every
    check groups on integer codes instead of hashing the county text again (on a national
    daily climate table of 52 M rows, each text grouping costs seconds)."""
    if COUNTY not in frame.columns or isinstance(frame[COUNTY].dtype, pd.CategoricalDtype):
        return frame
    codes, names = pd.factorize(frame[COUNTY].astype(str), sort=True)  # hashed once
    return frame.assign(**{COUNTY: pd.Categorical.from_codes(codes, categories=names)})


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
    return cadence_table(frame)["cadence"]


def cadence_table(frame: pd.DataFrame) -> pd.DataFrame:
    """Per county (index, as text): ``cadence`` (:func:`county_cadence`) and ``dates``, the
    number of distinct dates, from one pass over integer codes and day numbers."""
    cat = pd.Categorical(county_key(frame))
    code = cat.codes.astype(np.int32)  # 32-bit codes and day numbers: a national table's
    day = _day_numbers(frame[DATE])    # temporaries stay a few hundred MB
    later = (code[1:] > code[:-1]) | ((code[1:] == code[:-1]) & (day[1:] >= day[:-1]))
    if later.all():  # already by county, then date
        c, t = code, day
    else:
        order = np.lexsort((day, code))  # county, then date
        c, t = code[order], day[order]
    del later
    first = np.r_[True, (c[1:] != c[:-1]) | (t[1:] != t[:-1])]
    c, t = c[first], t[first]
    same = c[1:] == c[:-1]
    sc, st = c[1:][same], np.diff(t)[same]  # steps in days within each county
    span = int(st.max(initial=0)) + 1
    flat = sc.astype(np.int64) * span + st  # one key per (county, step)
    del sc, st, same
    if (int(c.max(initial=0)) + 1) * span <= 50_000_000:  # count without sorting
        n = np.bincount(flat)
        key = np.flatnonzero(n)
        n = n[key]
    else:
        key, n = np.unique(flat, return_counts=True)
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
    dates = np.bincount(c, minlength=len(cat.categories))[present]
    return pd.DataFrame({"cadence": out, "dates": dates}, index=med.index)


def _day_numbers(dates: pd.Series) -> np.ndarray:
    """Days since 1970-01-01 as int32 (NaT as the smallest int32)."""
    d = pd.to_datetime(dates).to_numpy().astype("datetime64[D]")
    out = d.astype(np.int64)
    out[np.isnat(d)] = np.iinfo(np.int32).min
    return out.astype(np.int32)


def county_sample(frame: pd.DataFrame, per_county: int = SAMPLE_PER_COUNTY) -> pd.DataFrame:
    """Every k-th row of each county (in the table's order), k = rows // ``per_county``; the
    frame itself when no county has more than ``2 * per_county`` rows. Deterministic."""
    code = pd.Categorical(county_key(frame)).codes.astype(np.int32) + 1  # 0: no county
    counts = np.bincount(code)
    step = np.maximum(1, counts // per_county)
    if step.max() < 2:
        return frame
    start = np.cumsum(counts) - counts
    if (code[1:] >= code[:-1]).all():  # by county already: positions without a sort
        pos = np.arange(code.size, dtype=np.int64) - start[code]
    else:
        order = np.argsort(code, kind="stable")
        pos = np.empty(code.size, dtype=np.int64)
        pos[order] = np.arange(code.size) - start[code[order]]
    return frame[(pos % step[code] == 0)]


def first_rows(frame: pd.DataFrame, key: list[str]) -> np.ndarray:
    """True on the first row of each distinct ``key`` (``~frame.duplicated(key)``).

    A (categorical county, date) key is one integer per row (county code x day number): on a
    table in key order the repeats are neighbours (one comparison per row), else the integers
    are hashed, never the county text and the timestamps.
    """
    if not key:
        return np.ones(len(frame), dtype=bool)
    county = frame[COUNTY] if COUNTY in key else None
    if (sorted(key) == sorted([COUNTY, DATE]) and county is not None
            and isinstance(county.dtype, pd.CategoricalDtype)
            and pd.api.types.is_datetime64_any_dtype(frame[DATE].dtype)):
        day = _day_numbers(frame[DATE]).astype(np.int64)  # NaT: the smallest number
        if day.size:
            day -= day.min()
        k = county.cat.codes.to_numpy().astype(np.int64) * (int(day.max(initial=0)) + 1) + day
        if k.size < 2 or (k[1:] > k[:-1]).all():  # in key order, every key once
            return np.ones(len(frame), dtype=bool)
        return ~pd.Series(k).duplicated().to_numpy()
    return ~frame.duplicated(key).to_numpy()
