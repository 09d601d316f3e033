"""Shared pieces of the linking stage: the result object, warnings, coverage and small helpers."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from impactlink.errors import LinkError, LinkWarning
from impactlink.indices.timegrid import week_monday as monday
from impactlink.link.target import Target
from impactlink.schema import COUNTY

__all__ = [
    "LinkResult",
    "LinkError",
    "LinkWarning",
    "OpenNoticeWarning",
    "ReportingEffortWarning",
    "CircularityWarning",
    "REJECTED_COLUMNS",
    "RECONCILIATION_COLUMNS",
    "OUTSIDE",
]

REJECTED_COLUMNS = ["table", "file", "row", "column", "value", "reason"]
RECONCILIATION_COLUMNS = ["impact", "table", "records", "used", "rejected", "outside_coverage"]

#: Reason of every record outside its source's coverage (listed in rejected_rows.csv and
#: counted under ``outside_coverage``: unknown, not impact-free).
OUTSIDE = "outside the source's coverage"


class OpenNoticeWarning(LinkWarning):
    """A notice without an end date was kept in force to the end of the record or a cap."""


class ReportingEffortWarning(LinkWarning):
    """The number of presence-only reports trends over the record (changing effort)."""


class CircularityWarning(LinkWarning):
    """An impact is defined by an index, so that index cannot be tested against it."""


@dataclass(frozen=True)
class LinkResult:
    """What :func:`impactlink.link.build_targets` returns for one impact.

    Attributes
    ----------
    targets : tuple of Target
    rejected : pandas.DataFrame
        table, file, row, column, value, reason (file may be empty).
    reconciliation : pandas.DataFrame
        impact, table, records, used, rejected, outside_coverage (records = used + rejected
        + outside_coverage), plus ``not_selected`` (rows of the table that belong to another
        crop, commodity or sector and are therefore not records of this impact).
    summary : pandas.DataFrame
        One row per target: rows, events per level, years, units, risk-set size, flags.
    warnings : list of str
    """

    targets: tuple[Target, ...]
    rejected: pd.DataFrame
    reconciliation: pd.DataFrame
    summary: pd.DataFrame
    warnings: list[str] = field(default_factory=list)

    def to_frame(self) -> pd.DataFrame:
        """The per-target summary."""
        return self.summary.copy()


# --------------------------------------------------------------------------- bookkeeping
class Ledger:
    """Collects rejected rows and per-table record counts for one impact."""

    def __init__(self, impact: str) -> None:
        self.impact = impact
        self._rejected: list[pd.DataFrame] = []
        self._counts: dict[str, dict[str, int]] = {}
        self.warnings: list[str] = []

    def reject(self, table: str, frame: pd.DataFrame, mask, reason: str | Iterable[str],
               *, column: str = "", file: str = "") -> None:
        mask = np.asarray(mask, dtype=bool)
        if not mask.any():
            return
        sub = frame.loc[mask]
        if column and column in sub.columns:
            values = sub[column].astype(str).to_numpy()
        else:
            values = np.full(len(sub), "", dtype=object)
        reasons = reason if isinstance(reason, str) else np.asarray(list(reason), dtype=object)[mask]
        # the file's row number as the inputs stage numbers it (1-based data row: column
        # ``source_row``, added by build_targets, or ``frame.attrs["source_rows"]``); a frame
        # built in code without them: its index + 1
        src = frame.attrs.get("source_rows") if hasattr(frame, "attrs") else None
        if "source_row" in frame.columns:
            rows = frame["source_row"].to_numpy()[mask]
        elif src is not None and len(src) == len(frame):
            rows = np.asarray(src)[mask]
        else:
            rows = sub.index.to_numpy() + 1
        file = file or str(getattr(frame, "attrs", {}).get("file", ""))
        self._rejected.append(pd.DataFrame({
            "table": table, "file": file, "row": rows,
            "column": column, "value": values, "reason": reasons,
        }))

    def count(self, table: str, *, records: int, used: int, outside: int, not_selected: int = 0
              ) -> None:
        rejected = records - used - outside
        c = self._counts.setdefault(table, {"records": 0, "used": 0, "rejected": 0,
                                            "outside_coverage": 0, "not_selected": 0})
        c["records"] += records
        c["used"] += used
        c["rejected"] += rejected
        c["outside_coverage"] += outside
        c["not_selected"] += not_selected

    def warn(self, message: str, category: type[Warning] = LinkWarning) -> None:
        import warnings

        self.warnings.append(message)
        warnings.warn(message, category, stacklevel=3)

    def rejected(self) -> pd.DataFrame:
        if not self._rejected:
            return pd.DataFrame({c: pd.Series(dtype=object) for c in REJECTED_COLUMNS})
        return pd.concat(self._rejected, ignore_index=True)[REJECTED_COLUMNS]

    def reconciliation(self) -> pd.DataFrame:
        rows = [{"impact": self.impact, "table": t, **c} for t, c in self._counts.items()]
        cols = RECONCILIATION_COLUMNS + ["not_selected"]
        return pd.DataFrame(rows, columns=cols)

    def result(self, targets: list[Target], summary: pd.DataFrame) -> LinkResult:
        """The :class:`LinkResult` of ``targets`` with this ledger's rejections, record counts
        and warnings."""
        return LinkResult(targets=tuple(targets), rejected=self.rejected(),
                          reconciliation=self.reconciliation(), summary=summary,
                          warnings=self.warnings)


def binary_variant(target: Target, label: str, event: np.ndarray) -> Target:
    """A binary target on the rows of ``target``: level 1 where ``event`` is true.

    Named ``<target.name>:<label>`` with levels ``("no", label)``; grain, role, rule and
    horizon are those of ``target``, and its provenance is copied.
    """
    frame = target.frame.copy()
    frame["level"] = np.asarray(event).astype(np.int64)
    return Target(name=f"{target.name}:{label}", impact=target.impact, kind="binary",
                  grain=target.grain, role=target.role, frame=frame, levels=("no", label),
                  rule=target.rule, horizon_weeks=target.horizon_weeks,
                  provenance={**target.provenance, "derived_from": target.name})


# --------------------------------------------------------------------------- time helpers
def check_weeks(weeks: pd.DatetimeIndex) -> pd.DatetimeIndex:
    """Validate the weekly grid: Mondays, 7 days apart, no gaps."""
    weeks = pd.DatetimeIndex(weeks)
    if len(weeks) == 0:
        raise LinkError("weeks: the weekly grid is empty; expected the Mondays of the record")
    if (weeks.day_of_week != 0).any():
        bad = weeks[weeks.day_of_week != 0][0]
        raise LinkError(f"weeks: {bad.date()} is not a Monday; label every ISO week by its Monday")
    if len(weeks) > 1 and not (np.diff(weeks.values.astype("datetime64[D]").astype(np.int64)) == 7).all():
        raise LinkError("weeks: the grid must be consecutive Mondays 7 days apart with no gaps")
    return weeks


def week_pos(weeks: pd.DatetimeIndex, dates) -> np.ndarray:
    """Position of the ISO week holding each date relative to ``weeks[0]`` (may be off-grid)."""
    m = monday(dates)
    return ((m - weeks[0]).days // 7).to_numpy().astype(np.int64)


def iso_season(weeks) -> np.ndarray:
    """ISO week number with week 53 pooled into week 52 (DESIGN.md convention)."""
    return np.minimum(pd.DatetimeIndex(weeks).isocalendar().week.to_numpy(dtype=np.int64), 52)


def iso_year(weeks) -> np.ndarray:
    return pd.DatetimeIndex(weeks).isocalendar().year.to_numpy(dtype=np.int64)


def option(opts: dict[str, Any], name: str, default: Any, allowed: tuple | None = None,
           *, impact: str = "") -> Any:
    v = opts.get(name, default)
    if allowed is not None and v not in allowed:
        raise LinkError(
            f"[impacts.{impact}] option {name} must be one of {allowed}, got {v!r}"
        )
    return v


def check_options(opts: dict[str, Any], known: set[str], *, impact: str, source: str) -> None:
    unknown = set(opts) - known
    if unknown:
        raise LinkError(
            f"[impacts.{impact}] (source {source!r}) has unknown option(s) {sorted(unknown)}; "
            f"known options: {sorted(known)}"
        )


# --------------------------------------------------------------------------- coverage
def coverage_rows(tables: dict[str, pd.DataFrame], names: Iterable[str]) -> pd.DataFrame | None:
    """Coverage rows whose ``source`` is one of ``names``; None when none are given."""
    cov = tables.get("coverage")
    if cov is None or len(cov) == 0:
        return None
    from impactlink.link._keys import forms, normalise_key

    names = {normalise_key(str(n)) for n in names}  # one normal form for every text key
    sel = cov[forms(cov["source"]).isin(names).to_numpy()]
    return sel if len(sel) else None


def expand_to_counties(cov: pd.DataFrame, counties: pd.DataFrame) -> pd.DataFrame:
    """Coverage rows per county: region-wide rows expand to every county of the region."""
    parts = []
    if COUNTY in cov.columns:
        by_c = cov[cov[COUNTY].notna()]
        parts.append(by_c[[COUNTY, "start_date", "end_date"]].astype({COUNTY: str}))
    else:
        by_c = cov.iloc[:0]
    if "region" in cov.columns and "region" in counties.columns:
        by_r = cov.drop(index=by_c.index)
        by_r = by_r[by_r["region"].notna()]
        if len(by_r):
            from impactlink.link._keys import forms

            left = by_r[["start_date", "end_date"]].assign(_key=forms(by_r["region"]).to_numpy())
            m = left.merge(pd.DataFrame({"_key": forms(counties["region"]).to_numpy(),
                                         COUNTY: counties[COUNTY].astype(str).to_numpy()}),
                           on="_key")
            parts.append(m[[COUNTY, "start_date", "end_date"]])
    if not parts:
        return pd.DataFrame({COUNTY: pd.Series(dtype=str),
                             "start_date": pd.Series(dtype="datetime64[ns]"),
                             "end_date": pd.Series(dtype="datetime64[ns]")})
    return pd.concat(parts, ignore_index=True)


def week_coverage(cov: pd.DataFrame | None, weeks: pd.DatetimeIndex,
                  county_ids: tuple[str, ...], counties: pd.DataFrame) -> np.ndarray:
    """Boolean (weeks, counties): a week is covered when any day of it is inside coverage.

    Without coverage rows the whole grid is covered. Painted with difference arrays.
    """
    nw, nc = len(weeks), len(county_ids)
    if cov is None:
        return np.ones((nw, nc), dtype=bool)
    per = expand_to_counties(cov, counties)
    cpos = pd.Index(county_ids).get_indexer(per[COUNTY].astype(str))
    s = week_pos(weeks, per["start_date"])
    e = week_pos(weeks, per["end_date"])
    return paint(s, e, cpos, nw, nc) > 0


def paint(start_pos, end_pos, county_pos, nw: int, nc: int, weight=None) -> np.ndarray:
    """Count, per (week, county), the intervals [start_pos, end_pos] (inclusive) covering it.

    Intervals are clipped to the grid; those entirely off the grid or with a county position
    of -1 are ignored. Vectorised with a difference array and a cumulative sum.
    """
    s = np.asarray(start_pos, dtype=np.int64)
    e = np.asarray(end_pos, dtype=np.int64)
    c = np.asarray(county_pos, dtype=np.int64)
    ok = (c >= 0) & (e >= 0) & (s < nw) & (e >= s)
    s, e, c = np.clip(s[ok], 0, nw - 1), np.clip(e[ok], 0, nw - 1), c[ok]
    w = np.ones(len(s), dtype=np.int64) if weight is None else np.asarray(weight)[ok]
    diff = np.zeros((nw + 1, nc), dtype=np.int64)
    np.add.at(diff, (s, c), w)
    np.add.at(diff, (e + 1, c), -w)
    return np.cumsum(diff[:-1], axis=0)


def interval_covered(units, starts, ends, cov_units, cov_starts, cov_ends) -> np.ndarray:
    """For each [start, end] of a unit: does any coverage interval of that unit overlap it?"""
    left = pd.DataFrame({"u": np.asarray(units, dtype=object).astype(str),
                         "s": pd.to_datetime(starts), "e": pd.to_datetime(ends)})
    left["i"] = np.arange(len(left))
    right = pd.DataFrame({"u": np.asarray(cov_units, dtype=object).astype(str),
                          "cs": pd.to_datetime(cov_starts), "ce": pd.to_datetime(cov_ends)})
    m = left.merge(right, on="u")
    hit = m.loc[(m["cs"] <= m["e"]) & (m["ce"] >= m["s"]), "i"].unique()
    out = np.zeros(len(left), dtype=bool)
    out[hit] = True
    return out


def empty_rejected() -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype=object) for c in REJECTED_COLUMNS})
