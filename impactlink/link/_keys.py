"""Text keys of the impact tables matched by one normal form, and each row's place in its file.

The normal form is :func:`impactlink.inputs.keys.normalise_key` (NFKC, whitespace stripped
and collapsed, case folded: Unicode Standard Annex #15 and section 3.13 of the Unicode
Standard). Every text key the linking stage matches (crop, practice, commodity, region,
sector, issuer, cause, water-system ids and names, coverage sources) goes through it, so
"Maize ", "MAIZE" and full-width "Ｍａｉｚｅ" are one key. The key keeps a written spelling:
the project file's when the project selects it, else the spelling most rows use.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["IMPACT_TABLES", "KEY_COLUMNS", "SELECTORS", "forms", "spelling", "attach_sources",
           "selector_values"]

#: Tables whose rows are impact records (each row is used or listed in rejected_rows.csv).
IMPACT_TABLES = ("yields", "prices", "notices", "notice_snapshots", "field_reports")

#: Text key columns the linking stage matches, per table.
KEY_COLUMNS: dict[str, tuple[str, ...]] = {
    "yields": ("crop", "practice"),
    "prices": ("commodity", "region"),
    "field_reports": ("sector",),
    "notices": ("issuer", "cause"),
    "notice_snapshots": ("issuer",),
    "water_systems": ("system_id", "system_name"),
    "coverage": ("source", "region"),
    "indicators": ("indicator",),  # matched in the indices stage (pipeline.stages.indices)
}

#: The project options that select rows, per impact source: (table, column, option).
SELECTORS: dict[str, tuple[tuple[str, str, str], ...]] = {
    "yields": (("yields", "crop", "crop"), ("yields", "practice", "practice")),
    "prices": (("prices", "commodity", "commodity"),),
    "field_reports": (("field_reports", "sector", "sector"),),
}


def normalise_key(text: str) -> str:
    """:func:`impactlink.inputs.keys.normalise_key` (imported when first needed: the inputs
    package imports the linking stage's defaults)."""
    from impactlink.inputs.keys import normalise_key as one

    return one(text)


def forms(values: pd.Series) -> pd.Series:
    """The normal form of each value (object dtype; missing values stay missing)."""
    from impactlink.inputs.keys import normalise_keys

    return normalise_keys(values)[0]


def selector_values(option) -> list[str] | None:  # noqa: ANN001 (str, list or None)
    """A selector option as a list of text (None when the option is not given)."""
    if option is None:
        return None
    return [str(option)] if isinstance(option, str) else [str(v) for v in option]


def spelling(values: pd.Series, known: Iterable[str] | None = None, *, key: str = "key"
             ) -> tuple[pd.Series, np.ndarray]:
    """Each value respelt to its key, and which values match ``known``.

    Parameters
    ----------
    values : pandas.Series
        Keys as written in a table.
    known : iterable of str, optional
        Keys as the project file spells them. A value whose normal form is that of a known
        key takes the known spelling; any other value takes the spelling most rows with its
        normal form use (ties: the first in sorted order).
    key : str
        What the key is (for the error on two known spellings of one normal form).

    Returns
    -------
    respelt : pandas.Series
        Same index, object dtype; missing values stay missing.
    matched : numpy.ndarray of bool
        True where the value matches a known key (every value when ``known`` is None).

    Examples
    --------
    >>> s, hit = spelling(pd.Series(["Maize ", "maize", "maize", "Oats"]), ["MAIZE"], key="crop")
    >>> s.tolist(), hit.tolist()
    (['MAIZE', 'MAIZE', 'MAIZE', 'Oats'], [True, True, True, False])
    """
    table = spelling_table(values, known, key=key)
    ok = table.codes >= 0
    out = np.full(len(values), pd.NA, dtype=object)
    out[ok] = table.key.to_numpy(dtype=object)[table.codes[ok]]
    hit = np.ones(len(values), dtype=bool)
    if known is not None:
        hit[:] = False
        hit[ok] = table.hit[table.codes[ok]]
    return pd.Series(out, index=values.index, dtype=object), hit


@dataclass(frozen=True)
class SpellingTable:
    """:func:`spelling` of the distinct values of a column: ``written`` (each distinct value),
    ``key`` (its respelling, NA where it has no normal form), ``hit`` (matches a known key),
    ``rows`` (how many rows hold it) and ``codes`` (each row's distinct value, -1 missing)."""

    written: pd.Series
    key: pd.Series
    hit: np.ndarray
    rows: np.ndarray
    codes: np.ndarray


def spelling_table(values: pd.Series, known: Iterable[str] | None = None, *, key: str = "key"
                   ) -> SpellingTable:
    """The rule of :func:`spelling`, worked on the distinct values (a key column of millions
    of rows holds a handful), each weighted by its rows."""
    codes, uniq = pd.factorize(values.astype("string"))
    u = pd.Series(np.asarray(uniq, dtype=object))
    n = np.bincount(codes[codes >= 0], minlength=len(u))
    norm = forms(u)
    present = norm.notna().to_numpy()
    pairs = pd.DataFrame({"w": u[present].astype(str).to_numpy(),
                          "f": norm[present].astype(str).to_numpy(), "n": n[present]})
    # the spelling most rows use, per normal form
    common = (pairs.groupby(["f", "w"])["n"].sum().rename("n").reset_index()
              .sort_values(["f", "n", "w"], ascending=[True, False, True])
              .drop_duplicates("f").set_index("f")["w"])
    res = pd.Series(pd.NA, index=u.index, dtype=object)
    res[present] = pairs["f"].map(common).to_numpy()
    hit = np.ones(len(u), dtype=bool)
    if known is not None:
        from impactlink.inputs.keys import match_keys

        m = match_keys(u, list(known), key=key)
        hit = m.matched.notna().to_numpy()
        res[hit] = m.matched[hit].astype(str).to_numpy()
    return SpellingTable(u, res, hit, n, codes)


def attach_sources(tables: Mapping[str, pd.DataFrame], files: Mapping[str, object] | None = None
                   ) -> dict[str, pd.DataFrame]:
    """The impact tables with a ``source_row`` column and ``attrs["file"]``.

    ``source_row`` is the row's place in its file as the inputs stage numbers it (1-based
    data row, header excluded: ``frame.attrs["source_rows"]``); a frame built in code without
    them gets its position + 1. Other tables are passed through unchanged.
    """
    out = dict(tables)
    for name in IMPACT_TABLES:
        frame = tables.get(name)
        if frame is None or "source_row" in frame.columns:
            continue
        src = frame.attrs.get("source_rows")
        rows = (np.asarray(src, dtype=np.int64) if src is not None and len(src) == len(frame)
                else np.arange(1, len(frame) + 1, dtype=np.int64))
        f = frame.copy()
        f["source_row"] = rows
        if files is not None and name in files:
            f.attrs["file"] = str(files[name])
        out[name] = f
    return out


def norm_lookup(keys: Iterable[object], values: Iterable[object]) -> dict[str, object]:
    """``{normal form of key: value}`` (the first value wins for a repeated form)."""
    out: dict[str, object] = {}
    for k, v in zip(keys, values, strict=True):
        if k is None or (isinstance(k, float) and np.isnan(k)):
            continue
        out.setdefault(normalise_key(str(k)), v)
    return out
