"""The table-loss stop: a table that loses too many of its rows stops the run, with a hint.

Rejecting bad rows one by one is right when a few rows are bad; when most of a table goes,
the cause is nearly always one mistake made for the whole file (two columns exchanged, a
unit, a date format), and a run on what is left would mislead. :func:`table_loss` is called
by :func:`impactlink.inputs.read_inputs` for each table, before any index is computed: a table
that loses more than ``[project] max_rejected_share`` of its rows (default 0.2), or all of
them, gives one line naming the file, the top reasons with their counts and, when the
rejections show it, a hint:

- columns that look exchanged: ``lon``/``lat`` (most ``lat`` values outside -90..90, or most
  points outside the counties' extent but inside it with the two values exchanged),
  ``start_date``/``end_date`` (most rows end before they start);
- a unit: most rejections are values beyond a physical limit (see
  :mod:`impactlink.inputs.plausibility`);
- a date format: most rejections are dates that do not read as ISO 8601 (``YYYY-MM-DD``).

Points that fall outside the counties' extent while their exchanged values fall inside are
not rejected here (the linking stage places points), but they count as lost for this rule.

Examples
--------
>>> _iso_example("15/03/2001")
'2001-03-15'
>>> _iso_example("03/15/2001")
'2001-03-15'
>>> _iso_example("2001.03.15") is None
True
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink.inputs._errors import REASONS, InputError

__all__ = ["DEFAULT_MAX_REJECTED_SHARE", "table_loss", "raise_losses", "degree_extent"]

#: Share of a table's rows the inputs stage may reject before the run stops (common practice:
#: a fifth of a table lost points to a mistake made for the whole file, not to a few bad rows).
DEFAULT_MAX_REJECTED_SHARE = 0.2
#: Reasons that mean "a value beyond a physical limit" (unit hint).
_LIMIT_REASONS = (REASONS["temperature"], "air temperature recorded", "rainfall record")
_UNIT_KEY = {"precip_mm": "precip_unit", "pet_mm": "precip_unit", "tmin_c": "temp_unit",
             "tmax_c": "temp_unit", "tmean_c": "temp_unit"}
_UNIT_NAME = {"_mm": "millimetres", "_c": "degrees Celsius"}
#: Margin around the counties' extent [degrees] within which a point counts as inside.
_EXTENT_MARGIN = 0.5


def table_loss(name: str, path: Path | str, count: dict[str, Any], rejected: pd.DataFrame, *,
               limit: float, frame: pd.DataFrame | None = None,
               extent: tuple[float, float, float, float] | None = None,
               where: str = "the project file") -> str | None:
    """The one-line stop message for a table that lost too many rows, or None.

    Parameters
    ----------
    name : str
        Contract table name.
    path : Path or str
        The file read (named in the message).
    count : dict
        The table's counts row (``rows_read``, ``rows_rejected``).
    rejected : DataFrame
        The table's rejected cells (``row``, ``column``, ``value``, ``reason``).
    limit : float
        ``[project] max_rejected_share`` (0..1); 1 never stops.
    frame : DataFrame, optional
        The raw table as read (for the swapped-coordinates test); row i is file row i + 1.
    extent : tuple, optional
        The counties' extent in degrees (lon min, lat min, lon max, lat max).
    where : str
        The project file, named in the "raise the share" advice.
    """
    n = int(count["rows_read"])
    if n == 0 or limit >= 1:
        return None
    lost_rows = set(rejected["row"].tolist()) if len(rejected) else set()
    lost = int(count["rows_rejected"])
    outside, swap_hint = _points(frame, extent, lost_rows)
    total = lost + outside
    if total == 0 or (total / n <= limit and total < n):
        return None
    how = f"all {n:,} rows" if total >= n else f"{total:,} of {n:,} rows ({100 * total / n:.0f} %)"
    reasons = _top_reasons(rejected)
    if outside:
        reasons.append(f"{outside:,} points outside the counties' extent")
    swap = _lat_hint(frame) or swap_hint  # one lon/lat hint: the plainer evidence first
    hints = [h for h in (swap, _order_hint(rejected, n),
                         _unit_hint(rejected, lost, converted=frame is None), _date_hint(rejected, lost)) if h]
    hint = f"; hint: {'; '.join(dict.fromkeys(hints))}" if hints else ""
    return (f"{path}: the {name} table loses {how} in the inputs stage, more than "
            f"max_rejected_share = {limit:g} allows (top reasons: {'; '.join(reasons)}){hint}; "
            f"fix the table, or allow the loss with [project] max_rejected_share in {where} "
            f"(0..1; 1 = never stop)")


def raise_losses(lines: list[str]) -> None:
    """Raise one :class:`InputError` with one line per table that lost too many rows."""
    if not lines:
        return
    err = InputError("\n".join(lines))
    err.problems = tuple(lines)  # type: ignore[attr-defined]  # printed one line each
    raise err


def degree_extent(counties: Any) -> tuple[float, float, float, float] | None:
    """The counties' extent in degrees (lon min, lat min, lon max, lat max), or None."""
    if counties is None or not len(counties) or getattr(counties, "crs", None) is None:
        return None
    g = counties.geometry
    if not g.crs.is_geographic:
        g = g.to_crs("EPSG:4326")
    b = g.total_bounds
    return (float(b[0]), float(b[1]), float(b[2]), float(b[3])) if np.isfinite(b).all() else None


# ------------------------------------------------------------------------------ parts
def _top_reasons(rejected: pd.DataFrame, k: int = 3) -> list[str]:
    if not len(rejected):
        return []
    reason = rejected["reason"].astype(str).str.replace(r"^duplicate of row \d+$", "duplicate",
                                                        regex=True)
    col = rejected["column"].astype(str)
    top = pd.DataFrame({"r": reason, "c": col}).value_counts().head(k)
    return [f"{int(m):,} {r}" + (f" ({c})" if c else "") for (r, c), m in top.items()]


def _numbers(frame: pd.DataFrame | None, col: str) -> np.ndarray | None:
    if frame is None or col not in frame:
        return None
    return pd.to_numeric(frame[col], errors="coerce").to_numpy(dtype=float)


def _lat_hint(frame: pd.DataFrame | None) -> str:
    lon, lat = _numbers(frame, "lon"), _numbers(frame, "lat")
    if lon is None or lat is None:
        return ""
    ok = np.isfinite(lon) & np.isfinite(lat)
    out = ok & (np.abs(lat) > 90) & (np.abs(lon) <= 90)
    if not ok.any() or out.sum() * 2 <= ok.sum():
        return ""
    e = float(lat[out][0])
    return (f"columns lon and lat look swapped: {int(out.sum()):,} of {int(ok.sum()):,} lat "
            f"values lie outside -90..90 (e.g. {e:g}) while their lon values fit -90..90; "
            f"exchange the two column names")


def _points(frame: pd.DataFrame | None, extent: tuple[float, float, float, float] | None,
            lost_rows: set[int]) -> tuple[int, str]:
    """Points outside the counties' extent whose exchanged values fall inside it."""
    lon, lat = _numbers(frame, "lon"), _numbers(frame, "lat")
    if lon is None or lat is None or extent is None:
        return 0, ""
    x0, y0, x1, y1 = extent
    m = _EXTENT_MARGIN

    def inside(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            return (x >= x0 - m) & (x <= x1 + m) & (y >= y0 - m) & (y <= y1 + m)

    ok = np.isfinite(lon) & np.isfinite(lat)
    swapped = ok & ~inside(lon, lat) & inside(lat, lon)
    if not ok.any() or swapped.sum() * 2 <= ok.sum():
        return 0, ""
    rows = np.flatnonzero(swapped) + 1
    not_yet = int((~np.isin(rows, np.fromiter(lost_rows, dtype=np.int64, count=len(lost_rows)))).sum())
    hint = (f"columns lon and lat look swapped: {int(swapped.sum()):,} of {int(ok.sum()):,} "
            f"points lie outside the counties' extent (lon {x0:.2f}..{x1:.2f}, lat "
            f"{y0:.2f}..{y1:.2f}) and inside it with lon and lat exchanged; exchange the two "
            f"column names")
    return not_yet, hint


def _share(rejected: pd.DataFrame, mask: pd.Series, of: int) -> int:
    """Distinct rows under ``mask`` when they are more than half of ``of``, else 0."""
    k = int(rejected.loc[mask, "row"].nunique()) if len(rejected) else 0
    return k if of and k * 2 > of else 0


def _order_hint(rejected: pd.DataFrame, n: int) -> str:
    if not len(rejected):
        return ""
    k = _share(rejected, rejected["reason"] == REASONS["end_before_start"], n)
    if not k:
        return ""
    return (f"columns start_date and end_date look swapped: {k:,} of {n:,} rows end before "
            f"they start; exchange the two column names")


def _unit_hint(rejected: pd.DataFrame, lost: int, *, converted: bool) -> str:
    """A unit hint: the column's unit suffix for a contract table; for a publisher file whose
    units the project converts (``converted``), the ``[units]`` key."""
    if not len(rejected):
        return ""
    mask = rejected["reason"].astype(str).str.contains("|".join(map(re.escape, _LIMIT_REASONS)))
    if not _share(rejected, mask, lost):
        return ""
    col = str(rejected.loc[mask, "column"].value_counts().index[0])
    sub = rejected.loc[mask & (rejected["column"] == col)]
    e = sub["value"].iloc[0]
    suffix = next((s for s in _UNIT_NAME if col.endswith(s)), "")
    unit = f"{_UNIT_NAME[suffix]}, as the suffix {suffix!r} says" if suffix else "its declared unit"
    key = _UNIT_KEY.get(col)
    fix = (f"declare the file's unit under [units] ({key} = ...) so it is converted"
           if converted and key else f"give the column in {unit} (convert the values)")
    return (f"column {col} looks like it is in another unit: {len(sub):,} values lie beyond a "
            f"physical limit (e.g. {e}); {fix}")


def _date_hint(rejected: pd.DataFrame, lost: int) -> str:
    if not len(rejected):
        return ""
    mask = rejected["reason"] == REASONS["date"]
    if not _share(rejected, mask, lost):
        return ""
    col = str(rejected.loc[mask, "column"].value_counts().index[0])
    sub = rejected.loc[mask & (rejected["column"] == col)]
    values = sub["value"].astype(str)
    plain = values[values.str.match(r"\s*(1[3-9]|2\d|3[01])[/.\-]|\s*\d{1,2}[/.\-](1[3-9]|2\d|3[01])")]
    e = str(plain.iloc[0] if len(plain) else values.iloc[0])  # a value whose day shows which
    iso = _iso_example(e)
    write = f"write {iso!r}" if iso else "write e.g. '2001-03-15'"
    if values.str.fullmatch(r"\s*-?\d+(\.\d*)?\s*").all():  # numbers, not dates
        return (f"column {col}: {len(sub):,} dates are numbers (e.g. {e!r}); store dates, or "
                "text YYYY-MM-DD such as '2001-03-15'")
    return (f"column {col}: {len(sub):,} dates do not read as ISO 8601 (e.g. {e!r}); dates must "
            f"be YYYY-MM-DD ({write} for {e!r})")


def _iso_example(text: str) -> str | None:
    """An ISO 8601 spelling of a day-first or month-first date, when the day shows which."""
    m = re.fullmatch(r"\s*(\d{1,2})[/.\-](\d{1,2})[/.\-](\d{4})\s*", text)
    if not m:
        return None
    a, b, y = int(m.group(1)), int(m.group(2)), m.group(3)
    day, month = (a, b) if a > 12 or b <= 12 else (b, a)
    if not (1 <= month <= 12 and 1 <= day <= 31):
        return None
    return f"{y}-{month:02d}-{day:02d}"
