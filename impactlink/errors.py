"""The one error tree and the one warning tree of impactlink.

Every mistake a user can make (in the project file, in a table, in a run folder, in a
command's arguments) is raised as a subclass of :class:`ImpactlinkError`, one class per stage.
The command line catches :class:`ImpactlinkError` and prints one line
``impactlink: error: <file>: <what was found>, <what to do>`` with exit code 2; any other
exception is a bug and keeps its traceback.

Every recoverable surprise is a subclass of :class:`ImpactlinkWarning`; the pipeline keeps
each one in ``manifest.json`` and the command line prints it once, as one line.

This module imports nothing from the package, so every stage can import it without a cycle.

Examples
--------
>>> issubclass(InputError, ImpactlinkError) and issubclass(TriggerError, ImpactlinkError)
True
>>> print(user_message(InputError("climate.csv: no column precip_mm; rename your column")))
impactlink: error: climate.csv: no column precip_mm; rename your column
"""

from __future__ import annotations

__all__ = [
    "ImpactlinkError",
    "ProjectError",
    "InputError",
    "IndicesError",
    "LinkError",
    "ModelError",
    "SkillError",
    "TriggerError",
    "ContrastError",
    "OutlookError",
    "ReportError",
    "ExecutionError",
    "ImpactlinkWarning",
    "ProjectWarning",
    "InputWarning",
    "IndicesWarning",
    "LinkWarning",
    "ModelWarning",
    "SkillWarning",
    "TriggerWarning",
    "ContrastWarning",
    "OutlookWarning",
    "ReportWarning",
    "STAGE_ERRORS",
    "user_message",
    "warning_line",
]


class ImpactlinkError(ValueError):
    """A user's mistake: the message names the file, table, row or key, and what to do.

    A subclass of :class:`ValueError` so that callers of the Python API who catch
    ``ValueError`` keep working.
    """


class ProjectError(ImpactlinkError):
    """The project file is missing, unreadable, or holds an impossible setting.

    Parameters
    ----------
    message : str
        With several problems: a summary line, then one line per problem.
    problems : sequence of str, optional
        One line per problem, each ``<file>: [<table>.]<key>: <what was found>; <what to
        do>`` (the command line prints each as its own ``impactlink: error:`` line). Default:
        the message, as one line.

    Examples
    --------
    >>> ProjectError("a.toml: project.seed: got -1, expected a whole number >= 0").problems
    ('a.toml: project.seed: got -1, expected a whole number >= 0',)
    """

    def __init__(self, message: str = "", *, problems: tuple[str, ...] | list[str] = ()) -> None:
        super().__init__(message)
        self.problems: tuple[str, ...] = tuple(problems) or (" ".join(str(message).split()),)

    def __reduce__(self):  # noqa: ANN204 - keep the problems through pickling (worker processes)
        return (_project_error, (str(self), self.problems))


def _project_error(message: str, problems: tuple[str, ...]) -> ProjectError:
    return ProjectError(message, problems=problems)


class InputError(ImpactlinkError):
    """A fatal problem with an input table (missing file or column, unreadable text, units)."""


class IndicesError(ImpactlinkError):
    """The index stage cannot compute an index from the inputs or settings it was given."""


class LinkError(ImpactlinkError):
    """Impact records cannot be joined to the index grid (unknown option, missing source)."""


class ModelError(ImpactlinkError):
    """An impact model cannot be fitted as asked (too few events, unknown link or trait)."""


class SkillError(ImpactlinkError):
    """The skill stage cannot score or rank the candidates as asked."""


class TriggerError(ImpactlinkError):
    """A trigger plan or trigger setting is impossible (unknown stage, indicator or rule)."""


class ContrastError(ImpactlinkError):
    """A county contrast cannot be made (unknown county, no traits, no shared weeks)."""


class OutlookError(ImpactlinkError):
    """The outlook cannot be computed as asked."""


class ReportError(ImpactlinkError):
    """A run folder cannot be turned into a report (missing or malformed table)."""


class ExecutionError(ImpactlinkError):
    """The execution engine cannot be used as asked (no Dask installed, bad address)."""


#: The stage each error class belongs to (the test of the error tree walks this).
STAGE_ERRORS: dict[str, type[ImpactlinkError]] = {
    "project": ProjectError,
    "inputs": InputError,
    "indices": IndicesError,
    "link": LinkError,
    "models": ModelError,
    "skill": SkillError,
    "triggers": TriggerError,
    "contrast": ContrastError,
    "outlook": OutlookError,
    "report": ReportError,
    "execution": ExecutionError,
}


class ImpactlinkWarning(UserWarning):
    """A recoverable surprise; the run goes on and the manifest keeps the message."""


class ProjectWarning(ImpactlinkWarning):
    """A project-file setting was adjusted or ignored."""


class InputWarning(ImpactlinkWarning):
    """A recoverable surprise in the input data."""


class IndicesWarning(ImpactlinkWarning):
    """An index was skipped, a calibration period adjusted, or some fits failed."""


class LinkWarning(ImpactlinkWarning):
    """Impact records were joined with a caveat (open notices, reporting effort)."""


class ModelWarning(ImpactlinkWarning):
    """A model fit needed a fallback (separation, ridge prior, no convergence)."""


class SkillWarning(ImpactlinkWarning):
    """Rows or candidates were dropped from the skill grid."""


class TriggerWarning(ImpactlinkWarning):
    """A trigger plan was replayed or tuned with a caveat."""


class ContrastWarning(ImpactlinkWarning):
    """A contrast was made with a caveat (few counties, a trait without spread)."""


class OutlookWarning(ImpactlinkWarning):
    """An outlook could not be given for some units or lags."""


class ReportWarning(ImpactlinkWarning):
    """A run-folder table was missing or odd; the report left that part out."""


def user_message(exc: ImpactlinkError) -> str:
    """What the command line prints for a user's mistake: one line per problem.

    Most errors hold one problem; a project file with several mistakes lists each on its
    own line (:attr:`ProjectError.problems`), so all of them can be fixed in one go.
    """
    problems = getattr(exc, "problems", ())
    if len(problems) > 1:
        return "\n".join(f"impactlink: error: {' '.join(str(p).split())}" for p in problems)
    text = " ".join(str(exc).split())  # one line, whatever the message held
    return f"impactlink: error: {text}"


def warning_line(message: Warning | str, category: type[Warning] | None = None) -> str:
    """The one line the command line prints for a warning (no Python source line)."""
    text = " ".join(str(message).split())
    return f"impactlink: warning: {text}"
