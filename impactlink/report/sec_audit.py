"""Threshold audit section: does each stage of a ladder occur as often as defined?
"""

from __future__ import annotations

import pandas as pd

from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    page_shapes,
    section,
    sel,
    with_names,
)
from impactlink.report.figures_audit import audit_shares, record_period
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.svgmap import svg_map
from impactlink.report.text import fmt_num
from impactlink.report.words_sections import AUDIT_INTRO
from impactlink.schema import COUNTY


def audit_section(run: RunFolder, figs: FigureSink) -> Markup:
    audit = run.table("audit")
    if audit is None or audit.empty:
        return section("audit", "Threshold audit", absent())
    parts = [paragraph(
        AUDIT_INTRO)]
    shapes = page_shapes(run) if run.counties is not None else None
    ratio = pd.to_numeric(sel(audit, period=record_period(audit)).get("ratio"), errors="coerce")
    ratio_top = max(float(ratio.max()) if ratio is not None and ratio.notna().any() else 2.0, 1.0)
    for ladder, sub in audit.groupby("ladder", sort=False):
        parts.append(el("h3", f"Ladder {ladder}"))
        rec = sel(sub, period=record_period(sub))
        med = rec.groupby("stage", observed=True)["observed_share"].median()
        alt_stages = "; ".join(
            f"{st}: expected {fmt_num(rec[rec['stage'] == st]['expected_share'].median(), 3)}, "
            f"median observed {fmt_num(v, 3)}" for st, v in med.items())
        parts.append(figs.add(
            f"audit_{ladder}",
            lambda s=sub, lad=ladder: audit_shares(s, ladder=lad),
            alt=(f"Threshold audit for ladder {ladder}: observed over expected share of weeks "
                 f"per county and stage, and early versus late period. {alt_stages}.")))
        parts.append(table(_audit_summary(sub), caption="Summary over counties (medians)"))
        if shapes is not None and "ratio" in rec.columns:
            unit = "percentile" if "percentile" in str(ladder) or (
                pd.to_numeric(rec.get("threshold"), errors="coerce").abs().max() > 5) else "index value"
            maps = []
            # One map per ladder, for its first (most often reached, so best measured)
            # stage; every stage is in the county cards and the per-county table.
            for stage, st in list(rec.groupby("stage", sort=False))[:1]:
                extra = {}
                if "local_threshold" in st.columns:
                    extra = {str(c): f"threshold {fmt_num(t)} {unit}, local threshold "
                                     f"{fmt_num(lt)} {unit}"
                             for c, t, lt in zip(st[COUNTY], st["threshold"],
                                                 st["local_threshold"], strict=True)}
                maps.append(svg_map(
                    shapes, st, "ratio", title=f"Stage {str(stage).replace('_', ' ')}",
                    unit="observed / expected (1 = as defined)", vmin=0.0, vmax=ratio_top,
                    extra=extra,
                    caption=(f"Ladder {ladder}, stage {stage}: how often the stage was reached "
                             "against how often its definition implies, per county (same scale "
                             "on every audit map); hover for the local threshold.")))
            parts.append(el("div", *maps, class_="maprow"))
        cols = [c for c in (COUNTY, "stage", "period", "threshold", "expected_share",
                            "observed_share", "ratio", "ratio_lo", "ratio_hi", "local_threshold",
                            "local_threshold_lo", "local_threshold_hi", "weeks") if c in sub.columns]
        parts.append(details("Per-county audit", table(with_names(run, sub[cols]))))
    parts.append(data_files(run, "audit"))
    return section("audit", "Threshold audit", *parts)


def _audit_summary(sub: pd.DataFrame) -> pd.DataFrame:
    agg = {"expected_share": "median", "observed_share": "median"}
    for col in ("ratio", "local_threshold", "threshold"):
        if col in sub.columns:
            agg[col] = "median"
    out = sub.groupby(["stage", "period"], observed=True, sort=False).agg(agg)
    if {"ratio_lo", "ratio_hi"} <= set(sub.columns):
        g = sub.groupby(["stage", "period"], observed=True, sort=False)
        out["counties_more_often"] = g["ratio_lo"].apply(lambda s: int((s > 1).sum()))
        out["counties_less_often"] = g["ratio_hi"].apply(lambda s: int((s < 1).sum()))
    return out.reset_index()
