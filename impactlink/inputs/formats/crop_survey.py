"""NASS Quick Stats CSV exports -> the yields contract.

A Quick Stats export (the "Spreadsheet" download of https://quickstats.nass.usda.gov) has 21
quoted text columns, written by the publisher as :data:`QUICKSTATS_COLUMNS`. The file is
recognised by that header (:func:`sniff_quickstats`), never by its name.

What the reader does, in order (each raw row is used or rejected once, with the first rule it
breaks; ``row`` is the data row, header excluded, as in the inputs stage):

1. ``Data Item`` is split as NASS composes it, ``COMMODITY[, descriptor...] - STATISTIC[,
   MEASURED IN UNIT]``, e.g. ``CORN, GRAIN, IRRIGATED - YIELD, MEASURED IN BU / ACRE``:
   crop (the commodity), practice (``IRRIGATED`` -> irrigated, ``NON-IRRIGATED`` ->
   non-irrigated, neither -> all), utilisation (the other descriptors, e.g. ``grain``),
   statistic (``yield``) and unit (``bu / acre``). Rows whose statistic is not a yield, whose
   domain is a breakdown (not ``TOTAL``) or whose period is not the annual estimate
   (``YEAR``; e.g. ``YEAR - AUG FORECAST``) are rejected with their own reason.
2. The place: ``Geo Level`` ``COUNTY`` -> ``county_id`` = State ANSI (2 digits) + County ANSI
   (3 digits), the county GEOID; ``STATE`` -> ``county_id`` = State ANSI (the state as one
   unit). Pooled rows (``OTHER (COMBINED) COUNTIES``, ``OTHER COUNTIES``: NASS's total of the
   counties it does not publish in an agricultural district) have no County ANSI and are
   rejected with their own reason, as are other geographic levels.
3. ``Value`` is text: thousands separators are removed; the publisher's markers are rejected,
   each with its own reason (:data:`MARKER_REASONS`); anything else that is not a number is
   "unparseable number".
4. A second row with the same county, year, crop and practice is rejected as a duplicate.

The ``crop`` label of the contract is the commodity with its utilisation, in lower case
(``corn grain``, ``corn silage``, ``wheat winter``), so two utilisations of one commodity in
one file stay two crops.
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import REASONS, InputError
from impactlink.inputs._rules import SourceRows
from impactlink.inputs.formats._ledger import HEADER_ROWS, FormatResult, RowLedger, read_text_csv
from impactlink.schema import COUNTY, YEAR

__all__ = [
    "QUICKSTATS_COLUMNS",
    "MARKER_REASONS",
    "QUICKSTATS_REASONS",
    "sniff_quickstats",
    "read_quickstats",
    "parse_data_item",
]

#: The 21 columns of a Quick Stats CSV export, as the publisher writes them.
QUICKSTATS_COLUMNS = (
    "Program", "Year", "Period", "Week Ending", "Geo Level", "State", "State ANSI",
    "Ag District", "Ag District Code", "County", "County ANSI", "Zip Code", "Region",
    "watershed_code", "Watershed", "Commodity", "Data Item", "Domain", "Domain Category",
    "Value", "CV (%)",
)

#: The publisher's markers in ``Value`` and the reason each row is rejected with (NASS
#: Quick Stats glossary, "Symbols").
MARKER_REASONS = {
    "(D)": "withheld by NASS to avoid disclosing data for individual operations (D)",
    "(Z)": "less than half the unit shown (Z)",
    "(NA)": "not available (NA)",
    "(S)": "withheld by NASS: insufficient number of reports (S)",
    "(X)": "not applicable (X)",
}

#: Reasons of the other rejection rules (stable texts; details sit in ``column``/``value``).
QUICKSTATS_REASONS = {
    "pooled": "pooled 'other counties' total of an agricultural district (no County ANSI)",
    "no_county_ansi": "no County ANSI code",
    "geo_level": "geographic level is not COUNTY or STATE",
    "not_yield": "data item is not a yield",
    "domain": "domain is a breakdown, not TOTAL",
    "period": "period is not the annual estimate (YEAR)",
    "data_item": "data item not in the NASS form 'COMMODITY - STATISTIC, MEASURED IN UNIT'",
}

_PRACTICES = {"IRRIGATED": "irrigated", "NON-IRRIGATED": "non-irrigated"}
_ITEM = re.compile(r"^(?P<head>[^-].*?) - (?P<stat>[^,]+?)(?:, MEASURED IN (?P<unit>.+))?$")
_NUMBER = re.compile(r"^-?(?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d*)?$|^-?\.\d+$")


def sniff_quickstats(path: str | Path) -> bool:
    """True when the file's header holds the 21 Quick Stats export columns.

    Parameters
    ----------
    path : str or Path
        Any file; only its first line is read.

    Returns
    -------
    bool
        False for a missing, unreadable or non-CSV file.
    """
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            header = next(csv.reader([fh.readline()]), [])
    except (OSError, UnicodeDecodeError):
        return False
    return set(QUICKSTATS_COLUMNS) <= {h.strip() for h in header}


def read_quickstats(path: str | Path) -> FormatResult:
    """Read a Quick Stats CSV export into the yields contract.

    Parameters
    ----------
    path : str or Path
        The export as downloaded (any name).

    Returns
    -------
    FormatResult
        ``frame``: ``county_id``, ``year``, ``crop``, ``yield``, ``unit``, ``practice`` (one
        row per county, year, crop and practice, sorted); ``rejected``: one line per raw row
        not used; ``details["items"]``: one line per data item found (``data_item``,
        ``crop``, ``commodity``, ``utilisation``, ``practice``, ``statistic``, ``unit``,
        ``rows``, ``rows_used``).

    Raises
    ------
    InputError
        The file lacks Quick Stats columns, or no row gives a usable yield.

    Notes
    -----
    Quick Stats ``Value`` cells are text such as ``"1,234.5"`` or ``"(D)"``; no value is
    imputed. See the module docstring for the rules, in the order they run.
    """
    path = Path(path)
    raw = read_text_csv(path, what="Quick Stats export")
    missing = [c for c in QUICKSTATS_COLUMNS if c not in raw.columns]
    if missing:
        raise InputError(f"{path}: not a NASS Quick Stats export: no column(s) {missing}; "
                         "download the table again as CSV from Quick Stats (Spreadsheet)")
    led = RowLedger("yields", str(path), len(raw))
    col = {c: raw[c].str.strip() for c in QUICKSTATS_COLUMNS}
    items = _parse_items(col["Data Item"])
    _item_rules(led, col, items)
    county_id = _place_rules(led, col)
    value = _value_rules(led, col["Value"])
    year = pd.to_numeric(col["Year"], errors="coerce").to_numpy(float)
    bad_year = ~np.isfinite(year) | (np.round(year) != year)
    led.reject(bad_year, "Year", col["Year"], REASONS["whole"])
    frame = pd.DataFrame({
        COUNTY: county_id, YEAR: np.where(led.alive, year, 0).astype(np.int64),
        "crop": items["crop"].to_numpy(), "yield": value,
        "unit": items["unit"].to_numpy(), "practice": items["practice"].to_numpy()})
    _duplicates(led, frame)
    if not led.alive.any():
        why = led.rejected()["reason"].value_counts().head(3).to_dict()
        raise InputError(f"{path}: no usable yield row in {led.n} rows (most common reasons: "
                         f"{why}); download yields (Data Item '... - YIELD ...') at COUNTY or "
                         "STATE level")
    used = frame.assign(_row=np.arange(1, led.n + 1) + HEADER_ROWS).loc[led.alive].sort_values(
        [COUNTY, "crop", "practice", YEAR], ignore_index=True)
    # file rows of the kept rows, so a later stage that rejects a yield names its row
    used.attrs["source_rows"] = SourceRows(used.pop("_row").to_numpy())
    summary = items.assign(data_item=col["Data Item"], used=led.alive).groupby(
        ["data_item", "crop", "commodity", "utilisation", "practice", "statistic", "unit"],
        sort=True, dropna=False).agg(rows=("used", "size"), rows_used=("used", "sum")
                                     ).reset_index()
    notes = [f"{path}: read as a NASS Quick Stats export ({led.n} rows, "
             f"{int(led.alive.sum())} yields used)"]
    return FormatResult("yields", str(path), used, led.rejected(), led.n, tuple(notes),
                        {"items": summary})


def parse_data_item(item: str) -> dict[str, str]:
    """Split one Quick Stats ``Data Item`` into its parts.

    Parameters
    ----------
    item : str
        E.g. ``"CORN, GRAIN, IRRIGATED - YIELD, MEASURED IN BU / ACRE"``.

    Returns
    -------
    dict
        ``crop``, ``commodity``, ``utilisation``, ``practice``, ``statistic``, ``unit`` (lower
        case; ``practice`` is ``irrigated``, ``non-irrigated`` or ``all``; an empty string
        for a part that is absent). All empty when the text is not in the NASS form.

    Examples
    --------
    >>> p = parse_data_item("CORN, GRAIN, IRRIGATED - YIELD, MEASURED IN BU / ACRE")
    >>> p["crop"], p["practice"], p["utilisation"], p["statistic"], p["unit"]
    ('corn grain', 'irrigated', 'grain', 'yield', 'bu / acre')
    >>> parse_data_item("SOYBEANS - YIELD, MEASURED IN BU / ACRE")["crop"]
    'soybeans'
    """
    row = _parse_items(pd.Series([item])).iloc[0]
    return {k: str(row[k]) for k in row.index}


# ----------------------------------------------------------------------- steps
def _parse_items(text: pd.Series) -> pd.DataFrame:
    """Vectorised split of ``Data Item`` (one regex over the distinct items)."""
    uniq, inverse = np.unique(text.to_numpy(dtype=str), return_inverse=True)
    rows = []
    for item in uniq:  # distinct data items only (a handful per file)
        m = _ITEM.match(item)
        if m is None:
            rows.append(dict.fromkeys(("crop", "commodity", "utilisation", "practice",
                                       "statistic", "unit"), ""))
            continue
        parts = [p.strip() for p in m["head"].split(",") if p.strip()]
        practice = [_PRACTICES[p] for p in parts[1:] if p in _PRACTICES]
        util = [p.lower() for p in parts[1:] if p not in _PRACTICES]
        commodity = parts[0].lower()
        rows.append({
            "crop": " ".join([commodity, *util]), "commodity": commodity,
            "utilisation": ", ".join(util), "practice": practice[0] if practice else "all",
            "statistic": m["stat"].strip().lower(), "unit": (m["unit"] or "").strip().lower()})
    table = pd.DataFrame(rows, columns=["crop", "commodity", "utilisation", "practice",
                                        "statistic", "unit"])
    return table.iloc[inverse.ravel()].reset_index(drop=True)


def _item_rules(led: RowLedger, col: dict[str, pd.Series], items: pd.DataFrame) -> None:
    r = QUICKSTATS_REASONS
    led.reject((items["crop"] == "").to_numpy(), "Data Item", col["Data Item"], r["data_item"])
    led.reject((items["statistic"] != "yield").to_numpy(), "Data Item", col["Data Item"],
               r["not_yield"])
    led.reject((col["Domain"].str.upper() != "TOTAL").to_numpy(), "Domain", col["Domain"],
               r["domain"])
    led.reject((col["Period"].str.upper() != "YEAR").to_numpy(), "Period", col["Period"],
               r["period"])


def _place_rules(led: RowLedger, col: dict[str, pd.Series]) -> np.ndarray:
    """County GEOID (or state code) of every row; rejects the rows that have none."""
    r = QUICKSTATS_REASONS
    level = col["Geo Level"].str.upper().to_numpy()
    state = col["State ANSI"].to_numpy(dtype=str)
    county = col["County ANSI"].to_numpy(dtype=str)
    led.reject(~np.isin(level, ["COUNTY", "STATE"]), "Geo Level", col["Geo Level"],
               r["geo_level"])
    digits_state = np.char.isdigit(state) & (np.char.str_len(state) <= 2)
    led.reject(~digits_state, "State ANSI", state, REASONS["missing"])
    is_county = level == "COUNTY"
    pooled = is_county & (county == "") & col["County"].str.upper().str.startswith(
        "OTHER").to_numpy()
    led.reject(pooled, "County", col["County"], r["pooled"])
    digits_county = np.char.isdigit(county) & (np.char.str_len(county) <= 3)
    led.reject(is_county & ~digits_county, "County ANSI", county, r["no_county_ansi"])
    geoid = np.where(is_county, np.char.add(np.char.zfill(state, 2), np.char.zfill(county, 3)),
                     np.char.zfill(state, 2))
    return geoid.astype(object)


def _value_rules(led: RowLedger, value: pd.Series) -> np.ndarray:
    text = value.to_numpy(dtype=str)
    upper = np.char.upper(np.char.replace(text, " ", ""))
    for marker, reason in MARKER_REASONS.items():
        led.reject(upper == marker, "Value", text, reason)
    led.reject(text == "", "Value", text, REASONS["missing"])
    ok = value.str.match(_NUMBER).to_numpy()
    led.reject(~ok, "Value", text, REASONS["number"])
    number = pd.to_numeric(value.str.replace(",", "", regex=False).where(ok), errors="coerce"
                           ).to_numpy(float)
    led.reject(number < 0, "Value", text, REASONS["negative"].format(quantity="yield"))
    return number


def _duplicates(led: RowLedger, frame: pd.DataFrame) -> None:
    """Reject a later row with the key (county, year, crop, practice) of an earlier one."""
    live = np.flatnonzero(led.alive)
    codes = frame.iloc[live].groupby([COUNTY, YEAR, "crop", "practice"], sort=False).ngroup()
    first = pd.Series(live).groupby(codes.to_numpy()).transform("min").to_numpy()
    later = first != live
    if not later.any():
        return
    mask = np.zeros(led.n, dtype=bool)
    mask[live[later]] = True
    reason = np.full(led.n, "", dtype=object)
    reason[live[later]] = [REASONS["duplicate"].format(row=r + 1 + HEADER_ROWS)
                           for r in first[later]]
    led.reject(mask, COUNTY, frame[COUNTY].to_numpy(), reason)
