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

import pandas as pd

from impactlink.errors import ReportError, ReportWarning
from impactlink.schema import COUNTY

__all__ = [
    "ReportWarning", "ReportError", "RunFolder", "read_run_folder", "TABLE_COLUMNS",
]


#: Columns the report needs from each CSV table, named as the producing stage writes them
#: (other columns are ignored; there is no renaming).
TABLE_COLUMNS: dict[str, tuple[str, ...]] = {
    "skill": ("impact", "target", "index", "scale_weeks", "lag_weeks", "model"),
    "skill_summary": ("impact", "target", "best_index", "best_scale_weeks", "best_lag_weeks",
                      "ranking_score"),
    "reliability": ("target", "mean_forecast", "observed_frequency", "n"),
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
    "trigger_plan_replay": ("unit", "week", "stage"),
    "trigger_plan_changes": ("unit", "week"),
    "trigger_plan_timeline": ("unit", "week", "indicator", "value", "enter_threshold",
                              "exit_threshold", "stage", "impact_level"),
    "trigger_plan_scores": ("stage", "stage_name", "by", "group"),
    "trigger_plan_leads": ("stage", "unit", "lead_weeks"),
    "trigger_plan_decades": ("decade", "stage", "stage_name", "weeks_share"),
    "trigger_plan_memo": ("stage", "stage_name", "impact", "since_year", "onsets",
                          "onsets_matched", "entries_without_impact"),
    "trigger_plan_tuning": ("threshold", "enter_weeks", "hit_rate", "false_alarm_ratio",
                            "weeks_in_stage_share", "chosen"),
    "trigger_plan_tuned": ("quantity", "estimate", "lo", "hi", "held_out"),
    "trigger_plan_tuning_folds": ("year", "threshold", "enter_weeks"),
    "trigger_plan_uniform_local": ("plan", "percentile", "threshold_value"),
    "contrast_terms": (),
    "contrast_summary": ("county_a", "county_b", "county_name_a", "county_name_b"),
    "contrast_lookalikes": ("county_a", "county_b", "county_name_a", "county_name_b"),
    "contrast_trajectories": (COUNTY, "year", "week_offset", "value"),
    "contrast_traits": ("label", "unit", "value_a", "value_b"),
}

#: Columns read as strings whatever they look like (ids keep their leading zeros).
_STRING_COLUMNS = (COUNTY, "county_name", "region", "impact", "target", "index", "index2",
                   "model", "stage", "ladder", "level_label", "table", "file", "reason",
                   "scope", "term", "unit", "level", "grain", "events_by_level", "county_a",
                   "county_b")


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
    return frame


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
