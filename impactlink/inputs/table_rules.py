"""Row rules of the contract tables: ranges, levels, coordinates, unknown counties, duplicates.

Each rule takes a :class:`~impactlink.inputs._rules.TableCheck` and the reading context and
rejects the rows that break it (vectorised over rows; no Python loop over rows).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from impactlink.inputs._cadence import first_rows, with_county_codes
from impactlink.inputs._errors import REASONS, InputError
from impactlink.inputs._rules import TableCheck, map_levels
from impactlink.schema import COUNTY, REGION, TableSpec

if TYPE_CHECKING:
    from impactlink.inputs.tables import _Context

__all__ = ["YEAR_RANGE", "TEMPERATURE_RANGE_C", "DEFAULT_REGION"]

#: Plausible range of a yield year (common practice: no crop record predates 1800).
YEAR_RANGE = (1800, 2100)
#: Plausible air temperature range in degrees C (the recorded extremes are about -89 and +57).
TEMPERATURE_RANGE_C = (-90.0, 60.0)
#: Default field-report severity range when no ``severity_range`` option is given.
DEFAULT_SEVERITY_RANGE = (1, 5)
#: Default notice ladder when no ``ladder`` option is given.
DEFAULT_LADDER = (1, 2, 3)
#: Region given to counties whose file has no ``region`` column.
DEFAULT_REGION = "all"



def _climate(check: TableCheck, ctx: _Context) -> None:
    c = check.clean
    temps = [t for t in ("tmin_c", "tmax_c", "tmean_c") if t in c]
    lo, hi = TEMPERATURE_RANGE_C
    for t in temps:
        v = c[t].to_numpy()
        with np.errstate(invalid="ignore"):
            check.reject((v < lo) | (v > hi), t, check.raw_text(t), REASONS["temperature"])
    if "tmin_c" in c and "tmax_c" in c:
        tmin, tmax = c["tmin_c"].to_numpy(), c["tmax_c"].to_numpy()
        with np.errstate(invalid="ignore"):
            bad = tmin > tmax
        check.reject(
            bad, "tmin_c", lambda i: [f"tmin_c={a:g} > tmax_c={b:g}" for a, b in zip(tmin[i], tmax[i])],
            REASONS["tmin_tmax"],
        )


def _yields(check: TableCheck, ctx: _Context) -> None:
    y = check.clean["year"].to_numpy()
    with np.errstate(invalid="ignore"):
        bad = (y < YEAR_RANGE[0]) | (y > YEAR_RANGE[1])
    check.reject(bad, "year", check.raw_text("year"), REASONS["year"])


def _price_index(check: TableCheck, ctx: _Context) -> None:
    v = check.clean["price_index"].to_numpy()
    check.reject(v == 0, "price_index", check.raw_text("price_index"), REASONS["zero_index"])


def _notices(check: TableCheck, ctx: _Context) -> None:
    # level 0 = "restrictions lifted" (the linking stage ends open notices with it)
    _levels(check, ctx, "level", allow_zero=True)
    _end_before_start(check)
    _coordinates(check)
    c = check.clean
    has_county = (c[COUNTY] != "").to_numpy() if COUNTY in c else np.zeros(check.n, bool)
    if "lon" in c and "lat" in c:
        has_point = (c["lon"].notna() & c["lat"].notna()).to_numpy()
    else:
        has_point = np.zeros(check.n, bool)
    check.reject(~has_county & ~has_point, COUNTY, "", REASONS["no_location"])


def _notice_snapshots(check: TableCheck, ctx: _Context) -> None:
    _levels(check, ctx, "stage", allow_zero=True)
    _coordinates(check)


def _water_systems(check: TableCheck, ctx: _Context) -> None:
    _coordinates(check)


def _field_reports(check: TableCheck, ctx: _Context) -> None:
    if "severity" not in check.clean:
        return
    lo, hi = ctx.severity_range
    v = check.clean["severity"].to_numpy()
    with np.errstate(invalid="ignore"):
        bad = (v < lo) | (v > hi)
    check.reject(bad, "severity", check.raw_text("severity"), REASONS["severity"])


def _coverage(check: TableCheck, ctx: _Context) -> None:
    _end_before_start(check)
    c = check.clean
    has = np.zeros(check.n, bool)
    for col in (COUNTY, REGION):
        if col in c:
            has |= (c[col] != "").to_numpy()
    check.reject(~has, COUNTY if COUNTY in c else REGION, "", REASONS["no_area"])


_RULES: dict[str, Callable[[TableCheck, _Context], None]] = {
    "climate": _climate,
    "yields": _yields,
    "price_index": _price_index,
    "notices": _notices,
    "notice_snapshots": _notice_snapshots,
    "water_systems": _water_systems,
    "field_reports": _field_reports,
    "coverage": _coverage,
}


def _levels(check: TableCheck, ctx: _Context, col: str, *, allow_zero: bool) -> None:
    text = check.clean[col]
    levels, bad = map_levels(
        text, check.clean["issuer"], n_levels=ctx.n_levels, names=ctx.stage_names,
        allow_zero=allow_zero,
    )
    check.reject(bad, col, check.raw_text(col), REASONS["level"])
    check.clean[f"{col}_label"] = text
    check.clean[col] = pd.Series(levels, index=text.index)


def _end_before_start(check: TableCheck) -> None:
    c = check.clean
    if "end_date" not in c:
        return
    s, e = c["start_date"], c["end_date"]
    bad = (e < s).to_numpy()
    check.reject(
        bad, "end_date",
        lambda i: [f"{a:%Y-%m-%d} < {b:%Y-%m-%d}" for a, b in zip(e.iloc[i], s.iloc[i])],
        REASONS["end_before_start"],
    )


def _coordinates(check: TableCheck) -> None:
    c = check.clean
    for col, lim in (("lon", 180.0), ("lat", 90.0)):
        if col in c:
            v = c[col].to_numpy()
            with np.errstate(invalid="ignore"):
                check.reject(np.abs(v) > lim, col, check.raw_text(col), REASONS["coordinates"])


def _reject_unknown_counties(check: TableCheck, ctx: _Context, path: Path) -> None:
    if COUNTY not in check.clean or ctx.county_ids is None:
        return
    ids = check.clean[COUNTY]
    given = (ids != "").to_numpy()
    unknown = given & ~ids.isin(ctx.county_ids).to_numpy()
    live = given & check.alive
    if live.any() and not (live & ~unknown).any():
        sample = sorted(set(ids[live]))[:5]
        known = list(ctx.county_ids[:5])
        hint = ""
        stripped = set(ctx.county_ids.str.lstrip("0"))
        if any(s.lstrip("0") in stripped for s in sample):
            hint = " The ids look like they lost or gained leading zeros: store ids as text."
        raise InputError(
            f"{path}: none of the county ids in column {COUNTY!r} is in the counties table "
            f"(e.g. {sample}; counties has e.g. {known}).{hint} Use the same county ids in "
            f"every table"
        )
    check.reject(unknown, COUNTY, ids, REASONS["unknown_county"])


def _warn_unknown_regions(check: TableCheck, ctx: _Context, path: Path, notes: list[str]) -> None:
    if REGION not in check.clean or not ctx.regions or ctx.regions == {DEFAULT_REGION}:
        return
    r = check.clean[REGION]
    odd = sorted(set(r[check.alive & (r != "").to_numpy()]) - ctx.regions)
    if odd:
        notes.append(
            f"{path}: region(s) {odd[:5]} are not regions of the counties table "
            f"({sorted(ctx.regions)[:5]}); rows are kept"
        )


def _reject_duplicates(check: TableCheck, spec: TableSpec) -> None:
    """Reject the later of two usable rows with the same key; the reason names the first."""
    key = [k for k in spec.key if k in check.clean]
    if not key or not check.alive.any():
        return
    live = np.flatnonzero(check.alive)
    every = live.size == check.n
    sub = with_county_codes(pd.DataFrame(
        {k: check.clean[k] if every else check.clean[k].iloc[live] for k in key}))
    if first_rows(sub, key).all():  # every key once (on integer codes): nothing to reject
        return
    del sub  # some key repeats: the codes below name the first row of each
    # One integer code per distinct key (factorize each column, fold them together and
    # re-factorize after each step so the codes stay below the row count).
    code = np.zeros(live.size, dtype=np.int64)
    for k in key:
        col, _ = pd.factorize(check.clean[k].iloc[live], use_na_sentinel=False)
        code, _ = pd.factorize(code * (int(col.max(initial=0)) + 1) + col)
    _, first, inverse = np.unique(code, return_index=True, return_inverse=True)
    first_of_row = first[inverse]
    dup = first_of_row != np.arange(live.size)
    if not dup.any():
        return
    mask = np.zeros(check.n, bool)
    mask[live[dup]] = True
    reasons = np.empty(check.n, dtype=object)
    reasons[live[dup]] = [
        REASONS["duplicate"].format(row=r) for r in check.rows[live[first_of_row[dup]]]
    ]
    parts = []
    for k in key:
        v = check.clean[k].iloc[live[dup]]
        if pd.api.types.is_datetime64_any_dtype(v.dtype):
            v = v.dt.strftime("%Y-%m-%d")
        elif pd.api.types.is_float_dtype(v.dtype):  # a year read as a number: 1981, not 1981.0
            v = v.map(lambda x: f"{x:g}" if x != round(x) else str(int(x)))
        parts.append(v.astype(object).astype(str).to_numpy())
    values = np.empty(check.n, dtype=object)
    values[live[dup]] = [" | ".join(t) for t in zip(*parts)]
    check.reject(mask, "+".join(key), values, reasons)

