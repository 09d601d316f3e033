"""The inputs stage: read, coerce and validate every table of the input contract.

Public entry points: :func:`read_inputs` (a :class:`Project` -> :class:`InputBundle` of clean
frames, rejected rows and row counts), :func:`discover_tables` (find tables in a folder by
name) and :func:`summary_frame` (one line per table for ``impactlink check``).
"""

from impactlink.inputs._errors import REASONS, InputError, InputWarning
from impactlink.inputs.discover import SUPPORTED_EXTENSIONS, discover_tables
from impactlink.inputs.read import InputBundle, read_inputs, resolve_files, summary_frame

__all__ = [
    "InputBundle",
    "InputError",
    "InputWarning",
    "REASONS",
    "SUPPORTED_EXTENSIONS",
    "discover_tables",
    "read_inputs",
    "resolve_files",
    "summary_frame",
]
