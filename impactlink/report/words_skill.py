"""Plain-language sentences about skill, built from numbers of the skill stage.

The skill stage returns numbers and flags only; these pure functions word them. They read
columns of ``skill_summary.csv`` (:func:`summary_sentence`) and ``skill_persistence.csv``
(:func:`persistence_sentence`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

__all__ = ["persistence_sentence", "summary_sentence"]


def _finite(v: Any) -> bool:
    try:
        return math.isfinite(float(v))
    except (TypeError, ValueError):
        return False


def _signed(row: Mapping[str, Any], key: str, pct: int) -> str:
    lo, hi = row.get(f"{key}_lo", math.nan), row.get(f"{key}_hi", math.nan)
    iv = f" ({pct}% interval {float(lo):+.3f} to {float(hi):+.3f})" if _finite(lo) else ""
    return f"{float(row[key]):+.3f}{iv}"


def persistence_sentence(row: Mapping[str, Any], *, ci: float = 0.90) -> str:
    """One sentence on whether the index adds skill beyond persistence at one lag.

    Parameters
    ----------
    row : mapping
        A row of ``skill_persistence.csv``: ``target``, ``lag_weeks``, ``index``,
        ``scale_weeks``, ``gain``, ``gain_lo``, ``gain_hi``, ``index_adds_skill``.
    ci : float, default 0.90
        Coverage of the interval (the run's ``ci``).
    """
    pct = int(round(100 * ci))
    index = row.get("index")
    what = f"{index.upper()} at {row['scale_weeks']} weeks" if isinstance(index, str) else "the index"
    lo, hi = row.get("gain_lo", math.nan), row.get("gain_hi", math.nan)
    interval = f" ({pct}% interval {float(lo):+.3f} to {float(hi):+.3f})" if _finite(lo) else ""
    if bool(row.get("index_adds_skill")):
        verdict = "adds skill beyond knowing the current impact level"
    else:
        verdict = ("does not clearly add skill beyond knowing the current impact level; "
                   "the level itself carries most of the signal")
    return (f"{row['target']}, {int(row['lag_weeks'])} week(s) ahead: {what} changes the ranked "
            f"probability skill by {float(row['gain']):+.3f}{interval} over persistence, so it "
            f"{verdict}.")


def summary_sentence(row: Mapping[str, Any], *, ci: float = 0.90,
                     persistence: Mapping[str, Any] | None = None) -> str:
    """The headline paragraph for one target from a row of ``skill_summary.csv``.

    Parameters
    ----------
    row : mapping
        Reads ``target``, ``best_index``, ``best_scale_weeks``, ``best_lag_weeks``,
        ``naive_rpss`` (+ ``_lo``/``_hi``), ``events``, ``n_years``, ``n_candidates``,
        ``n_indistinguishable``, ``nested_rpss``, and when present ``best_pair``,
        ``best_pair_gain`` (+ ``_lo``/``_hi``), ``boosted_gain`` (+ ``_lo``/``_hi``).
    ci : float, default 0.90
        Coverage of the intervals (the run's ``ci``).
    persistence : mapping, optional
        The row of ``skill_persistence.csv`` at the shortest lag, worded by
        :func:`persistence_sentence` at the end.
    """
    pct = int(round(100 * ci))
    lo, hi = row.get("naive_rpss_lo", math.nan), row.get("naive_rpss_hi", math.nan)
    iv = f" ({pct}% interval {float(lo):.3f} to {float(hi):.3f})" if _finite(lo) else ""
    n_ind, n_c = int(row["n_indistinguishable"]), int(row["n_candidates"])
    s = (f"For {row['target']}, {str(row['best_index']).upper()} over {row['best_scale_weeks']} "
         f"weeks, {row['best_lag_weeks']} week(s) ahead, predicts best out of sample: ranked "
         f"probability skill {float(row['naive_rpss']):.3f}{iv} against the base rate, resting "
         f"on {row['events']} impact rows in {row['n_years']} years; {max(n_ind - 1, 0)} of the "
         f"other {n_c - 1} candidates are statistically indistinguishable from it.")
    if _finite(row.get("nested_rpss")):
        s += (" Choosing the best afresh in each fold, the fairer selection-aware estimate is "
              f"{float(row['nested_rpss']):.3f}.")
    extras = []
    if _finite(row.get("best_pair_gain")):
        extras.append(f"the best two-scale pair ({row['best_pair']}) changes skill by "
                      f"{_signed(row, 'best_pair_gain', pct)}")
    if _finite(row.get("boosted_gain")):
        extras.append("a flexible boosted curve on the best candidate changes it by "
                      f"{_signed(row, 'boosted_gain', pct)}")
    if extras:
        s += " Compared with the best single candidate, " + "; ".join(extras) + "."
    if persistence is not None:
        s += " " + persistence_sentence(persistence, ci=ci)
    return s + " This is a statistical association, not proof of cause."
