"""Methods, cautions: the fixed text of the report (written in
:mod:`impactlink.report.words_methods` and :mod:`impactlink.report.text`).
"""

from __future__ import annotations

from impactlink.report.common import FigureSink, section
from impactlink.report.html import Markup, el, paragraph
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import CAUTIONS
from impactlink.report.words_methods import METHODS, REFERENCES


def methods_section(run: RunFolder, figs: FigureSink) -> Markup:
    parts = []
    for head, text in METHODS:
        parts.append(el("h3", head))
        parts.append(paragraph(text))
    parts.append(el("h3", "References"))
    parts.append(el("ol", *[el("li", r) for r in REFERENCES], class_="refs"))
    return section("methods", "Methods", *parts)


def cautions_section(run: RunFolder, figs: FigureSink) -> Markup:
    parts = []
    for head, text in CAUTIONS:
        parts.append(el("h3", head))
        parts.append(paragraph(text))
    warn = (run.manifest or {}).get("warnings") or []
    if warn:
        parts.append(el("h3", "Warnings raised during this run"))
        parts.append(el("ul", *[el("li", w) for w in warn]))
    return section("cautions", "Cautions", *parts)
