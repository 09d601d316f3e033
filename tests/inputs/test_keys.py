"""Text-key normalisation: NFKC (Unicode Standard Annex #15), whitespace, case folding.

Expected normal forms are those of Python's :mod:`unicodedata` (an implementation of UAX #15
maintained outside this project) and :meth:`str.casefold` (Unicode default case folding,
section 3.13 of the Unicode Standard), applied value by value as the reference.
"""

from __future__ import annotations

import unicodedata

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from impactlink.inputs.keys import match_keys, normalise_key, normalise_keys


def reference(text: str) -> str:
    return " ".join(unicodedata.normalize("NFKC", text).split()).casefold()


def test_maize_spellings_are_one_key_and_the_report_counts_them():
    s = pd.Series([" Maize ", "MAIZE", "maize", "Maize", "maize", None])
    norm, report = normalise_keys(s)
    assert norm.tolist()[:5] == ["maize"] * 5 and pd.isna(norm.iloc[5])
    assert (report.values, report.changed) == (5, 3)
    assert report.by_kind == {"unicode": 0, "whitespace": 1, "case": 3}
    assert report.examples == {" Maize ": "maize", "MAIZE": "maize", "Maize": "maize"}
    assert report.message("crop").startswith("crop: 3 of 5 values normalised for matching")


@pytest.mark.parametrize(("written", "normal"), [
    ("\uff2d\uff41\uff49\uff5a\uff45", "maize"),  # full-width letters (NFKC compatibility)
    ("Stage\u00a0Two", "stage two"),  # no-break space
    ("e\u0301t\u00e9", "\u00e9t\u00e9"),  # combining acute composes to U+00E9
    ("\ufb01eld crops", "field crops"),  # the fi ligature
    ("STRASSE", "strasse"), ("Stra\u00dfe", "strasse"),  # casefold: sharp s is ss
    ("  winter\t wheat \n", "winter wheat"),
])
def test_nfkc_forms(written, normal):
    assert normalise_key(written) == normal == reference(written)


def test_unicode_step_is_counted():
    _, report = normalise_keys(pd.Series(["\uff2d\uff41\uff49\uff5a\uff45", "e\u0301t\u00e9"]))
    assert report.by_kind["unicode"] == 2


def test_match_keeps_the_known_spelling_and_rejects_unknown_with_its_reason():
    values = pd.Series(["MAIZE ", "Sorghum", None, " maize", "Ｍａｉｚｅ"], index=[10, 11, 12, 13, 14])
    m = match_keys(values, ["Maize"], key="crop")
    assert m.matched.tolist() == ["Maize", pd.NA, pd.NA, "Maize", "Maize"]
    assert m.unknown.tolist() == [False, True, False, False, False]  # a blank is not unknown
    assert m.reason == "unknown crop"
    assert list(m.matched.index) == [10, 11, 12, 13, 14]


def test_two_known_keys_with_one_normal_form_are_refused():
    with pytest.raises(ValueError, match="same normal form 'maize'"):
        match_keys(pd.Series(["maize"]), ["Maize", "MAIZE "])


@given(st.lists(st.text(max_size=8), max_size=20))
def test_column_normalisation_equals_the_per_value_reference(texts):
    norm, report = normalise_keys(pd.Series(texts, dtype=object))
    assert norm.tolist() == [reference(t) for t in texts]
    assert report.changed == sum(reference(t) != t for t in texts)
