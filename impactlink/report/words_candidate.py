"""One candidate (index, time scale, lag or season-window end) in words a reader can decode.

The one home of candidate wording: every section, card, caption and figure label describes a
candidate through :func:`candidate_label` (or :func:`row_label` for a result row). Time scales
of monthly input are written in months (the ``scale_months`` column), weekly input in weeks;
a seasonal candidate (a yield or seasonal price whose accumulation window ends at a searched
ISO week, column ``end_week``) is written by where its window ends, "SPEI over 2 months ending
in August", never as a lag.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import pandas as pd

__all__ = ["candidate_label", "row_label", "in_cadence", "window_end", "index_name"]

_INDEX_NAMES = {
    "spi": "SPI",
    "spei": "SPEI",
    "eddi": "EDDI",
    "pdsi": "Palmer index",
    "soil_moisture_pct": "soil-moisture percentile",
    "streamflow_pct": "streamflow percentile",
}
_MONTHS = ("January", "February", "March", "April", "May", "June", "July", "August",
           "September", "October", "November", "December")


def _present(x) -> bool:
    if x is None or x is pd.NA:
        return False
    try:
        return not math.isnan(float(x))
    except (TypeError, ValueError):
        return False


def index_name(index) -> str:
    """Display name of an index ("spi" -> "SPI"); unknown names are kept as given."""
    if not isinstance(index, str) and not _present(index):
        return "no index"
    return _INDEX_NAMES.get(str(index).lower(), str(index).replace("_", " "))


def in_cadence(weeks, cadence: str = "weekly") -> str:
    """A span in weeks written in the input's cadence ("13 weeks"; "3 months" for monthly
    input, using 52 / 12 weeks a month).

    Examples
    --------
    >>> in_cadence(13, "monthly"), in_cadence(1), in_cadence(4, "monthly")
    ('3 months', '1 week', '1 month')
    """
    if not _present(weeks):
        return "n/a"
    w = float(weeks)
    if cadence == "monthly":
        months = int(round(w * 12 / 52))
        return f"{months} month" + ("" if months == 1 else "s")
    return f"{int(w)} week" + ("" if int(w) == 1 else "s")


def window_end(end_week, end_month=None) -> str:
    """Where a seasonal window ends: the month for monthly input ("July"), else the part of
    the month holding the Thursday of the ISO week (ISO 8601: a week belongs to the month and
    year of its Thursday), in a year whose 1 January is a Thursday (1970), with the week.

    Examples
    --------
    >>> window_end(29, 7), window_end(33), window_end(27), window_end(39)
    ('July', 'mid-August (ISO week 33)', 'early July (ISO week 27)', 'late September (ISO week 39)')
    """
    if _present(end_month):
        return _MONTHS[int(float(end_month)) - 1]
    thursday = pd.Timestamp("1970-01-01") + pd.Timedelta(weeks=int(float(end_week)) - 1)
    part = "early" if thursday.day <= 10 else "mid-" if thursday.day <= 20 else "late"
    sep = "" if part.endswith("-") else " "
    return f"{part}{sep}{_MONTHS[thursday.month - 1]} (ISO week {int(float(end_week))})"


def candidate_label(index, scale_weeks, lag_weeks, *, short: bool = False,
                    cadence: str = "weekly", scale_months=None, end_week=None,
                    end_month=None) -> str:
    """Describe one candidate in words a reader can decode.

    Parameters
    ----------
    index : str
    scale_weeks, lag_weeks : int or float
        Time scale and lag in weeks (missing values are left out).
    short : bool, default False
        "SPI over 13 weeks, 4 weeks ahead" instead of "SPI, 13-week time scale, 4-week lag".
    cadence : {"weekly", "monthly", "annual"}, default "weekly"
        The input's cadence: monthly input is described in months.
    scale_months : int, optional
        The time scale of monthly input in months (``scale_months`` of the result tables);
        when given it is written instead of the weeks.
    end_week, end_month : int, optional
        ISO week (and, for monthly input, month) where a seasonal candidate's window ends;
        when given the window end is written instead of the lag.

    Examples
    --------
    >>> candidate_label("spi", 13, 4)
    'SPI, 13-week time scale, 4-week lag'
    >>> candidate_label("spei", 26, 8, short=True)
    'SPEI over 26 weeks, 8 weeks ahead'
    >>> candidate_label("spei", 26, 8, short=True, cadence="monthly")
    'SPEI over 6 months, 2 months ahead'
    >>> candidate_label("spei", 9, 4, short=True, scale_months=2, end_week=33, end_month=8)
    'SPEI over 2 months ending in August'
    >>> candidate_label("spei", 13, 5, scale_months=3, end_week=33, end_month=8)
    'SPEI, 3-month time scale, window ending in August'
    >>> candidate_label("eddi", 8, 2, short=True, end_week=33)
    'EDDI over 8 weeks ending in mid-August (ISO week 33)'
    """
    head, parts = index_name(index), []
    if _present(scale_weeks) and float(scale_weeks) == 0:
        parts.append("as supplied")  # a supplied indicator, not summed
    elif _present(scale_months) or _present(scale_weeks):
        span = (in_cadence(float(scale_months) * 52 / 12, "monthly") if _present(scale_months)
                else in_cadence(scale_weeks, cadence))
        parts.append(f"over {span}" if short else f"{span.replace(' ', '-').rstrip('s')} time scale")
    if _present(end_week):
        when = window_end(end_week, end_month)
        parts.append(f"ending in {when}" if short else f"window ending in {when}")
    elif _present(lag_weeks):
        lead = in_cadence(lag_weeks, cadence)
        same = "same month" if cadence == "monthly" else "same week"
        parts.append((same if float(lag_weeks) == 0 else f"{lead} ahead") if short
                     else f"{lead.replace(' ', '-').rstrip('s')} lag")
    if short and parts and parts[0].startswith("over"):
        glue = " " if len(parts) > 1 and parts[1].startswith("ending") else ", "
        return glue.join([f"{head} {parts[0]}", *parts[1:]])
    return ", ".join([head, *parts])


def row_label(row: Mapping, *, prefix: str = "", short: bool = True,
              cadence: str = "weekly") -> str:
    """:func:`candidate_label` of a result row (``skill.csv``, ``skill_summary.csv`` with
    ``prefix="best_"``, ``skill_local.csv``, ...), reading whichever of ``index``,
    ``scale_weeks``, ``scale_months``, ``lag_weeks``, ``end_week`` and ``end_month`` it has.

    Examples
    --------
    >>> row_label({"best_index": "spei", "best_scale_weeks": 4, "best_scale_months": 1,
    ...            "best_lag_weeks": 9, "best_end_week": 29, "best_end_month": 7}, prefix="best_")
    'SPEI over 1 month ending in July'
    """
    g = row.get
    return candidate_label(g(f"{prefix}index"), g(f"{prefix}scale_weeks"),
                           g(f"{prefix}lag_weeks"), short=short, cadence=cadence,
                           scale_months=g(f"{prefix}scale_months"),
                           end_week=g(f"{prefix}end_week"), end_month=g(f"{prefix}end_month"))
