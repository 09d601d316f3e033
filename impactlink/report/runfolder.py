"""Read a run folder: every table the report draws from, each one optional.

The report is a pure function of the run folder. A file that is missing becomes ``None``
(its section then says it was not computed in this run); a file that cannot be read or
lacks a column the report needs also becomes ``None``, with a :class:`ReportWarning`
and a note kept in :attr:`RunFolder.problems`, so that one damaged table never stops the
page from being written.
"""

from __future__ import annotations

import json
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink.errors import ReportError, ReportWarning
from impactlink.schema import COUNTY

__all__ = [
    "ReportWarning", "ReportError", "RunFolder", "read_run_folder", "TABLE_COLUMNS",
    "normalise_summary",
]


#: Columns the report needs from each CSV table (other columns are ignored).
TABLE_COLUMNS: dict[str, tuple[str, ...]] = {
    "skill": ("impact", "target", "index", "scale_weeks", "lag_weeks", "model"),
    "skill_summary": ("impact", "target", "best_index", "best_scale_weeks", "best_lag_weeks"),
    "reliability": ("target", "forecast_mean", "observed_freq", "count"),
    "skill_local": ("target", "unit", "index", "scale_weeks", "lag_weeks"),
    "curves": ("impact", "target", "index", "scale_weeks", "x", "prob"),
    "crossings": ("impact", "target", "level_k", "prob_level", "x_cross"),
    "audit": (COUNTY, "ladder", "stage", "period", "expected_share", "observed_share"),
    "outlook": (COUNTY, "impact", "target", "horizon_weeks", "prob"),
    "triggers": (),
    "trigger_timeline": ("week", COUNTY, "scope", "index_value", "threshold", "trigger_on"),
    "contrast": (),
    "county_excess": (COUNTY,),
    "contrast_pairs": (),
    "reconciliation": ("impact", "records", "used", "rejected"),
    "link_summary": ("target", "events"),
    "rejected_rows": ("table", "reason"),
}

#: Other spellings of contract columns, per table (e.g. the skill stage's reliability
#: table names its columns after the score module).
_ALIASES: dict[str, dict[str, str]] = {
    "reliability": {"mean_forecast": "forecast_mean", "observed_frequency": "observed_freq",
                    "n": "count"},
}

#: Columns read as strings whatever they look like (ids keep their leading zeros).
_STRING_COLUMNS = (COUNTY, "county_name", "region", "impact", "target", "index", "index2",
                   "model", "stage", "ladder", "level_label", "table", "file", "reason",
                   "scope", "term", "unit", "level", "grain", "events_by_level")


@dataclass(frozen=True)
class RunFolder:
    """Everything the report reads from one run folder.

    Attributes
    ----------
    path : Path
        The run folder.
    manifest : dict or None
        Parsed ``manifest.json``.
    tables : dict
        Table name (file stem, e.g. ``"skill"``) -> DataFrame, or None when missing/unusable.
    counties : GeoDataFrame or None
        Layer ``counties`` of ``counties.gpkg``.
    layers : dict
        Other per-county layers of ``counties.gpkg`` (``audit``, ``best_candidate``,
        ``outlook`` ...), name -> GeoDataFrame or DataFrame.
    problems : tuple of str
        One line per file that was present but could not be used.
    """

    path: Path
    manifest: dict[str, Any] | None
    tables: dict[str, pd.DataFrame | None]
    counties: Any = None
    layers: dict[str, Any] = field(default_factory=dict)
    problems: tuple[str, ...] = ()

    def table(self, name: str) -> pd.DataFrame | None:
        """The table ``name`` or None if it is missing (never raises for a known name)."""
        return self.tables.get(name)


def read_run_folder(run_dir: str | Path) -> RunFolder:
    """Read every table of a run folder that the report uses.

    Parameters
    ----------
    run_dir : str or Path
        Folder written by ``impactlink run``.

    Returns
    -------
    RunFolder

    Raises
    ------
    ReportError
        If ``run_dir`` does not exist or is not a folder.
    """
    path = Path(run_dir)
    if not path.is_dir():
        raise ReportError(
            f"run folder {str(path)!r} does not exist or is not a folder; pass the output "
            "folder of `impactlink run` (the one holding manifest.json)"
        )
    problems: list[str] = []
    manifest = _read_manifest(path / "manifest.json", problems)
    tables = {name: _read_table(path, name, cols, problems) for name, cols in TABLE_COLUMNS.items()}
    counties, layers = _read_layers(path / "counties.gpkg", problems)
    return RunFolder(path, manifest, tables, counties, layers, tuple(problems))


def _problem(problems: list[str], message: str) -> None:
    problems.append(message)
    warnings.warn(message, ReportWarning, stacklevel=3)


def _read_manifest(file: Path, problems: list[str]) -> dict[str, Any] | None:
    if not file.exists():
        return None
    try:
        data = json.loads(file.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as exc:
        _problem(problems, f"{file.name}: not readable as JSON ({exc}); provenance left out")
        return None
    if not isinstance(data, dict):
        _problem(problems, f"{file.name}: expected a JSON object, found {type(data).__name__}")
        return None
    return data


def _read_table(folder: Path, name: str, needed: tuple[str, ...], problems: list[str]):
    csv, parquet = folder / f"{name}.csv", folder / f"{name}.parquet"
    try:
        if csv.exists():
            frame = pd.read_csv(csv, dtype={c: "string" for c in _STRING_COLUMNS})
        elif parquet.exists():
            frame = pd.read_parquet(parquet)
        else:
            return None
    except pd.errors.EmptyDataError:
        return None  # a stage that had nothing to write: "not computed", not a fault
    except Exception as exc:  # noqa: BLE001 - any reader failure means "unusable", reported
        _problem(problems, f"{name}: could not be read ({type(exc).__name__}: {exc})")
        return None
    frame = frame.rename(columns={k: v for k, v in _ALIASES.get(name, {}).items()
                                  if k in frame.columns and v not in frame.columns})
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        _problem(
            problems,
            f"{name}: lacks column(s) {missing}; found {list(frame.columns)[:12]}; "
            "its section is left out",
        )
        return None
    for col in _STRING_COLUMNS:
        if col in frame.columns:
            frame[col] = frame[col].astype("string")
    if name == "skill_summary":
        frame = normalise_summary(frame)
    return frame


def normalise_summary(summary: pd.DataFrame) -> pd.DataFrame:
    """Give a skill summary the generic score columns the report reads.

    The skill stage may name its ranking score (``ranking_score`` = "rpss") and write
    ``naive_rpss``, ``nested_rpss``, ``nested_rpss_lo`` ...; the report reads ``score_name``,
    ``naive_skill``, ``nested_skill``, ``nested_lo``, ``nested_hi``. Existing generic columns
    are kept; missing ones are filled from the score-specific ones.
    """
    out = summary.copy()
    if "score_name" not in out.columns:
        out["score_name"] = out["ranking_score"] if "ranking_score" in out.columns else pd.NA
    score = out["score_name"].astype("string")
    for generic, suffix in (("naive_skill", "naive_{}"), ("nested_skill", "nested_{}"),
                            ("nested_lo", "nested_{}_lo"), ("nested_hi", "nested_{}_hi")):
        values = out[generic] if generic in out.columns else pd.Series(np.nan, index=out.index)
        for name in score.dropna().unique():
            col = suffix.format(name)
            if col in out.columns:
                rows = (score == name).fillna(False).to_numpy(bool) & values.isna().to_numpy()
                values = values.where(~rows, out[col])
        out[generic] = pd.to_numeric(values, errors="coerce")
    return out


def _read_layers(file: Path, problems: list[str]):
    if not file.exists():
        return None, {}
    try:
        import pyogrio

        names = [row[0] for row in pyogrio.list_layers(file)]
        layers = {}
        for name in names:
            layer = pyogrio.read_dataframe(file, layer=name)
            if COUNTY in layer.columns:
                layer[COUNTY] = layer[COUNTY].astype("string")
            layers[name] = layer
    except Exception as exc:  # noqa: BLE001 - a damaged GeoPackage only costs the maps
        _problem(problems, f"{file.name}: could not be read ({type(exc).__name__}: {exc})")
        return None, {}
    counties = layers.pop("counties", None)
    if counties is not None and (COUNTY not in counties.columns or counties.geometry is None):
        _problem(problems, f"{file.name}: layer 'counties' lacks {COUNTY!r} or geometry")
        counties = None
    return counties, layers
