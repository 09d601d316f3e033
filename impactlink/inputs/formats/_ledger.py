"""Shared bookkeeping of the publisher-format readers: rejected rows and reconciled counts.

Every reader in :mod:`impactlink.inputs.formats` returns a :class:`FormatResult`: the tidy
contract frame, one rejected-rows line per raw row that was not used (``table``, ``file``,
``row``, ``column``, ``value``, ``reason``) and counts with ``rows_read == rows_used +
rows_rejected``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import REASONS, InputError
from impactlink.schema import COUNTY

__all__ = ["FormatResult", "RowLedger", "REJECTED_COLUMNS", "HEADER_ROWS", "read_text_csv",
           "reject_repeats", "reject_unknown_counties"]

#: Columns of a rejected-rows frame (the same as the inputs stage's ``rejected_rows.csv``).
REJECTED_COLUMNS = ["table", "file", "row", "column", "value", "reason"]

#: Offset of the first data row. ``row`` in a rejected-rows frame follows the inputs stage
#: (:class:`impactlink.inputs._rules.TableCheck`): the 1-based data row with the header
#: excluded (row 1 is the first line under the header).
HEADER_ROWS = 0


@dataclass(frozen=True)
class FormatResult:
    """A publisher file read into one contract table.

    Attributes
    ----------
    table : str
        Contract table name (``yields``, ``climate``, ``indicators``, ``zones``).
    file : str
        The file read.
    frame : DataFrame
        The tidy contract frame (rows used).
    rejected : DataFrame
        One line per raw row not used, columns :data:`REJECTED_COLUMNS`.
    rows_read : int
        Data rows in the file (header excluded).
    notes : tuple of str
        What the reader did that a user should know (units converted, codes matched).
    details : dict
        Reader-specific extras (e.g. the Quick Stats data items found).
    """

    table: str
    file: str
    frame: pd.DataFrame
    rejected: pd.DataFrame
    rows_read: int
    notes: tuple[str, ...] = ()
    details: dict[str, pd.DataFrame] = field(default_factory=dict)

    @property
    def rows_rejected(self) -> int:
        """Distinct raw rows rejected."""
        return int(self.rejected["row"].nunique())

    @property
    def rows_used(self) -> int:
        """Raw rows that became (part of) the frame."""
        return self.rows_read - self.rows_rejected

    def counts(self) -> dict[str, int | str]:
        """``table``, ``file``, ``rows_read``, ``rows_used``, ``rows_rejected``."""
        return {"table": self.table, "file": self.file, "rows_read": self.rows_read,
                "rows_used": self.rows_used, "rows_rejected": self.rows_rejected}

    def reasons(self) -> pd.Series:
        """Rejected rows per reason (sorted by reason text)."""
        return self.rejected["reason"].value_counts().sort_index()

    def to_frame(self) -> pd.DataFrame:
        """The counts as a one-row frame."""
        return pd.DataFrame([self.counts()])


class RowLedger:
    """Usable flag per raw row, and the reason for every row taken out.

    Each raw row is rejected at most once (the first rule it breaks), so the rejected frame
    has one line per rejected row and the counts reconcile by construction.

    Parameters
    ----------
    table, file : str
        Contract table name and the file path as shown to the user.
    n : int
        Number of data rows.
    """

    def __init__(self, table: str, file: str, n: int) -> None:
        self.table = table
        self.file = file
        self.n = n
        self.alive = np.ones(n, dtype=bool)
        self._parts: list[pd.DataFrame] = []

    def reject(self, mask, column: str, values, reason) -> None:
        """Reject the still-usable rows in ``mask``; ``values``/``reason`` scalar or per row."""
        m = np.asarray(mask, dtype=bool) & self.alive
        if not m.any():
            return
        idx = np.flatnonzero(m)
        vals = np.broadcast_to(np.asarray(values, dtype=object), (self.n,))[idx]
        why = np.broadcast_to(np.asarray(reason, dtype=object), (self.n,))[idx]
        self._parts.append(pd.DataFrame({
            "table": self.table, "file": self.file, "row": idx + 1 + HEADER_ROWS,
            "column": column, "value": vals.astype(str), "reason": why.astype(str)}))
        self.alive &= ~m

    def rejected(self) -> pd.DataFrame:
        """The rejected rows sorted by row number."""
        if not self._parts:
            return pd.DataFrame({c: pd.Series(dtype="int64" if c == "row" else "object")
                                 for c in REJECTED_COLUMNS})
        out = pd.concat(self._parts, ignore_index=True)
        return out.sort_values("row", kind="stable", ignore_index=True)[REJECTED_COLUMNS]


def read_text_csv(path: Path, *, what: str) -> pd.DataFrame:
    """Read a CSV with every cell as text (leading zeros and markers kept as written).

    Raises
    ------
    InputError
        The file is missing, empty or not CSV; the message names the file and ``what``.
    """
    if not path.exists():
        raise InputError(f"{path}: file not found; check the path of the {what}")
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, na_filter=False,
                            encoding="utf-8-sig", skip_blank_lines=False)
    except pd.errors.EmptyDataError:
        raise InputError(f"{path}: the {what} is empty; it needs a header row and data rows"
                         ) from None
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(f"{path}: the {what} cannot be read as CSV ({first}); save it as "
                         "comma-separated UTF-8 text with one header row") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def reject_repeats(led: RowLedger, frame: pd.DataFrame, keys: list[str], reason: str, *,
                   column: str | None = None) -> None:
    """Reject each usable row whose ``keys`` repeat an earlier usable row's.

    ``reason`` may hold ``{row}``, filled with the earlier row's number; the rejected line
    shows ``column`` (default the last key) of the later row.
    """
    live = np.flatnonzero(led.alive)
    codes = frame.iloc[live].groupby(keys, sort=False).ngroup().to_numpy()
    first = pd.Series(live).groupby(codes).transform("min").to_numpy()
    later = first != live
    if not later.any():
        return
    mask = np.zeros(led.n, dtype=bool)
    mask[live[later]] = True
    why = np.full(led.n, reason, dtype=object)
    if "{row}" in reason:
        why[live[later]] = [reason.format(row=r + 1 + HEADER_ROWS) for r in first[later]]
    col = column or keys[-1]
    led.reject(mask, col, frame[col].to_numpy(), why)


def reject_unknown_counties(led: RowLedger, ids: np.ndarray, counties: Sequence[str] | None,
                            path: Path, *, what: str) -> None:
    """Reject the usable rows whose county id is not in the counties table ("unknown county").

    The rejected line's column is ``county_id`` and its value the id, as for contract tables,
    so the inputs stage's warning names these counties. When no usable row's county is
    known the ids do not match at all: one error, as for contract tables.
    """
    if counties is None:
        return
    ids = np.asarray(ids, dtype=object).astype(str)
    unknown = ~np.isin(ids, np.asarray(list(counties), dtype=str))
    live = led.alive & (ids != "")
    if live.any() and not (live & ~unknown).any():
        raise InputError(f"{path}: none of the county ids of the {what} (e.g. "
                         f"{sorted(set(ids[live]))[:5]}) is in the counties table (e.g. "
                         f"{sorted(counties)[:5]}); use the same county ids (5-digit GEOIDs as "
                         "text) in every table")
    led.reject(unknown, COUNTY, ids, REASONS["unknown_county"])
