"""Plain-language sentences for the report, built from result rows.

Every function returns plain text (no markup); the HTML layer escapes it. Wording is our
own and aimed at committee members and county officials: numbers are rounded, intervals
are written "from ... to ...", and each answer says what it rests on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import pandas as pd

from impactlink.report._select import single_candidates, summary_skill

__all__ = [
    "index_name",
    "score_label",
    "candidate_label",
    "fmt_num",
    "fmt_interval",
    "Answer",
    "answer_card",
    "verdict",
    "CAUTIONS",
    "CAUTIONS_SHORT",
    "target_label",
    "persistence_sentence",
]

_INDEX_NAMES = {
    "spi": "SPI",
    "spei": "SPEI",
    "eddi": "EDDI",
    "soil_moisture_pct": "soil-moisture percentile",
    "streamflow_pct": "streamflow percentile",
}

_SCORE_LABELS = {
    "bss": "Brier skill score",
    "rpss": "ranked probability skill score",
    "brier": "Brier score",
    "roc_auc": "ROC area",
}

#: Short form of the cautions for the banner on the first screen: (heading, sentence).
CAUTIONS_SHORT = (
    ("Association, not cause", "the numbers show what tends to go together, not what causes what."),
    ("Data limits", "coverage, reporting effort, short records and few events make every "
     "estimate uncertain."),
    ("Decisions", "rest with the responsible authorities, local codes and licensed practice."),
)

#: The cautions every report carries, in full: (heading, text).
CAUTIONS = (
    (
        "Association, not cause",
        "These results describe statistical association between index values and recorded "
        "impacts. They do not show that dryness caused any impact, nor that acting on an "
        "index will prevent one.",
    ),
    (
        "Limits of the data",
        "Impact records are only as complete as their coverage and the effort spent "
        "reporting them. Short records and few events make every estimate uncertain; "
        "weeks outside a source's coverage are unknown, not impact-free. Intervals shown "
        "are the honest range, not decoration.",
    ),
    (
        "Decisions belong to the responsible authorities",
        "Declarations, restrictions and relief decisions rest with the responsible "
        "authorities, under local codes and licensed professional practice. This report is "
        "one input to their judgement, not a substitute for it.",
    ),
)


def index_name(index) -> str:
    """Display name of an index ("spi" -> "SPI"); unknown names are kept as given."""
    if index is None or (isinstance(index, float) and math.isnan(index)) or index is pd.NA:
        return "no index"
    return _INDEX_NAMES.get(str(index).lower(), str(index).replace("_", " "))


def score_label(score: str) -> str:
    """Display name of a score column ("bss" -> "Brier skill score")."""
    return _SCORE_LABELS.get(str(score), str(score))


def candidate_label(index, scale_weeks, lag_weeks, *, short: bool = False) -> str:
    """Describe one candidate.

    Parameters
    ----------
    index : str
    scale_weeks, lag_weeks : int or float
        Time scale and lag in weeks (missing values are left out).
    short : bool, default False
        "SPI 13w lag 4w" instead of "SPI, 13-week time scale, 4-week lag".

    Examples
    --------
    >>> candidate_label("spi", 13, 4)
    'SPI, 13-week time scale, 4-week lag'
    >>> candidate_label("spei", 26, 0, short=True)
    'SPEI 26w lag 0w'
    """
    parts = [index_name(index)]
    if _present(scale_weeks) and float(scale_weeks) == 0:
        parts.append("as supplied" if not short else "")  # a supplied indicator, not summed
        parts = [p for p in parts if p]
    elif _present(scale_weeks):
        parts.append(f"{int(scale_weeks)}w" if short else f"{int(scale_weeks)}-week time scale")
    if _present(lag_weeks):
        parts.append(f"lag {int(lag_weeks)}w" if short else f"{int(lag_weeks)}-week lag")
    return " ".join(parts) if short else ", ".join(parts)


def fmt_num(value, digits: int = 2) -> str:
    """A number rounded for reading; missing values become "n/a".

    Examples
    --------
    >>> fmt_num(0.2049)
    '0.20'
    >>> fmt_num(float("nan"))
    'n/a'
    >>> fmt_num(-0.0004)
    '0.00'
    """
    if not _present(value):
        return "n/a"
    text = f"{float(value):.{digits}f}"
    return text[1:] if text.startswith("-") and float(text) == 0 else text  # no "-0.00"


def fmt_interval(estimate, lo, hi, *, digits: int = 2) -> str:
    """"0.21 (0.12 to 0.30)", or the estimate alone when the interval is missing.

    Examples
    --------
    >>> fmt_interval(0.214, 0.12, 0.3)
    '0.21 (0.12 to 0.30)'
    """
    text = fmt_num(estimate, digits)
    if _present(lo) and _present(hi):
        text += f" ({fmt_num(lo, digits)} to {fmt_num(hi, digits)})"
    return text


#: Skill below this (out of 1) is called "small" in the verdict (our own wording
#: convention, not a published cut-off).
SMALL_SKILL = 0.05


def verdict(nested, nested_lo, *, beats_seasonal=None, beats_persistence=None) -> str:
    """One-line plain-language verdict on a selection-aware skill estimate.

    Parameters
    ----------
    nested, nested_lo : float
        Selection-aware (nested) skill and the lower end of its interval; 0 is the
        climatological base rate, higher is better.
    beats_seasonal, beats_persistence : bool, optional
        Whether the best candidate beats those baselines out of sample.

    Returns
    -------
    str
    """
    if not _present(nested):
        return "Not scored in this run."
    others = [b for b in (beats_seasonal, beats_persistence) if b is not None and _present(b)]
    if _present(nested_lo) and nested_lo > 0:
        small = nested < SMALL_SKILL
        if others and all(bool(b) for b in others):
            if small:
                return "Clear but small signal: the index beats every baseline by a little."
            return "Clear signal: the index beats every baseline out of sample."
        if small:
            return "Small signal, and it does not beat every baseline."
        return "Real signal, but it does not beat every baseline."
    if nested > 0:
        return "Weak signal: the interval reaches down to no skill."
    return "No usable signal: no better than the base rate."


@dataclass(frozen=True)
class Answer:
    """The per-target answer shown on the first screen.

    Attributes are plain sentences (or "" when the run lacks the numbers).
    """

    impact: str
    target: str
    which: str
    how_good: str
    baselines: str
    how_sure: str
    rests_on: str
    verdict: str
    persistence: str = ""


def answer_card(summary: pd.Series, skill: pd.DataFrame | None = None) -> Answer:
    """Build the answer for one row of ``skill_summary.csv``.

    Parameters
    ----------
    summary : Series
        A row of ``skill_summary.csv``.
    skill : DataFrame, optional
        ``skill.csv``; used for baseline scores, the flags of the best candidate and the
        names of candidates statistically as good as the best.

    Returns
    -------
    Answer
    """
    g = summary.get
    sk = summary_skill(summary)
    score = sk.score
    which = candidate_label(g("best_index"), g("best_scale_weeks"), g("best_lag_weeks"))
    if _present(g("best_model")):
        which += f" ({g('best_model')} model)"
    # For a yes/no target the ranked probability skill score equals the Brier skill score
    # (Epstein 1969 with two categories); use the name readers know.
    shown = "bss" if score == "rpss" and str(g("kind", "")) == "binary" else score
    how_good = (
        f"{score_label(shown).capitalize()} {fmt_interval(sk.nested, sk.nested_lo, sk.nested_hi)} "
        f"after allowing for the search over {_int(g('n_candidates'))} candidates "
        f"(best candidate's own score {fmt_num(sk.naive)}); 0 = climatological base "
        "rate, 1 = perfect."
    )
    baselines, flags, ties = "", {}, []
    best_label = candidate_label(g("best_index"), g("best_scale_weeks"), g("best_lag_weeks"),
                                 short=True)
    if skill is not None and not skill.empty and score in skill.columns:
        rows = skill[((skill["impact"] == g("impact")) & (skill["target"] == g("target")))
                     .fillna(False).to_numpy(dtype=bool)]
        baselines = _baseline_text(rows, score, g("best_lag_weeks"))
        singles = single_candidates(rows)
        b = _best_row(singles, score, g("best_index"), g("best_scale_weeks"),
                      g("best_lag_weeks"), g("best_model"))
        if b is not None:
            flags = {k: b.get(k) for k in ("beats_climatology", "beats_seasonal",
                                           "beats_persistence") if k in b.index}
        beaten = [k.removeprefix("beats_") for k, v in flags.items() if _present(v) and _truthy(v)]
        missed = [k.removeprefix("beats_") for k, v in flags.items()
                  if _present(v) and not _truthy(v)]
        if beaten:
            baselines += " Beats " + ", ".join(beaten) + "."
        if missed:
            baselines += " Does not beat " + ", ".join(missed) + "."
        if "indistinguishable_from_best" in singles.columns:
            tie_rows = singles[singles["indistinguishable_from_best"].astype("boolean")
                               .fillna(False).to_numpy(bool)].sort_values(score, ascending=False)
            labels = [candidate_label(r["index"], r["scale_weeks"], r["lag_weeks"], short=True)
                      for _, r in tie_rows.iterrows()]
            ties = [lab for lab in dict.fromkeys(labels) if lab != best_label]
    n_ind = g("n_indistinguishable")
    n_other = max(int(n_ind) - 1, 0) if _present(n_ind) else len(ties)
    if n_other <= 0:
        how_sure = "No other candidate is statistically as good as the best."
    else:
        shown = "; ".join(ties[:5])
        if len(ties) > 5:
            shown += f"; and {len(ties) - 5} more"
        how_sure = (f"{n_other} other candidate{'s are' if n_other != 1 else ' is'} statistically "
                    f"as good as the best" + (f": {shown}." if ties else "."))
    share = g("nested_most_picked_share")
    if _present(share):
        picks = g("nested_distinct_picks")
        how_sure += (f" Re-running the search without each year's data picked the same "
                     f"candidate {100 * float(share):.0f} % of the time"
                     + (f" ({int(picks)} different candidates were picked)."
                        if _present(picks) and int(picks) > 1 else "."))
    years = f" in {int(g('n_years'))} years" if _present(g("n_years")) else ""
    rests_on = (f"Rests on {_int(g('events'))} events among {_int(g('n'))} scored cases{years}.")
    persistence = persistence_sentence(summary)
    return Answer(
        impact=str(g("impact")),
        target=str(g("target")),
        which=which,
        how_good=how_good,
        baselines=baselines,
        how_sure=how_sure,
        rests_on=rests_on,
        verdict=verdict(sk.nested, sk.nested_lo,
                        beats_seasonal=flags.get("beats_seasonal"),
                        beats_persistence=flags.get("beats_persistence")),
        persistence=persistence,
    )


def persistence_sentence(summary: pd.Series) -> str:
    """Whether the index adds warning beyond persistence, from the numbers of one
    ``skill_summary.csv`` row (``index_adds_skill``, ``persistence_gain`` and its interval).

    The one place the report turns the skill stage's persistence comparison into words
    (the answer cards and the skill section both call it); "" when the run lacks it.
    """
    g = summary.get
    gain = fmt_interval(g("persistence_gain"), g("persistence_gain_lo"), g("persistence_gain_hi"))
    if _present(g("index_adds_skill")) and _present(g("persistence_gain")):
        word = "adds" if _truthy(g("index_adds_skill")) else "does not clearly add"
        return (f"For {target_label(g('impact'), g('target'))}, the index {word} warning "
                f"beyond persistence (knowing the current impact level): skill gain {gain}.")
    if _present(g("persistence_gain")):
        return f"Gain over persistence: {gain}."
    return ""


def _baseline_text(rows: pd.DataFrame, score: str, best_lag) -> str:
    parts = []
    for model in ("seasonal", "persistence"):
        # persistence has one row per lag: quote the one at the best lag, else the best
        base = rows[(rows["model"] == model).fillna(False).to_numpy(bool)].dropna(subset=[score])
        at_lag = base[(base["lag_weeks"] == best_lag).fillna(False).to_numpy(bool)]
        pick = at_lag if not at_lag.empty else base
        if not pick.empty:
            parts.append(f"{model} {fmt_num(pick[score].max())}")
    return "Baseline scores: " + (", ".join(parts) if parts else "none in this run") + "."


def _best_row(singles: pd.DataFrame, score: str, index, scale, lag, model):
    """The row of the best candidate: its own model if named, else the plain index model."""
    match = singles[((singles["index"] == index) & (singles["scale_weeks"] == scale)
                     & (singles["lag_weeks"] == lag)).fillna(False).to_numpy(bool)]
    if match.empty:
        return None
    for wanted in (model, "index"):
        if _present(wanted):
            same = match[(match["model"] == wanted).fillna(False).to_numpy(bool)]
            if not same.empty:
                return same.iloc[0]
    return match.loc[match[score].idxmax()] if match[score].notna().any() else match.iloc[0]


def target_label(impact, target) -> str:
    """A target name without its impact prefix ("restrictions:onset:4w" -> "onset:4w").

    Examples
    --------
    >>> target_label("restrictions", "restrictions:onset:4w")
    'onset:4w'
    >>> target_label("crop", "class")
    'class'
    """
    impact, target = str(impact), str(target)
    prefix = impact + ":"
    return target[len(prefix):] if target.startswith(prefix) and len(target) > len(prefix) else target


def _present(value) -> bool:
    if value is None or value is pd.NA:
        return False
    try:
        return not (isinstance(value, float) and math.isnan(value)) and not pd.isna(value)
    except (TypeError, ValueError):
        return True


def _truthy(value) -> bool:
    if isinstance(value, str):
        return value.strip().lower() in ("true", "1", "yes")
    return bool(value)


def _int(value) -> str:
    return str(int(value)) if _present(value) else "an unknown number of"
