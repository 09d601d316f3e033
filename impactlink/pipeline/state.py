"""Typed run state: one frozen result per stage, handed from stage to stage.

A :class:`Run` holds the project, the execution options and each stage's result (``None``
until the stage has run). Stages never touch disk; :mod:`impactlink.pipeline.publish`
turns the results into files through each result's ``tables()``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

if TYPE_CHECKING:
    from impactlink.indices import IndexCube
    from impactlink.inputs import InputBundle
    from impactlink.link import Target
    from impactlink.project import Project

__all__ = [
    "Candidate", "InputsResult", "CubeFile", "PanelFile", "IndicesResult", "AuditResult", "LinkStageResult",
    "RankResult", "OutlookResult", "TriggersResult", "ContrastResult", "Run", "RunResult",
    "CheckSummary",
]

Candidate = tuple[str, int, int]
"""One single-index candidate: (index, scale_weeks, lag_weeks)."""


@dataclass(frozen=True)
class InputsResult:
    """Every input table read and validated."""

    bundle: InputBundle

    @property
    def warnings(self) -> tuple[str, ...]:
        return tuple(self.bundle.warnings)

    def tables(self) -> dict[str, pd.DataFrame]:
        return {"rejected_rows.csv": self.bundle.rejected}


@dataclass(frozen=True)
class CubeFile:
    """An index cube to be written as the long table ``indices.parquet`` (columns county_id,
    ``time_col``, index, ``scale_col``, value), one key at a time, never as one frame."""

    cube: IndexCube
    time_col: str = "week"
    scale_col: str = "scale_weeks"

    def frame(self) -> pd.DataFrame:
        """The whole long table in memory (for small runs and tests)."""
        return self.cube.to_frame().rename(columns={"week": self.time_col,
                                                    "scale_weeks": self.scale_col})


@dataclass(frozen=True)
class PanelFile:
    """The link stage's targets, to be written as the long table ``panel.parquet`` one target
    at a time (columns of :func:`impactlink.link.panel_frame`), never as one frame: a national
    run's panel is about 20 M rows and 6 GB as one pandas frame."""

    targets: tuple[Target, ...] = ()

    def __len__(self) -> int:
        return sum(len(t.frame) for t in self.targets)

    def frame(self) -> pd.DataFrame:
        """The whole panel in memory (for small runs and tests)."""
        from impactlink.link import panel_frame

        return panel_frame(self.targets)


@dataclass(frozen=True)
class IndicesResult:
    """The index cube on ISO weeks, and the cube written to ``indices.parquet``.

    ``file`` keeps the input cadence (a monthly input keeps ``month`` / ``scale_months``);
    ``cube`` is always weekly, as later stages need. ``key_normalisation``: the indicator
    names respelt to their key (the indicators table leaves the run state after this stage;
    the link stage adds this to the manifest's ``key_normalisation``).
    """

    cube: IndexCube
    file: CubeFile
    key_normalisation: dict[str, Any] = field(default_factory=dict)

    @property
    def frame(self) -> pd.DataFrame:
        """``indices.parquet`` as one frame (builds it: avoid on national runs)."""
        return self.file.frame()

    def tables(self) -> dict[str, pd.DataFrame | CubeFile]:
        return {"indices.parquet": self.file}


@dataclass(frozen=True)
class AuditResult:
    table: pd.DataFrame

    def tables(self) -> dict[str, pd.DataFrame]:
        return {"audit.csv": self.table}


@dataclass(frozen=True)
class LinkStageResult:
    """Targets built from the impact records, with their bookkeeping tables."""

    targets: tuple[Target, ...]
    panel: PanelFile
    reconciliation: pd.DataFrame
    summary: pd.DataFrame
    rejected: pd.DataFrame
    rejected_all: pd.DataFrame  # input rejections plus impact records rejected while linking
    warnings: tuple[str, ...] = ()
    #: per table and key column: values respelt to their key (``manifest.json``
    #: ``key_normalisation``; see :func:`impactlink.link.selection.key_normalisation`)
    key_normalisation: dict[str, Any] = field(default_factory=dict)

    def tables(self) -> dict[str, pd.DataFrame | PanelFile]:
        out: dict[str, pd.DataFrame | PanelFile] = {
            "reconciliation.csv": self.reconciliation, "link_summary.csv": self.summary,
            "rejected_rows.csv": self.rejected_all}
        if len(self.panel):
            out["panel.parquet"] = self.panel
        return out


@dataclass(frozen=True)
class RankResult:
    """Out-of-sample skill of every candidate, and the final fit of each target's best one.

    ``best`` maps a target name to (fitted model, its candidate); ``skill_tables`` maps a
    target name to its own skill table.
    """

    skill: pd.DataFrame
    summary: pd.DataFrame
    reliability: pd.DataFrame
    local: pd.DataFrame
    persistence: pd.DataFrame
    curves: pd.DataFrame
    crossings: pd.DataFrame
    best: dict[str, tuple[Any, Candidate]] = field(default_factory=dict)
    skill_tables: dict[str, pd.DataFrame] = field(default_factory=dict)

    def tables(self) -> dict[str, pd.DataFrame]:
        return {"skill.csv": self.skill, "skill_summary.csv": self.summary,
                "reliability.csv": self.reliability, "skill_local.csv": self.local,
                "skill_persistence.csv": self.persistence, "curves.csv": self.curves,
                "crossings.csv": self.crossings}


@dataclass(frozen=True)
class OutlookResult:
    table: pd.DataFrame

    def tables(self) -> dict[str, pd.DataFrame]:
        return {"outlook.csv": self.table}


@dataclass(frozen=True)
class TriggersResult:
    """One-index trigger audit per state target, and the committee's plan when one is given.

    ``plan`` is a :class:`impactlink.triggers.TriggerPlanResult` (None without ``[triggers]
    plan``); its tables are the ``trigger_plan_*.csv`` files.
    """

    table: pd.DataFrame
    timeline: pd.DataFrame
    plan: Any = None

    def tables(self) -> dict[str, pd.DataFrame]:
        out = {"triggers.csv": self.table, "trigger_timeline.csv": self.timeline}
        if self.plan is not None:
            out.update(self.plan.frames())
        return out


@dataclass(frozen=True)
class ContrastResult:
    """County contrasts; ``computed`` is False when the project has no traits table."""

    table: pd.DataFrame
    excess: pd.DataFrame
    pairs: pd.DataFrame
    computed: bool = True
    #: the explained pair per annual target: file name -> frame (``contrast.csv``: the parts
    #: with intervals; ``contrast_summary.csv``, ``contrast_lookalikes.csv``,
    #: ``contrast_trajectories.csv``, ``contrast_traits.csv``)
    explained: dict[str, pd.DataFrame] = field(default_factory=dict)

    def tables(self) -> dict[str, pd.DataFrame]:
        if not self.computed:
            return {}
        return {"contrast_terms.csv": self.table, "county_excess.csv": self.excess,
                "contrast_pairs.csv": self.pairs, **self.explained}


@dataclass(frozen=True)
class Run:
    """The state of one run: project, execution options and each stage's result so far."""

    project: Project
    jobs: int = 1
    dask_address: str | None = None
    inputs: InputsResult | None = None
    indices: IndicesResult | None = None
    audit: AuditResult | None = None
    link: LinkStageResult | None = None
    rank: RankResult | None = None
    outlook: OutlookResult | None = None
    triggers: TriggersResult | None = None
    contrast: ContrastResult | None = None


@dataclass
class RunResult:
    """What a run wrote (paths in the final output folder) and how long each stage took."""

    out_dir: Path
    written: list[Path] = field(default_factory=list)
    timings_s: dict[str, float] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    state: Run | None = None


@dataclass(frozen=True)
class CheckSummary:
    """What ``check`` found: one line per table, rejected rows by reason, warnings."""

    tables: pd.DataFrame
    rejected_by_reason: pd.DataFrame
    warnings: tuple[str, ...]
    written: tuple[Path, ...] = ()

    @property
    def ok(self) -> bool:
        """True: every table was read (a fatal problem raises instead)."""
        return True
