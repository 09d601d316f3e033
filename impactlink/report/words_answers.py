"""Words of the first screen: the plain answer per primary impact, the demo banner, the
"what this means for you" lines and the glossary.

Plain text (the HTML layer escapes it), built from a run's tables and manifest.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import pandas as pd

from impactlink.report._select import single_candidates, summary_skill
from impactlink.report.text import (
    _present,
    cadence_of,
    fmt_num,
    impact_name,
    percent_level,
    row_label,
    score_label,
    target_name,
)

__all__ = ["PlainAnswer", "plain_answer", "is_demo", "FOR_YOU", "GLOSSARY", "DEMO_BANNER"]

DEMO_BANNER = ("Demonstration run: every number on this page comes from invented data for the "
               "fictional state of Vellmora. Nothing here applies to a real place.")

#: One line per user, with the section it leads to: (who, what it means, anchor, link text).
FOR_YOU = (
    ("Drought committee", "which index and level to watch, and how a trigger plan would have "
     "performed in past droughts", "#triggers", "trigger plan replay"),
    ("Extension agent", "find your county by name and read its one-page card: its best index, "
     "threshold check, outlook and contrast", "#finder", "county finder"),
    ("Researcher", "every score with its interval, derived targets and horizons, methods and "
     "files", "#appendix", "appendix"),
    ("Everyone", "time scale, lead, impact levels and each score (its range and no-skill "
     "value) explained", "#glossary", "glossary"),
)

#: (term, definition) shown on the page.
GLOSSARY = (
    ("Time scale", "The number of weeks (or months, for monthly input) over which "
     "precipitation or the water balance is summed before the index is computed: SPEI over "
     "13 weeks looks at the last 13 weeks."),
    ("Lag / lead", "How long before the impact the index is read. \"8 weeks ahead\" means the "
     "index value of 8 weeks earlier is used, which gives 8 weeks of warning."),
    ("End week", "The last week of an impact's season window (for crops, the ISO 8601 week in "
     "which the yield-relevant window ends); the index is read at that week minus the lead."),
    ("Impact level", "A step on the impact's own ladder: for a yield shortfall, \"yield at "
     "least 10 % below trend\"; for restrictions, \"level 2 or stricter\"; for a price, "
     "\"at least 10 % above its recent level\". Chances are given for \"this level or worse\"."),
    ("Target", "What is predicted for an impact: the level in force (primary), or a derived "
     "yes/no question such as a single shortfall threshold, or a new episode or a stricter "
     "level within a horizon (in the appendix)."),
    ("Episode", "A continuous run of weeks under restrictions in a county, counted once."),
    ("Brier skill score", "Higher is better. Range from minus infinity to 1; 0 = no better "
     "than climatology (the base rate), 1 = perfect. For yes/no targets."),
    ("Ranked probability skill score", "Higher is better. Range from minus infinity to 1; 0 = "
     "no better than climatology, 1 = perfect. For ordered levels; equals the Brier skill "
     "score for a yes/no target."),
    ("ROC area", "Higher is better. Range 0 to 1; 0.5 = no discrimination, 1 = perfect: the "
     "chance that a randomly chosen impact case got a higher forecast than a non-impact case."),
    ("Log loss", "Lower is better. Range 0 to infinity; 0 = perfect."),
    ("Calibration slope", "1 = forecasts are as spread as they should be; below 1 = too "
     "extreme, above 1 = too timid."),
    ("Peirce skill score", "Higher is better. Hit rate minus false-alarm rate; range -1 to 1, "
     "0 = no skill."),
    ("Climatology", "The baseline that always forecasts the long-run share of impact cases."),
    ("Persistence", "The baseline that forecasts that the current impact level carries on. "
     "An index that does not beat persistence adds little warning beyond what is already known."),
    ("Boosted challenger", "A flexible curve (gradient boosting) fitted to the same index, to "
     "test whether the simple logistic curve misses a shape; a negative gain means the simple "
     "curve is at least as good."),
    ("Selection-aware estimate", "Skill re-estimated by repeating the whole search over "
     "indices, time scales and leads without each year's data, so choosing the best of many "
     "candidates does not flatter the score."),
    ("Interval", "The range that holds the value with the stated probability, from a "
     "bootstrap over years: skill intervals at the level of [skill] ci, curve bands at "
     "[models] curve_ci (both 90 % unless the project file says otherwise)."),
)


@dataclass(frozen=True)
class PlainAnswer:
    """One primary impact's answer on the first screen (plain sentences)."""

    impact: str
    title: str
    answer: str
    score: str
    climatology: str
    persistence: str
    events: str


def is_demo(manifest: dict | None) -> bool:
    """Whether a run is the invented demonstration scenario.

    Reads ``manifest["scenario"]`` (a flag the pipeline may write) first, then the project
    name ("demonstration", "demo", "scenario" or the scenario's state, Vellmora); the folder
    name is not used.
    """
    man = manifest or {}
    flag = man.get("scenario")
    if isinstance(flag, bool):
        return flag
    if isinstance(flag, (str, dict)) and flag:
        return True
    project = man.get("project") or {}
    name = str(project.get("name", "")) if isinstance(project, dict) else ""
    return bool(re.search(r"\b(demo|demonstration|scenario|vellmora)\b", name, re.IGNORECASE))


def plain_answer(row: pd.Series, skill: pd.DataFrame | None, link_row: pd.Series | None,
                 *, options: dict | None = None, ci: float | None = None) -> PlainAnswer:
    """The first-screen answer for one ``skill_summary.csv`` row.

    Parameters
    ----------
    row : Series
        The impact's primary target in ``skill_summary.csv``.
    skill : DataFrame, optional
        ``skill.csv`` (baseline scores and the best candidate's flags).
    link_row : Series, optional
        The target's row of ``link_summary.csv`` (grain, episodes).
    options : dict, optional
        The impact's options from the manifest (``season_week``).
    ci : float, optional
        Interval level (``manifest["project"]["skill"]["ci"]``), default 0.9.
    """
    g = row.get
    impact, target = str(g("impact")), str(g("target"))
    grain = link_row.get("grain") if link_row is not None else None
    cadence = cadence_of(grain)
    answer = row_label(row, prefix="best_", cadence=cadence)
    week = (options or {}).get("season_week")
    if cadence == "annual" and _present(week) and not _present(g("best_end_week")):
        answer += f", read at the end of ISO week {int(float(str(week)))} (end of the season window)"
    sk = summary_skill(row)
    shown = "bss" if sk.score == "rpss" and str(g("kind", "")) == "binary" else sk.score
    level = f"{percent_level(ci or 0.9)} interval"
    score = f"{score_label(shown)} {fmt_num(sk.nested)}"
    if _present(sk.nested_lo) and _present(sk.nested_hi):
        score += f" ({level} {fmt_num(sk.nested_lo)} to {fmt_num(sk.nested_hi)})"
    climatology = ("beats it" if _present(sk.nested_lo) and sk.nested_lo > 0 else
                   "better on average, but the interval reaches no skill"
                   if _present(sk.nested) and sk.nested > 0 else "does not beat it")
    climatology = f"Climatology (score 0): {climatology}."
    persistence = _persistence(row, skill, sk.score)
    return PlainAnswer(impact=impact, title=f"{impact_name(impact)}: {target_name(impact, target)}",
                       answer=answer, score=score, climatology=climatology,
                       persistence=persistence, events=_events(row, link_row))


def _persistence(row: pd.Series, skill: pd.DataFrame | None, score: str) -> str:
    """Read the numbers: the index beats persistence only if its score is higher."""
    if skill is None or score not in skill.columns:
        return "Persistence: not scored in this run."
    g = row.get
    rows = skill[((skill["impact"] == g("impact")) & (skill["target"] == g("target")))
                 .fillna(False).to_numpy(bool)]
    base = rows[(rows["model"] == "persistence").fillna(False).to_numpy(bool)].dropna(
        subset=[score])
    if base.empty:
        return "Persistence: not scored for this impact (no current level to carry forward)."
    at_lag = base[(base["lag_weeks"] == g("best_lag_weeks")).fillna(False).to_numpy(bool)]
    p = float((at_lag if not at_lag.empty else base)[score].max())
    singles = single_candidates(rows)
    best = singles[((singles["index"] == g("best_index"))
                    & (singles["scale_weeks"] == g("best_scale_weeks"))
                    & (singles["lag_weeks"] == g("best_lag_weeks"))).fillna(False).to_numpy(bool)]
    own = float(best[score].max()) if not best.empty and best[score].notna().any() else float(
        summary_skill(row).naive)
    if not _present(own):
        return f"Persistence (score {fmt_num(p)}): not compared."
    if own > p:
        return f"Persistence (score {fmt_num(p)}): beats it ({fmt_num(own)})."
    return (f"Persistence (score {fmt_num(p)}): persistence is better than the index "
            f"({fmt_num(own)}); the index adds warning only where the level is not yet known.")


def _events(row: pd.Series, link_row: pd.Series | None) -> str:
    """The event count in the impact's own unit (episodes, county-years, region-months)."""
    events = row.get("events")
    grain = str(link_row.get("grain")) if link_row is not None else ""
    episodes = link_row.get("episodes") if link_row is not None else None
    years = row.get("n_years")
    tail = f" in {int(years)} years" if _present(years) else ""
    if _present(episodes):
        return f"{int(float(str(episodes)))} restriction episodes{tail}."
    if not _present(events):
        return "Event count not recorded."
    unit = {"county_year": "county-years", "region_month": "region-months",
            "county_month": "county-months", "county_week": "county-weeks"}.get(grain, "cases")
    return f"{int(events)} {unit} with the impact{tail}."
