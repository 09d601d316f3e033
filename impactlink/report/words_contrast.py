"""Plain-language paragraph of one county contrast, for a county meeting.

Pure function of one row of the contrast summary
(:attr:`impactlink.contrast.ContrastDecomposition.summary`): every number in the sentence is a
number of that row, rounded for reading.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from impactlink.errors import ReportError
from impactlink.report.text import index_name

__all__ = ["contrast_paragraph", "CAUTION", "PAIR_HEAD", "PAIR_INTRO", "LOOKALIKE_HEAD",
           "LOOKALIKE_INTRO", "TERMS_HEAD", "PART_LABELS", "parts_caption", "pair_figure_alt",
           "terms_alt", "excess_alt", "excess_title", "EXCESS_LABEL", "EXCESS_DETAILS",
           "PAIRS_HEAD", "PAIRS_DETAILS", "lookalike_caption"]

#: The caution that closes every contrast paragraph.
CAUTION = ("This is a statistical association in past records, not a verdict on anyone's "
           "management; decisions rest with the responsible authorities.")

PAIR_HEAD = "Two counties that looked alike but fared differently"
PAIR_INTRO = (
    "The pair below was chosen among the counties whose index trajectories were closest in the "
    "same weeks of the same drought but whose impacts differed most. The difference in the "
    "modelled chance of an impact is split into exposure (their index values differed), "
    "sensitivity (their traits differ, trait by trait) and the unexplained remainder (the "
    "county effect left after both: management, luck or data). The parts add up to the gap; "
    "intervals are year-block bootstrap intervals."
)
LOOKALIKE_HEAD = "Look-alike pairs, ranked"
LOOKALIKE_INTRO = (
    "Pairs of counties with nearly the same index trajectory in the same drought year, "
    "ranked by how different their impacts were; traits are in their own units (percent, "
    "millimetres, head per km²)."
)
TERMS_HEAD = "County traits in the index model"
EXCESS_LABEL = "ratio (1 = as the index predicts)"
EXCESS_DETAILS = "Per-county observed and expected events"
PAIRS_HEAD = "Matched pairs"
PAIRS_DETAILS = "Counties with similar dryness but different impacts"

#: Labels of the parts of ``contrast.csv`` (probability scale).
PART_LABELS = {
    "p_a": "modelled chance of an impact, first county",
    "p_b": "modelled chance of an impact, second county",
    "total": "gap (first minus second)",
    "exposure": "exposure (different index values)",
    "sensitivity": "sensitivity (different traits), all traits",
    "unexplained": "unexplained (remaining county effect)",
}


def parts_caption(row: Mapping) -> str:
    """Caption of the parts table: which county minus which, when, in what unit."""
    when = (f"{int(row['period_start'])}" if row["period_start"] == row["period_end"]
            else f"{int(row['period_start'])}-{int(row['period_end'])}")
    return (f"{row['county_name_a']} ({_id(row['county_a'])}) minus {row['county_name_b']} "
            f"({_id(row['county_b'])}), {when}: modelled chance of an impact and its parts "
            "[percentage points]")


def lookalike_caption(target: str) -> str:
    """Caption of the ranked look-alike table."""
    return f"Look-alike pairs for {target}: impacts and traits in real units"


def pair_figure_alt(row: Mapping) -> str:
    """Alt text of the side-by-side contrast figure."""
    return (f"{row['county_name_a']} beside {row['county_name_b']}: their "
            f"{int(row['scale_weeks'])}-week {index_name(row['index'])} trajectories, the "
            f"modelled chance of an impact ({_num(row['expected_a'])} % against "
            f"{_num(row['expected_b'])} %) with the exposure ({_pts(row['exposure_pts'])}), "
            f"sensitivity ({_pts(row['sensitivity_pts'])}) and unexplained "
            f"({_pts(row['unexplained_pts'])}) parts, and their traits in real units.")


def terms_alt(target: str, items: list[str]) -> str:
    """Alt text of the trait odds-ratio chart; ``items`` are "term interval" strings."""
    return (f"Odds ratios per standard deviation of each county trait for {target}: "
            + "; ".join(items) + ".")


def excess_title(target: str) -> str:
    """Title of the observed-over-expected map."""
    return f"observed / expected events\n{target}"


def excess_alt(target: str, lo: str, hi: str) -> str:
    """Alt text of the observed-over-expected map."""
    return (f"County map of observed over expected impact events for {target}, given the "
            f"index alone; ratios range from {lo} to {hi}.")


_NEEDED = ("county_name_a", "county_name_b", "county_a", "county_b", "period_start",
           "period_end", "index", "scale_weeks", "expected_a", "expected_b", "gap_pts",
           "exposure_pts", "sensitivity_pts", "unexplained_pts", "index_mean_a",
           "index_mean_b", "top_trait_label", "top_trait_unit", "top_trait_a", "top_trait_b",
           "impact_unit", "observed_a", "observed_b", "event_label")

#: Below this mean index difference [index units] two trajectories "differed little".
LITTLE = 0.25


def contrast_paragraph(row: Mapping) -> str:
    """One paragraph explaining a contrast in words, with numbers in real units.

    Parameters
    ----------
    row : mapping
        One row of the contrast summary (a dict or a pandas Series) with the columns of
        :func:`impactlink.contrast.explain.summary_row`.

    Returns
    -------
    str
        E.g. "In 2012 Brambeth (90001) lost 31 % of its expected maize yield and Tovova
        (90003) 9 %. ... This is a statistical association ...".

    Raises
    ------
    ReportError
        If the row lacks a column the paragraph needs.
    """
    missing = [k for k in _NEEDED if k not in row]
    if missing:
        raise ReportError(f"contrast_paragraph: the summary row lacks {missing}; pass a row of "
                          "ContrastDecomposition.summary.")
    a = f"{row['county_name_a']} ({_id(row['county_a'])})"
    b = f"{row['county_name_b']} ({_id(row['county_b'])})"
    name_b = str(row["county_name_b"])
    name_a = str(row["county_name_a"])
    when = (f"{int(row['period_start'])}" if row["period_start"] == row["period_end"]
            else f"{int(row['period_start'])}-{int(row['period_end'])}")
    lead = f"In {when} " + _observed(row, a, b)
    idx = f"{int(row['scale_weeks'])}-week {index_name(row['index'])}"
    more = name_a if float(row["gap_pts"]) >= 0 else name_b
    expect = (f"Given the {idx} and the county traits, the model put the chance of "
              f"{_event(row['event_label'])} at {_num(row['expected_a'])} % in {name_a} and "
              f"{_num(row['expected_b'])} % in {name_b}: a gap of {_pts(row['gap_pts'])} "
              f"({name_a} minus {name_b}; {_pts(abs(float(row['gap_pts'])))} more in "
              f"{more}).")
    dx = float(row["index_mean_a"]) - float(row["index_mean_b"])
    differed = ("differed little" if abs(dx) < LITTLE else
                f"differed by {abs(dx):.2f} (mean {float(row['index_mean_a']):.2f} against "
                f"{float(row['index_mean_b']):.2f})")
    share = (f"exposure explains {_pts(row['exposure_pts'])} of the gap"
             if round(float(row["exposure_pts"])) >= 0 else
             f"exposure works the other way: {_pts(row['exposure_pts'])}, {name_b} was the "
             "more exposed")
    exposure = f"Their {idx} {differed} ({share})"
    unit = str(row["top_trait_unit"])
    va = _trait(row["top_trait_a"], unit)
    vb = _trait(row["top_trait_b"], unit)
    sens = (f"{name_b}'s {row['top_trait_label']} is {vb} against {name_a}'s {va} "
            f"(sensitivity: {_pts(row['sensitivity_pts'])})")
    unexplained = f"{_pts(row['unexplained_pts'])} are not explained by either"
    return f"{lead} {expect} {exposure}; {sens}; {unexplained}. {CAUTION}"


def _observed(row: Mapping, a: str, b: str) -> str:
    unit = str(row["impact_unit"])
    oa, ob = float(row["observed_a"]), float(row["observed_b"])
    if unit == "pct_of_expected_yield_lost" and math.isfinite(oa) and math.isfinite(ob):
        crop = str(row.get("target", "")).split(":")
        what = f"its expected {crop[1]} yield" if len(crop) > 1 else "its expected yield"
        return f"{a} {_loss(oa, what)} and {b} {_loss(ob, what, again=True)}."
    if unit == "pct_of_weeks_with_impact" and math.isfinite(oa) and math.isfinite(ob):
        return f"{a} had an impact in {_num(oa)} % of the weeks and {b} in {_num(ob)} %."
    return f"{a} and {b} had different impacts."


def _loss(v: float, what: str, *, again: bool = False) -> str:
    if round(v) > 0:
        return f"{_num(v)} %" if again else f"lost {_num(v)} % of {what}"
    above = (f"its yield was {_num(-v)} % above expected" if round(v) < 0
             else "its yield was as expected")
    return f"lost nothing ({above})"


def _event(label) -> str:
    text = str(label).replace("_", " ")
    if text in ("yes", "impact", "1"):
        return "an impact"
    if text.startswith("shortfall ") and text.endswith("pct"):
        return f"a shortfall of at least {text.removeprefix('shortfall ').removesuffix('pct')} %"
    return f"an impact ({text})"


def _num(v) -> str:
    """Whole number for reading (0 instead of -0)."""
    r = round(float(v))
    return str(int(r)) if r != 0 else "0"


def _pts(v) -> str:
    n = _num(v)
    word = "point" if n in ("1", "-1") else "points"
    return f"{n} {word}"


def _trait(v, unit: str) -> str:
    v = float(v)
    digits = 1 if unit == "head/km²" or (unit == "" and abs(v) < 10) else 0
    text = f"{v:.{digits}f}"
    return f"{text} {unit}".strip() if unit else text


def _id(value) -> str:
    text = str(value)
    return text.removeprefix("region:") if text.startswith("region:") else text
