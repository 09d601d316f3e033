"""The inputs stage's result: clean tables, rejected rows, reconciled counts, summary."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink.inputs._errors import InputError
from impactlink.inputs._rules import TableCheck
from impactlink.project import Project
from impactlink.schema import COUNTY
from impactlink.words import counted, verb

__all__ = ["InputBundle", "summary_frame"]


@dataclass(frozen=True)
class InputBundle:
    """Clean input tables and the record of what was dropped and why.

    Attributes
    ----------
    tables : dict
        Contract table name -> clean frame. Ids and text are ``str``; dates are
        ``datetime64[ns]`` at midnight; numbers are ``float64`` (``year`` is ``int64``,
        notice ``level`` / snapshot ``stage`` are ``int64`` with the text as written in
        ``level_label`` / ``stage_label``). ``counties`` is a GeoDataFrame in its own CRS with
        ``county_id``, ``county_name`` (when given), ``region`` and ``geometry``.
    rejected : DataFrame
        One line per rejected cell or row: ``table``, ``file``, ``row``, ``column``,
        ``value``, ``reason``. ``row`` is the 1-based data row number in the file with the
        header excluded (row 1 is the first line under the header; for geometry files, the
        first feature). A row with several bad cells appears once per cell.
    counts : DataFrame
        One line per table: ``table``, ``file``, ``rows_read``, ``rows_used``,
        ``rows_rejected`` (distinct rows), ``date_min``, ``date_max``, ``counties`` (distinct
        county ids used). ``rows_read == rows_used + rows_rejected`` always.
    checksums : dict
        File path -> SHA-256 hex digest (shapefiles also list their side files).
    files : dict
        Contract table name -> file read.
    warnings : list of str
        Recoverable surprises (also issued as :class:`InputWarning`).
    notes : list of str
        What the publisher-format readers did (units converted, zones assigned, features
        kept); empty for contract tables.
    provenance : dict
        Publisher-format extras by ``{table}_{what}``: ``climate_provenance`` /
        ``indicators_provenance`` (county -> zone step), ``yields_items`` (Quick Stats
        data items found).
    """

    tables: dict[str, pd.DataFrame]
    rejected: pd.DataFrame
    counts: pd.DataFrame
    checksums: dict[str, str]
    files: dict[str, Path]
    warnings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    provenance: dict[str, pd.DataFrame] = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        """The per-table row counts (same as :attr:`counts`)."""
        return self.counts.copy()

    def without(self, *names: str) -> InputBundle:
        """The same bundle without the clean frames ``names`` (their counts, rejections,
        files and checksums stay): the run drops the daily climate rows once the index cube
        exists, as no later stage reads them (about 2 GB for a national daily table)."""
        import dataclasses

        return dataclasses.replace(self, tables={k: v for k, v in self.tables.items()
                                                 if k not in names})



def summary_frame(bundle: InputBundle) -> pd.DataFrame:
    """One line per table for the ``check`` command.

    Columns: ``table``, ``file`` (name only), ``rows_read``, ``rows_used``,
    ``rows_rejected``, ``first`` and ``last`` (ISO dates or blank), ``counties``, and
    ``top_reasons`` (the three most frequent rejection reasons with their counts).
    """
    c = bundle.counts
    rej = bundle.rejected
    reasons = []
    for table in c["table"]:  # loop over at most a dozen tables
        r = rej.loc[rej["table"] == table, "reason"]
        r = r.str.replace(r"^duplicate of row \d+$", "duplicate", regex=True)
        top = r.value_counts().head(3)
        reasons.append("; ".join(f"{n} {why}" for why, n in top.items()))
    return pd.DataFrame(
        {
            "table": c["table"],
            "file": [Path(f).name for f in c["file"]],
            "rows_read": c["rows_read"],
            "rows_used": c["rows_used"],
            "rows_rejected": c["rows_rejected"],
            "first": c["date_min"].dt.strftime("%Y-%m-%d").fillna(""),
            "last": c["date_max"].dt.strftime("%Y-%m-%d").fillna(""),
            "counties": c["counties"],
            "top_reasons": reasons,
        }
    )



def _count_row(name: str, path: Path, check: TableCheck, clean: pd.DataFrame) -> dict[str, Any]:
    used = int(check.alive.sum())
    dmin = dmax = pd.NaT
    for col in ("date", "start_date"):
        if col in clean and len(clean):
            dmin, dmax = clean[col].min(), clean[col].max()
            break
    else:
        if "year" in clean and len(clean):
            dmin = pd.Timestamp(int(clean["year"].min()), 1, 1)
            dmax = pd.Timestamp(int(clean["year"].max()), 12, 31)
    counties = int(clean[COUNTY].replace("", np.nan).nunique()) if COUNTY in clean else None
    return {
        "table": name,
        "file": str(path),
        "rows_read": check.n,
        "rows_used": used,
        "rows_rejected": check.n - used,
        "date_min": dmin,
        "date_max": dmax,
        "counties": counties,
    }



def _climate_gaps(
    climate: pd.DataFrame, counties: pd.DataFrame, path: Path, project: Project
) -> list[str]:
    """Warnings for counties with no climate rows or a record shorter than min_years."""
    out = []
    codes, ids = pd.factorize(climate[COUNTY])
    years = climate["date"].dt.year.to_numpy().astype(np.int64)
    pairs = np.unique(codes.astype(np.int64) * 10_000 + years)  # years are below 10000
    have = pd.Series(np.bincount(pairs // 10_000, minlength=len(ids)), index=ids)
    absent = sorted(set(counties[COUNTY]) - set(have.index))
    if absent:
        names = counties.set_index(COUNTY)["county_name"] if "county_name" in counties else None
        named = [f"{c} ({names[c]})" if names is not None and isinstance(names.get(c), str)
                 and names[c] else str(c) for c in absent[:20]]
        more = f" and {len(absent) - 20} more" if len(absent) > 20 else ""
        out.append(
            f"{path}: {len(absent)} of {counted(len(counties), 'county', 'counties')} "
            f"{verb(len(absent), 'has', 'have')} a polygon but no climate "
            f"rows: {', '.join(named)}{more}; they get no index values (add their climate rows, "
            f"or leave them out of the counties table)"
        )
    short = have[have < project.calibration.min_years]
    if len(short):
        out.append(
            f"{path}: {counted(len(short), 'county', 'counties')} "
            f"{verb(len(short), 'has', 'have')} fewer than {project.calibration.min_years} "
            f"years of climate rows (e.g. {dict(list(short.items())[:3])} years); their "
            f"index values rest on a short record"
        )
    return out


def _check_record_length(climate: pd.DataFrame, path: Path, project: Project) -> None:
    need = project.calibration.min_years
    years = climate["date"].dt.year
    n = int(years.nunique())
    if n < need:
        span = f" ({years.min()}-{years.max()})" if n else ""
        where = project.path or "the project file"
        raise InputError(
            f"{path}: the climate record covers {n} year(s){span}, fewer than the {need} the "
            f"calibration needs; supply a longer record, or lower min_years under "
            f"[calibration] in {where} (shorter records give less reliable index values)"
        )


def _index_gaps(price_index: pd.DataFrame, path: Path, most: int = 12) -> list[str]:
    """A warning naming the months a monthly price index lacks between its first and last.

    The index is monthly when the median step between its distinct months is one month;
    an index at another cadence is not judged. A price in a month without an index value
    cannot be deflated.
    """
    if "date" not in price_index or len(price_index) < 3:
        return []
    months = pd.PeriodIndex(price_index["date"].dropna(), freq="M").unique().sort_values()
    step = np.diff(months.asi8)
    if len(step) == 0 or float(np.median(step)) != 1.0:
        return []
    full = pd.period_range(months[0], months[-1], freq="M")
    missing = full.difference(months)
    if not len(missing):
        return []
    shown = ", ".join(str(m) for m in missing[:most])
    more = f" and {len(missing) - most} more" if len(missing) > most else ""
    return [f"{path}: the monthly price index has no value for {len(missing)} month(s) between "
            f"{months[0]} and {months[-1]}: {shown}{more}; prices of those months cannot be "
            f"deflated (add the missing months)"]
