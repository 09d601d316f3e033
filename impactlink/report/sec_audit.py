"""Threshold audit section: does each stage of a ladder occur as often as defined?
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.report import maps as M
from impactlink.report.common import FigureSink, absent, data_files, section, sel, with_names
from impactlink.report.figures_audit import audit_shares, record_period
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import fmt_num
from impactlink.report.words_sections import AUDIT_INTRO
from impactlink.schema import COUNTY


def audit_section(run: RunFolder, figs: FigureSink) -> Markup:
    audit = run.table("audit")
    if audit is None or audit.empty:
        return section("audit", "Threshold audit", absent())
    parts = [paragraph(
        AUDIT_INTRO)]
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
        if run.counties is not None and "local_threshold" in rec.columns:
            for stage, st in rec.groupby("stage", sort=False):
                thr = pd.to_numeric(st.get("threshold"), errors="coerce")
                uniform = float(thr.median()) if thr is not None and thr.notna().any() else None
                loc = pd.to_numeric(st["local_threshold"], errors="coerce")
                lo = np.nanmin([loc.min(), uniform if uniform is not None else np.nan])
                hi = np.nanmax([loc.max(), uniform if uniform is not None else np.nan])
                panels = []
                if uniform is not None:
                    panels.append(M.MapPanel(st.assign(_u=uniform), "_u",
                                             title=f"uniform threshold {fmt_num(uniform)}",
                                             label="index value", vmin=lo, vmax=hi))
                panels.append(M.MapPanel(st, "local_threshold", title="local threshold",
                                         label="index value", vmin=lo, vmax=hi))
                if "ratio" in st.columns:
                    panels.append(M.MapPanel(st, "ratio", title="observed / expected",
                                             label="ratio (1 = as defined)"))
                parts.append(figs.add(
                    f"audit_map_{ladder}_{stage}",
                    lambda p=panels, t=f"{ladder} \u2014 {stage}": M.county_panels(
                        run.counties, p, suptitle=t),
                    alt=(f"County maps for stage {stage} of ladder {ladder}: the uniform "
                         f"threshold {fmt_num(uniform)} beside the local threshold per county "
                         f"(from {fmt_num(loc.min())} to {fmt_num(loc.max())}) and the "
                         "observed over expected ratio.")))
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
