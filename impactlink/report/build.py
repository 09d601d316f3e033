"""``build_report``: rebuild ``report.html`` (and figures, table copies, map layers) from a
run folder.

The report is a pure function of the run folder: nothing here recomputes science, so
``impactlink report RUN_DIR`` gives the same page as the run that wrote the folder.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable
from pathlib import Path

import pandas as pd

from impactlink.report.common import FigureSink, not_drawn
from impactlink.report.figures_audit import record_period
from impactlink.report.html import Markup, page
from impactlink.report.runfolder import ReportWarning, RunFolder, read_run_folder
from impactlink.report.sec_answers import (
    answer_cards,
    appendix_section,
    contents,
    first_screen,
    glossary_section,
)
from impactlink.report.sec_audit import audit_section
from impactlink.report.sec_contrast import contrast_section
from impactlink.report.sec_counties import finder_section
from impactlink.report.sec_curves import curves_section
from impactlink.report.sec_data import data_section, provenance_section
from impactlink.report.sec_methods import cautions_section, methods_section
from impactlink.report.sec_outlook import outlook_section
from impactlink.report.sec_skill import (
    maps_section,
    persistence_section,
    reliability_section,
    skill_detail_section,
    skill_section,
)
from impactlink.report.sec_triggers import triggers_section
from impactlink.schema import COUNTY

__all__ = ["build_report", "render_html", "SECTIONS"]

#: Sections after the first screen, in page order: (id, title, builder). Each builder is
#: ``(run, figs) -> Markup`` and lives in the ``sec_*`` module of its stage.
SECTIONS = (
    ("data", "Data and coverage", data_section),
    ("curves", "Impact curves", curves_section),
    ("skill", "Skill by index, time scale and lag", skill_section),
    ("maps", "County maps", maps_section),
    ("audit", "Threshold audit", audit_section),
    ("triggers", "Trigger plan replay and tuning", triggers_section),
    ("outlook", "Outlook", outlook_section),
    ("cautions", "Cautions", cautions_section),
)

#: Sections after the main part (they may run over the printed page budget): the county
#: finder with one card per county, then the appendix for researchers.
AFTER_MAIN = (
    ("glossary", "Glossary", glossary_section),
    ("finder", "County finder", finder_section),
    ("summary", "Answer details", answer_cards),
    ("appendix", "Appendix: derived targets", appendix_section),
    ("persistence", "Warning beyond persistence", persistence_section),
    ("reliability", "Reliability", reliability_section),
    ("contrast", "County contrasts", contrast_section),
    ("skill_detail", "Skill of every candidate", skill_detail_section),
    ("methods", "Methods", methods_section),
    ("provenance", "Provenance", provenance_section),
)

#: Tables that also get a Parquet copy beside their CSV.
PARQUET_TABLES = ("skill", "skill_summary", "skill_local", "reliability", "curves", "crossings", "audit",
                  "outlook", "triggers", "trigger_timeline", "contrast", "county_excess",
                  "contrast_pairs", "reconciliation", "link_summary", "rejected_rows")


def build_report(run_dir: str | Path, *, progress: Callable[[str], None] | None = None) -> Path:
    """Write ``figures/*.png`` and ``report.html`` into a run folder.

    Also writes a Parquet copy of every CSV table that lacks one, and adds per-county
    layers (``audit``, ``outlook``) to ``counties.gpkg`` when the run did not write them.

    Parameters
    ----------
    run_dir : str or Path
        Output folder of ``impactlink run`` (holding ``manifest.json`` and the tables).
        Any table may be missing: its section then says it was not computed.
    progress : callable, optional
        Called with one short message per step (``progress("report: figures")``).

    Returns
    -------
    Path
        The written ``report.html``.

    Raises
    ------
    ReportError
        If ``run_dir`` does not exist or is not a folder.

    Warns
    -----
    ReportWarning
        For each table that is present but unusable, and each figure or section that could
        not be drawn from the data; the page says the same in words.
    """
    say = progress or (lambda _msg: None)
    say("report: reading the run folder")
    run = read_run_folder(run_dir)
    # Table copies and map layers first, so the page links to them on the first build too.
    _write_parquet_copies(run)
    _write_layers(run)
    say("report: drawing figures")
    document, sink = render_html(run, progress=say)
    say("report: writing figures")
    _write_figures(run.path, sink.files)
    out = run.path / "report.html"
    tmp = out.with_suffix(".html.tmp")
    tmp.write_text(document, encoding="utf-8")
    os.replace(tmp, out)
    say(f"report: {out}")
    return out


def render_html(run: RunFolder, *, progress: Callable[[str], None] | None = None):
    """The report page as a string, and the :class:`FigureSink` holding its figures.

    Parameters
    ----------
    run : RunFolder
    progress : callable, optional
        Called once per section.

    Returns
    -------
    (str, FigureSink)
    """
    say = progress or (lambda _msg: None)
    sink = FigureSink()
    man = run.manifest or {}
    project = man.get("project") or {}
    name = project.get("name") if isinstance(project, dict) else None
    title = f"Dryness and its impacts \u2014 {name}" if name else "Dryness and its impacts"
    subtitle = " \u00b7 ".join(str(p) for p in (
        f"run of {man['created_utc']}" if man.get("created_utc") else None,
        f"impactlink {man['impactlink_version']}" if man.get("impactlink_version") else None,
        f"seed {man['seed']}" if man.get("seed") is not None else None,
    ) if p) or "run details not recorded"
    body: list[Markup] = [first_screen(run)]
    body.append(contents([(sid, title) for sid, title, _ in SECTIONS + AFTER_MAIN]))
    for sid, stitle, builder in SECTIONS + AFTER_MAIN:
        if sid == AFTER_MAIN[0][0]:  # the appendix part starts here
            body.append(Markup('<div class="after-main">'))
        say(f"report: {stitle}")
        try:
            body.append(builder(run, sink))
        # One unexpected table layout must not cost the whole page: the failure is shown in
        # the section and raised as a warning.
        except Exception as exc:  # noqa: BLE001
            warnings.warn(f"report section {sid!r} failed: {type(exc).__name__}: {exc}",
                          ReportWarning, stacklevel=2)
            body.append(not_drawn(sid, stitle, exc))
    body.append(Markup("</div>"))
    return page(title=title, subtitle=subtitle, body=body), sink


def _write_figures(folder: Path, files: dict[str, bytes]) -> None:
    fig_dir = folder / "figures"
    fig_dir.mkdir(exist_ok=True)
    for name, png in files.items():
        (fig_dir / name).write_bytes(png)


def _write_parquet_copies(run: RunFolder) -> None:
    for name in PARQUET_TABLES:
        frame = run.table(name)
        csv, pq = run.path / f"{name}.csv", run.path / f"{name}.parquet"
        if frame is None or not csv.exists():
            continue
        if pq.exists() and pq.stat().st_mtime >= csv.stat().st_mtime:
            continue
        try:
            frame.to_parquet(pq, index=False)
        except (ValueError, TypeError, ImportError, OSError) as exc:
            warnings.warn(f"{pq.name}: could not be written ({exc})", ReportWarning,
                          stacklevel=3)


def _write_layers(run: RunFolder) -> None:
    """Add per-county ``audit`` (record period) and ``outlook`` layers if missing."""
    if run.counties is None:
        return
    gpkg = run.path / "counties.gpkg"
    wanted = {"audit": run.table("audit"), "outlook": run.table("outlook")}
    for layer, frame in wanted.items():
        if frame is None or frame.empty or layer in run.layers or COUNTY not in frame.columns:
            continue
        if layer == "audit" and "period" in frame.columns:
            frame = frame[(frame["period"] == record_period(frame)).fillna(False).to_numpy(bool)]
        shapes = run.counties[[COUNTY, "geometry"]]
        joined = shapes.merge(pd.DataFrame(frame), on=COUNTY, how="inner")
        try:
            joined.to_file(gpkg, layer=layer, driver="GPKG")
        except Exception as exc:  # noqa: BLE001 - the GIS copy is a convenience, not the report
            warnings.warn(f"counties.gpkg: layer {layer!r} could not be written ({exc})",
                          ReportWarning, stacklevel=3)
