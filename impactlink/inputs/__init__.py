"""The inputs stage: read, coerce and validate every table of the input contract.

Public entry points: :func:`read_inputs` (a :class:`Project` -> :class:`InputBundle` of clean
frames, rejected rows and row counts), :func:`discover_tables` (find contract tables in a
folder by name), :func:`recognise_files` (find downloaded publisher files by header),
:func:`plan_project` (what ``impactlink init`` writes) and :func:`summary_frame` (one line
per table for ``impactlink check``).
"""

from impactlink.inputs._errors import REASONS, InputError, InputWarning
from impactlink.inputs.discover import SUPPORTED_EXTENSIONS, discover_tables
from impactlink.inputs.init_plan import plan_project
from impactlink.inputs.read import InputBundle, read_inputs, resolve_files, summary_frame
from impactlink.inputs.recognise import Recognised, recognise_files

__all__ = [
    "InputBundle",
    "InputError",
    "InputWarning",
    "REASONS",
    "Recognised",
    "SUPPORTED_EXTENSIONS",
    "discover_tables",
    "plan_project",
    "read_inputs",
    "recognise_files",
    "resolve_files",
    "summary_frame",
]
