"""Words of the trigger section: fixed paragraphs, and sentences built from the numbers of
``triggers.csv`` and the ``trigger_plan_*.csv`` tables.

Plain text (the HTML layer escapes it). The two skill ratios keep one name each:
false-alarm RATIO b / (a + b) (share of stage weeks without an impact) and false-alarm RATE
b / (b + d) (share of weeks without an impact that were in the stage); the Peirce skill score
is hit rate minus false-alarm rate (Peirce 1884; Wilks 2011, section 8.2).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import pandas as pd

from impactlink.report.text import fmt_interval, fmt_num

__all__ = [
    "PLAN_TITLE", "PLAN_INTRO", "SKILL_WORDS", "CAUTION", "MEMO_HEAD", "SCORES_CAPTION",
    "TUNED_HEAD", "TIMELINES_HEAD", "MAP_HEAD", "OLD_AUDIT_HEAD", "OLD_AUDIT_NOTE",
    "OLD_INTRO", "QUANTITY_LABELS", "exposure_sentence", "tuned_sentence", "tradeoff_alt",
    "timeline_alt", "uniform_local_sentence", "uniform_local_alt", "map_panel_titles",
    "trigger_comparison_sentence", "not_scored_label", "single_map_alt", "single_timeline_alt",
    "OLD_TIMELINES_HEAD", "POOLED_CAPTION", "PER_COUNTY_OLD", "PER_COUNTY_PLAN", "BY_GROUP_HEAD",
    "DECADES_HEAD",
]

PLAN_TITLE = "The committee's trigger plan, replayed over the record"

PLAN_INTRO = (
    "The plan's stages were replayed week by week for every unit over the whole record, with "
    "the plan's own entry and exit rules, and each stage was scored against the recorded "
    "impact. An entry counts as a hit when an impact began within the plan's tolerance window "
    "after it."
)

SKILL_WORDS = (
    "Hit rate is the share of impact weeks that were in the stage. The false-alarm ratio "
    "(column false_alarm_ratio) is the share of stage weeks that brought no impact, "
    "b / (a + b). The false-alarm rate (column false_alarm_rate) is the share of weeks "
    "without an impact that were nevertheless in the stage, b / (b + d). The Peirce skill "
    "score is hit rate minus false-alarm RATE (0 = no skill, 1 = perfect); it is not hit "
    "rate minus false-alarm ratio."
)

CAUTION = (
    "These replays are statistical associations with past impact records, not causes; the "
    "records are incomplete. Trigger decisions rest with the responsible authorities under "
    "their own codes and plans."
)

MEMO_HEAD = "In a sentence per stage"
SCORES_CAPTION = "Scores of each stage over the whole record (exposed unit-weeks only)"
TUNED_HEAD = "Tuned threshold, its interval and its skill on held-out years"
TIMELINES_HEAD = "Two units on one time axis"
MAP_HEAD = "One statewide threshold against local percentiles"
OLD_AUDIT_HEAD = "Single-index check (one index, one threshold)"
OLD_AUDIT_NOTE = (
    "The older one-index, one-threshold check is kept here for comparison only; the plan "
    "replay above supersedes it, because it replays the committee's own stages, indicators "
    "and exit rules and scores them with the same exposure rule."
)
OLD_INTRO = (
    "How a single-index trigger (switch on after the index stays beyond its threshold for "
    "the entry weeks, off after the exit weeks) would have performed over the record: one "
    "threshold for every county (uniform) against thresholds tuned per county (local). Hit "
    "rate and false-alarm ratio here are shares of impact episodes and of activations."
)

OLD_TIMELINES_HEAD = "Replay timelines"
POOLED_CAPTION = "All counties together"
PER_COUNTY_OLD = "Per-county plans"
PER_COUNTY_PLAN = "Per-county comparison (counties that cannot record the impact are not scored)"
BY_GROUP_HEAD = "By season and by region"
DECADES_HEAD = "Share of weeks in each stage, per decade"

#: Plain labels of the quantities of ``trigger_plan_tuned.csv``.
QUANTITY_LABELS = {
    "threshold": "entry threshold",
    "enter_weeks": "weeks to enter",
    "peirce_skill_score": "Peirce skill score",
    "economic_value": "relative economic value",
    "entries_per_unit_year": "entries per unit and year",
}


def exposure_sentence(exposed_units, all_units, impact: str) -> str:
    """Which units were scored; a unit that cannot record the impact is not scored.

    Examples
    --------
    >>> exposure_sentence(34, 60, "restrictions")
    '34 of the 60 units could record restrictions and were scored; the other 26 have no water system, so they cannot record a restriction and are not scored for restrictions (they count neither as hits nor as false alarms).'
    """
    words = str(impact).replace("_", " ")
    try:
        n_exp, n_all = int(exposed_units), int(all_units)
    except (TypeError, ValueError):
        return (f"Only unit-weeks where {words} could be recorded were scored; counties "
                "without water systems are not scored for restrictions.")
    rest = n_all - n_exp
    if rest <= 0:
        return f"All {n_all} units could record {words} and were scored."
    why = ("have no water system, so they cannot record a restriction and are not scored for "
           "restrictions" if "restriction" in words else f"cannot record {words} and are not "
           "scored")
    return (f"{n_exp} of the {n_all} units could record {words} and were scored; the other "
            f"{rest} {why} (they count neither as hits nor as false alarms).")


def not_scored_label(impact: str) -> str:
    """Cell text for a unit that was not scored for ``impact``."""
    if "restriction" in str(impact):
        return "not scored: no water system"
    return "not scored: impact cannot be recorded"


def _row(tuned: pd.DataFrame, quantity: str) -> Mapping | None:
    hit = tuned[tuned["quantity"].astype(str) == quantity]
    return None if hit.empty else hit.iloc[0]


def tuned_sentence(tuned: pd.DataFrame) -> str:
    """The tuned threshold, its bootstrap interval and held-out skill in one or two sentences.

    Parameters
    ----------
    tuned : pandas.DataFrame
        ``trigger_plan_tuned.csv``: ``quantity, estimate, lo, hi, held_out`` (and ``ci``;
        ``stage``, ``rule`` and ``kind`` are used when present).
    """
    thr = _row(tuned, "threshold")
    if thr is None:
        return ""

    def first(col: str) -> str:
        if col not in tuned.columns or not tuned[col].notna().any():
            return ""
        return str(tuned[col].dropna().iloc[0])

    ci = tuned["ci"].iloc[0] if "ci" in tuned.columns else math.nan
    level = f"{100 * float(ci):.0f} % " if pd.notna(ci) else ""
    stage, rule, kind = first("stage"), first("rule"), first("kind")
    what = f"stage {stage}" if stage else "the tuned stage"
    if rule:
        what += f" ({rule})"
    value = fmt_interval(thr["estimate"], thr["lo"], thr["hi"])
    where = (f"the local percentile {value}" if kind == "percentile" else
             f"{value} (in the rule's own units: index value, percentile or percent of normal)"
             if not kind else f"{value} ({kind})")
    text = f"Tuned on the whole record, {what} enters at {where}"
    wk = _row(tuned, "enter_weeks")
    if wk is not None and pd.notna(wk["estimate"]):
        text += f" after {fmt_num(wk['estimate'], 0)} weeks"
    text += f"; {level}year-block bootstrap interval in brackets."
    pss = _row(tuned, "peirce_skill_score")
    if pss is not None:
        text += (f" Its Peirce skill score is {fmt_interval(pss['estimate'], pss['lo'], pss['hi'])}"
                 f" on the years it was tuned on and {fmt_num(pss['held_out'])} on years "
                 "held out of the tuning (leave one year out); the held-out number is the one "
                 "to expect.")
    return text


def tradeoff_alt(curve: pd.DataFrame) -> str:
    """Alt text of the tuning trade-off figure, with the chosen point's numbers."""
    c = curve[curve["chosen"].astype(str).str.lower().isin(("true", "1"))]
    text = ("Tuning trade-off: hit rate against false-alarm ratio for each candidate "
            "threshold and number of entry weeks, and the share of weeks in the stage against "
            "the threshold.")
    if not c.empty:
        r = c.iloc[0]
        text += (f" The chosen threshold {fmt_num(r['threshold'])} with "
                 f"{fmt_num(r['enter_weeks'], 0)} entry weeks has hit rate "
                 f"{fmt_num(r['hit_rate'])}, false-alarm ratio {fmt_num(r['false_alarm_ratio'])}"
                 f" and {fmt_num(100 * float(r['weeks_in_stage_share']), 0)} % of weeks in the "
                 "stage.")
    return text


def timeline_alt(unit_label: str, indicators: Sequence[str], stage_names: Sequence[str]) -> str:
    """Alt text of one per-unit plan timeline."""
    return (f"Plan timeline of {unit_label}: weekly values of {', '.join(indicators)} with their "
            f"entry and exit thresholds, the stage reached ({', '.join(stage_names)}), and "
            "weeks with a recorded impact; blank where the impact could not be recorded.")


def map_panel_titles(percentile) -> tuple[str, str]:
    """Titles of the two panels of the uniform-versus-local map."""
    p = fmt_num(percentile, 0) if percentile is not None and pd.notna(percentile) else ""
    local = f"local {p}th percentile" if p else "local percentile"
    return "one statewide threshold", local


def uniform_local_sentence(pooled: pd.DataFrame, column: str,
                           per_unit: pd.DataFrame | None = None) -> str:
    """Statewide against local thresholds from the pooled rows (``unit`` or ``county_id``
    "all") of ``trigger_plan_uniform_local.csv``; ``column`` is the mapped quantity
    (``entries_per_decade`` or ``weeks_in_stage_share``); ``per_unit`` (the other rows) adds
    the range over units of each plan."""
    by = {str(r["plan"]): r for _, r in pooled.iterrows()}
    if not {"uniform", "local"} <= set(by):
        return ""
    u, loc = by["uniform"], by["local"]
    scale = 1.0 if column == "entries_per_decade" else 100.0
    unit = " entries per decade" if column == "entries_per_decade" else " % of weeks in the stage"
    digits = 1 if column == "entries_per_decade" else 0

    def amount(r) -> str:
        return f"{fmt_num(scale * float(r[column]), digits)}{unit}"

    def spread(plan: str) -> str:
        if per_unit is None or "plan" not in per_unit.columns:
            return ""
        v = pd.to_numeric(per_unit.loc[per_unit["plan"].astype(str) == plan, column],
                          errors="coerce").dropna() * scale
        if v.empty:
            return ""
        return f" (from {fmt_num(v.min(), digits)} to {fmt_num(v.max(), digits)} by unit)"

    text = (f"With one statewide threshold ({fmt_num(u['threshold_value'])}) a unit has on "
            f"average {amount(u)}{spread('uniform')}, against {amount(loc)}{spread('local')} "
            f"with each unit's own {fmt_num(loc['percentile'], 0)}th percentile. The two maps "
            "share one colour scale, so the same shade means the same frequency in both.")
    if "peirce_skill_score" in pooled.columns:
        text += (f" Peirce skill score over all scored units: "
                 f"{fmt_num(u['peirce_skill_score'])} statewide, "
                 f"{fmt_num(loc['peirce_skill_score'])} local.")
    return text


def uniform_local_alt(titles: Sequence[str], label: str, lo, hi) -> str:
    """Alt text of the uniform-versus-local map."""
    return (f"Two county maps on one colour scale of {label} (from {fmt_num(lo)} to "
            f"{fmt_num(hi)}): {titles[0]} (left) and {titles[1]} (right).")


def trigger_comparison_sentence(pooled: pd.DataFrame) -> str:
    """Uniform against local thresholds in one sentence, from the pooled rows
    (``county_id == "all"``) of ``triggers.csv``; "" without both scopes scored.
    """
    if "scope" not in pooled.columns or "peirce_skill" not in pooled.columns:
        return ""
    by = {str(r["scope"]): r for _, r in pooled.iterrows()}
    if not {"uniform", "local"} <= set(by):
        return ""
    u, loc = by["uniform"], by["local"]
    text = (f"Replayed on the whole record, local thresholds score {fmt_num(loc['peirce_skill'])} "
            f"against {fmt_num(u['peirce_skill'])} for one uniform threshold")
    if "cv_peirce_skill" in pooled.columns and pd.notna(loc.get("cv_peirce_skill")):
        text += (f"; on years held out of the tuning, {fmt_num(loc['cv_peirce_skill'])} against "
                 f"{fmt_num(u.get('cv_peirce_skill'))}")
    return text + ". Tuned thresholds always look better on the years they were tuned on."


def single_map_alt(label: str, lo, hi) -> str:
    """Alt text of the single-index threshold maps."""
    return (f"County maps for {label}: the uniform trigger threshold beside the locally tuned "
            f"threshold per county (from {fmt_num(lo)} to {fmt_num(hi)}).")


def single_timeline_alt(target, counties: str) -> str:
    """Alt text of the single-index replay timelines."""
    return (f"Timelines of the trigger replay{' for ' + target if target else ''} in "
            f"counties {counties}: weekly index value over the last 20 years, the uniform and "
            "local thresholds, weeks each plan was on, and weeks with a recorded impact.")
