"""One function per stage: typed inputs -> typed result. No file is read or written here.

Every number comes from a stage package; these functions only wire arguments and gather
frames. Progress messages go through the ``progress`` callback.
"""

from __future__ import annotations

import dataclasses
import functools
import warnings as _warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
import pandas as pd

from impactlink.errors import ContrastError, ContrastWarning, IndicesError
from impactlink.link import features as link_features
from impactlink.project import Project
from impactlink.schema import COUNTY

from ._stage_parts import (
    _best_candidate,
    _concat,
    _indicator_keys,
    _latitudes,
    _meta,
    _model_options,
    _source_of,
    _trigger_candidate,
)
from .state import (
    AuditResult,
    Candidate,
    ContrastResult,
    CubeFile,
    IndicesResult,
    InputsResult,
    LinkStageResult,
    OutlookResult,
    PanelFile,
    RankResult,
    TriggersResult,
)

Progress = Callable[[str], None]

__all__ = ["read", "indices", "audit", "link", "rank", "outlook", "triggers", "contrast"]


def read(project: Project, progress: Progress) -> InputsResult:
    """Read and validate every input table."""
    from impactlink.inputs import read_inputs

    return InputsResult(read_inputs(project, progress=progress))


def indices(project: Project, inputs: InputsResult, progress: Progress) -> IndicesResult:
    """Index cube at every time scale; a monthly input keeps its cadence in the frame."""
    from impactlink.indices import compute_indices

    tables = inputs.bundle.tables
    cfg, cal = project.indices, project.calibration
    indicators = _indicator_keys(tables.get("indicators"))
    cube = compute_indices(
        tables["climate"],
        latitude_deg=_latitudes(tables["counties"]),
        indicators=indicators,
        scales_weeks=tuple(cfg.scales_weeks),
        scales_months=tuple(cfg.scales_months),
        indices=tuple(cfg.indices),
        pet_method=cast(Literal["hargreaves", "thornthwaite"], cfg.pet_method),
        calibration=(cal.start_year, cal.end_year),
        min_calibration_years=cal.min_years,
        min_valid_days=cfg.min_valid_days,
        progress=progress,
    )
    if cfg.indicators:
        from impactlink.inputs.keys import normalise_key

        # indicator names matched by normal form (case, spaces, Unicode form), as the cube
        # names them (spaces as underscores)
        named = {w: normalise_key(w).replace(" ", "_") for w in cfg.indicators}
        have = {k[0] for k in cube.arrays}
        absent = [w for w, key in named.items() if key not in have]
        if absent:
            found = sorted(set(indicators["indicator"])) if indicators is not None else []
            where = inputs.bundle.files.get("indicators", "the indicators table")
            raise IndicesError(f"{where}: no indicator {absent[0]!r} (named by [indices] "
                               f"indicators); the table's indicators are {found}; write a "
                               "name the indicator column gives")
        wanted = set(cfg.indices) | set(named.values())
        keep = {k: v for k, v in cube.arrays.items() if k[0] in wanted}
        cube = type(cube)(cube.weeks, cube.county_ids, keep, cube.provenance)
    keys = _indicator_respellings(tables.get("indicators"), project, progress)
    if cube.provenance.get("cadence") != "monthly":
        return IndicesResult(cube=cube, file=CubeFile(cube), key_normalisation=keys)
    # indices.parquet keeps the monthly cadence (scales in months); later stages work on
    # ISO weeks, so they get the cube expanded to weeks (see indices.cadence)
    from impactlink.indices.cadence import monthly_to_weekly

    progress("monthly climate input: indices at monthly cadence, expanded to ISO weeks "
             "for linking (scale labels converted from months to weeks)")
    return IndicesResult(cube=monthly_to_weekly(cube),
                         file=CubeFile(cube, time_col="month", scale_col="scale_months"),
                         key_normalisation=keys)


def _indicator_respellings(indicators: pd.DataFrame | None, project: Project,
                           progress: Progress) -> dict[str, Any]:
    """The indicator names' respellings (manifest ``key_normalisation``), found here because
    the indicators table leaves the run state after this stage."""
    if indicators is None:
        return {}
    from impactlink.link.selection import key_normalisation, normalisation_lines

    keys = key_normalisation({"indicators": indicators}, project.impacts)
    for line in normalisation_lines(keys):
        progress(line)
    return keys


def audit(project: Project, ind: IndicesResult, progress: Progress, *, jobs: int = 1
          ) -> AuditResult:
    """Threshold ladders audited county by county (``jobs`` threads for the bootstrap)."""
    from impactlink.indices import threshold_audit

    frames = []
    for lad in project.audit:
        progress(f"audit ladder {lad.name}: {lad.index} {lad.scale_weeks} weeks")
        res = threshold_audit(
            ind.cube,
            index=lad.index,
            scale_weeks=lad.scale_weeks,
            thresholds=list(lad.thresholds),
            stage_names=list(lad.stages),
            kind=cast(Literal["value", "percentile"], lad.kind),
            early=(lad.early[0], lad.early[1]) if lad.early else None,
            late=(lad.late[0], lad.late[1]) if lad.late else None,
            n_boot=lad.n_boot,
            seed=project.seed,
            jobs=jobs,
        )
        f = res.to_frame().drop(columns=["ladder", "index", "scale_weeks"], errors="ignore")
        f.insert(1, "ladder", lad.name)
        f.insert(2, "index", lad.index)
        f.insert(3, "scale_weeks", lad.scale_weeks)
        frames.append(f)
    return AuditResult(_concat(frames))


def link(project: Project, inputs: InputsResult, ind: IndicesResult,
         progress: Progress) -> LinkStageResult:
    """Impact records -> targets on their own grids, with reconciliation counts."""
    from impactlink.link import build_targets
    from impactlink.link._keys import attach_sources
    from impactlink.link.build import with_files
    from impactlink.link.selection import key_normalisation, normalisation_lines, unselected_rows
    from impactlink.link.target import compact_frame

    files = {k: str(v) for k, v in inputs.bundle.files.items()}
    # every impact record carries its file row; text keys are matched by one normal form
    tables = attach_sources(inputs.bundle.tables, files)
    keys = key_normalisation(tables, project.impacts)
    for line in normalisation_lines(keys):
        progress(line)
    keys = {**ind.key_normalisation, **keys}  # the indicator names, found by the indices stage
    targets: list[Any] = []
    rejected: list[pd.DataFrame] = []
    recon: list[pd.DataFrame] = []
    summaries: list[pd.DataFrame] = []
    warns: list[str] = []
    for spec in project.impacts:
        progress(f"link {spec.name} ({spec.source})")
        res = build_targets(
            spec,
            tables,
            counties=tables["counties"],
            weeks=ind.cube.weeks,
            lags_weeks=tuple(project.link.lags_weeks),
            equal_area_crs=project.link.equal_area_crs,
            files=files,
        )
        # 32-bit columns where exact (integer levels, persistence): a national run holds
        # several weekly targets of millions of rows through every later stage
        targets.extend(dataclasses.replace(t, frame=compact_frame(t.frame)) for t in
                       (link_features.season_in_months(t, ind.cube) for t in res.targets))
        rejected.append(res.rejected)
        recon.append(res.reconciliation)
        summaries.append(res.summary)
        warns.extend(res.warnings)
    # rows of an impact table that no impact selects: listed once, reconciled in one line
    unused, unused_recon = unselected_rows(project.impacts, tables)
    rejected.append(unused)
    recon.append(unused_recon)
    link_rejected = _concat(rejected)
    if len(link_rejected):
        link_rejected = with_files(link_rejected, files)
    return LinkStageResult(
        targets=tuple(targets),
        panel=PanelFile(tuple(targets)),
        reconciliation=_concat(recon),
        summary=_concat(summaries),
        rejected=link_rejected,
        rejected_all=pd.concat([inputs.bundle.rejected, link_rejected], ignore_index=True),
        warnings=tuple(warns),
        key_normalisation=keys,
    )


def rank(project: Project, inputs: InputsResult, ind: IndicesResult, lk: LinkStageResult,
         progress: Progress, *, jobs: int = 1, dask_address: str | None = None) -> RankResult:
    """Rank every candidate out of sample; fit each target's best candidate on all data.

    With ``dask_address`` one client serves every target
    (:func:`impactlink.execution.dask_session`), so the index cube travels to the workers
    once for the whole stage.
    """
    from impactlink.execution import dask_session
    from impactlink.link.features import candidate_lags, feature_reader
    from impactlink.models import crossings, fit_impact_model, impact_curves
    from impactlink.skill import rank_candidates

    cube, sk = ind.cube, project.skill
    parts: dict[str, list[pd.DataFrame]] = {k: [] for k in (
        "skill", "summary", "reliability", "local", "persistence", "curves", "crossings")}
    best: dict[str, tuple[Any, Candidate]] = {}
    skill_tables: dict[str, pd.DataFrame] = {}
    with dask_session(dask_address):
        for target in lk.targets:
            # a seasonal target searches the end of its accumulation window (as lags from the
            # latest end week); every other target the modelled lags
            lags = candidate_lags(target, project.link.lags_weeks)
            candidates = [(idx, scale, lag) for (idx, scale) in cube.keys for lag in lags]
            progress(f"rank {target.name}: {len(candidates)} candidates, {target.events} events")

            features = feature_reader(target, cube)  # picklable: workers read the cube too
            res = rank_candidates(
                target, features, candidates,
                cv=sk.cv, k_folds=sk.k_folds, n_boot=sk.n_boot, ci=sk.ci, n_bins=sk.n_bins,
                pairs=sk.pairs, challenger=sk.challenger, seasonal=project.models.seasonal,
                seed=project.seed, jobs=jobs, dask_address=dask_address, progress=progress,
            )
            monthly = bool(cube.provenance.get("scale_months_of_key"))
            ends = functools.partial(link_features.with_end_week, target=target,
                                     monthly=monthly)
            res = dataclasses.replace(  # every table that names a candidate says its window end
                res, table=ends(res.table, lag_col="lag_weeks"),
                summary=ends(res.summary, lag_col="best_lag_weeks"),
                local=ends(res.local, lag_col="lag_weeks"))
            for key, frame in (("skill", res.table), ("summary", res.summary),
                               ("reliability", res.reliability), ("local", res.local),
                               ("persistence", res.persistence)):
                parts[key].append(frame)
            cand = _best_candidate(res.table, target)
            if cand is None:
                continue
            meta = _meta(target, cand)
            model = fit_impact_model(target, features(*cand), link=project.models.link,
                                     **_model_options(project, inputs, target), meta=meta)
            best[target.name] = (model, cand)
            skill_tables[target.name] = res.table
            if model.ok:
                parts["curves"].append(link_features.with_end_week(
                    impact_curves(model, ci=project.models.curve_ci, meta=meta), target,
                    "lag_weeks", monthly))
                cr = crossings(model, ci=project.models.curve_ci)
                for k, v in meta.items():
                    if k not in cr.columns:
                        cr.insert(0, k, v)
                parts["crossings"].append(link_features.with_end_week(cr, target, "lag_weeks",
                                                                      monthly))
    c = {k: _concat(v) for k, v in parts.items()}
    return RankResult(skill=c["skill"], summary=c["summary"], reliability=c["reliability"],
                      local=c["local"], persistence=c["persistence"], curves=c["curves"],
                      crossings=c["crossings"], best=best, skill_tables=skill_tables)


def outlook(project: Project, inputs: InputsResult, ind: IndicesResult, lk: LinkStageResult,
            rk: RankResult, progress: Progress, *, jobs: int = 1) -> OutlookResult:
    """Chance of each impact now and at each modelled lag ahead, per county.

    ``jobs`` > 1 refits the lags of a target on that many threads (the fits are numpy
    passes over the rows; the models are kept in lag order, so the result is the same).

    For every target and lag, the best single-index candidate at that lag is refitted on the
    whole record; the latest week's index values then give the chance ``lag`` weeks ahead.
    Onset targets use the current state of their impact (counties already in an episode are
    not at risk of a new one).
    """
    from impactlink.execution import thread_map
    from impactlink.link import feature_values
    from impactlink.models import fit_impact_model
    from impactlink.outlook import impact_outlook

    counties = inputs.bundle.tables["counties"][[COUNTY, "region"]]
    states = {t.impact: t for t in lk.targets if t.role == "state"}
    frames = []
    for target in lk.targets:
        table = rk.skill_tables.get(target.name)
        if table is None or table.empty:
            continue
        models: dict[tuple, Any] = {}
        todo: list[Candidate] = []
        lags = pd.to_numeric(table.loc[table["model"] == "index", "lag_weeks"], errors="coerce")
        for lag in sorted(set(lags.dropna().astype(int))):
            cand = _best_candidate(table[table["lag_weeks"] == lag], target)
            if cand is None:
                continue
            fitted = rk.best.get(target.name)
            if fitted is not None and fitted[1] == cand:
                models[(target.name, *cand)] = fitted[0]  # already fitted for curves
                continue
            models[(target.name, *cand)] = None  # fitted below, kept in lag order
            todo.append(cand)

        def refit(cand, _t=target):  # noqa: ANN001, ANN202
            return fit_impact_model(_t, feature_values(_t, ind.cube, *cand),
                                    link=project.models.link,
                                    **_model_options(project, inputs, _t), meta=_meta(_t, cand))

        for cand, model in zip(todo, thread_map(refit, todo, jobs), strict=True):
            models[(target.name, *cand)] = model
        if not models:
            continue
        progress(f"outlook {target.name}: {len(models)} lags")
        state = None
        if target.role in ("onset", "escalation") and target.impact in states:
            sf = states[target.impact].frame
            last = sf[sf["time"] == sf["time"].max()]
            state = last[[COUNTY, "level"]].drop_duplicates(COUNTY)
        frames.append(impact_outlook(models, ind.cube, counties=counties, state=state,
                                     ci=project.models.curve_ci))
    return OutlookResult(_concat(frames))


def triggers(project: Project, inputs: InputsResult, ind: IndicesResult, lk: LinkStageResult,
             rk: RankResult, progress: Progress, *, jobs: int = 1) -> TriggersResult:
    """Replay, tune and audit trigger plans for every county-week state target.

    The index and time scale come from the best candidate of the same impact's onset
    target (a trigger should warn of new impacts), else from the state target itself.
    ``jobs`` threads share the numpy work (threshold search, replays, plan tuning); the
    tables are the same for any ``jobs``.
    """
    from impactlink.triggers import audit_triggers, impact_grid

    cube = ind.cube
    region_of = inputs.bundle.tables["counties"].set_index(COUNTY)["region"].astype(str)
    regions = [region_of.get(c, "all") for c in cube.county_ids]
    frames, timelines = [], []
    systems = inputs.bundle.tables.get("water_systems")
    exposed = None
    if systems is not None and COUNTY in systems.columns:
        have = set(systems[COUNTY].dropna().astype(str))
        exposed = np.array([str(c) in have for c in cube.county_ids])
    for target in lk.targets:
        if target.grain != "county_week" or target.role != "state":
            continue
        cand = _trigger_candidate(lk, rk, target)
        if cand is None:
            continue
        idx, scale, _lag = cand
        progress(f"triggers {target.name}: {idx} {scale} weeks")
        grid = impact_grid(target, cube.weeks, cube.county_ids)
        if exposed is not None and _source_of(project, target.impact) == "notices":
            grid[:, ~exposed] = np.nan  # no water system: a restriction cannot be recorded
        res = audit_triggers(
            cube.get(idx, scale),
            grid,
            weeks=cube.weeks, county_ids=cube.county_ids, regions=regions,
            index=idx, scale_weeks=scale,
            entry_weeks=project.triggers.entry_weeks, exit_weeks=project.triggers.exit_weeks,
            seed=project.seed, jobs=jobs,
        )
        f = res.to_frame().drop(columns=["impact", "target"], errors="ignore")
        f.insert(0, "target", target.name)
        f.insert(0, "impact", target.impact)
        frames.append(f)
        tl = res.timeline_frame().drop(columns=["target"], errors="ignore")
        tl.insert(0, "target", target.name)
        timelines.append(tl)
    plan = None
    if project.triggers.plan:
        from impactlink.triggers import run_trigger_plan

        progress(f"trigger plan {Path(project.triggers.plan).name}: replay, scores, tuning")
        tables = inputs.bundle.tables
        plan = run_trigger_plan(project.triggers.plan, cube=cube, targets=lk.targets,
                                counties=tables["counties"],
                                water_systems=tables.get("water_systems"), seed=project.seed,
                                jobs=jobs)
    return TriggersResult(_concat(frames), _concat(timelines), plan)


def contrast(project: Project, inputs: InputsResult, ind: IndicesResult, lk: LinkStageResult,
             rk: RankResult, progress: Progress, *, jobs: int = 1) -> ContrastResult:
    """County contrasts for each target with a county grain, on its best candidate.

    ``jobs`` threads run the leave-one-year-out folds, the look-alike distances and the
    bootstrap refits; the numbers do not depend on ``jobs``.
    """
    from impactlink.contrast import county_contrast
    from impactlink.link import feature_values

    traits = inputs.bundle.tables.get("traits")
    if traits is None or traits.empty:
        _warnings.warn(ContrastWarning("no traits table: county contrasts not computed"),
                       stacklevel=2)
        empty = pd.DataFrame()
        return ContrastResult(empty, empty, empty, computed=False)
    rows: list[pd.DataFrame] = []
    excess: list[pd.DataFrame] = []
    pairs: list[pd.DataFrame] = []
    for target in lk.targets:
        if target.grain == "region_month" or target.role == "escalation":
            continue
        if target.name not in rk.best:
            continue
        cand = rk.best[target.name][1]
        progress(f"contrast {target.name}: {cand[0]} {cand[1]} weeks, lag {cand[2]}")
        x = feature_values(target, ind.cube, *cand)
        res = county_contrast(target, x, traits, ci=project.models.curve_ci, seed=project.seed,
                              jobs=jobs)
        del x
        meta = _meta(target, cand)
        for frame, bucket in ((res.to_frame(), rows), (res.county_excess, excess),
                              (res.pairs, pairs)):
            if frame is None or len(frame) == 0:
                continue
            frame = frame.drop(columns=[k for k in meta if k in frame.columns])
            for i, (k, v) in enumerate(meta.items()):
                frame.insert(i, k, v)
            bucket.append(frame)
    explained = _explain_pairs(project, inputs, ind, lk, rk, traits, progress, jobs=jobs)
    return ContrastResult(_concat(rows), _concat(excess), _concat(pairs), explained=explained)


def _explain_pairs(project: Project, inputs: InputsResult, ind: IndicesResult,
                   lk: LinkStageResult, rk: RankResult, traits: pd.DataFrame,
                   progress: Progress, *, jobs: int = 1) -> dict[str, pd.DataFrame]:
    """Exposure / sensitivity / unexplained split of two counties per annual target.

    The pair is ``[contrast] counties`` when given, else the most striking look-alike pair.
    Annual (county-year) targets only: weekly targets hold ~100 times more rows and the
    question extension staff bring is about a season's losses. An ordinal target is
    contrasted on its most severe level.
    """
    from impactlink.contrast import contrast_counties, parse_period

    cs = project.contrast
    pair = tuple(cs.counties) if cs.counties else None
    if pair is not None and len(pair) != 2:
        raise ContrastError(f"[contrast] counties: give two county ids or names (or one and "
                            f"\"region\"); got {list(pair)}")
    period = parse_period(cs.period) if cs.period else None
    counties = inputs.bundle.tables["counties"]
    names = pd.DataFrame(counties.drop(columns="geometry", errors="ignore"))
    parts: dict[str, list[pd.DataFrame]] = {k: [] for k in (
        "contrast.csv", "contrast_summary.csv", "contrast_lookalikes.csv",
        "contrast_trajectories.csv", "contrast_traits.csv")}
    for target in lk.targets:
        if (target.grain != "county_year" or target.name not in rk.best
                or target.provenance.get("derived_from")):  # binary variants: same pairs
            continue
        cand = rk.best[target.name][1]
        progress(f"contrast {target.name}: explaining a county pair")
        try:
            res = contrast_counties(
                target, ind.cube, cand, traits, names, pair=pair, period=period,
                n_boot=cs.n_boot, ci=project.models.curve_ci, seed=project.seed,
                level_at_least=max(1, target.n_levels - 1), jobs=jobs)
        except ContrastError as exc:
            if pair is not None:
                raise
            _warnings.warn(ContrastWarning(f"{target.name}: {exc}"), stacklevel=2)
            continue
        for name, frame in (("contrast.csv", res.to_frame()),
                            ("contrast_summary.csv", res.summary),
                            ("contrast_lookalikes.csv", res.lookalikes),
                            ("contrast_trajectories.csv", res.trajectories),
                            ("contrast_traits.csv", res.traits_side)):
            frame = frame.drop(columns=["target", "impact"], errors="ignore")
            frame.insert(0, "target", target.name)
            frame.insert(0, "impact", target.impact)
            parts[name].append(frame)
    return {k: _concat(v) for k, v in parts.items() if v}


# ----------------------------------------------------------------------------- helpers
