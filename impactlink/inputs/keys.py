"""Text keys (crop, commodity, sector, issuer, stage names) normalised the same way everywhere.

A key is matched by its normal form: Unicode NFKC (compatibility composition, so a
full-width "Ｍａｉｚｅ", a ligature or a no-break space reads as the plain text), surrounding
whitespace stripped, inner runs of whitespace collapsed to one space, and case folded
(:meth:`str.casefold`, the Unicode caseless matching of section 3.13 of the Unicode
Standard). The user's own spelling is kept for display; only matching uses the normal form.

A key that still matches nothing is rejected with the reason ``"unknown <key>"`` (for example
"unknown crop"), never counted as withheld or missing.

References
----------
The Unicode Consortium. Unicode Standard Annex #15: Unicode Normalization Forms.
https://www.unicode.org/reports/tr15/
The Unicode Standard, version 15.0, section 3.13 Default Case Algorithms.

Examples
--------
>>> import pandas as pd
>>> norm, report = normalise_keys(pd.Series([" Maize ", "MAIZE", "maize", "Ｍａｉｚｅ"]))
>>> norm.tolist()
['maize', 'maize', 'maize', 'maize']
>>> report.changed, report.by_kind
(3, {'unicode': 1, 'whitespace': 1, 'case': 3})
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from impactlink.errors import InputError

__all__ = ["KeyReport", "KeyMatch", "normalise_key", "normalise_keys", "match_keys"]


@dataclass(frozen=True)
class KeyReport:
    """How many values normalisation changed, and how.

    Attributes
    ----------
    values : int
        Non-missing values looked at.
    changed : int
        Values whose normal form differs from the text as written.
    by_kind : dict
        Values changed by each step: ``"unicode"`` (NFKC), ``"whitespace"`` (strip and
        collapse), ``"case"`` (case folding); a value can count under several.
    examples : dict
        Up to five ``written -> normal form`` pairs, for the message.
    """

    values: int
    changed: int
    by_kind: dict[str, int] = field(default_factory=dict)
    examples: dict[str, str] = field(default_factory=dict)

    def message(self, column: str) -> str:
        """One line for the manifest, e.g. ``crop: 160 of 900 values normalised (...)``."""
        kinds = ", ".join(f"{n} {k}" for k, n in self.by_kind.items() if n)
        ex = ", ".join(f"{a!r} -> {b!r}" for a, b in self.examples.items())
        return (f"{column}: {self.changed} of {self.values} values normalised for matching "
                f"({kinds}; e.g. {ex})" if self.changed else f"{column}: no value changed")


@dataclass(frozen=True)
class KeyMatch:
    """What :func:`match_keys` returns.

    Attributes
    ----------
    matched : pandas.Series
        The known key (as spelt in ``known``) of each value, dtype ``string``; missing
        where none matched.
    unknown : numpy.ndarray of bool
        Values that match no known key (a missing value is not unknown).
    reason : str
        ``"unknown <key>"``, the rejection reason of the unknown values.
    report : KeyReport
    """

    matched: pd.Series
    unknown: np.ndarray
    reason: str
    report: KeyReport


def normalise_key(text: str) -> str:
    """The normal form of one key: NFKC, whitespace stripped and collapsed, case folded.

    >>> normalise_key("  Stage\\u00a0 Two ")
    'stage two'
    """
    import unicodedata

    return " ".join(unicodedata.normalize("NFKC", text).split()).casefold()


def normalise_keys(values: pd.Series) -> tuple[pd.Series, KeyReport]:
    """Normal forms of a column of keys, and a report of what changed.

    Parameters
    ----------
    values : pandas.Series
        Text keys as read; missing values stay missing. Non-text values are read as text.

    Returns
    -------
    normalised : pandas.Series
        Same index; the normal form of each value (see :func:`normalise_key`).
    report : KeyReport
    """
    # each step on the distinct values only, then mapped back by integer codes (a column of
    # millions of rows has a handful of distinct keys)
    codes, uniq = pd.factorize(values.astype("string"))
    present = codes >= 0
    distinct = pd.Series(np.asarray(uniq, dtype=object)).astype(str)
    nfkc = distinct.str.normalize("NFKC")
    spaced = nfkc.str.split().str.join(" ")
    folded = pd.Series([t.casefold() for t in spaced], index=distinct.index, dtype=object)
    table = pd.Series(folded.to_numpy(), index=distinct.to_numpy())
    out = np.full(len(values), pd.NA, dtype=object)
    out[present] = folded.to_numpy(dtype=object)[codes[present]]
    norm = pd.Series(out, index=values.index, dtype=object)
    step = pd.DataFrame({"unicode": (nfkc != distinct).to_numpy(),
                         "whitespace": (spaced != nfkc).to_numpy(),
                         "case": (folded != spaced).to_numpy()}, index=distinct.to_numpy())
    weights = np.bincount(codes[present], minlength=len(distinct))  # rows per distinct value
    changed_distinct = (table.to_numpy() != table.index.to_numpy())
    examples = {a: b for a, b in zip(table.index[changed_distinct][:5],
                                     table.to_numpy()[changed_distinct][:5], strict=True)}
    report = KeyReport(
        values=int(present.sum()),
        changed=int(weights[changed_distinct].sum()),
        by_kind={k: int(weights[step[k].to_numpy()].sum()) for k in step.columns},
        examples=examples,
    )
    return norm, report


def match_keys(values: pd.Series, known: Iterable[str], *, key: str = "key") -> KeyMatch:
    """Match keys to the known ones by their normal forms.

    Parameters
    ----------
    values : pandas.Series
        Keys as written in a table (e.g. the ``crop`` column).
    known : iterable of str
        Keys as written in the project file or another table (e.g. ``crop = "maize"``).
    key : str
        What the key is, for the rejection reason ``"unknown <key>"``.

    Returns
    -------
    KeyMatch

    Raises
    ------
    InputError
        Two known keys have the same normal form.

    Examples
    --------
    >>> m = match_keys(pd.Series(["MAIZE ", "Sorghum", None]), ["maize"], key="crop")
    >>> m.matched.tolist(), m.unknown.tolist(), m.reason
    (['maize', <NA>, <NA>], [False, True, False], 'unknown crop')
    """
    known = list(known)
    forms: dict[str, str] = {}
    for k in known:  # a handful of names from the project file
        f = normalise_key(str(k))
        if f in forms and forms[f] != k:
            raise InputError(f"{key}: the names {forms[f]!r} and {k!r} have the same normal form "
                             f"{f!r}; keep one spelling in the project file")
        forms[f] = k
    norm, report = normalise_keys(values)
    matched = norm.map(forms).astype("string")
    unknown = (norm.notna() & matched.isna()).to_numpy(dtype=bool)
    return KeyMatch(matched=matched, unknown=unknown, reason=f"unknown {key}", report=report)
