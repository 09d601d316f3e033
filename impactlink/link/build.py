"""Entry points of the linking stage: one impact -> its targets; targets -> the long panel."""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import replace

import pandas as pd

from impactlink.link._common import CircularityWarning, LinkError, LinkResult
from impactlink.link._keys import attach_sources
from impactlink.link.notices import link_notices
from impactlink.link.prices import link_prices
from impactlink.link.reports import link_field_reports
from impactlink.link.target import Target
from impactlink.link.yields import link_yields
from impactlink.schema import COUNTY, EQUAL_AREA_CRS

__all__ = ["build_targets", "with_files", "panel_frame", "circularity_flags", "PANEL_COLUMNS"]

#: Leading columns of ``panel.parquet``; role-specific columns follow.
PANEL_COLUMNS = ["target", "impact", "role", "grain", "horizon_weeks", "unit_id", COUNTY,
                 "region", "time", "year", "season", "level"]

_LINKERS = {
    "yields": link_yields,
    "prices": link_prices,
    "notices": link_notices,
    "field_reports": link_field_reports,
}

#: Words in an impact's own text columns that suggest it is keyed to an index.
_INDEX_WORDS = ("spi", "spei", "eddi", "drought category", "drought class", "drought index",
                "drought map", "percentile")


def build_targets(spec, tables: dict[str, pd.DataFrame], *, counties, weeks: pd.DatetimeIndex,
                  lags_weeks: tuple[int, ...] = (0,), equal_area_crs: str = EQUAL_AREA_CRS,
                  files: Mapping[str, object] | None = None) -> LinkResult:
    """Turn one impact's records into targets on their own grid.

    Parameters
    ----------
    spec : impactlink.project.ImpactSpec
        ``source`` in {"yields", "prices", "notices", "field_reports"}; options are documented
        on :func:`~impactlink.link.yields.link_yields`,
        :func:`~impactlink.link.prices.link_prices`,
        :func:`~impactlink.link.notices.link_notices` and
        :func:`~impactlink.link.reports.link_field_reports`. Every source also takes
        ``defined_by`` (index name): the impact is defined by that index (circularity flag).
    tables : dict of str -> DataFrame
        Validated input frames (inputs stage), including ``coverage``, ``price_index``,
        ``traits``, ``water_systems``, ``notice_snapshots`` when present.
    counties : geopandas.GeoDataFrame
        ``county_id``, geometry, optional ``region``.
    weeks : pandas.DatetimeIndex
        Mondays of the record (ISO 8601 weeks).
    lags_weeks : tuple of int
        Modelled lags [weeks]; persistence columns are built for them.
    equal_area_crs : str, default ``impactlink.schema.EQUAL_AREA_CRS`` (EPSG:5070)
        Projection for areas and spatial joins.
    files : mapping of str -> path, optional
        The file of each table (``InputBundle.files``): rejected records name it. Every
        rejected record names its file row as the inputs stage numbers it (1-based data
        row, header excluded; ``frame.attrs["source_rows"]``).

    Returns
    -------
    LinkResult
        Targets, rejected rows, reconciliation (records = used + rejected + outside_coverage),
        per-target summary, warnings.

    Raises
    ------
    LinkError
        Unknown source, unknown option, missing table.
    """
    if spec.source not in _LINKERS:
        raise LinkError(f"impact {spec.name!r}: source must be one of {sorted(_LINKERS)}, got "
                        f"{spec.source!r}")
    if COUNTY not in getattr(counties, "columns", []):
        raise LinkError("build_targets: counties has no county_id column; pass the validated "
                        "counties layer")
    tables = attach_sources(tables, files)
    res = _LINKERS[spec.source](spec, tables, counties=counties, weeks=pd.DatetimeIndex(weeks),
                                lags_weeks=tuple(lags_weeks), equal_area_crs=equal_area_crs)
    if files and len(res.rejected):
        res = replace(res, rejected=with_files(res.rejected, files))
    hints = _text_hints(spec, tables)
    if hints:
        import warnings

        msg = (f"[impacts.{spec.name}] the records mention {sorted(hints)}: the impact may be "
               "defined by an index (circular); set defined_by in the project file to flag it")
        warnings.warn(msg, CircularityWarning, stacklevel=2)
        res.warnings.append(msg)
        for t in res.targets:
            t.provenance.setdefault("flags", []).extend(f"possible_circular:{h}" for h in
                                                        sorted(hints))
        res = LinkResult(targets=res.targets, rejected=res.rejected,
                         reconciliation=res.reconciliation,
                         summary=_refresh_flags(res.summary, res.targets),
                         warnings=res.warnings)
    return res


def with_files(rejected: pd.DataFrame, files: Mapping[str, object]) -> pd.DataFrame:
    """``rejected`` with an empty ``file`` filled with its table's file."""
    out = rejected.copy()
    blank = out["file"].isna() | (out["file"].astype(str) == "")
    named = out["table"].map({k: str(v) for k, v in files.items()})
    out.loc[blank, "file"] = named[blank].fillna("")
    return out


def panel_frame(targets: Iterable[Target]) -> pd.DataFrame:
    """Long panel of every target, for ``panel.parquet``.

    Columns: target, impact, role, grain, horizon_weeks, unit_id, county_id, region, time,
    year, season, level, then the role-specific columns of each target (persistence_<L>,
    weeks_since_end, departure_pct, anomaly_pct, report_count, ...; NaN where a target lacks
    them).
    """
    parts = []
    for t in targets:
        fr = t.frame.copy()
        fr.insert(0, "target", t.name)
        fr.insert(1, "impact", t.impact)
        fr.insert(2, "role", t.role)
        fr.insert(3, "grain", t.grain)
        fr.insert(4, "horizon_weeks", t.horizon_weeks)
        parts.append(fr)
    if not parts:
        return pd.DataFrame(columns=PANEL_COLUMNS)
    out = pd.concat(parts, ignore_index=True, sort=False)
    for c in PANEL_COLUMNS:
        if c not in out.columns:
            out[c] = pd.NA
    rest = [c for c in out.columns if c not in PANEL_COLUMNS]
    out = out[PANEL_COLUMNS + rest]
    for c in ("unit_id", COUNTY, "region"):
        out[c] = out[c].astype("string")
    return out


def circularity_flags(targets: Iterable[Target], *, candidates: Iterable[str] | None = None
                      ) -> pd.DataFrame:
    """Impact-index pairs that are circular (the impact is defined by the index).

    Parameters
    ----------
    targets : iterable of Target
    candidates : iterable of str, optional
        Index names being tested; a flag on an index outside them is still listed.

    Returns
    -------
    pandas.DataFrame
        target, impact, index, kind ("declared" via ``defined_by``, or "possible" from words
        in the records), in_candidates (bool). A declared pair should not be ranked: its
        skill measures the definition, not a relationship.
    """
    cand = {c.lower() for c in candidates} if candidates is not None else None
    rows = []
    for t in targets:
        for f in t.provenance.get("flags", []):
            m = re.match(r"(possible_circular|circular):(.+)", f)
            if m:
                idx = m.group(2)
                rows.append({"target": t.name, "impact": t.impact, "index": idx,
                             "kind": "declared" if m.group(1) == "circular" else "possible",
                             "in_candidates": bool(cand is None or idx.lower() in cand)})
    return pd.DataFrame(rows, columns=["target", "impact", "index", "kind", "in_candidates"])


def _text_hints(spec, tables) -> set[str]:
    table = {"notices": "notices", "field_reports": "field_reports"}.get(spec.source)
    df = tables.get(table) if table else None
    if df is None or spec.options.get("defined_by"):
        return set()
    found = set()
    for col in ("cause", "level_label"):
        if col in df.columns:
            text = " ".join(df[col].dropna().astype(str).str.lower().unique())
            for w in _INDEX_WORDS:
                if re.search(rf"\b{re.escape(w)}\b", text):
                    found.add(w)
    return found


def _refresh_flags(summary: pd.DataFrame, targets) -> pd.DataFrame:
    s = summary.copy()
    flags = {t.name: ";".join(t.provenance.get("flags", [])) for t in targets}
    s["flags"] = s["target"].map(flags).fillna("")
    return s
