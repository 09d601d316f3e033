"""First screen of the report: the demo banner, the cautions, the plain answer per primary
impact and what it means for each user; then the answer cards, the glossary and the
appendix of derived targets.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report._select import summary_skill
from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    primary_pairs,
    section,
    setting,
)
from impactlink.report.html import Markup, el, link, paragraph
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import (
    CAUTIONS_SHORT,
    answer_card,
    fmt_interval,
    impact_name,
    is_primary,
    level_name,
    row_label,
    target_name,
)
from impactlink.report.words_answers import (
    DEMO_BANNER,
    FOR_YOU,
    GLOSSARY,
    is_demo,
    plain_answer,
)
from impactlink.report.words_sections import ANSWERS_NOTE


def first_screen(run: RunFolder) -> Markup:
    """What a reader sees without scrolling: the demo banner (on scenario runs), the
    cautions, one plain answer per primary impact and a line per user."""
    man = run.manifest or {}
    parts = []
    if is_demo(man):
        parts.append(el("p", el("strong", "Invented data. "), DEMO_BANNER, class_="demo",
                        role="note"))
    parts.append(cautions_banner())
    summary = run.table("skill_summary")
    if summary is None or summary.empty:
        parts.append(absent("No skill summary was written, so no index can be recommended."))
        return el("div", *parts, class_="first")
    skill, links = run.table("skill"), run.table("link_summary")
    opts = {str(i.get("name")): i.get("options") or {} for i in man.get("project", {})
            .get("impacts", []) if isinstance(i, dict)} if isinstance(man.get("project"), dict) else {}
    ci = setting(run, "skill", "ci", None)
    blocks = []
    for _, row in primary_rows(summary).iterrows():
        link_row = None
        if links is not None and "target" in links.columns:
            hit = links[(links["target"] == row["target"]).fillna(False).to_numpy(bool)]
            link_row = hit.iloc[0] if not hit.empty else None
        a = plain_answer(row, skill, link_row, options=opts.get(str(row["impact"])), ci=ci)
        blocks.append(el("article", el("h3", a.title),
                         el("dl", el("dt", "Best predictor"), el("dd", a.answer),
                            el("dt", "Score (out of sample)"), el("dd", a.score),
                            el("dt", "Compared with"), el("dd", a.climatology, el("br"),
                                                          a.persistence),
                            el("dt", "Events"), el("dd", a.events)),
                         class_="answer"))
    you = [el("li", el("strong", who + ": "), what + " \u2192 ", link(href, text))
           for who, what, href, text in FOR_YOU]
    parts += [el("h2", "The answers", id="answers"),
              el("div", *blocks, class_="answers", aria_label="answers"),
              el("ul", *you, class_="foryou", aria_label="what this means for you")]
    return el("div", *parts, class_="first")


def primary_rows(summary: pd.DataFrame) -> pd.DataFrame:
    """The primary target of each impact (derived thresholds and horizons left out)."""
    keep = [is_primary(r) for _, r in summary.iterrows()]
    rows = summary.loc[keep]
    missing = set(summary["impact"]) - set(rows["impact"])
    extra = summary[summary["impact"].isin(missing)].drop_duplicates("impact")
    return pd.concat([rows, extra]).drop_duplicates("target")


def glossary_section(run: RunFolder, figs: FigureSink | None = None) -> Markup:
    """Definitions of the words the page uses."""
    items = [Markup(el("dt", term) + el("dd", text)) for term, text in GLOSSARY]
    curves = run.table("curves")
    if curves is not None and {"impact", "target", "level_label"} <= set(curves.columns):
        levels = curves.dropna(subset=["level_label"]).drop_duplicates(["target", "level_label"])
        keep = set(primary_pairs(run, list(dict.fromkeys(zip(
            levels["impact"].astype(str), levels["target"].astype(str), strict=True)))))
        for (impact, target), sub in levels.groupby(["impact", "target"], sort=False):
            if (str(impact), str(target)) not in keep:
                continue
            names = [level_name(v) for v in sub["level_label"]]
            items.append(Markup(el("dt", f"Levels of {impact_name(impact)}: "
                                         f"{target_name(impact, target)}")
                                + el("dd", "; ".join(names) + ".")))
    return section("glossary", "Glossary", el("dl", *items, class_="glossary"))


def cautions_banner() -> Markup:
    """The short cautions box shown on the first screen."""
    items = [el("li", el("strong", head + ": "), body) for head, body in CAUTIONS_SHORT]
    return el("aside", el("strong", "Read with care "), "(", link("#cautions", "full text"), ")",
              el("ul", *items), class_="cautions", aria_label="cautions")


def answer_cards(run: RunFolder, figs: FigureSink | None = None) -> Markup:
    """Per-impact answer cards for the primary targets: which index and time scale, how
    good, against which baselines, how sure."""
    summary = run.table("skill_summary")
    if summary is None or summary.empty:
        return section("summary", "Answer details", absent(
            "Not computed in this run: no skill summary was written, so no index can be "
            "recommended."))
    skill = run.table("skill")
    cards, glance = [], []
    for _, row in primary_rows(summary).iterrows():
        main = answer_card(row, skill)
        glance.append(el("li", el("strong", f"{impact_name(row['impact'])}: "),
                         _glance(row, main)))
        cards.append(_card(main))
    return section("summary", "Answer details",
                    el("ul", *glance, class_="glance", aria_label="at a glance"),
                    paragraph(ANSWERS_NOTE, class_="note"),
                    el("div", *cards, class_="cards"),
                    data_files(run, "skill_summary"))


def appendix_section(run: RunFolder, figs: FigureSink | None = None) -> Markup:
    """Appendix: the derived targets (single shortfall thresholds, onset and escalation
    horizons), each with its answer card."""
    summary = run.table("skill_summary")
    if summary is None or summary.empty:
        return section("appendix", "Appendix: derived targets", absent())
    skill = run.table("skill")
    primary = set(primary_rows(summary)["target"])
    cards = [_card(answer_card(r, skill)) for _, r in summary.iterrows()
             if r["target"] not in primary]
    if not cards:
        return section("appendix", "Appendix: derived targets",
                       absent("This run has no derived targets."))
    return section("appendix", "Appendix: derived targets",
                   paragraph("Each derived target asks a single yes/no question of an impact "
                             "(one shortfall threshold, a new episode or a stricter level within "
                             "a horizon). They are scored like the primary targets."),
                   el("div", *cards, class_="cards"))


def _card(main) -> Markup:
    dl = el("dl",
            el("dt", "Best predictor"), el("dd", main.which),
            el("dt", "How good"), el("dd", main.how_good),
            el("dt", "Against baselines"), el("dd", main.baselines or "No baselines scored."),
            el("dt", "How sure"), el("dd", main.how_sure),
            el("dt", "Evidence"), el("dd", main.rests_on),
            *([el("dt", "Beyond persistence"), el("dd", main.persistence)]
              if main.persistence else []))
    return el("article", el("h3", f"{impact_name(main.impact)}: "
                                  f"{target_name(main.impact, main.target)}"),
              paragraph(main.verdict, class_="verdict"), dl, class_="card")


def _glance(row: pd.Series, answer) -> str:
    """One line per impact: best candidate, score with its interval, verdict, events."""
    label = row_label(row, prefix="best_")
    label = f"{target_name(row.get('impact'), row.get('target'))}: {label}"
    nested = summary_skill(row)
    skill = fmt_interval(nested.nested, nested.nested_lo, nested.nested_hi)
    events = row.get("events")
    tail = f", {int(events)} cases with the impact" if pd.notna(events) else ""
    short = answer.verdict.split(":")[0].rstrip(".")
    return f"{label} \u2014 score {skill}; {short[:1].lower() + short[1:]}{tail}."


def contents(entries: list[tuple[str, str]]) -> Markup:
    """Table of contents (hidden in print)."""
    return el("nav", el("ol", *[el("li", link(f"#{sid}", title)) for sid, title in entries]),
              aria_label="contents")
