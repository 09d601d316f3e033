"""Errors and warnings of the ``indices`` stage (members of the one tree in ``impactlink.errors``)."""

from __future__ import annotations

from impactlink.errors import IndicesError, IndicesWarning

__all__ = [
    "IndicesError",
    "IndicesWarning",
    "IndexCalibrationWarning",
    "IndexFitWarning",
]


class IndexCalibrationWarning(IndicesWarning):
    """The requested calibration period could not be used as given (e.g. not covered)."""


class IndexFitWarning(IndicesWarning):
    """Some week-of-year distribution fits failed; the affected values are NaN."""
