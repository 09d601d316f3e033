"""Data and provenance sections: what was read, what was rejected, how it was computed.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from impactlink.report.common import FigureSink, absent, county_names, data_files, section
from impactlink.report.figures_data import record_timeline
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder


def data_section(run: RunFolder, figs: FigureSink) -> Markup:
    parts = []
    man = run.manifest or {}
    inputs = pd.DataFrame(man.get("inputs") or [])
    if not inputs.empty:
        shown = inputs.copy()
        if "file" in shown.columns:
            shown["file"] = [Path(str(f)).name if pd.notna(f) else f for f in shown["file"]]
        if "sha256" in shown.columns:
            shown["sha256"] = shown["sha256"].astype(str).str[:12] + "\u2026"
        parts.append(table(shown, caption="Inputs read (checksums in full under Provenance)"))
        if {"date_min", "date_max"} <= set(inputs.columns):
            spans = ", ".join(f"{r.table} {str(r.date_min)[:4]}\u2013{str(r.date_max)[:4]}"
                              for r in inputs.itertuples())
            parts.append(figs.add("record_timeline", lambda: record_timeline(inputs),
                                  alt=f"Bar chart of the record span of each input: {spans}."))
    else:
        parts.append(absent("Inputs: not recorded in this run (no manifest.json)."))
    rec = run.table("reconciliation")
    if rec is None and man.get("impacts"):
        rec = pd.DataFrame(man["impacts"])
    if rec is not None and not rec.empty:
        parts.append(el("h3", "Impact records"))
        parts.append(table(rec, caption="Impact records: used, rejected, outside coverage "
                           "(outside coverage = unknown, not impact-free)"))
    link_summary = run.table("link_summary")
    targets = pd.DataFrame(man.get("targets") or [])
    if link_summary is not None and not link_summary.empty:
        cols = [c for c in ("target", "grain", "rows", "events", "events_by_level", "years",
                            "first_year", "last_year", "units", "episodes")
                if c in link_summary.columns]
        targets = link_summary[cols]
    if not targets.empty:
        parts.append(table(targets, caption="Impact targets: scored rows and the events they "
                           "hold (few events = fragile estimates)"))
    rej = run.table("rejected_rows")
    parts.append(el("h3", "Rejected rows"))
    if rej is None:
        parts.append(absent("No list of rejected rows in this run."))
    elif rej.empty:
        parts.append(paragraph("No input row was rejected."))
    else:
        counts = (rej.groupby(["table", "reason"], dropna=False).size()
                  .rename("rows").reset_index().sort_values("rows", ascending=False))
        parts.append(table(counts, caption="Why rows were rejected"))
        parts.append(details(f"First rows of {len(rej)} rejected", table(rej, max_rows=50)))
    names = county_names(run)
    if names is not None:
        parts.append(el("h3", "Counties"))
        parts.append(details(f"{len(names)} counties in the study area", table(names)))
    if run.problems:
        parts.append(el("h3", "Files that could not be used"))
        parts.append(el("ul", *[el("li", p) for p in run.problems]))
    parts.append(data_files(run, "reconciliation", "link_summary", "rejected_rows", "manifest"))
    return section("data", "Data and coverage", *parts)


def provenance_section(run: RunFolder, figs: FigureSink) -> Markup:
    man = run.manifest
    if not man:
        return section("provenance", "Provenance", absent(
            "Not recorded in this run: manifest.json is missing."))
    facts = pd.DataFrame([
        ("impactlink version", man.get("impactlink_version")),
        ("run created (UTC)", man.get("created_utc")),
        ("seed", man.get("seed")),
        ("run folder", str(Path(run.path).resolve())),
    ], columns=["item", "value"])
    parts = [table(facts, caption="This run")]
    inputs = pd.DataFrame(man.get("inputs") or [])
    if not inputs.empty:
        cols = [c for c in ("table", "file", "sha256", "rows_read", "rows_used", "rows_rejected")
                if c in inputs.columns]
        parts.append(table(inputs[cols], caption="Inputs with SHA-256 checksums"))
    indices = man.get("indices") or {}
    if isinstance(indices, dict) and indices:
        rows = []
        for name, prov in indices.items():
            prov = prov if isinstance(prov, dict) else {"method": prov}
            rows.append({"index": name, **{k: v for k, v in prov.items() if k in (
                "method", "estimator", "distribution", "calibration", "calibration_note",
                "zero_handling", "scales")}})
        parts.append(table(pd.DataFrame(rows), caption="How each index was computed"))
    versions = man.get("versions") or {}
    if versions:
        parts.append(table(pd.DataFrame(sorted(versions.items()), columns=["package", "version"]),
                           caption="Package versions"))
    timings = man.get("timings_s") or {}
    if timings:
        parts.append(table(pd.DataFrame(list(timings.items()), columns=["stage", "seconds"]),
                           caption="Time per stage", digits=1))
    if man.get("project"):
        parts.append(details("Settings of this run", el("pre", json.dumps(
            man["project"], indent=2, sort_keys=True, default=str))))
    parts.append(data_files(run, "manifest"))
    return section("provenance", "Provenance", *parts)
