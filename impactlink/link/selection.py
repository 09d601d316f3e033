"""Across every impact of a project: how text keys were normalised, and rows no impact selects.

Two things the linking stage reports once per table rather than once per impact:

- :func:`key_normalisation`: per table and key column, how many values were respelt to their
  key (by Unicode form, whitespace and case) and every written form with the key it became
  (``manifest.json`` ``key_normalisation``; one progress line per table);
- :func:`unselected_rows`: rows of an impact table whose crop, practice, commodity or sector
  matches no impact of the project file after normalisation. They are listed in
  ``rejected_rows.csv`` with the reason ``unknown <key> value ...`` (never as withheld or
  missing) and reconciled in a line of ``reconciliation.csv`` whose impact is
  :data:`NO_IMPACT`.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np
import pandas as pd

from impactlink.link._common import Ledger
from impactlink.link._keys import (
    KEY_COLUMNS,
    SELECTORS,
    forms,
    selector_values,
    spelling,
    spelling_table,
)

__all__ = ["key_normalisation", "normalisation_lines", "unselected_rows", "NO_IMPACT",
           "MAX_FORMS"]

#: ``impact`` of the reconciliation line of rows that no impact selects.
NO_IMPACT = "(selected by no impact)"

#: Written forms listed per column in the manifest (the count of the rest is given).
MAX_FORMS = 100


def _known(impacts: Iterable[Any], table: str, column: str) -> list[str] | None:
    """Spellings the project's impacts give for ``table.column`` (first spelling of each
    normal form), or None when no impact selects on it."""
    out: list[str] = []
    seen: set[str] = set()
    for spec in impacts:
        for t, col, opt in SELECTORS.get(spec.source, ()):
            if (t, col) != (table, column):
                continue
            for v in selector_values(spec.options.get(opt)) or []:
                f = forms(pd.Series([v])).iloc[0]
                if f not in seen:
                    seen.add(f)
                    out.append(v)
    return out or None


def _kinds(written: str, key: str) -> list[str]:
    """Steps of the normal form that make ``written`` and ``key`` equal."""
    u_w, u_k = unicodedata.normalize("NFKC", written), unicodedata.normalize("NFKC", key)
    s_w, s_k = " ".join(u_w.split()), " ".join(u_k.split())
    kinds = []
    if u_w != written or u_k != key:
        kinds.append("unicode")
    if s_w != u_w or s_k != u_k:
        kinds.append("whitespace")
    if s_w != s_k:
        kinds.append("case")
    return kinds


def key_normalisation(tables: Mapping[str, pd.DataFrame], impacts: Iterable[Any] = ()
                      ) -> dict[str, dict[str, dict[str, Any]]]:
    """Per table and key column, the values respelt to their key.

    Returns
    -------
    dict
        ``{table: {column: {"values": n, "respelt": n, "by_kind": {"unicode": n,
        "whitespace": n, "case": n}, "forms": {written: key}, "more_forms": n}}}`` for the
        columns where at least one value was respelt; a value counts under every step it
        needed. The key is the project's spelling when an impact selects it, else the
        spelling most rows use.
    """
    impacts = list(impacts)
    out: dict[str, dict[str, dict[str, Any]]] = {}
    for table, columns in KEY_COLUMNS.items():
        frame = tables.get(table)
        if frame is None or not len(frame):
            continue
        for col in columns:
            if col not in frame.columns:
                continue
            tab = spelling_table(frame[col], _known(impacts, table, col), key=col)
            present = pd.notna(tab.key.to_numpy())  # distinct values, weighted by their rows
            pairs = pd.DataFrame({"w": tab.written[present].astype(str).to_numpy(),
                                  "k": tab.key[present].astype(str).to_numpy(),
                                  "n": tab.rows[present]})
            n_values = int(pairs["n"].sum())
            pairs = pairs[pairs["w"] != pairs["k"]]
            if pairs.empty:
                continue
            counts = pairs.set_index(["w", "k"])["n"].sort_index()
            by_kind = {"unicode": 0, "whitespace": 0, "case": 0}
            for (w, k), n in counts.items():  # distinct written forms: a handful
                for kind in _kinds(str(w), str(k)):
                    by_kind[kind] += int(n)
            listed = list(counts.index)[:MAX_FORMS]
            out.setdefault(table, {})[col] = {
                "values": n_values, "respelt": int(counts.sum()), "by_kind": by_kind,
                "forms": {str(w): str(k) for w, k in listed},
                "more_forms": max(0, len(counts) - MAX_FORMS)}
    return out


def normalisation_lines(report: Mapping[str, Mapping[str, Mapping[str, Any]]]) -> list[str]:
    """One line per table of :func:`key_normalisation`, for the run's progress output."""
    lines = []
    for table, cols in report.items():
        parts = []
        for col, r in cols.items():
            kinds = ", ".join(f"{n} {k}" for k, n in r["by_kind"].items() if n)
            ex = ", ".join(f"{w!r} -> {k!r}" for w, k in list(r["forms"].items())[:3])
            parts.append(f"{col}: {r['respelt']} of {r['values']} values ({kinds}; e.g. {ex})")
        lines.append(f"keys in {table} matched by normal form (case, spaces, Unicode form): "
                     + "; ".join(parts) + " (manifest.json key_normalisation)")
    return lines


def unselected_rows(impacts: Iterable[Any], tables: Mapping[str, pd.DataFrame]
                    ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Rows of the yields, prices and field-report tables that no impact selects.

    A table read by an impact that selects on no column has no such row; a table no impact
    reads is left alone. A row is given the first key column (in :data:`SELECTORS` order)
    after which no impact still selects it.

    Returns
    -------
    rejected : DataFrame
        ``table, file, row, column, value, reason`` (reason ``unknown <column> value: no
        impact of the project file selects it (selected: ...)``).
    reconciliation : DataFrame
        One line per table with such rows: impact :data:`NO_IMPACT`, records = rejected.
    """
    impacts = list(impacts)
    ledger = Ledger(NO_IMPACT)
    for table in sorted({t for sel in SELECTORS.values() for t, _, _ in sel}):
        frame = tables.get(table)
        readers = [s for s in impacts if any(t == table for t, _, _ in SELECTORS.get(s.source, ()))]
        if frame is None or not len(frame) or not readers:
            continue
        columns = [(c, o) for t, c, o in SELECTORS[readers[0].source] if t == table]
        alive = np.ones((len(frame), len(readers)), dtype=bool)
        dead_before = np.zeros(len(frame), dtype=bool)
        for col, opt in columns:
            chosen = []
            for j, spec in enumerate(readers):
                want = selector_values(spec.options.get(opt))
                if want is None:
                    continue
                chosen += want
                values = (frame[col].astype("string").fillna("") if col in frame.columns
                          else pd.Series("", index=frame.index))
                _, hit = spelling(values, want, key=col)
                alive[:, j] &= hit
            dead = ~alive.any(axis=1) & ~dead_before
            if dead.any():
                shown = ", ".join(repr(v) for v in dict.fromkeys(chosen))
                ledger.reject(table, frame, dead, f"unknown {col} value: no impact of the "
                              f"project file selects it (selected: {shown})",
                              column=col if col in frame.columns else "")
            dead_before |= dead
        if dead_before.any():
            n = int(dead_before.sum())
            ledger.count(table, records=n, used=0, outside=0)
    return ledger.rejected(), ledger.reconciliation()
