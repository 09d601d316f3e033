"""The pipeline runner: wires stages together, times them and writes the run folder.

It holds no science: every number comes from a stage function. Stages run in order
(inputs -> indices -> audit -> link -> rank -> outlook -> triggers -> contrast -> report),
and a stage command runs only what it needs.
"""

from __future__ import annotations

import json
import platform
import time
import warnings as _warnings
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink import __version__
from impactlink.errors import ProjectError
from impactlink.progress import Reporter
from impactlink.project import Project, load_project, render_project_file

__all__ = ["run_project", "run_demo", "check_project", "init_project", "RunResult"]

ORDER = ("inputs", "indices", "audit", "link", "rank", "outlook", "triggers", "contrast", "report")
NEEDS = {
    "indices": ("inputs", "indices"),
    "audit": ("inputs", "indices", "audit"),
    "link": ("inputs", "indices", "link"),
    "rank": ("inputs", "indices", "link", "rank"),
    "outlook": ("inputs", "indices", "link", "rank", "outlook"),
    "triggers": ("inputs", "indices", "link", "rank", "triggers"),
    "contrast": ("inputs", "indices", "link", "rank", "contrast"),
    "run": ORDER,
}


@dataclass
class RunResult:
    """What a run wrote and how long each stage took."""

    out_dir: Path
    written: list[Path] = field(default_factory=list)
    timings_s: dict[str, float] = field(default_factory=dict)
    state: dict[str, Any] = field(default_factory=dict)


# ----------------------------------------------------------------------------- commands
def init_project(folder: str | Path, *, force: bool = False) -> Path:
    """Find the tables in ``folder`` and write a commented ``impactlink.toml`` (see plan_project)."""
    from impactlink.inputs.init_plan import plan_project

    folder = Path(folder)
    if not folder.is_dir():
        raise ProjectError(f"{folder} is not a folder; give the folder that holds your tables")
    target = folder / "impactlink.toml"
    if target.exists() and not force:
        raise ProjectError(f"{target} exists; use --force to overwrite it")
    text = render_project_file(**plan_project(folder), name=folder.resolve().name,
                               output_dir="impactlink_output")
    target.write_text(text, encoding="utf-8")
    return target


def check_project(path: str | Path, *, out: str | Path | None = None) -> bool:
    """Read and validate every table and print a per-table summary with rejection reasons.

    Returns True when every table was read; a fatal problem raises (the CLI turns it into
    one error line and exit code 2). Rejected rows are reported, not fatal.
    """
    project = load_project(path)
    from impactlink.inputs import read_inputs, summary_frame

    bundle = read_inputs(project)
    summary = summary_frame(bundle)
    with pd.option_context("display.width", 160, "display.max_columns", 20):
        print(summary.to_string(index=False))
    if len(bundle.rejected):
        reasons = bundle.rejected.groupby(["table", "reason"]).size().rename("rows").reset_index()
        print("\nrejected rows by reason:")
        print(reasons.to_string(index=False))
    for w in bundle.warnings:
        print(f"warning: {w}")
    if out:
        out = Path(out)
        out.mkdir(parents=True, exist_ok=True)
        bundle.rejected.to_csv(out / "rejected_rows.csv", index=False)
        _write_manifest(out, project, {"bundle": bundle}, {}, [])
    return True


def run_demo(*, out: str | Path | None = None, jobs: int = 1, quiet: bool = False) -> Path:
    """Run every stage on the committed fictional scenario into ``reports/demo``."""
    root = _repo_root()
    project_file = root / "scenario_data" / "impactlink.toml"
    out = Path(out) if out else root / "reports" / "demo"
    result = run_project(project_file, until="run", out=out, jobs=jobs, quiet=quiet)
    if not quiet:
        for p in result.written:
            print(f"wrote {p}")
    return out / "report.html"


def run_project(
    path: str | Path | Project,
    *,
    until: str = "run",
    out: str | Path | None = None,
    jobs: int | None = None,
    dask_address: str | None = None,
    quiet: bool = False,
) -> RunResult:
    """Run the stages that ``until`` needs and write their outputs."""
    project = path if isinstance(path, Project) else load_project(path, output_dir=out)
    out_dir = Path(out) if out else project.output_dir
    out_dir.mkdir(parents=True, exist_ok=True)
    stages = NEEDS[until]
    reporter = Reporter(quiet=quiet, n_stages=len(stages))
    result = RunResult(out_dir=out_dir)
    st = result.state
    st["jobs"] = jobs if jobs is not None else project.jobs
    st["dask"] = dask_address
    warnings: list[str] = []
    try:
        for stage in stages:
            reporter.stage(stage)
            t0 = time.perf_counter()
            with _warnings.catch_warnings(record=True) as caught:
                _warnings.simplefilter("always")
                written = _STAGES[stage](project, st, out_dir, reporter, warnings)
            for w in caught:  # kept in the manifest, shown once as a progress line
                msg = f"{w.category.__name__}: {w.message}"
                if msg not in warnings:
                    warnings.append(msg)
                    reporter(f"warning: {msg}")
            result.timings_s[stage] = round(time.perf_counter() - t0, 3)
            result.written.extend(written or [])
            _write_manifest(out_dir, project, st, result.timings_s, warnings)
    finally:
        reporter.close()
    result.written.append(out_dir / "manifest.json")
    return result


# ----------------------------------------------------------------------------- stages
def _stage_inputs(project, st, out_dir, progress, warnings):
    from impactlink.inputs import read_inputs

    bundle = read_inputs(project, progress=progress)
    st["bundle"] = bundle
    warnings.extend(bundle.warnings)
    path = out_dir / "rejected_rows.csv"
    bundle.rejected.to_csv(path, index=False)
    return [path]


def _stage_indices(project, st, out_dir, progress, warnings):
    from impactlink.indices import compute_indices

    tables = st["bundle"].tables
    counties = tables["counties"]
    lat = _latitudes(counties)
    cfg = project.indices
    cal = project.calibration
    cube = compute_indices(
        tables["climate"],
        latitude_deg=lat,
        indicators=tables.get("indicators"),
        scales_weeks=tuple(cfg.scales_weeks),
        scales_months=tuple(cfg.scales_months),
        indices=tuple(cfg.indices),
        pet_method=cfg.pet_method,
        calibration=(cal.start_year, cal.end_year),
        min_calibration_years=cal.min_years,
        min_valid_days=cfg.min_valid_days,
        progress=progress,
    )
    if cfg.indicators:
        keep = {k: v for k, v in cube.arrays.items() if k[0] in set(cfg.indices) | set(cfg.indicators)}
        cube = type(cube)(cube.weeks, cube.county_ids, keep, cube.provenance)
    path = out_dir / "indices.parquet"
    if cube.provenance.get("cadence") == "monthly":
        # indices.parquet keeps the monthly cadence (scales in months); later stages work on
        # ISO weeks, so they get the cube expanded to weeks (see indices.cadence)
        from impactlink.indices.cadence import monthly_to_weekly

        frame = cube.to_frame().rename(columns={"week": "month", "scale_weeks": "scale_months"})
        frame.to_parquet(path, index=False)
        cube = monthly_to_weekly(cube)
        progress("monthly climate input: indices at monthly cadence, expanded to ISO weeks "
                 "for linking (scale labels converted from months to weeks)")
    else:
        cube.to_frame().to_parquet(path, index=False)
    st["cube"] = cube
    return [path]


def _stage_audit(project, st, out_dir, progress, warnings):
    from impactlink.indices import threshold_audit

    cube = st["cube"]
    frames = []
    for lad in project.audit:
        progress(f"audit ladder {lad.name}: {lad.index} {lad.scale_weeks} weeks")
        res = threshold_audit(
            cube,
            index=lad.index,
            scale_weeks=lad.scale_weeks,
            thresholds=list(lad.thresholds),
            stage_names=list(lad.stages),
            kind=lad.kind,
            early=tuple(lad.early) if lad.early else None,
            late=tuple(lad.late) if lad.late else None,
            n_boot=lad.n_boot,
            seed=project.seed,
        )
        f = res.to_frame().drop(columns=["ladder", "index", "scale_weeks"], errors="ignore")
        f.insert(1, "ladder", lad.name)
        f.insert(2, "index", lad.index)
        f.insert(3, "scale_weeks", lad.scale_weeks)
        frames.append(f)
    audit = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    st["audit"] = audit
    path = out_dir / "audit.csv"
    audit.to_csv(path, index=False)
    return [path]


def _stage_link(project, st, out_dir, progress, warnings):
    from impactlink.link import build_targets, panel_frame

    tables = st["bundle"].tables
    cube = st["cube"]
    targets, rejected, recon, summaries = [], [], [], []
    for spec in project.impacts:
        progress(f"link {spec.name} ({spec.source})")
        res = build_targets(
            spec,
            tables,
            counties=tables["counties"],
            weeks=cube.weeks,
            lags_weeks=tuple(project.link.lags_weeks),
            equal_area_crs=project.link.equal_area_crs,
        )
        targets.extend(res.targets)
        rejected.append(res.rejected)
        recon.append(res.reconciliation)
        summaries.append(res.summary)
        warnings.extend(res.warnings)
    st["targets"] = targets
    st["link_rejected"] = _concat(rejected)
    st["reconciliation"] = _concat(recon)
    written = []
    if targets:
        panel = panel_frame(targets)
        p = out_dir / "panel.parquet"
        panel.to_parquet(p, index=False)
        written.append(p)
    for name, frame in [
        ("reconciliation.csv", st["reconciliation"]),
        ("link_summary.csv", _concat(summaries)),
    ]:
        p = out_dir / name
        frame.to_csv(p, index=False)
        written.append(p)
    # impact records rejected while linking join the input rejections
    rej = pd.concat([st["bundle"].rejected, st["link_rejected"]], ignore_index=True)
    rej.to_csv(out_dir / "rejected_rows.csv", index=False)
    return written


def _stage_rank(project, st, out_dir, progress, warnings):
    from impactlink.link import feature_values
    from impactlink.models import crossings, fit_impact_model, impact_curves
    from impactlink.skill import rank_candidates

    cube = st["cube"]
    sk = project.skill
    candidates = [
        (idx, scale, lag)
        for (idx, scale) in cube.keys
        for lag in project.link.lags_weeks
    ]
    tables, summaries, reliab, curves, cross = [], [], [], [], []
    local, persistence = [], []
    best_models = {}
    for target in st["targets"]:
        progress(f"rank {target.name}: {len(candidates)} candidates, {target.events} events")

        def features(index, scale, lag, _t=target):
            return feature_values(_t, cube, index, scale, lag)

        res = rank_candidates(
            target,
            features,
            candidates,
            cv=sk.cv,
            k_folds=sk.k_folds,
            n_boot=sk.n_boot,
            ci=sk.ci,
            n_bins=sk.n_bins,
            pairs=sk.pairs,
            challenger=sk.challenger,
            seasonal=project.models.seasonal,
            seed=project.seed,
            jobs=st["jobs"],
            dask_address=st["dask"],
            progress=progress,
        )
        tables.append(res.table)
        summaries.append(res.summary)
        reliab.append(res.reliability)
        local.append(res.local)
        persistence.append(res.persistence)
        best = _best_single(res.table)
        if best is None:
            continue
        idx, scale, lag = best
        x = features(idx, scale, lag)
        meta = {"impact": target.impact, "target": target.name, "index": idx,
                "scale_weeks": scale, "lag_weeks": lag}
        model = fit_impact_model(
            target, x, link=project.models.link, **_model_options(project, st, target),
            meta=meta,
        )
        best_models[target.name] = (model, (idx, scale, lag))
        st.setdefault("skill_tables", {})[target.name] = res.table
        if model.ok:
            curves.append(impact_curves(model, ci=project.models.curve_ci, meta=meta))
            cr = crossings(model, ci=project.models.curve_ci)
            for k, v in meta.items():
                if k not in cr.columns:
                    cr.insert(0, k, v)
            cross.append(cr)
    st["best_models"] = best_models
    st["skill"] = _concat(tables)
    st["skill_summary"] = _concat(summaries)
    st["skill_local"] = _concat(local)
    written = []
    for name, frame in [
        ("skill.csv", st["skill"]),
        ("skill_summary.csv", st["skill_summary"]),
        ("reliability.csv", _concat(reliab)),
        ("skill_local.csv", _concat(local)),
        ("skill_persistence.csv", _concat(persistence)),
        ("curves.csv", _concat(curves)),
        ("crossings.csv", _concat(cross)),
    ]:
        p = out_dir / name
        frame.to_csv(p, index=False)
        written.append(p)
    return written


def _stage_outlook(project, st, out_dir, progress, warnings):
    """Chance of each impact now and at each modelled lag ahead, per county.

    For every target and lag, the best single-index candidate at that lag is refitted on the
    whole record; the latest week's index values then give the chance ``lag`` weeks ahead.
    Onset targets use the current state of their impact (counties already in an episode are
    not at risk of a new one).
    """
    from impactlink.link import feature_values
    from impactlink.models import fit_impact_model
    from impactlink.outlook import impact_outlook

    cube = st["cube"]
    counties = st["bundle"].tables["counties"][["county_id", "region"]]
    states = {t.impact: t for t in st["targets"] if t.role == "state"}
    frames = []
    for target in st["targets"]:
        table = st.get("skill_tables", {}).get(target.name)
        if table is None or table.empty:
            continue
        models = {}
        for lag in sorted(set(project.link.lags_weeks)):
            best = _best_single(table[table["lag_weeks"] == lag])
            if best is None:
                continue
            idx, scale, lag_ = best
            meta = {"impact": target.impact, "target": target.name, "index": idx,
                    "scale_weeks": scale, "lag_weeks": lag_}
            fitted = st.get("best_models", {}).get(target.name)
            if fitted is not None and fitted[1] == (idx, scale, lag_):
                models[(target.name, idx, scale, lag_)] = fitted[0]  # already fitted for curves
                continue
            x = feature_values(target, cube, idx, scale, lag_)
            models[(target.name, idx, scale, lag_)] = fit_impact_model(
                target, x, link=project.models.link, **_model_options(project, st, target),
                meta=meta,
            )
        if not models:
            continue
        progress(f"outlook {target.name}: {len(models)} lags")
        state = None
        if target.role in ("onset", "escalation") and target.impact in states:
            sf = states[target.impact].frame
            last = sf[sf["time"] == sf["time"].max()]
            state = last[["county_id", "level"]].drop_duplicates("county_id")
        frames.append(impact_outlook(models, cube, counties=counties, state=state,
                                     ci=project.models.curve_ci))
    out = _concat(frames)
    st["outlook"] = out
    p = out_dir / "outlook.csv"
    out.to_csv(p, index=False)
    return [p]


def _stage_triggers(project, st, out_dir, progress, warnings):
    """Replay, tune and audit trigger plans for every county-week state target.

    The index and time scale come from the best candidate for the matching onset target
    (a trigger should warn of new impacts), else from the state target itself.
    """
    from impactlink.triggers import audit_triggers, impact_grid

    cube = st["cube"]
    counties = st["bundle"].tables["counties"]
    region_of = counties.set_index("county_id")["region"].astype(str)
    regions = [region_of.get(c, "all") for c in cube.county_ids]
    frames, timelines = [], []
    for target in st["targets"]:
        if target.grain != "county_week" or target.role != "state":
            continue
        best = _best_for_impact(st, target)
        if best is None:
            continue
        idx, scale, _lag = best
        progress(f"triggers {target.name}: {idx} {scale} weeks")
        res = audit_triggers(
            cube.get(idx, scale),
            impact_grid(target, cube.weeks, cube.county_ids),
            weeks=cube.weeks,
            county_ids=cube.county_ids,
            regions=regions,
            index=idx,
            scale_weeks=scale,
            entry_weeks=project.triggers.entry_weeks,
            exit_weeks=project.triggers.exit_weeks,
            seed=project.seed,
        )
        f = res.to_frame().drop(columns=["impact", "target"], errors="ignore")
        f.insert(0, "target", target.name)
        f.insert(0, "impact", target.impact)
        frames.append(f)
        tl = res.timeline_frame().drop(columns=["target"], errors="ignore")
        tl.insert(0, "target", target.name)
        timelines.append(tl)
    st["triggers"] = _concat(frames)
    written = []
    for name, frame in [("triggers.csv", st["triggers"]), ("trigger_timeline.csv", _concat(timelines))]:
        p = out_dir / name
        frame.to_csv(p, index=False)
        written.append(p)
    return written


def _stage_contrast(project, st, out_dir, progress, warnings):
    """County contrasts for each target with a county grain, on its best candidate."""
    from impactlink.contrast import county_contrast
    from impactlink.link import feature_values

    traits = st["bundle"].tables.get("traits")
    if traits is None or traits.empty:
        warnings.append("no traits table: county contrasts not computed")
        return []
    cube = st["cube"]
    rows, excess, pairs = [], [], []
    for target in st["targets"]:
        if target.grain == "region_month" or target.role in ("escalation",):
            continue
        if target.name not in st.get("best_models", {}):
            continue
        _model, (idx, scale, lag) = st["best_models"][target.name]
        progress(f"contrast {target.name}: {idx} {scale} weeks, lag {lag}")
        x = feature_values(target, cube, idx, scale, lag)
        res = county_contrast(target, x, traits, ci=project.models.curve_ci, seed=project.seed)
        meta = {"impact": target.impact, "target": target.name, "index": idx,
                "scale_weeks": scale, "lag_weeks": lag}
        for frame, bucket in [(res.to_frame(), rows), (res.county_excess, excess), (res.pairs, pairs)]:
            if frame is None or len(frame) == 0:
                continue
            frame = frame.drop(columns=[k for k in meta if k in frame.columns])
            for i, (k, v) in enumerate(meta.items()):
                frame.insert(i, k, v)
            bucket.append(frame)
    st["contrast"] = _concat(rows)
    st["county_excess"] = _concat(excess)
    written = []
    for name, frame in [("contrast.csv", st["contrast"]), ("county_excess.csv", st["county_excess"]),
                        ("contrast_pairs.csv", _concat(pairs))]:
        p = out_dir / name
        frame.to_csv(p, index=False)
        written.append(p)
    return written


def _best_for_impact(st: dict, target) -> tuple[str, int, int] | None:
    """Best (index, scale, lag) for a state target: its onset sibling's, else its own."""
    best = st.get("best_models", {})
    siblings = [n for n in best if n.startswith(f"{target.impact}:onset")]
    for name in sorted(siblings) + [target.name]:
        if name in best:
            return best[name][1]
    return None


def _stage_report(project, st, out_dir, progress, warnings):
    from impactlink.report import build_report

    _write_layers(out_dir, st)
    return [build_report(out_dir, progress=progress)]


_STAGES = {
    "inputs": _stage_inputs,
    "indices": _stage_indices,
    "audit": _stage_audit,
    "link": _stage_link,
    "rank": _stage_rank,
    "outlook": _stage_outlook,
    "triggers": _stage_triggers,
    "contrast": _stage_contrast,
    "report": _stage_report,
}


# ----------------------------------------------------------------------------- helpers
def _model_options(project: Project, st: dict, target) -> dict[str, Any]:
    """Final-fit options from ``[models]``: pooling, seasonal terms, county traits.

    County pooling and traits need a county grain; region-month targets fall back to one
    model for all units.
    """
    county_grain = target.grain != "region_month"
    opts: dict[str, Any] = {
        "pooling": project.models.pooling if county_grain else "all",
        "seasonal": project.models.seasonal,
    }
    traits = st["bundle"].tables.get("traits")
    if project.models.traits and county_grain and traits is not None:
        missing = set(project.models.traits) - set(traits.columns)
        if missing:
            from impactlink.errors import ContrastError

            raise ContrastError(
                f"[models] traits names {sorted(missing)}, which the traits table lacks; "
                f"its columns are {sorted(c for c in traits.columns if c != 'county_id')}"
            )
        opts["traits"] = traits[["county_id", *project.models.traits]]
    return opts


def _best_single(table: pd.DataFrame):
    """The best single-index candidate (index, scale, lag) of a skill table, or None."""
    if table is None or table.empty:
        return None
    single = table[table["model"] == "index"]
    single = single.dropna(subset=["rank"]) if "rank" in single else single
    if single.empty:
        return None
    row = single.sort_values("rank").iloc[0]
    return str(row["index"]), int(row["scale_weeks"]), int(row["lag_weeks"])


def _latitudes(counties) -> pd.Series:
    c = counties.to_crs("EPSG:4326") if counties.crs is not None else counties
    # centroids in lon/lat are adequate for day length (errors far below 0.1 degree of latitude)
    cent = c.geometry.representative_point()
    return pd.Series(cent.y.to_numpy(), index=c["county_id"].astype(str).to_numpy(), name="lat_deg")


def _concat(frames) -> pd.DataFrame:
    frames = [f for f in frames if f is not None and len(f)]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def _write_layers(out_dir: Path, st: dict) -> None:
    """The ``counties`` and ``best_candidate`` layers of counties.gpkg for GIS users.

    The report stage adds the ``audit`` and ``outlook`` layers from their tables, so a run
    folder rebuilt with ``impactlink report`` gets them too.
    """
    bundle = st.get("bundle")
    if bundle is None:
        return
    counties = bundle.tables["counties"]
    path = out_dir / "counties.gpkg"
    if path.exists():
        path.unlink()
    base = counties[[c for c in ("county_id", "county_name", "region", "geometry") if c in counties]]
    base.to_file(path, layer="counties", driver="GPKG")
    local = st.get("skill_local")
    if local is not None and len(local):
        # one row per county and target: best candidate, its skill and the events it rests on
        unit = local[local["level"] == "unit"].rename(columns={"unit": "county_id"})
        unit = unit.drop(columns=["level"])
        layer = base.merge(unit, on="county_id", how="inner")
        if len(layer):
            layer.to_file(path, layer="best_candidate", driver="GPKG")


def _versions() -> dict[str, str]:
    import importlib.metadata as md

    out = {"python": platform.python_version()}
    for pkg in ("numpy", "pandas", "scipy", "scikit-learn", "statsmodels", "geopandas",
                "shapely", "pyarrow", "matplotlib"):
        try:
            out[pkg] = md.version(pkg)
        except md.PackageNotFoundError:
            pass
    return out


def _write_manifest(out_dir: Path, project: Project, st: dict, timings: dict, warnings: list) -> None:
    bundle = st.get("bundle")
    inputs = []
    if bundle is not None:
        counts = bundle.counts
        for row in counts.to_dict("records"):
            f = str(row.get("file", ""))
            row["sha256"] = bundle.checksums.get(f, "")
            inputs.append({k: _jsonable(v) for k, v in row.items()})
    recon = st.get("reconciliation")
    manifest = {
        "impactlink_version": __version__,
        "created_utc": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "project": project.settings_dict(),
        "seed": project.seed,
        "inputs": inputs,
        "rows_total": {
            "read": int(sum(r.get("rows_read", 0) for r in inputs)),
            "used": int(sum(r.get("rows_used", 0) for r in inputs)),
            "rejected": int(sum(r.get("rows_rejected", 0) for r in inputs)),
        },
        "impacts": [] if recon is None or recon.empty else [
            {k: _jsonable(v) for k, v in r.items()} for r in recon.to_dict("records")
        ],
        "targets": [
            {"target": t.name, "role": t.role, "grain": t.grain, "rows": len(t.frame),
             "events": t.events,
             # onset / escalation targets: the explicit risk set (county-weeks at risk)
             "rows_at_risk": _jsonable(t.provenance.get("at_risk")),
             "flags": _jsonable(t.provenance.get("flags", []))}
            for t in st.get("targets", [])
        ],
        "indices": {str(k): _jsonable(v) for k, v in getattr(st.get("cube"), "provenance", {}).items()},
        "versions": _versions(),
        "timings_s": timings,
        "warnings": list(warnings),
    }
    (out_dir / "manifest.json").write_text(json.dumps(manifest, indent=2, default=str), encoding="utf-8")


def _jsonable(v):
    if v is None or v is pd.NaT or v is pd.NA:
        return None
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (np.floating,)):
        return None if np.isnan(v) else float(v)
    if isinstance(v, (pd.Timestamp, datetime)):
        return v.strftime("%Y-%m-%d")
    if isinstance(v, dict):
        return {str(k): _jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, float) and np.isnan(v):
        return None
    return v


def _repo_root() -> Path:
    here = Path(__file__).resolve().parent.parent
    if (here / "scenario_data").is_dir():
        return here
    cwd = Path.cwd()
    if (cwd / "scenario_data").is_dir():
        return cwd
    raise ProjectError(
        "cannot find scenario_data/; run `impactlink demo` from the project's source folder, "
        "or generate the scenario with `impactlink scenario --out DIR` and run "
        "`impactlink run DIR/impactlink.toml`"
    )
