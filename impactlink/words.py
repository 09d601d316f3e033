"""Counts in messages: a number with its noun (and verb) in the right grammatical number."""

from __future__ import annotations

__all__ = ["counted", "verb"]


def counted(n: int, one: str, many: str) -> str:
    """``"1 county"``, ``"3 counties"``, ``"1,204 counties"``.

    Examples
    --------
    >>> counted(1, "county", "counties"), counted(2, "county", "counties")
    ('1 county', '2 counties')
    """
    return f"{n:,} {one if n == 1 else many}"


def verb(n: int, one: str, many: str) -> str:
    """The verb agreeing with a count: ``verb(1, "has", "have")`` is ``"has"``."""
    return one if n == 1 else many
