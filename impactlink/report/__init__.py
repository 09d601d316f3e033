"""The report stage: one self-contained HTML page, figures, tables and map layers, rebuilt
from a run folder.

Public entry point: :func:`build_report`. Figures are pure functions in
:mod:`impactlink.report.figures` and :mod:`impactlink.report.maps`; page assembly with
escaping in :mod:`impactlink.report.html`; the colour scheme in
:mod:`impactlink.report.palette`.
"""

from impactlink.report.build import build_report, render_html
from impactlink.report.runfolder import ReportError, ReportWarning, RunFolder, read_run_folder

__all__ = ["build_report", "render_html", "read_run_folder", "RunFolder", "ReportError",
           "ReportWarning"]
