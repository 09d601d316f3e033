"""Plain-language sentences for the report, built from result rows.

Every function returns plain text (no markup); the HTML layer escapes it. Wording is our
own and aimed at committee members and county officials: numbers are rounded, intervals
are written "from ... to ...", and each answer says what it rests on.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from impactlink.report._select import single_candidates, summary_skill
from impactlink.report.words_candidate import candidate_label, in_cadence, index_name, row_label
from impactlink.report.words_sections import CAUTIONS, CAUTIONS_SHORT

__all__ = [
    "index_name",
    "score_label",
    "candidate_label",
    "row_label",
    "fmt_num",
    "fmt_interval",
    "percent_level",
    "Answer",
    "answer_card",
    "verdict",
    "CAUTIONS",
    "CAUTIONS_SHORT",
    "target_label",
    "persistence_sentence",
    "impact_name",
    "target_name",
    "level_name",
    "model_name",
    "in_cadence",
    "cadence_of",
    "is_primary",
]


_SCORE_LABELS = {
    "bss": "Brier skill score",
    "rpss": "ranked probability skill score",
    "brier": "Brier score",
    "rps": "ranked probability score",
    "roc_auc": "ROC area",
    "log_loss": "log loss",
    "calibration_slope": "calibration slope",
}

_MODEL_NAMES = {
    "climatology": "climatology (the long-run base rate)",
    "seasonal": "seasonal base rate",
    "persistence": "persistence (the current impact level carried forward)",
    "index": "index model",
    "index_pair": "two-time-scale index model",
    "boosted": "boosted challenger (flexible curve)",
    "index_persistence": "index plus persistence",
    "logistic": "logistic",
    "ordinal_logit": "proportional-odds",
}

def score_label(score: str) -> str:
    """Display name of a score column ("bss" -> "Brier skill score")."""
    return _SCORE_LABELS.get(str(score), str(score))


def cadence_of(grain) -> str:
    """Cadence of an impact from its grain ("region_month" -> "monthly")."""
    text = str(grain or "")
    if text.endswith("month"):
        return "monthly"
    if text.endswith("year"):
        return "annual"
    return "weekly"


def impact_name(impact) -> str:
    """Display name of an impact ("maize_shortfall" -> "Maize shortfall").

    Examples
    --------
    >>> impact_name("hay_price_spike"), impact_name("restrictions")
    ('Hay price spike', 'Water-use restrictions')
    """
    text = str(impact)
    if text == "restrictions":
        return "Water-use restrictions"
    words = text.replace("_", " ").strip()
    return words[:1].upper() + words[1:]


def target_name(impact, target) -> str:
    """Display name of a target, decoded from its id.

    Examples
    --------
    >>> target_name("restrictions", "restrictions:state")
    'restriction level in force each week'
    >>> target_name("restrictions", "restrictions:onset:4w")
    'a new restriction episode starting within 4 weeks'
    >>> target_name("maize_shortfall", "maize_shortfall:maize:rainfed:shortfall_20pct")
    'rainfed maize: yield at least 20 % below trend'
    >>> target_name("crop_reports", "crop_reports:count")
    'field reports of crop damage each week'
    """
    rest = target_label(impact, target).split(":")
    if rest[0] in ("onset", "escalation"):
        what = ("a new restriction episode starting" if rest[0] == "onset"
                else "a move to a stricter level")
        return f"{what} within {rest[1].rstrip('w')} weeks" if len(rest) > 1 else what
    if rest == ["state"]:
        return "restriction level in force each week"
    if rest == ["count"]:
        return "field reports of crop damage each week"
    level = [p for p in rest if p.startswith(("shortfall_", "spike_"))]
    words = [p for p in rest if p not in level]
    if len(words) == 2:  # crop:practice
        head = f"{words[1]} {words[0]}"
    else:
        head = " ".join(w.replace("_", " ") for w in words) or str(target)
    if level:
        return f"{head}: {level_name(level[0])}"
    if str(impact).endswith("shortfall"):
        return f"{head}: yield-shortfall class"
    if str(impact).endswith("spike"):
        return f"{head}: price-rise class"
    return head


def level_name(label) -> str:
    """Display name of an impact level ("shortfall_10pct" -> "yield at least 10 % below
    trend", "stage_2" -> "level 2 or stricter").

    Examples
    --------
    >>> level_name("spike_25pct"), level_name("severity_1"), level_name("yes")
    ('price at least 25 % above its recent level', 'severity 1 or worse', 'yes')
    """
    text = str(label)
    head, _, tail = text.rpartition("_")
    pct = tail[:-3] if tail.endswith("pct") else None
    if head == "shortfall" and pct:
        return f"yield at least {pct} % below trend"
    if head == "spike" and pct:
        return f"price at least {pct} % above its recent level"
    if head == "stage" and tail.isdigit():
        return f"level {tail} or stricter"
    if head == "severity" and tail.isdigit():
        return f"severity {tail} or worse"
    return text.replace("_", " ")


def model_name(model) -> str:
    """Display name of a model or baseline ("boosted" -> "boosted challenger (flexible
    curve)")."""
    return _MODEL_NAMES.get(str(model), str(model).replace("_", " "))


def is_primary(row) -> bool:
    """Whether a ``skill_summary.csv`` row is an impact's primary target, rather than a
    derived one (a single shortfall threshold, an onset or escalation horizon)."""
    role = str(row.get("role", ""))
    if role in ("primary", "secondary"):
        return role == "primary"
    if role in ("onset", "escalation"):
        return False
    last = str(row.get("target", "")).split(":")[-1]
    return not last.startswith(("shortfall_", "spike_"))


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


def percent_level(level: float) -> str:
    """An interval's coverage as the report writes it: 0.9 -> '90 %', 0.975 -> '97.5 %'."""
    return f"{100 * float(level):g} %"


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
            names = " and ".join(n for n, b in (("seasonal", beats_seasonal),
                                                ("persistence", beats_persistence))
                                 if b is not None and _present(b))
            if small:
                return (f"Clear but small signal: the index beats climatology and the {names} "
                        "baseline by a little.")
            return (f"Clear signal: the index beats climatology and the {names} baseline out "
                    "of sample.")
        if small:
            return "Small signal, and a baseline does as well or better."
        return "Real signal, but a baseline does as well or better."
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
    which = row_label(summary, prefix="best_", short=False)
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
    best_label = row_label(summary, prefix="best_")
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
            labels = [row_label(r) for _, r in tie_rows.iterrows()]
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
        return (f"For {target_name(g('impact'), g('target'))}, the index {word} warning "
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
    try:  # None, NA and NaN are absent; an array-like is present
        return value is not None and value is not pd.NA and not bool(pd.isna(value))
    except (TypeError, ValueError):
        return True


def _truthy(value) -> bool:
    if isinstance(value, str):
        return value.strip().lower() in ("true", "1", "yes")
    return bool(value)


def _int(value) -> str:
    return str(int(value)) if _present(value) else "an unknown number of"
