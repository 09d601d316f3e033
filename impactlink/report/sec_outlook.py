"""Outlook section: chance of each impact now and some weeks ahead, per county, aware of
each annual impact's season window (a closed season is not shown as a forecast).
"""

from __future__ import annotations

import ast
import datetime as dt

import pandas as pd

from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    pair_title,
    primary_pairs,
    section,
    sel,
    with_names,
)
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.svgmap import map_shapes, svg_map
from impactlink.report.text import fmt_num, level_name, row_label
from impactlink.schema import COUNTY

__all__ = ["outlook_section", "scalar_columns", "season_note"]


def outlook_section(run: RunFolder, figs: FigureSink) -> Markup:
    out = run.table("outlook")
    if out is None or out.empty:
        return section("outlook", "Outlook", absent())
    out = scalar_columns(out)
    as_of = ", ".join(dict.fromkeys(out["as_of_week"].astype(str))) if "as_of_week" in out else "?"
    parts = [paragraph(f"Chance of each impact now and some weeks ahead, from index values up "
                       f"to the week of {as_of}. These are chances, not certainties. Every map "
                       "uses the same scale, 0 to 1; hover a county for its value, click it "
                       "for its card.")]
    shapes = map_shapes(run.counties) if run.counties is not None else None
    options = _impact_options(run.manifest or {})
    keys = [k for k in ("impact", "target") if k in out.columns]
    pairs = list(dict.fromkeys(zip(*(out[k].astype(str) for k in keys), strict=True)))
    main = primary_pairs(run, pairs) if len(keys) == 2 else pairs
    for key in main:
        sub = sel(out, **dict(zip(keys, key, strict=True)))
        title = pair_title(*key) if len(key) == 2 else str(key[0])
        parts.append(el("h3", title))
        first = sub
        what = title
        if "level_k" in sub.columns and sub["level_k"].notna().any():
            first = sub[(sub["level_k"] == sub["level_k"].min()).fillna(False).to_numpy(bool)]
            if "level_label" in first.columns and first["level_label"].notna().any():
                what = f"{title}: {level_name(first['level_label'].dropna().iloc[0])}"
        closed = season_note(first, options.get(str(key[0])) or {})
        if closed:
            parts.append(paragraph(closed, class_="season"))
        maps = []
        leads = _leads(first)
        if not closed and shapes is not None and not leads:
            notes = "; ".join(dict.fromkeys(first.get("note", pd.Series(dtype=str))
                                            .dropna().astype(str))) or "no value was computed"
            parts.append(paragraph(f"No map: {notes}, at every lead, so no chance can be given "
                                   "yet for this impact.", class_="absent"))
        for lag in ([] if closed or shapes is None else leads):
            assert shapes is not None
            at = sel(first, **{_lead_column(first): lag})
            when = _when(at, lag)
            prob = pd.to_numeric(at["prob"], errors="coerce")
            gaps = int(prob.isna().sum())
            maps.append(svg_map(
                shapes, at, "prob", title=f"Chance {when}", unit="chance (0 to 1)",
                vmin=0.0, vmax=1.0,
                caption=(f"{what}, {when}: chance per county from {fmt_num(prob.min())} to "
                         f"{fmt_num(prob.max())}, from {_candidate(at)}."
                         + (f" {gaps} counties have no value." if gaps else ""))))
        if maps:
            parts.append(el("div", *maps, class_="maprow"))
        cols = [c for c in (COUNTY, "valid_week", "lag_weeks", "level_label", "prob", "prob_lo",
                            "prob_hi", "note") if c in sub.columns]
        order = [c for c in ("lag_weeks", "horizon_weeks", "level_k", "prob") if c in sub.columns]
        ranked = sub.sort_values(order, ascending=[True] * (len(order) - 1) + [False])[cols]
        if "level_label" in ranked.columns:
            ranked = ranked.assign(level_label=ranked["level_label"].map(level_name))
        parts.append(details("Per-county chances", table(with_names(run, ranked), digits=2)))
    parts.append(data_files(run, "outlook"))
    return section("outlook", "Outlook", *parts)


def season_note(rows: pd.DataFrame, options: dict) -> str:
    """A sentence when an annual impact's season window has closed by the outlook date
    ("" otherwise): says so, and gives the reason the next season's chance is or is not
    shown.

    The next season's chance is supported only when the model's lead reaches the next
    window's end week from today (lead >= weeks to that week); otherwise the reason is given.
    """
    week = options.get("season_week")
    if week is None or "as_of_week" not in rows.columns or rows.empty:
        return ""
    try:
        as_of = pd.Timestamp(str(rows["as_of_week"].iloc[0])).date()
        end = dt.date.fromisocalendar(as_of.year, int(week), 7)
    except (ValueError, TypeError):
        return ""
    if as_of <= end:
        return ""
    nxt = dt.date.fromisocalendar(as_of.year + 1, int(week), 7)
    ahead = (nxt - as_of).days // 7
    lag = pd.to_numeric(rows.get("lag_weeks"), errors="coerce")
    lead = int(lag.max()) if lag is not None and lag.notna().any() else 0
    text = (f"The {as_of.year} season window (ending ISO week {int(week)}, {end:%d %b %Y}) closed "
            f"before the outlook date ({as_of:%d %b %Y}): its outcome is already decided, so no "
            "map is drawn for it (its values are in the table and outlook.csv).")
    if lead >= ahead:
        return text + f" The {as_of.year + 1} season is within the model's {lead}-week lead."
    return (text + f" A chance for the {as_of.year + 1} season cannot be given yet: the model "
            f"needs the index at the window's end, {ahead} weeks away, beyond its "
            f"longest fitted lead ({lead} weeks).")


def scalar_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """Turn cells holding a Python tuple (or its text, "('a', 'b', 13)") into plain text
    ("a, b, 13"), so the page never shows a tuple. The outlook stage should write scalars."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype != object and not pd.api.types.is_string_dtype(out[col]):
            continue
        sample = out[col].dropna().head(20).astype(str)
        if sample.empty or not sample.str.match(r"^\(.*\)$").all():
            continue
        out[col] = out[col].map(_untuple)
    return out


def _untuple(value):
    if isinstance(value, tuple):
        return ", ".join(map(str, value))
    if isinstance(value, str) and value.startswith("("):
        try:
            parsed = ast.literal_eval(value)
        except (ValueError, SyntaxError):
            return value
        if isinstance(parsed, tuple):
            return ", ".join(map(str, parsed))
    return value


def _lead_column(rows: pd.DataFrame) -> str:
    """Weeks ahead of each row: ``lag_weeks`` (one refit per lag), else ``horizon_weeks``."""
    return "lag_weeks" if "lag_weeks" in rows.columns else "horizon_weeks"


def _leads(rows: pd.DataFrame) -> list[float]:
    """Up to two leads (weeks ahead) to map: the nearest and the farthest with values."""
    have = rows[pd.to_numeric(rows["prob"], errors="coerce").notna().to_numpy(bool)]
    if _lead_column(rows) not in rows.columns:
        return []
    lags = sorted(pd.to_numeric(have[_lead_column(rows)], errors="coerce").dropna().unique())
    return [float(x) for x in dict.fromkeys([lags[0], lags[-1]])] if lags else []


def _when(rows: pd.DataFrame, lag) -> str:
    week = (f" (week of {rows['valid_week'].dropna().astype(str).iloc[0]})"
            if "valid_week" in rows.columns and rows["valid_week"].notna().any() else "")
    return ("now" if not lag else f"{int(lag)} weeks ahead") + week


def _candidate(rows: pd.DataFrame) -> str:
    if rows.empty or "index" not in rows.columns:
        return "the best candidate"
    r = rows.iloc[0]
    return row_label(r)


def _impact_options(manifest: dict) -> dict[str, dict]:
    project = manifest.get("project") if isinstance(manifest, dict) else None
    impacts = project.get("impacts", []) if isinstance(project, dict) else []
    return {str(i.get("name")): (i.get("options") or {}) for i in impacts if isinstance(i, dict)}
