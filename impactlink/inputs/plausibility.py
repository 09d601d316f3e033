"""Plausibility of input values, by physical limits and by distribution, per column and county.

Pure functions over tidy frames (one row per county and date or year), vectorised per column
and per county with ``groupby``. Two kinds of finding:

- a **unit mistake** (Fahrenheit under a Celsius name, inches under a millimetre name, one
  county's values a power of ten or a unit factor off the others, one county on another
  cadence) is fatal: a :class:`UnitFinding` whose :meth:`~UnitFinding.message` is one line
  naming the file, column and county, and what to do;
- a **value beyond a physical limit** rejects its row: :func:`beyond_physical_limits` returns
  a frame of (row, column, value, reason).

The inputs stage calls :func:`check_plausibility` on each clean table after its row rules and
before any index is computed, raises one :class:`~impactlink.errors.InputError` listing the
fatal findings and adds the rejections to ``rejected_rows.csv``.

Physical limits (World Meteorological Organization, Weather and Climate Extremes Archive,
https://wmo.asu.edu):

- highest air temperature 56.7 C, Furnace Creek (Death Valley), USA, 10 July 1913;
- lowest air temperature -89.2 C, Vostok, Antarctica, 21 July 1983;
- greatest 24-hour rainfall 1825 mm, Foc-Foc, La Reunion, 7-8 January 1966;
- greatest one-month rainfall 9300 mm, Cherrapunji, India, July 1861.

A 7-day total cannot exceed 7 x 1825 mm = 12775 mm (each day is at most the daily record).

References
----------
WMO Weather and Climate Extremes Archive, https://wmo.asu.edu (accessed 2026).
Zhang, X. et al. (2011). Indices for monitoring changes in extremes based on daily temperature
and precipitation data. WIREs Climate Change 2, 851-870. doi:10.1002/wcc.147 (a wet day is a
day with at least 1 mm).
NIST Handbook 130: 1 bushel of maize = 56 lb = 25.40 kg; 1 acre = 0.404686 ha.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from impactlink.schema import COUNTY, DATE

__all__ = [
    "UnitFinding",
    "PlausibilityResult",
    "LIMITS",
    "check_plausibility",
    "temperature_units",
    "precipitation_units",
    "scaled_counties",
    "mixed_cadence",
    "county_cadence",
    "beyond_physical_limits",
]

#: Physical limits per column and cadence: (lowest, highest) [C or mm], see module notes.
LIMITS: dict[str, dict[str, tuple[float, float]]] = {
    "temperature_c": {"any": (-89.2, 56.7)},
    "precip_mm": {"daily": (0.0, 1825.0), "weekly": (0.0, 7 * 1825.0),
                  "monthly": (0.0, 9300.0)},
}
TEMPERATURE_COLUMNS = ("tmin_c", "tmax_c", "tmean_c")
#: A county's median Celsius temperature above this is Fahrenheit [C]: hotter than the
#: annual mean of any place on Earth (about 35 C, Dallol, Ethiopia; from memory) by 10 C.
MEDIAN_TEMPERATURE_MAX_C = 45.0
#: A 2nd-98th percentile spread above this is Fahrenheit [C]: the largest annual cycle of
#: daily temperature on Earth, in north-east Siberia (January mean about -45 C, July mean
#: about +17 C at Verkhoyansk; from memory), spans about 65 C before day-to-day spread.
SPREAD_TEMPERATURE_MAX_C = 80.0
#: Median of the positive values below this is inches [mm]: a wet day holds at least 1 mm
#: (Zhang et al. 2011); a positive week or month rarely holds less than the wet day.
WET_STEP_MIN_MM = {"daily": 1.0, "weekly": 2.0, "monthly": 5.0}
#: Unit factors between one county and the others (log10 of the ratio) and their names.
FACTORS: tuple[tuple[float, str, str], ...] = (
    (3.0, "a factor of 1,000", "kg/ha among t/ha, or values scaled by 1,000"),
    (2.0, "a factor of 100", "values scaled by 100"),
    (1.0, "a factor of 10", "values scaled by 10"),
    (float(np.log10(62.77)), "a factor of about 63", "kg/ha among bu/acre (1 bu/acre of maize "
     "= 62.77 kg/ha)"),
    (float(np.log10(15.93)), "a factor of about 16", "bu/acre among t/ha (1 t/ha = 15.93 "
     "bu/acre of maize)"),
)
#: Half-width of the log10 window around each factor (a factor of 10 ** 0.12 = 1.32 either
#: way; county medians of one crop in one state rarely differ by 7x, common practice).
FACTOR_TOLERANCE = 0.12
CADENCE_DAYS = {"daily": (1, 1), "weekly": (7, 7), "monthly": (28, 31)}


@dataclass(frozen=True)
class UnitFinding:
    """A fatal unit mistake in one column of one county (``county`` empty: the whole column)."""

    file: str
    column: str
    county: str
    found: str
    fix: str

    def message(self) -> str:
        """One line: ``<file>: column <c>, county <id>: <found>; <fix>``."""
        where = f"column {self.column}" + (f", county {self.county}" if self.county else "")
        return f"{self.file}: {where}: {self.found}; {self.fix}"


@dataclass(frozen=True)
class PlausibilityResult:
    """Fatal unit findings and row-level rejections of one table."""

    fatal: tuple[UnitFinding, ...]
    rejected: pd.DataFrame  # row, column, value, reason

    def to_frame(self) -> pd.DataFrame:
        """The rejections (row, column, value, reason)."""
        return self.rejected.copy()


def check_plausibility(frame: pd.DataFrame, table: str, *, file: str = "") -> PlausibilityResult:
    """Every plausibility check that applies to one clean table.

    Parameters
    ----------
    frame : pandas.DataFrame
        A clean table (after the row rules): ``climate`` (county_id, date, precip_mm,
        optional tmin_c, tmax_c, tmean_c) or ``yields`` (county_id, year, crop, yield).
    table : str
        Contract table name; other tables give an empty result.
    file : str
        File name for messages.

    Returns
    -------
    PlausibilityResult
    """
    fatal: list[UnitFinding] = []
    rejected = _empty_rejected()
    if table == "climate" and len(frame):
        fatal += mixed_cadence(frame, file=file)
        if not fatal:
            fatal += temperature_units(frame, file=file)
            fatal += precipitation_units(frame, file=file)
            fatal += scaled_counties(frame, "precip_mm", file=file)
            rejected = beyond_physical_limits(frame)
    if table == "yields" and len(frame):
        fatal += scaled_counties(frame, "yield", by=("crop",), file=file)
    return PlausibilityResult(fatal=tuple(fatal), rejected=rejected)


def temperature_units(frame: pd.DataFrame, *, file: str = "",
                      columns: tuple[str, ...] = TEMPERATURE_COLUMNS) -> list[UnitFinding]:
    """Counties whose Celsius columns hold Fahrenheit values.

    Rule, per column and county: the median is above 45 C (:data:`MEDIAN_TEMPERATURE_MAX_C`),
    or the 2nd-98th percentile spread is above 80 C (:data:`SPREAD_TEMPERATURE_MAX_C`).
    Fahrenheit values of a temperate county (median 60 F) fail the first rule, those of a cold
    county (spread 1.8 times the Celsius spread) the second.

    Notes
    -----
    Conversion: C = (F - 32) x 5 / 9 (NIST Special Publication 811, 2008, section B.9).
    """
    out: list[UnitFinding] = []
    for col in (c for c in columns if c in frame.columns):  # at most three columns
        g = pd.to_numeric(frame[col], errors="coerce").groupby(frame[COUNTY].astype(str))
        med, lo, hi = g.median(), g.quantile(0.02), g.quantile(0.98)
        bad = (med > MEDIAN_TEMPERATURE_MAX_C) | ((hi - lo) > SPREAD_TEMPERATURE_MAX_C)
        for county in med.index[bad.to_numpy()]:
            out.append(UnitFinding(
                file, col, str(county),
                f"median {med[county]:.1f} and 2-98 % spread {hi[county] - lo[county]:.1f} "
                f"look like degrees Fahrenheit (a Celsius median above "
                f"{MEDIAN_TEMPERATURE_MAX_C:g} or a spread above {SPREAD_TEMPERATURE_MAX_C:g} "
                f"is hotter or wider than any climate; record high 56.7 C)",
                "convert the column to degrees Celsius, C = (F - 32) x 5/9"))
    return out


def precipitation_units(frame: pd.DataFrame, *, file: str = "", column: str = "precip_mm"
                        ) -> list[UnitFinding]:
    """Counties whose millimetre column holds inches.

    Rule, per county and cadence (:func:`county_cadence`): the median of the positive values
    is below 1 mm (daily), 2 mm (weekly) or 5 mm (monthly), :data:`WET_STEP_MIN_MM`. A wet day
    is a day with at least 1 mm (Zhang et al. 2011), so most positive days below 1 mm is
    inches (1 in = 25.4 mm, exact by definition).
    """
    if column not in frame.columns:
        return []
    v = pd.to_numeric(frame[column], errors="coerce")
    pos = v.where(v > 0)
    med = pos.groupby(frame[COUNTY].astype(str)).median()
    cad = county_cadence(frame).reindex(med.index)
    limit = cad.map(WET_STEP_MIN_MM).astype(float)
    bad = (med < limit).to_numpy()
    return [UnitFinding(file, column, str(c),
                        f"the median {cad[c]} value above zero is {med[c]:.2f}, below "
                        f"{limit[c]:g} mm (looks like inches)",
                        "convert the column to millimetres, mm = inches x 25.4")
            for c in med.index[bad]]


def scaled_counties(frame: pd.DataFrame, column: str, *, by: tuple[str, ...] = (),
                    file: str = "", min_counties: int = 3) -> list[UnitFinding]:
    """Counties whose values are a unit factor off the other counties' median.

    Rule: per group (``by``, e.g. crop) and county, r = log10(county median / median of the
    county medians of the group). A county is flagged when |r - f| < 0.12 for a factor f of
    :data:`FACTORS`: 10, 100, 1,000 (values scaled, kg/ha among t/ha), 62.77 (kg/ha among
    bu/acre) or 15.93 (bu/acre among t/ha), either way. Groups with fewer than ``min_counties``
    counties are not judged (no majority to compare with).
    """
    if column not in frame.columns or not len(frame):
        return []
    keys = [frame[b].astype(str) for b in by] + [frame[COUNTY].astype(str)]
    val = pd.to_numeric(frame[column], errors="coerce")
    med = val.where(val > 0).groupby(keys).median().dropna()
    if not len(med):
        return []
    level = list(range(len(by)))
    if by:
        ref = med.groupby(level=level).transform("median")
        n = med.groupby(level=level).transform("size")
    else:
        ref = pd.Series(med.median(), index=med.index)
        n = pd.Series(len(med), index=med.index)
    r = np.log10(med / ref)
    out = []
    for f, size, meaning in FACTORS:  # a handful of factors, vectorised over counties
        hit = ((r.abs() - f).abs() < FACTOR_TOLERANCE) & (n >= min_counties)
        for i in np.flatnonzero(hit.to_numpy()):
            key = med.index[i] if isinstance(med.index[i], tuple) else (med.index[i],)
            group = ", ".join(f"{b} {k}" for b, k in zip(by, key[:-1], strict=True))
            way = "above" if r.iloc[i] > 0 else "below"
            out.append(UnitFinding(
                file, column, str(key[-1]),
                f"{group + ': ' if group else ''}median {med.iloc[i]:.4g} is {size} {way} the "
                f"median county's {ref.iloc[i]:.4g} ({meaning}?)",
                "give this county's values in the unit of the others (or fix the unit column)"))
    return out


def mixed_cadence(frame: pd.DataFrame, *, file: str = "") -> list[UnitFinding]:
    """Counties whose rows come at another cadence than most counties of the table.

    Rule: the cadence of a county is the median step between its consecutive dates
    (:func:`county_cadence`); counties off the most common cadence are flagged.
    """
    cad = county_cadence(frame)
    n_dates = frame.groupby(frame[COUNTY].astype(str))[DATE].nunique()
    cad = cad[n_dates.reindex(cad.index).to_numpy() >= 3]  # too few dates to judge a cadence
    if cad.nunique() < 2:
        return []
    main = cad.value_counts().index[0]
    return [UnitFinding(file, DATE, str(c), f"{cad[c]} rows among {main} rows of the other "
                        "counties", f"give every county {main} rows (or split the table)")
            for c in cad.index[(cad != main).to_numpy()]]


def county_cadence(frame: pd.DataFrame) -> pd.Series:
    """Cadence of each county's rows: "daily", "weekly", "monthly" or "irregular".

    The median step in days between consecutive distinct dates: 1 daily, 7 weekly, 28-31
    monthly; a county with one date is "daily" (nothing to judge).
    """
    d = pd.DataFrame({"c": frame[COUNTY].astype(str).to_numpy(),
                      "t": pd.to_datetime(frame[DATE]).to_numpy()}).drop_duplicates()
    d = d.sort_values(["c", "t"], kind="stable")
    step = d.groupby("c")["t"].diff().dt.days
    med = step.groupby(d["c"]).median().fillna(1.0)
    out = pd.Series("irregular", index=med.index, dtype=object)
    for name, (lo, hi) in CADENCE_DAYS.items():
        out[(med >= lo) & (med <= hi)] = name
    return out


def beyond_physical_limits(frame: pd.DataFrame) -> pd.DataFrame:
    """Rows holding a value beyond a physical limit (:data:`LIMITS`), one row per cell.

    Returns
    -------
    pandas.DataFrame
        ``row`` (the frame's index label), ``column``, ``value``, ``reason``.
    """
    parts = []
    for col in (c for c in TEMPERATURE_COLUMNS if c in frame.columns):
        lo, hi = LIMITS["temperature_c"]["any"]
        v = pd.to_numeric(frame[col], errors="coerce")
        bad = (v < lo) | (v > hi)
        parts.append(_rows(frame, col, v, bad, np.where(
            v[bad] > hi, f"above the highest air temperature recorded ({hi} C, WMO)",
            f"below the lowest air temperature recorded ({lo} C, WMO)")))
    if "precip_mm" in frame.columns:
        v = pd.to_numeric(frame["precip_mm"], errors="coerce")
        cad = frame[COUNTY].astype(str).map(county_cadence(frame))
        hi = cad.map({k: b for k, (_, b) in LIMITS["precip_mm"].items()}).astype(float)
        bad = v > hi
        span = {"daily": "24-hour", "weekly": "7-day (7 x 24-hour)", "monthly": "one-month"}
        reason = [f"{span[c]} rainfall record ({h:g} mm, WMO) exceeded"  # rejected rows only
                  for c, h in zip(cad[bad], hi[bad], strict=True)]
        parts.append(_rows(frame, "precip_mm", v, bad, np.asarray(reason, dtype=object)))
    parts = [p for p in parts if len(p)]
    return pd.concat(parts, ignore_index=True) if parts else _empty_rejected()


def _rows(frame: pd.DataFrame, col: str, v: pd.Series, bad: pd.Series, reason) -> pd.DataFrame:
    return pd.DataFrame({"row": frame.index[bad.to_numpy()], "column": col,
                         "value": v[bad].to_numpy(), "reason": reason})


def _empty_rejected() -> pd.DataFrame:
    return pd.DataFrame({"row": pd.Series(dtype=np.int64), "column": pd.Series(dtype=object),
                         "value": pd.Series(dtype=float), "reason": pd.Series(dtype=object)})
