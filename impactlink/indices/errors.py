"""Errors and warnings of the ``indices`` stage."""

from __future__ import annotations

__all__ = [
    "IndexInputError",
    "IndexCalibrationWarning",
    "IndexFitWarning",
    "IndexInputWarning",
]


class IndexInputError(ValueError):
    """Fatal problem with the input of an index computation.

    The message names the argument or column, what was found, what was expected and
    what to do about it.
    """


class IndexInputWarning(UserWarning):
    """Recoverable surprise in the input (an index skipped, a column ignored)."""


class IndexCalibrationWarning(UserWarning):
    """The requested calibration period could not be used as given (e.g. not covered)."""


class IndexFitWarning(UserWarning):
    """Some week-of-year distribution fits failed; the affected values are NaN."""
