"""The report stage: one self-contained HTML page, figures, tables and map layers, rebuilt
from a run folder.

Public entry point: :func:`build_report`. One section builder per stage in the ``sec_*``
modules, its figures in the ``figures_*`` modules and :mod:`impactlink.report.maps`, its
words in :mod:`impactlink.report.text` and the ``words_*`` modules; page assembly with
escaping in :mod:`impactlink.report.html`; the colour scheme in
:mod:`impactlink.report.palette`. The file map is in DEVELOPERS.md.
"""

from impactlink.report.build import build_report, render_html
from impactlink.report.runfolder import ReportError, ReportWarning, RunFolder, read_run_folder

__all__ = ["build_report", "render_html", "read_run_folder", "RunFolder", "ReportError",
           "ReportWarning"]
