"""The project file (TOML): where the data are, and every setting with its documented default.

A project file is read once, validated against the key schema of
:mod:`impactlink.project_schema` (type, range and order of every key; every problem listed at
once, before any computation) and turned into a frozen :class:`Project`. Unknown keys are
errors with a "did you mean" (a typo must not silently fall back to a default). Relative
paths are resolved against the folder holding the project file.
"""

from __future__ import annotations

import tomllib
from dataclasses import asdict, dataclass, field, fields
from pathlib import Path
from typing import Any, TypeVar

from impactlink.errors import ProjectError
from impactlink.project_check import check_files, check_raw, found_tables
from impactlink.project_formats import (  # [formats] / [units]: publisher layouts and units
    TABLE_FORMATS,
    FormatSettings,
    UnitSettings,
    check_formats,
)
from impactlink.schema import EQUAL_AREA_CRS

__all__ = [
    "ProjectError",
    "Project",
    "Calibration",
    "IndexSettings",
    "AuditLadder",
    "ImpactSpec",
    "LinkSettings",
    "ModelSettings",
    "SkillSettings",
    "TriggerSettings",
    "ContrastSettings",
    "ReportSettings",
    "load_project",
    "project_from_dict",
    "IMPACT_SOURCES",
    "FormatSettings",
    "UnitSettings",
    "TABLE_FORMATS",
]

IMPACT_SOURCES = ("yields", "prices", "notices", "field_reports")
_S = TypeVar("_S")


@dataclass(frozen=True)
class Calibration:
    """Period over which index distributions are fitted.

    The default 1991-2020 follows 30-year climate normals (common practice); when the record
    does not cover it, the full record is used; fewer than ``min_years`` years is an error.
    """

    start_year: int = 1991
    end_year: int = 2020
    min_years: int = 20


@dataclass(frozen=True)
class IndexSettings:
    scales_weeks: tuple[int, ...] = (4, 8, 13, 26, 39, 52, 104)
    # used instead of scales_weeks when the climate input is monthly (monthly cadence)
    scales_months: tuple[int, ...] = (1, 2, 3, 6, 9, 12, 24)
    indices: tuple[str, ...] = ("spi", "spei", "eddi")
    pet_method: str = "hargreaves"  # "hargreaves" | "thornthwaite" | "supplied"
    min_valid_days: int = 6
    indicators: tuple[str, ...] = ()  # supplied indicators to standardize; () = all found


@dataclass(frozen=True)
class AuditLadder:
    """A ladder of thresholds on one index, with our stage names, for the threshold audit."""

    name: str = "spi_ladder"
    index: str = "spi"
    scale_weeks: int = 13
    kind: str = "value"  # "value" | "percentile"
    thresholds: tuple[float, ...] = (-1.0, -1.5, -2.0)
    # Default: the SPI dryness classes of McKee et al. (1993), as in the WMO SPI User Guide (2012).
    stages: tuple[str, ...] = ("moderately_dry", "severely_dry", "extremely_dry")
    early: tuple[int, int] | None = (1981, 2002)
    late: tuple[int, int] | None = (2003, 2025)
    n_boot: int = 500


@dataclass(frozen=True)
class ImpactSpec:
    """One impact to model: a name, the source table and source-specific options.

    Options by source (all optional, defaults in the linking stage):

    - ``yields``: crop, practice, trend ("linear" | "quadratic" | "lowess"), robust,
      class_pct (shortfall class edges in percent), binary_pct, season_week, window_weeks,
      window_stat ("value" | "min" | "mean").
    - ``prices``: commodity, base_years, baseline_years, class_pct, season options as above.
    - ``notices``: ladder, stage_names (issuer -> {stage name -> level}), open_end_cap_weeks,
      drought_causes, episodic.
    - ``field_reports``: sector, min_severity.
    """

    name: str
    source: str
    options: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class LinkSettings:
    lags_weeks: tuple[int, ...] = (0, 2, 4, 8, 13, 26)
    equal_area_crs: str = EQUAL_AREA_CRS


@dataclass(frozen=True)
class ModelSettings:
    link: str = "logit"  # "logit" | "probit" for ordinal models
    pooling: str = "all"  # "all" | "region" | "county"
    seasonal: bool = False
    traits: tuple[str, ...] = ()
    curve_ci: float = 0.90


@dataclass(frozen=True)
class SkillSettings:
    cv: str = "leave_one_year_out"  # | "blocked_k_fold" | "leave_one_region_out"
    k_folds: int = 5
    n_boot: int = 200
    ci: float = 0.90
    n_bins: int = 200
    pairs: bool = True
    challenger: bool = True


@dataclass(frozen=True)
class TriggerSettings:
    entry_weeks: int = 2
    exit_weeks: int = 4
    # a committee's trigger plan (TOML, see scenario_data/trigger_plan.toml); resolved
    # against the project file's folder; None = no plan replayed
    plan: str | None = None


@dataclass(frozen=True)
class ContrastSettings:
    """County contrasts: which two counties to explain (default: the most striking look-alike
    pair) and over which years ("2011-2013"; default: the pair's drought year)."""

    counties: tuple[str, ...] = ()
    period: str | None = None
    n_boot: int = 200


@dataclass(frozen=True)
class ReportSettings:
    """Which counties get a one-page card in the report: ``county_cards`` lists them (ids or
    names); empty means every county when there are at most ``max_cards``, else none (a
    national run is summarised by region; cards on request)."""

    county_cards: tuple[str, ...] = ()
    max_cards: int = 300


@dataclass(frozen=True)
class Project:
    """A validated project."""

    name: str
    path: Path | None
    data_dir: Path
    output_dir: Path
    tables: dict[str, Path]
    seed: int = 0
    jobs: int = 1
    max_rejected_share: float = 0.2  # a table losing more of its rows stops the run; 1 = never
    calibration: Calibration = field(default_factory=Calibration)
    indices: IndexSettings = field(default_factory=IndexSettings)
    audit: tuple[AuditLadder, ...] = (AuditLadder(),)
    impacts: tuple[ImpactSpec, ...] = ()
    link: LinkSettings = field(default_factory=LinkSettings)
    models: ModelSettings = field(default_factory=ModelSettings)
    skill: SkillSettings = field(default_factory=SkillSettings)
    triggers: TriggerSettings = field(default_factory=TriggerSettings)
    contrast: ContrastSettings = field(default_factory=ContrastSettings)
    report: ReportSettings = field(default_factory=ReportSettings)
    formats: FormatSettings = field(default_factory=FormatSettings)
    units: UnitSettings = field(default_factory=UnitSettings)

    def settings_dict(self) -> dict[str, Any]:
        """Plain settings for the manifest (paths as strings)."""
        d = asdict(self)
        d["path"] = str(self.path) if self.path else None
        d["data_dir"] = str(self.data_dir)
        d["output_dir"] = str(self.output_dir)
        d["tables"] = {k: str(v) for k, v in self.tables.items()}
        return d


# --------------------------------------------------------------------------- loading
def load_project(path: str | Path, *, output_dir: str | Path | None = None) -> Project:
    """Read and validate a project file; every problem is listed at once.

    Parameters
    ----------
    path : str or Path
        The TOML project file, or a folder holding ``impactlink.toml``. A UTF-8 byte-order
        mark at the start of the file is accepted.
    output_dir : str or Path, optional
        Overrides ``[project] output_dir``.

    Returns
    -------
    Project

    Raises
    ------
    ProjectError
        Missing or unreadable file, invalid TOML, or any problem of the key schema
        (:mod:`impactlink.project_schema`): unknown or misspelt keys and impact options, values
        of the wrong type, out of range or out of order, missing data folder or table files,
        impacts whose source tables are absent. ``exc.problems`` holds one line per problem.
    """
    path = Path(path)
    if path.is_dir():
        path = path / "impactlink.toml"
    if not path.is_file():
        raise ProjectError(
            f"project file {path} does not exist; create one with `impactlink init FOLDER`"
        )
    try:
        text = path.read_text(encoding="utf-8-sig")  # "-sig": a leading BOM is dropped
    except UnicodeDecodeError as exc:
        raise ProjectError(
            f"project file {path} is not UTF-8 text (byte {exc.start}); save it as UTF-8"
        ) from None
    except OSError as exc:
        raise ProjectError(f"project file {path} cannot be read ({exc.strerror}); check "
                           "its permissions") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ProjectError(f"project file {path} is not valid TOML: {exc}") from None
    return project_from_dict(raw, base=path.parent, path=path, output_dir=output_dir,
                             complete=True)


def project_from_dict(
    raw: dict[str, Any],
    *,
    base: str | Path = ".",
    path: Path | None = None,
    output_dir: str | Path | None = None,
    complete: bool = False,
) -> Project:
    """Build a :class:`Project` from the parsed TOML mapping (see :func:`load_project`).

    Parameters
    ----------
    raw : dict
        What :func:`tomllib.loads` returned.
    base : str or Path
        Folder that relative paths are resolved against.
    path : Path, optional
        The project file (named in messages).
    output_dir : str or Path, optional
        Overrides ``[project] output_dir``.
    complete : bool, default False
        Also check what needs the disk (the data folder and every file under ``[tables]``
        exist; each impact's source tables are named or found in the data folder) and the
        values of the impact options the inputs stage reads (``ladder``, ``stage_names``,
        ``severity_range``). :func:`load_project` passes True; projects built in code leave
        those checks to the inputs stage.

    Raises
    ------
    ProjectError
        One error listing every problem (``exc.problems``, one line each).
    """
    where = str(path) if path else "project settings"
    problems = check_raw(raw, option_values=complete)
    if not problems and complete:
        problems = check_files(raw, Path(base), tables_found=found_tables(raw, Path(base)))
    if problems:
        lines = tuple(p.line(where) for p in problems)
        if len(lines) == 1:
            raise ProjectError(lines[0], problems=lines)
        raise ProjectError(
            f"{where}: {len(lines)} problems in the project file; fix each:\n" + "\n".join(lines),
            problems=lines,
        )
    return _build(raw, base=Path(base), path=path, output_dir=output_dir)


def _build(raw: dict[str, Any], *, base: Path, path: Path | None,
           output_dir: str | Path | None) -> Project:
    """The :class:`Project` of a mapping without schema problems."""
    proj = dict(raw.get("project", {}))
    data_dir = (base / proj.get("data_dir", ".")).resolve()
    out = Path(output_dir) if output_dir else (base / proj.get("output_dir", "impactlink_output"))
    tables = {k: (data_dir / v).resolve() for k, v in raw.get("tables", {}).items()}
    audit_raw = raw.get("audit", [{}])
    if isinstance(audit_raw, dict):
        audit_raw = [audit_raw]
    impacts = []
    for name, spec in raw.get("impacts", {}).items():
        spec = dict(spec)
        source = spec.pop("source")
        impacts.append(ImpactSpec(name=name, source=source, options=spec))
    project = Project(
        name=str(proj.get("name", "impactlink project")),
        path=path,
        data_dir=data_dir,
        output_dir=out.resolve(),
        tables=tables,
        seed=int(proj.get("seed", 0)),
        jobs=int(proj.get("jobs", 1)),
        max_rejected_share=float(proj.get("max_rejected_share", 0.2)),
        calibration=_section(Calibration, raw.get("calibration", {})),
        indices=_section(IndexSettings, raw.get("indices", {})),
        audit=tuple(_section(AuditLadder, a) for a in audit_raw),
        impacts=tuple(impacts),
        link=_section(LinkSettings, raw.get("link", {})),
        models=_section(ModelSettings, raw.get("models", {})),
        skill=_section(SkillSettings, raw.get("skill", {})),
        triggers=_plan_resolved(_section(TriggerSettings, raw.get("triggers", {})), base),
        contrast=_section(ContrastSettings, raw.get("contrast", {})),
        report=_section(ReportSettings, raw.get("report", {})),
        formats=_section(FormatSettings, raw.get("formats", {})),
        units=_section(UnitSettings, raw.get("units", {})),
    )
    check_formats(project.formats, project.units, str(path) if path else "project settings")
    return project


def _plan_resolved(t: TriggerSettings, base: Path) -> TriggerSettings:
    if t.plan is None:
        return t
    return TriggerSettings(entry_weeks=t.entry_weeks, exit_weeks=t.exit_weeks,
                           plan=str((base / t.plan).resolve()))


def _section(cls: type[_S], d: dict[str, Any]) -> _S:
    """A settings dataclass from its table (lists become tuples; ``[]`` periods become None)."""
    kwargs: dict[str, Any] = {}
    for f in fields(cls):  # type: ignore[arg-type]
        if f.name in d:
            v = d[f.name]
            if f.name in ("early", "late") and v == []:
                v = None
            kwargs[f.name] = tuple(v) if isinstance(v, list) else v
    return cls(**kwargs)
