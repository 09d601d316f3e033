"""First screen of the report: the cautions banner, the per-impact answer cards and the
contents.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report._select import summary_skill
from impactlink.report.common import FigureSink, absent, data_files, pair_title, section
from impactlink.report.html import Markup, el, link, paragraph
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import (
    CAUTIONS_SHORT,
    answer_card,
    candidate_label,
    fmt_interval,
    target_label,
)
from impactlink.report.words_sections import ANSWERS_NOTE


def cautions_banner() -> Markup:
    """The short cautions box shown on the first screen."""
    items = [el("li", el("strong", head + ": "), body) for head, body in CAUTIONS_SHORT]
    return el("aside", el("strong", "Read with care "), "(", link("#cautions", "full text"), ")",
              el("ul", *items), class_="cautions", aria_label="cautions")


def answer_cards(run: RunFolder, figs: FigureSink | None = None) -> Markup:
    """Per-impact answer cards: which index and time scale, how good, how sure."""
    summary = run.table("skill_summary")
    if summary is None or summary.empty:
        return section("summary", "What this run found", absent(
            "Not computed in this run: no skill summary was written, so no index can be "
            "recommended."))
    skill = run.table("skill")
    cards, glance = [], []
    for impact, rows in summary.groupby("impact", sort=False):
        if "role" in rows.columns:
            rows = rows.assign(_p=(rows["role"] != "primary").fillna(True)).sort_values(
                "_p", kind="stable")
        answers = [answer_card(r, skill) for _, r in rows.iterrows()]
        main, others = answers[0], answers[1:]
        glance.append(el("li", el("strong", f"{impact}: "), _glance(rows.iloc[0], main)))
        dl = el("dl",
                el("dt", "Best predictor"), el("dd", main.which),
                el("dt", "How good"), el("dd", main.how_good),
                el("dt", "Against baselines"), el("dd", main.baselines or "No baselines scored."),
                el("dt", "How sure"), el("dd", main.how_sure),
                el("dt", "Evidence"), el("dd", main.rests_on),
                *( [el("dt", "Beyond persistence"), el("dd", main.persistence)]
                   if main.persistence else []))
        extra = [el("li", el("strong", f"{target_label(a.impact, a.target)}: "), f"{a.which}. {a.verdict} "
                    f"{a.how_sure} {a.persistence}".strip()) for a in others]
        cards.append(el(
            "article",
            el("h3", pair_title(impact, main.target)),
            paragraph(main.verdict, class_="verdict"),
            dl,
            el("ul", *extra, class_="others") if extra else Markup(""),
            class_="card",
        ))
    return section("summary", "What this run found",
                    el("ul", *glance, class_="glance", aria_label="at a glance"),
                    paragraph(ANSWERS_NOTE, class_="note"),
                    el("div", *cards, class_="cards"),
                    data_files(run, "skill_summary"))


def _glance(row: pd.Series, answer) -> str:
    """One line per impact for the top of the page: best candidate, skill, verdict, events."""
    label = candidate_label(row.get("best_index"), row.get("best_scale_weeks"),
                            row.get("best_lag_weeks"), short=True)
    nested = summary_skill(row)
    skill = fmt_interval(nested.nested, nested.nested_lo, nested.nested_hi)
    events = row.get("events")
    tail = f", {int(events)} events" if pd.notna(events) else ""
    short = answer.verdict.split(":")[0].rstrip(".")
    return f"{label} \u2014 skill {skill}; {short[:1].lower() + short[1:]}{tail}."


def contents(entries: list[tuple[str, str]]) -> Markup:
    """Table of contents (hidden in print)."""
    return el("nav", el("ol", *[el("li", link(f"#{sid}", title)) for sid, title in entries]),
              aria_label="contents")
