"""Error and warning classes shared across stages, and the set the CLI reports as one line."""

from __future__ import annotations

from impactlink.project import ProjectError

__all__ = ["ImpactlinkWarning", "USER_ERRORS", "StageError"]


class ImpactlinkWarning(UserWarning):
    """A recoverable surprise; the count is kept in the manifest."""


class StageError(ValueError):
    """A stage cannot run on the data it was given; the message says what to change."""


def _user_errors() -> tuple[type[BaseException], ...]:
    errs: list[type[BaseException]] = [ProjectError, StageError, FileNotFoundError]
    for mod, name in [
        ("impactlink.inputs", "InputError"),
        ("impactlink.indices", "IndexInputError"),
    ]:
        try:
            module = __import__(mod, fromlist=[name])
            errs.append(getattr(module, name))
        except (ImportError, AttributeError):  # stage not built yet
            pass
    return tuple(errs)


USER_ERRORS = _user_errors()
