"""Plausibility of input values, by physical limits and by distribution, per column and county.

Pure functions over tidy frames (one row per county and date or year), vectorised per column
and per county with ``groupby``. Two kinds of finding:

- a **unit mistake** (Fahrenheit under a Celsius name, inches under a millimetre name, one
  county's values a power of ten or a unit factor off the others, one county on another
  cadence) is fatal: a :class:`UnitFinding` whose :meth:`~UnitFinding.message` is one line
  naming the file, column and county, and what to do;
- a **value beyond a physical limit** rejects its row: :func:`beyond_physical_limits` returns
  a frame of (row, column, value, reason).

The inputs stage calls :func:`unit_findings` on each contract table's values as read (after
the cells are converted, before the row rules, so a unit mistake is never half-rejected as
out-of-range rows) and :func:`check_plausibility` on each clean table after its row rules; it
raises one :class:`~impactlink.errors.InputError` listing the fatal findings and adds the
rejections to ``rejected_rows.csv``. All before any index is computed.

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

from impactlink.inputs._cadence import (
    cadence_table,
    county_cadence,
    county_sample,
    with_county_codes,
)
from impactlink.inputs._cadence import county_key as _county
from impactlink.schema import COUNTY, DATE

__all__ = [
    "UnitFinding",
    "PlausibilityResult",
    "LIMITS",
    "check_plausibility",
    "temperature_units",
    "precipitation_units",
    "scaled_counties",
    "temperature_pairs",
    "mixed_units",
    "unit_findings",
    "fatal_line",
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
#: Fewest values of a county (a year of months) for its median and spread to tell a unit; a
#: county with fewer is judged by the row rules alone (its median is not yet a climate).
UNIT_MIN_VALUES = 12
#: A county's median Celsius temperature above this is Fahrenheit [C]: hotter than the
#: annual mean of any place on Earth (about 35 C, Dallol, Ethiopia; from memory) by 10 C.
MEDIAN_TEMPERATURE_MAX_C = 45.0
#: A county's median Celsius temperature above this is kelvin [C]: the coldest air recorded,
#: -89.2 C, is 184 K, and the hottest, 56.7 C, is 134 F (WMO), so no Fahrenheit median
#: comes near 150 and no kelvin median falls below it.
KELVIN_MEDIAN_MIN = 150.0
#: A 2nd-98th percentile spread above this is Fahrenheit [C]: the largest annual cycle of
#: daily temperature on Earth, in north-east Siberia (January mean about -45 C, July mean
#: about +17 C at Verkhoyansk; from memory), spans about 65 C before day-to-day spread.
SPREAD_TEMPERATURE_MAX_C = 80.0
#: A county's median daily ``tmax_c - tmin_c`` above this is a Fahrenheit ``tmax_c`` [C]: the
#: widest mean day-night ranges, in high deserts, are about 20-25 C (from memory).
DIURNAL_RANGE_MAX_C = 30.0
#: Share of a county's rows with ``tmin_c`` above ``tmax_c`` beyond which the two columns are
#: not Celsius of the same days: an observing-time slip inverts a day now and then, not one
#: day in four (common practice). A Fahrenheit ``tmin_c`` of a cool county is above the
#: Celsius ``tmax_c`` in about half of the months.
INVERTED_SHARE_MAX = 0.25
#: Fewest rows holding both temperatures for a county's pair to be judged (a year of months).
PAIR_MIN_ROWS = 12
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
#: Half-width of the log10 window around each factor: three median absolute deviations of the
#: group's log county medians (about two standard deviations), within 0.12 .. 0.3 (a factor of
#: 1.32 .. 2 either way; county medians of one crop and practice in one state rarely differ by
#: 3x, common practice). A county at the low edge of its group, scaled by 1,000, still lands
#: in the window.
FACTOR_TOLERANCE = (0.12, 0.3)


@dataclass(frozen=True)
class UnitFinding:
    """A fatal unit mistake in one column of one county (``county`` empty: the whole column)."""

    file: str
    column: str
    county: str
    found: str
    fix: str
    place: str = "county"  # "zone" for a per-zone file

    def message(self) -> str:
        """One line: ``<file>: column <c>, county <id>: <found>; <fix>``."""
        where = f"column {self.column}" + (f", {self.place} {self.county}" if self.county else "")
        return f"{self.file}: {where}: {self.found}; {self.fix}"


@dataclass(frozen=True)
class PlausibilityResult:
    """Fatal unit findings and row-level rejections of one table."""

    fatal: tuple[UnitFinding, ...]
    rejected: pd.DataFrame  # row, column, value, reason

    def to_frame(self) -> pd.DataFrame:
        """The rejections (row, column, value, reason)."""
        return self.rejected.copy()


def check_plausibility(frame: pd.DataFrame, table: str, *, file: str = "", units: bool = True
                       ) -> PlausibilityResult:
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
    frame = with_county_codes(frame)
    fatal = unit_findings(frame, table, file=file) if units else []
    rejected = _empty_rejected()
    if table == "climate" and len(frame):
        rejected = beyond_physical_limits(frame)
    return PlausibilityResult(fatal=tuple(fatal), rejected=rejected)


def unit_findings(frame: pd.DataFrame, table: str, *, file: str = "") -> list[UnitFinding]:
    """The fatal unit findings of one table, on its values as read (before the row rules).

    The inputs stage runs these on the coerced values before any range rule, so a unit
    mistake is named as one even where its values would also break a physical limit (a
    Fahrenheit summer above 60, a Fahrenheit ``tmin_c`` above ``tmax_c``).

    ``climate``: :func:`mixed_cadence`, then :func:`temperature_units`,
    :func:`temperature_pairs`, :func:`precipitation_units` and :func:`scaled_counties` of
    ``precip_mm``. ``yields``: :func:`mixed_units` of ``unit`` per crop, then
    :func:`scaled_counties` of ``yield`` per crop and practice. ``prices``: :func:`mixed_units`
    per commodity. Other tables: none.
    """
    fatal: list[UnitFinding] = []
    if not len(frame):
        return fatal
    frame = with_county_codes(frame)
    if table == "climate":
        cadence = cadence_table(frame)  # on every row: the steps between dates
        fatal += mixed_cadence(frame, file=file, cadence=cadence)
        if not fatal:
            part = county_sample(frame)  # the distribution checks need no more values
            fatal += temperature_units(part, file=file)
            seen = {(f.column, f.county) for f in fatal}  # one finding per column and county
            fatal += [f for f in temperature_pairs(part, file=file)
                      if (f.column, f.county) not in seen]
            fatal += precipitation_units(part, file=file, cadence=cadence["cadence"])
            fatal += scaled_counties(part, "precip_mm", file=file)
    if table == "yields":
        fatal += mixed_units(frame, "unit", by="crop", file=file)
        if not fatal:
            by = tuple(b for b in ("crop", "practice") if b in frame.columns)
            fatal += scaled_counties(frame, "yield", by=by, file=file)
    if table == "prices":
        fatal += mixed_units(frame, "unit", by="commodity", file=file)
    return fatal


def fatal_line(findings: list[UnitFinding] | tuple[UnitFinding, ...], *, most: int = 3
               ) -> str:
    """One line for the error: the findings joined by `` | ``; the findings of one column
    and fix in more than ``most`` counties are told once, counting and naming the first ones
    (a whole column in another unit is one mistake, not one per county)."""
    groups: dict[tuple[str, str, str], list[UnitFinding]] = {}
    for f in findings:
        groups.setdefault((f.file, f.column, f.fix), []).append(f)
    parts = []
    for (file, column, fix), fs in groups.items():
        if len(fs) <= most:
            parts += [f.message() for f in fs]
            continue
        shown = ", ".join(f.county for f in fs[:most])
        place = fs[0].place
        parts.append(UnitFinding(file, column, "", f"{len(fs)} {place.replace('y', 'ie')}s "
                                 f"({shown} ...), e.g. {place} {fs[0].county}: {fs[0].found}",
                                 fix).message())
    return " | ".join(parts)


def temperature_units(frame: pd.DataFrame, *, file: str = "",
                      columns: tuple[str, ...] = TEMPERATURE_COLUMNS) -> list[UnitFinding]:
    """Counties whose Celsius columns hold Fahrenheit values.

    Rule, per column and county of at least :data:`UNIT_MIN_VALUES` values: the median is
    above 45 C (:data:`MEDIAN_TEMPERATURE_MAX_C`), or the 2nd-98th percentile spread is above
    80 C (:data:`SPREAD_TEMPERATURE_MAX_C`). A median above 150 is kelvin
    (:data:`KELVIN_MEDIAN_MIN`), whatever the count.
    Fahrenheit values of a temperate county (median 60 F) fail the first rule, those of a cold
    county (spread 1.8 times the Celsius spread) the second.

    Notes
    -----
    Conversion: C = (F - 32) x 5 / 9 (NIST Special Publication 811, 2008, section B.9).
    """
    out: list[UnitFinding] = []
    for col in (c for c in columns if c in frame.columns):  # at most three columns
        g = pd.to_numeric(frame[col], errors="coerce").groupby(_county(frame))
        med, lo, hi = g.median(), g.quantile(0.02), g.quantile(0.98)
        kelvin = med > KELVIN_MEDIAN_MIN
        bad = (((med > MEDIAN_TEMPERATURE_MAX_C) | ((hi - lo) > SPREAD_TEMPERATURE_MAX_C))
               & ~kelvin & (g.count() >= UNIT_MIN_VALUES))
        for county in med.index[kelvin.to_numpy()]:
            out.append(UnitFinding(
                file, col, str(county),
                f"median {med[county]:.1f} looks like kelvin (a median above "
                f"{KELVIN_MEDIAN_MIN:g} is neither Celsius nor Fahrenheit; record low -89.2 C "
                "= 184 K)", "convert the column to degrees Celsius, C = K - 273.15"))
        for county in med.index[bad.to_numpy()]:
            out.append(UnitFinding(
                file, col, str(county),
                f"median {med[county]:.1f} and 2-98 % spread {hi[county] - lo[county]:.1f} "
                f"look like degrees Fahrenheit (a Celsius median above "
                f"{MEDIAN_TEMPERATURE_MAX_C:g} or a spread above {SPREAD_TEMPERATURE_MAX_C:g} "
                f"is hotter or wider than any climate; record high 56.7 C)",
                "convert the column to degrees Celsius, C = (F - 32) x 5/9"))
    return out


def temperature_pairs(frame: pd.DataFrame, *, file: str = "") -> list[UnitFinding]:
    """Counties whose ``tmin_c`` and ``tmax_c`` cannot both be Celsius of the same days.

    Rules, per county over the rows holding both: ``tmin_c`` above ``tmax_c`` in more than
    :data:`INVERTED_SHARE_MAX` of them (a Fahrenheit ``tmin_c``, or the two columns
    exchanged), or a median
    ``tmax_c - tmin_c`` above :data:`DIURNAL_RANGE_MAX_C` (a Fahrenheit ``tmax_c``: in a cool
    county its values stay below the physical limits and its median below 45, so
    :func:`temperature_units` cannot see it).
    """
    if "tmin_c" not in frame.columns or "tmax_c" not in frame.columns:
        return []
    lo = pd.to_numeric(frame["tmin_c"], errors="coerce")
    hi = pd.to_numeric(frame["tmax_c"], errors="coerce")
    both = lo.notna() & hi.notna()
    d = pd.DataFrame({"c": _county(frame), "inv": lo > hi, "dtr": hi - lo,
                      "lo": lo, "hi": hi})[both.to_numpy()]
    g = d.groupby("c", sort=True)
    s = pd.DataFrame({"n": g.size(), "inv": g["inv"].sum(), "dtr": g["dtr"].median(),
                      "lo": g["lo"].median(), "hi": g["hi"].median()})
    out = []
    medians = "median tmin_c {lo:.1f}, tmax_c {hi:.1f}"
    s = s[s["n"] >= PAIR_MIN_ROWS]  # a few rows are judged by the row rules alone
    inverted = s["inv"] > INVERTED_SHARE_MAX * s["n"]
    for c, r in s[inverted].iterrows():  # flagged counties only
        out.append(UnitFinding(
            file, "tmin_c", str(c),
            f"tmin_c is above tmax_c in {int(r['inv']):,} of {int(r['n']):,} rows "
            f"({medians.format(**r)}): tmin_c looks like degrees Fahrenheit, or the two "
            "columns are exchanged",
            "convert tmin_c to degrees Celsius, C = (F - 32) x 5/9, or exchange the column "
            "names"))
    for c, r in s[(s["dtr"] > DIURNAL_RANGE_MAX_C) & ~inverted].iterrows():
        out.append(UnitFinding(
            file, "tmax_c", str(c),
            f"the median of tmax_c - tmin_c is {r['dtr']:.1f}, wider than the day-night range "
            f"of any climate (above {DIURNAL_RANGE_MAX_C:g} C; {medians.format(**r)}): tmax_c "
            "looks like degrees Fahrenheit",
            "convert tmax_c to degrees Celsius, C = (F - 32) x 5/9"))
    return out


def mixed_units(frame: pd.DataFrame, column: str, *, by: str, file: str = "",
                most: int = 5) -> list[UnitFinding]:
    """Groups (a crop, a commodity) whose rows name more than one unit in ``column``.

    Units are read from the table, never guessed: one group in two units would be compared
    and modelled as one series, so each such group is fatal, naming the units with their row
    counts and the counties (or regions) of the less common ones.
    """
    if column not in frame.columns or by not in frame.columns:
        return []
    unit = frame[column].astype("str").fillna("").str.strip()
    place = next((c for c in (COUNTY, "region") if c in frame.columns), None)
    d = pd.DataFrame({"g": frame[by].astype(str), "u": unit,
                      "p": frame[place].astype(str) if place else ""})[(unit != "").to_numpy()]
    n = d.groupby(["g", "u"], sort=True).size()
    out = []
    for g in sorted({k for k, _ in n.index}):  # one pass per crop or commodity
        units = n[g].sort_values(ascending=False, kind="stable")
        if len(units) < 2:
            continue
        parts = []
        for u, k in units.items():
            where = sorted(set(d.loc[(d["g"] == g) & (d["u"] == u), "p"]))
            shown = "" if u == units.index[0] or not place else (
                f"; {place} {', '.join(where[:most])}" + (" ..." if len(where) > most else ""))
            parts.append(f"{u} ({k:,} row{'s' * (k != 1)}{shown})")
        out.append(UnitFinding(
            file, column, "",
            f"{by} {g} is given in {len(units)} units: {', '.join(parts)}",
            f"give all {g} rows in one unit (convert the other rows to {units.index[0]} and "
            "write that unit)"))
    return out


def precipitation_units(frame: pd.DataFrame, *, file: str = "", column: str = "precip_mm",
                        cadence: pd.Series | None = None) -> list[UnitFinding]:
    """Counties whose millimetre column holds inches.

    Rule, per county (of at least :data:`UNIT_MIN_VALUES` positive values) and cadence
    (:func:`county_cadence`): the median of the positive values
    is below 1 mm (daily), 2 mm (weekly) or 5 mm (monthly), :data:`WET_STEP_MIN_MM`. A wet day
    is a day with at least 1 mm (Zhang et al. 2011), so most positive days below 1 mm is
    inches (1 in = 25.4 mm, exact by definition). ``cadence``: :func:`county_cadence` of the
    whole table, when ``frame`` is a sample of its rows.
    """
    if column not in frame.columns:
        return []
    v = pd.to_numeric(frame[column], errors="coerce")
    pos = v.where(v > 0)
    g = pos.groupby(_county(frame))
    med = g.median()
    cad = (county_cadence(frame) if cadence is None else cadence).reindex(med.index)
    limit = cad.map(WET_STEP_MIN_MM).astype(float)
    bad = ((med < limit) & (g.count() >= UNIT_MIN_VALUES)).to_numpy()
    return [UnitFinding(file, column, str(c),
                        f"the median {cad[c]} value above zero is {med[c]:.2f}, below "
                        f"{limit[c]:g} mm (looks like inches)",
                        "convert the column to millimetres, mm = inches x 25.4")
            for c in med.index[bad]]


def scaled_counties(frame: pd.DataFrame, column: str, *, by: tuple[str, ...] = (),
                    file: str = "", min_counties: int = 3) -> list[UnitFinding]:
    """Counties whose values are a unit factor off the other counties' median.

    Rule: per group (``by``, e.g. crop) and county, r = log10(county median / median of the
    county medians of the group). A county is flagged when ||r| - f| < tol for a factor f of
    :data:`FACTORS`: 10, 100, 1,000 (values scaled, kg/ha among t/ha), 62.77 (kg/ha among
    bu/acre) or 15.93 (bu/acre among t/ha), either way, and named by the nearest factor; tol is
    three median absolute deviations of the group's r, within :data:`FACTOR_TOLERANCE`. Groups
    with fewer than ``min_counties`` counties are not judged (no majority to compare with).
    """
    if column not in frame.columns or not len(frame):
        return []
    keys = [frame[b].astype(str) for b in by] + [_county(frame)]
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
    dev = (r.abs().groupby(level=level).transform("median") if by
           else pd.Series(float(r.abs().median()), index=r.index))
    tol = (3 * dev).clip(*FACTOR_TOLERANCE).to_numpy()
    gap = np.abs(np.abs(r.to_numpy())[:, None] - np.array([f for f, _, _ in FACTORS])[None, :])
    nearest = gap.argmin(axis=1)  # one finding per county: the nearest factor
    hit = (gap.min(axis=1) < tol) & (n.to_numpy() >= min_counties)
    out = []
    for i in np.flatnonzero(hit):  # flagged counties only
        _, size, meaning = FACTORS[int(nearest[i])]
        key = med.index[i] if isinstance(med.index[i], tuple) else (med.index[i],)
        group = ", ".join(f"{b} {k}" for b, k in zip(by, key[:-1], strict=True))
        way = "above" if r.iloc[i] > 0 else "below"
        out.append(UnitFinding(
            file, column, str(key[-1]),
            f"{group + ': ' if group else ''}median {med.iloc[i]:.4g} is {size} {way} the "
            f"median county's {ref.iloc[i]:.4g} ({meaning}?)",
            "give this county's values in the unit of the others (or fix the unit column)"))
    return out


def mixed_cadence(frame: pd.DataFrame, *, file: str = "", cadence: pd.DataFrame | None = None
                  ) -> list[UnitFinding]:
    """Counties whose rows come at another cadence than most counties of the table.

    Rule: the cadence of a county is the median step between its consecutive dates
    (:func:`county_cadence`); counties off the most common cadence are flagged. ``cadence``:
    the table's :func:`~impactlink.inputs._cadence.cadence_table`, when already computed.
    """
    tab = cadence_table(frame) if cadence is None else cadence
    cad = tab["cadence"][tab["dates"].to_numpy() >= 3]  # too few dates to judge a cadence
    if cad.nunique() < 2:
        return []
    main = cad.value_counts().index[0]
    return [UnitFinding(file, DATE, str(c), f"{cad[c]} rows among {main} rows of the other "
                        "counties", f"give every county {main} rows (or split the table)")
            for c in cad.index[(cad != main).to_numpy()]]


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
        cat = pd.Categorical(_county(frame))  # per county, then spread by code
        per = county_cadence(frame).reindex(cat.categories.astype(str)).to_numpy(object)
        lim = pd.Series(per).map({k: b for k, (_, b) in LIMITS["precip_mm"].items()})
        hi = lim.to_numpy(float)[cat.codes]
        bad = pd.Series(v.to_numpy() > hi, index=frame.index)
        span = {"daily": "24-hour", "weekly": "7-day (7 x 24-hour)", "monthly": "one-month"}
        rows = bad.to_numpy()  # reasons for the rejected rows only
        reason = [f"{span[c]} rainfall record ({h:g} mm, WMO) exceeded"
                  for c, h in zip(per[cat.codes[rows]], hi[rows], strict=True)]
        parts.append(_rows(frame, "precip_mm", v, bad, np.asarray(reason, dtype=object)))
    parts = [p for p in parts if len(p)]
    return pd.concat(parts, ignore_index=True) if parts else _empty_rejected()


def _rows(frame: pd.DataFrame, col: str, v: pd.Series, bad: pd.Series, reason) -> pd.DataFrame:
    return pd.DataFrame({"row": frame.index[bad.to_numpy()], "column": col,
                         "value": v[bad].to_numpy(), "reason": reason})


def _empty_rejected() -> pd.DataFrame:
    return pd.DataFrame({"row": pd.Series(dtype=np.int64), "column": pd.Series(dtype=object),
                         "value": pd.Series(dtype=float), "reason": pd.Series(dtype=object)})
