"""Vectorised coercion and row rules for one table.

A :class:`TableCheck` holds the raw frame of one file, a boolean "still usable" flag per row
and the rejected-row records. Every rule is a whole-column numpy/pandas operation: no Python
loop runs over rows, so a million-row climate table is checked in seconds.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
import pandas as pd

from impactlink.errors import InputError
from impactlink.inputs._errors import REASONS
from impactlink.schema import SENTINELS

#: Text that means "missing" in a numeric or date cell (compared in lower case). A blank
#: cell is the contract's missing value; these common spellings are accepted as blank too.
NA_SPELLINGS = ("na", "n/a", "nan", "null", "none", "nat", "#n/a")

#: Plain words for the quantity in a ``negative ...`` reason.
QUANTITY = {
    "precip_mm": "precipitation",
    "pet_mm": "evapotranspiration",
    "yield": "yield",
    "price": "price",
    "price_index": "price index",
    "population_served": "population served",
}

REJECTED_COLUMNS = ["table", "file", "row", "column", "value", "reason"]


class TableCheck:
    """Raw frame of one file + per-row usable flags + rejected-row records.

    Parameters
    ----------
    table : str
        Contract table name.
    file : str
        File path as shown to the user.
    frame : DataFrame
        The raw frame; row ``i`` (0-based) is data row ``i + 1`` of the file (header excluded).
    """

    def __init__(self, table: str, file: str, frame: pd.DataFrame) -> None:
        self.table = table
        self.file = file
        self.frame = frame.reset_index(drop=True)
        self.n = len(self.frame)
        self.rows = np.arange(1, self.n + 1, dtype=np.int64)
        self.alive = np.ones(self.n, dtype=bool)
        self.blank = np.zeros(self.n, dtype=bool)  # wholly blank rows, reported once
        self.clean: dict[str, pd.Series] = {}
        self._rejects: list[pd.DataFrame] = []

    # ---------------------------------------------------------------- recording
    def reject(
        self,
        mask: Any,
        column: str,
        values: Any,
        reason: str | np.ndarray,
        *,
        only_alive: bool = True,
    ) -> None:
        """Record the rows in ``mask`` as rejected and mark them unusable.

        ``only_alive=False`` is used by the cell-by-cell coercion, so a row with several bad
        cells lists each of them; later rules only look at rows that are still usable.
        """
        mask = np.asarray(mask, dtype=bool)
        if only_alive:
            mask = mask & self.alive
        else:
            mask = mask & ~self.blank
        if not mask.any():
            return
        idx = np.flatnonzero(mask)
        if isinstance(values, str):
            shown = np.full(idx.size, values, dtype=object)
        elif callable(values):  # built only for the rejected rows (cheap on big tables)
            shown = np.asarray(values(idx), dtype=object)
        else:
            vals = values.iloc[idx] if isinstance(values, pd.Series) else np.asarray(values)[idx]
            shown = _display(pd.Series(np.asarray(vals, dtype=object)))
        if not isinstance(reason, str):
            reason = np.asarray(reason, dtype=object)[idx]
        self._rejects.append(
            pd.DataFrame(
                {
                    "table": self.table,
                    "file": self.file,
                    "row": self.rows[idx],
                    "column": column,
                    "value": shown,
                    "reason": reason,
                }
            )
        )
        self.alive &= ~mask

    def rejected(self) -> pd.DataFrame:
        if not self._rejects:
            return _empty_rejected()
        return pd.concat(self._rejects, ignore_index=True)

    def raw_text(self, column: str) -> Callable[[np.ndarray], np.ndarray]:
        """The column as the user wrote it (for the ``value`` field), built only for the
        rejected rows."""
        raw = self.frame[column]
        return lambda idx: _display(raw.iloc[idx])

    def reject_blank_rows(self) -> None:
        """A row with every cell blank (a blank line in a CSV) is reported once as a blank row."""
        if self.n == 0 or not len(self.frame.columns):
            return
        if not all(pd.api.types.is_string_dtype(t) for t in self.frame.dtypes):
            return  # typed (Parquet) frames: blank rows show up as missing values instead
        # Only rows whose first cell is blank can be blank rows: test the rest on those alone.
        cand = np.flatnonzero(_blank(self.frame.iloc[:, 0]))
        if cand.size == 0:
            return
        sub = self.frame.iloc[cand]
        all_blank = np.logical_and.reduce([_blank(sub[c]) for c in sub.columns])
        blank = np.zeros(self.n, dtype=bool)
        blank[cand[all_blank]] = True
        self.reject(blank, "", "", REASONS["blank"])
        self.blank = blank

    # ---------------------------------------------------------------- coercion
    def coerce(self, column: str, kind: str, *, required: bool) -> None:
        """Convert one column to its contract kind and reject the cells that do not fit."""
        raw = self.frame[column]
        if kind in ("id", "str"):
            values, missing = text_column(raw)
        elif kind == "date":
            values, missing, bad, far = date_column(raw)
            self.reject(bad, column, raw, REASONS["date"], only_alive=False)
            self.reject(far, column, raw, REASONS["date_range"], only_alive=False)
        elif kind in ("float", "nonneg_float", "int"):
            values, missing = self._number(column, raw, kind)
        elif kind == "level":
            values, missing = text_column(raw)  # mapped to integers by the table's rule
        else:  # pragma: no cover - schema guard
            raise InputError(f"unknown column kind {kind!r}")
        if required:
            self.reject(missing, column, "", REASONS["missing"], only_alive=False)
        self.clean[column] = values

    def _number(self, column: str, raw: pd.Series, kind: str) -> tuple[pd.Series, np.ndarray]:
        values, missing, bad = number_column(raw)
        self.reject(bad, column, raw, REASONS["number"], only_alive=False)
        v = values.to_numpy()
        with np.errstate(invalid="ignore"):
            sentinel = np.isin(v, SENTINELS)
            self.reject(sentinel, column, raw, REASONS["sentinel"], only_alive=False)
            self.reject(np.isinf(v), column, raw, REASONS["not_finite"], only_alive=False)
            if kind == "nonneg_float":
                reason = REASONS["negative"].format(quantity=QUANTITY.get(column, "value"))
                self.reject((v < 0) & ~sentinel, column, raw, reason, only_alive=False)
            if kind == "int":
                whole = np.isfinite(v) & (v != np.round(v))
                self.reject(whole, column, raw, REASONS["whole"], only_alive=False)
        return values, missing

    # ---------------------------------------------------------------- finishing
    def used(self, columns: list[str]) -> pd.DataFrame:
        """The usable rows, with the clean version of ``columns`` (raw for the rest)."""
        keep = self.alive
        every = bool(keep.all())  # no row rejected: the columns as they are (no copy)
        out = {}
        for c in columns:
            s = self.clean[c] if c in self.clean else self.frame[c]
            out[c] = (s if every else s[keep]).reset_index(drop=True)
        frame = pd.DataFrame(out)
        # file row numbers of the kept rows, so later stages can name the row they reject
        frame.attrs["source_rows"] = SourceRows(self.rows[np.asarray(keep, dtype=bool)])
        return frame


class SourceRows:
    """File row numbers (1-based, header excluded) of a clean frame's rows.

    Kept in ``frame.attrs["source_rows"]``; wrapped so that pandas can compare attrs
    (a bare array is ambiguous in ``==``).
    """

    __slots__ = ("rows",)

    def __init__(self, rows: np.ndarray) -> None:
        self.rows = np.asarray(rows, dtype=np.int64)

    def __array__(self, dtype=None, copy=None):
        return self.rows if dtype is None else self.rows.astype(dtype)

    def __len__(self) -> int:
        return len(self.rows)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, SourceRows) and np.array_equal(self.rows, other.rows)

    __hash__ = None  # type: ignore[assignment]

    def __deepcopy__(self, memo):
        return self


# -------------------------------------------------------------------- column converters
def text_column(raw: pd.Series) -> tuple[pd.Series, np.ndarray]:
    """Stripped text; numbers stored as numbers become their integer text (``1001.0`` -> ``1001``)."""
    if pd.api.types.is_float_dtype(raw.dtype):
        v = raw.to_numpy(dtype=float, na_value=np.nan)
        whole = np.isfinite(v) & (v == np.round(v))
        text = raw.astype(object).astype(str)
        text[whole] = pd.Series(v[whole]).astype(np.int64).astype(str).to_numpy()
        s = pd.Series(text, index=raw.index, dtype="str").where(~np.isnan(v), "")
    elif pd.api.types.is_string_dtype(raw.dtype) and not pd.api.types.is_object_dtype(raw.dtype):
        s = raw.fillna("") if raw.hasnans else raw
    else:
        s = raw.astype(object).where(raw.notna(), "").astype("str")
    stripped = s.str.strip()
    if not (stripped.str.len() == s.str.len()).all():  # else no copy (a national table's ids)
        s = stripped
    del stripped
    missing = (s == "").to_numpy()
    return s, missing


#: Dates the contract holds: within the span of a nanosecond timestamp (pandas' datetime64[ns],
#: 1677-09-21 .. 2262-04-11), whole days. A date outside (a typed year 2400 or 1200) is
#: rejected by row as "date out of range".
DATE_SPAN = (pd.Timestamp("1677-09-22"), pd.Timestamp("2262-04-11"))


def date_column(raw: pd.Series) -> tuple[pd.Series, np.ndarray, np.ndarray, np.ndarray]:
    """Dates (ISO 8601 text or stored dates) as midnight-normalised datetime64[ns].

    Returns the dates, and masks of missing cells, unparseable cells and dates outside
    :data:`DATE_SPAN` (set to NaT).
    """
    if pd.api.types.is_datetime64_any_dtype(raw.dtype):
        d = raw
        missing = d.isna().to_numpy()
        bad = np.zeros(len(d), dtype=bool)
        ns = _as_nanoseconds(d)  # stored dates: one conversion, no more copies
        if ns is not None:
            whole = ns.to_numpy().view(np.int64) % 86_400_000_000_000 == 0
            if bool(whole[~missing].all()):
                return ns, missing, bad, np.zeros(len(d), dtype=bool)
    elif pd.api.types.is_numeric_dtype(raw.dtype) or pd.api.types.is_bool_dtype(raw.dtype):
        # numbers are not dates (an integer would read as nanoseconds after 1970)
        missing = raw.isna().to_numpy()
        d = pd.Series(pd.NaT, index=raw.index, dtype="datetime64[ns]")
        bad = ~missing
    else:
        if pd.api.types.is_string_dtype(raw.dtype) and not pd.api.types.is_object_dtype(raw.dtype):
            text = raw.fillna("").str.strip()
            missing = (text == "") | text.str.lower().isin(NA_SPELLINGS)
            if (text.str.len() > 10).any():
                # A date with a time (and maybe a UTC offset): the calendar date as written
                # is the date meant; offsets would otherwise mix time zones.
                timed = text.str.match(r"^\d{4}-\d{2}-\d{2}[T ]")
                text = text.where(~timed, text.str.slice(0, 10))
            try:
                d = pd.to_datetime(text.where(~missing), format="ISO8601", errors="coerce")
            except ValueError:  # mixed offsets in forms the slice above does not cover
                d = pd.to_datetime(text.where(~missing), format="ISO8601", errors="coerce",
                                   utc=True)
        else:  # Python date objects from Parquet date32, mixed objects
            missing = raw.isna()
            d = pd.to_datetime(raw, errors="coerce")
        missing = missing.to_numpy()
        bad = d.isna().to_numpy() & ~missing
    if getattr(d.dt, "tz", None) is not None:
        d = d.dt.tz_localize(None)
    d = d.dt.normalize()
    far = (d.notna() & ((d < DATE_SPAN[0]) | (d > DATE_SPAN[1]))).to_numpy()
    d = d.where(~far).astype("datetime64[ns]")
    return d, missing, bad, far


def _as_nanoseconds(d: pd.Series) -> pd.Series | None:
    """Naive stored dates as datetime64[ns]; None when they carry a time zone or fall
    outside what nanoseconds hold (those take the general path, which rejects them by row)."""
    if getattr(d.dt, "tz", None) is not None:
        return None
    try:
        return d.astype("datetime64[ns]")
    except (OverflowError, pd.errors.OutOfBoundsDatetime):
        return None


def number_column(raw: pd.Series) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """Float64 values; blank (or a common NA spelling) is missing, other text is unparseable."""
    if raw.dtype == np.float64:  # typed (Parquet) floats: the column itself, no copy
        return raw, raw.isna().to_numpy(), np.zeros(len(raw), dtype=bool)
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        v = pd.Series(raw.to_numpy(dtype=float, na_value=np.nan), index=raw.index)
        missing = v.isna().to_numpy()
        return v, missing, np.zeros(len(v), dtype=bool)
    text = raw.astype("str").fillna("").str.strip()
    missing = ((text == "") | text.str.lower().isin(NA_SPELLINGS)).to_numpy()
    v = pd.to_numeric(text.where(~missing), errors="coerce").astype(np.float64)
    bad = v.isna().to_numpy() & ~missing
    return v, missing, bad


def map_levels(
    text: pd.Series,
    issuer: pd.Series,
    *,
    n_levels: int,
    names: Mapping[tuple[str, str], int],
    allow_zero: bool,
) -> tuple[np.ndarray, np.ndarray]:
    """Turn level text into integer levels.

    A level is an integer ``1..n_levels`` (``0..n_levels`` when ``allow_zero``), or a stage
    name: ``names`` maps ``(issuer, name in lower case)`` to a level, with issuer ``"*"`` for
    names every issuer uses.

    Returns
    -------
    levels : ndarray of float
        The level, NaN where blank or not on the ladder.
    bad : ndarray of bool
        Non-blank text that is not on the ladder.
    """
    lower = text.str.lower()
    num = pd.to_numeric(lower.where(lower != ""), errors="coerce").to_numpy(dtype=float)
    levels = num.copy()
    if names:
        by_issuer = {f"{i}\x1f{n}": lv for (i, n), lv in names.items() if i != "*"}
        anyone = {n: lv for (i, n), lv in names.items() if i == "*"}
        key = issuer.astype("str").fillna("").str.strip() + "\x1f" + lower
        named = key.map(by_issuer).astype(float).to_numpy()
        if anyone:
            fallback = lower.map(anyone).astype(float).to_numpy()
            named = np.where(np.isnan(named), fallback, named)
        levels = np.where(np.isnan(levels), named, levels)
    lo = 0 if allow_zero else 1
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(levels) & (levels == np.round(levels)) & (levels >= lo) & (levels <= n_levels)
    blank = (lower == "").to_numpy()
    bad = ~ok & ~blank
    return np.where(ok, levels, np.nan), bad


# -------------------------------------------------------------------- helpers
def _blank(s: pd.Series) -> np.ndarray:
    return s.astype("str").fillna("").str.strip().eq("").to_numpy()


def _display(s: pd.Series) -> np.ndarray:
    if pd.api.types.is_datetime64_any_dtype(s.dtype) and (s.dropna().dt.normalize()
                                                          == s.dropna()).all():
        s = s.dt.strftime("%Y-%m-%d")  # a stored calendar date, shown as the day it is
    out = s.astype(object).where(s.notna(), "")
    return out.astype(str).to_numpy(dtype=object)


def _empty_rejected() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "table": pd.Series(dtype="str"),
            "file": pd.Series(dtype="str"),
            "row": pd.Series(dtype=np.int64),
            "column": pd.Series(dtype="str"),
            "value": pd.Series(dtype="str"),
            "reason": pd.Series(dtype="str"),
        }
    )
