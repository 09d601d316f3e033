"""Errors, warnings and the stable wording of row-level rejection reasons."""

from __future__ import annotations

from impactlink.errors import InputError, InputWarning

__all__ = ["InputError", "InputWarning", "REASONS"]


#: Stable reason texts for rejected rows. Details (which column, which value) live in the
#: ``column`` and ``value`` fields of the rejected-rows table, not in the reason.
#: ``negative`` and ``duplicate`` are templates: ``negative {quantity}`` and
#: ``duplicate of row {row}``.
REASONS: dict[str, str] = {
    "blank": "blank row",
    "missing": "missing required value",
    "date": "unparseable date",
    "date_range": "date out of range",
    "number": "unparseable number",
    "whole": "not a whole number",
    "sentinel": "sentinel value",
    "not_finite": "value not finite",
    "negative": "negative {quantity}",
    "duplicate": "duplicate of row {row}",
    "unknown_county": "unknown county",
    "end_before_start": "end before start",
    "level": "level outside the ladder",
    "no_location": "no county or coordinates",
    "no_area": "no county or region",
    "coordinates": "coordinates out of range",
    "year": "year out of range",
    "tmin_tmax": "tmin above tmax",
    "temperature": "temperature out of range",
    "severity": "severity out of range",
    "zero_index": "zero price index",
    "geometry": "missing geometry",
}
