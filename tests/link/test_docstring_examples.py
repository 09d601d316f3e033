"""The Examples in the linking stage's docstrings run and give what they show (the README's
worked notice example is one of them)."""

from __future__ import annotations

import doctest
import importlib

import pytest

MODULES = ["notices", "spatial", "yields", "prices"]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    mod = importlib.import_module(f"impactlink.link.{name}")
    res = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0
    assert res.failed == 0
