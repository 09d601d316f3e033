"""Trigger plan section: replay and tuning of uniform and local thresholds.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report import maps as M
from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    name_map,
    section,
    sel,
    with_names,
)
from impactlink.report.figures_triggers import trigger_timeline
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import fmt_num
from impactlink.report.words_sections import TRIGGERS_INTRO
from impactlink.report.words_triggers import trigger_comparison_sentence
from impactlink.schema import COUNTY


def triggers_section(run: RunFolder, figs: FigureSink) -> Markup:
    trig = run.table("triggers")
    timeline = run.table("trigger_timeline")
    title = "Trigger plan replay and tuning"
    if trig is None and timeline is None:
        return section("triggers", title, absent())
    parts = [paragraph(
        TRIGGERS_INTRO)]
    if trig is not None and not trig.empty:
        keys = [k for k in ("impact", "target") if k in trig.columns]
        groups = trig.groupby(keys, sort=False) if keys else [((), trig)]
        for key, sub in groups:
            key = key if isinstance(key, tuple) else (key,)
            label = " \u2014 ".join(str(k) for k in key) or "trigger plans"
            parts.append(el("h3", label))
            pooled = sel(sub, county_id="all") if COUNTY in sub.columns else sub
            cols = [c for c in ("scope", "index", "scale_weeks", "threshold", "entry_weeks",
                                "exit_weeks", "activations", "hit_rate", "false_alarm_ratio",
                                "peirce_skill", "cv_peirce_skill", "lead_weeks_median",
                                "events") if c in pooled.columns]
            if not pooled.empty:
                parts.append(table(pooled[cols], caption="All counties together"))
                parts.append(paragraph(trigger_comparison_sentence(pooled)))
            per = sub[(sub[COUNTY] != "all").fillna(True).to_numpy(bool)] if COUNTY in sub else sub
            if run.counties is not None and {"scope", "threshold", COUNTY} <= set(per.columns):
                uni = sel(per, scope="uniform")
                loc = sel(per, scope="local")
                thr = pd.to_numeric(per["threshold"], errors="coerce")
                if not uni.empty and not loc.empty and thr.notna().any():
                    lo, hi = float(thr.min()), float(thr.max())
                    panels = [M.MapPanel(uni, "threshold", title="uniform threshold",
                                         label="index value", vmin=lo, vmax=hi),
                              M.MapPanel(loc, "threshold", title="local threshold",
                                         label="index value", vmin=lo, vmax=hi)]
                    if "peirce_skill" in loc.columns:
                        panels.append(M.MapPanel(loc, "peirce_skill", title="local plan skill",
                                                 label="Peirce skill score"))
                    parts.append(figs.add(
                        f"trigger_map_{'_'.join(map(str, key))}",
                        lambda p=panels, t=label: M.county_panels(run.counties, p, suptitle=t),
                        alt=(f"County maps for {label}: the uniform trigger threshold beside "
                             f"the locally tuned threshold per county (from {fmt_num(lo)} to "
                             f"{fmt_num(hi)}) and the local plan's Peirce skill score.")))
            parts.append(details("Per-county plans", table(with_names(run, per))))
    if timeline is not None and not timeline.empty:
        parts.append(el("h3", "Replay timelines"))
        targets = (list(dict.fromkeys(timeline["target"].astype(str)))
                   if "target" in timeline.columns else [None])
        for tgt in targets:
            sub = sel(timeline, target=tgt) if tgt is not None else timeline
            counties = ", ".join(dict.fromkeys(sub[COUNTY].astype(str)))
            parts.append(figs.add(
                f"trigger_timeline_{tgt or 'all'}",
                lambda t=tgt: trigger_timeline(timeline, target=t,
                                                 county_names=name_map(run)),
                alt=(f"Timelines of the trigger replay{' for ' + tgt if tgt else ''} in "
                     f"counties {counties}: weekly index value over the last 20 years, the "
                     "uniform and local thresholds, weeks each plan was on, and weeks with a "
                     "recorded impact.")))
    parts.append(data_files(run, "triggers", "trigger_timeline"))
    return section("triggers", title, *parts)
