"""Memo sentences for trigger plans, from the numbers of ``trigger_plan_memo.csv``.

A pure function of one row; the wording is ours. The numbers are replays of past records:
statistical associations, not causes, and no substitute for the responsible authority's
judgement.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from impactlink.report.text import index_name

__all__ = ["memo_sentence"]


def memo_sentence(row: Mapping[str, Any]) -> str:
    """One memo sentence for one stage of a replayed trigger plan.

    Parameters
    ----------
    row : mapping
        A row of ``trigger_plan_memo.csv`` (:data:`impactlink.triggers.MEMO_COLUMNS`):
        ``stage_name, impact, since_year, onsets, onsets_matched, lead_weeks_median,
        entries_without_impact, matched_entries, top_driver_index, top_driver_scale_weeks,
        top_driver_entries``.

    Returns
    -------
    str
        Plain text (no markup).

    Examples
    --------
    >>> memo_sentence({"stage_name": "conserve", "impact": "restrictions", "since_year": 1981,
    ...     "onsets": 18, "onsets_matched": 14, "lead_weeks_median": 5.0,
    ...     "entries_without_impact": 6, "matched_entries": 14, "top_driver_index": "spei",
    ...     "top_driver_scale_weeks": 26, "top_driver_entries": 9})
    'Stage conserve would have been entered in 14 of the 18 restriction onsets since 1981, a median 5 weeks before, with 6 entries that brought no restriction; driven by SPEI-26 in 9 of 14.'
    """
    stage = str(row["stage_name"])
    noun = _singular(str(row["impact"]))
    since = int(row["since_year"])
    onsets, matched = int(row["onsets"]), int(row["onsets_matched"])
    empty = int(row["entries_without_impact"])
    without = f"{empty} {'entry' if empty == 1 else 'entries'} that brought no {noun}"
    if onsets == 0:
        return (f"No {noun} onset was recorded since {since} where one could be recorded; "
                f"stage {stage} had {without}.")
    lead = _num(row.get("lead_weeks_median"))
    when = ""
    if matched and lead is not None:
        weeks = f"{lead:g} week{'' if lead == 1 else 's'}"
        when = f", a median {weeks} before" if lead > 0 else ", in the week of onset (median)"
    text = (f"Stage {stage} would have been entered in {matched} of the {onsets} {noun} "
            f"onset{'' if onsets == 1 else 's'} since {since}{when}, with {without}")
    n_entries, n_top = int(row.get("matched_entries", 0)), int(row.get("top_driver_entries", 0))
    if n_entries and n_top and str(row.get("top_driver_index", "")):
        scale = int(row["top_driver_scale_weeks"])
        label = index_name(row["top_driver_index"]) + (f"-{scale}" if scale > 0 else "")
        text += f"; driven by {label} in {n_top} of {n_entries}"
    return text + "."


def _singular(impact: str) -> str:
    words = impact.replace("_", " ").strip()
    return words[:-1] if words.endswith("s") and not words.endswith("ss") else words


def _num(value) -> float | None:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(v) else round(v, 1)
