"""Trigger section: the committee's plan replayed, scored, tuned and mapped; then, briefly,
the older single-index check.

Reads ``trigger_plan_memo / scores / tuning / tuned / timeline / uniform_local.csv`` (see
:mod:`impactlink.triggers.plan_run`, :mod:`~impactlink.triggers.plan_scores`,
:mod:`~impactlink.triggers.plan_tune`) and ``triggers.csv`` / ``trigger_timeline.csv``.
Every sentence comes from :mod:`impactlink.report.words_triggers` or
:mod:`impactlink.report.words_plan`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.report import maps as M
from impactlink.report import words_triggers as W
from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    name_map,
    section,
    sel,
    with_names,
)
from impactlink.report.figures_plan import plan_timeline, tuning_tradeoff
from impactlink.report.figures_triggers import trigger_timeline
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.words_plan import memo_sentence
from impactlink.schema import COUNTY

TITLE = "Trigger plan replay and tuning"

_PLAN_TABLES = ("trigger_plan_memo", "trigger_plan_scores", "trigger_plan_tuning",
                "trigger_plan_tuned", "trigger_plan_timeline", "trigger_plan_uniform_local")

#: Columns of the stage score table, in reading order (one name per quantity).
_SCORE_SHOWN = ("stage_name", "hits", "false_alarms", "misses", "correct_negatives",
                "hit_rate", "false_alarm_ratio", "false_alarm_rate", "peirce_skill_score",
                "heidke_skill_score", "onsets", "onsets_matched", "entries",
                "entries_without_impact", "flip_flops", "weeks_in_stage_share",
                "lead_weeks_median", "exit_minus_recovery_weeks_median")

_COUNTS = ("hits", "false_alarms", "misses", "correct_negatives")


def triggers_section(run: RunFolder, figs: FigureSink) -> Markup:
    """The trigger section of the report (plan replay first, single-index check after)."""
    trig = run.table("triggers")
    timeline = run.table("trigger_timeline")
    has_plan = any(run.table(n) is not None for n in _PLAN_TABLES)
    if not has_plan and trig is None and timeline is None:
        return section("triggers", TITLE, absent())
    parts: list[Markup] = []
    if has_plan:
        parts.extend(_plan_part(run, figs))
        old = _single_index(run, figs, trig, timeline, short=True)
        if old:
            parts.append(details(W.OLD_AUDIT_HEAD, paragraph(W.OLD_AUDIT_NOTE), *old))
    else:
        parts.append(paragraph(W.OLD_INTRO))
        parts.extend(_single_index(run, figs, trig, timeline, short=False))
    parts.append(paragraph(W.CAUTION, class_="caution"))
    parts.append(data_files(run, *_PLAN_TABLES, "trigger_plan_leads", "trigger_plan_decades",
                            "trigger_plan_tuning_folds", "trigger_plan_replay",
                            "trigger_plan_changes", "triggers", "trigger_timeline"))
    return section("triggers", TITLE, *parts)


# ----------------------------------------------------------------------------- the plan

def _stage_names(run: RunFolder) -> list[str]:
    for name in ("trigger_plan_memo", "trigger_plan_scores", "trigger_plan_decades"):
        frame = run.table(name)
        if frame is not None and {"stage", "stage_name"} <= set(frame.columns):
            st = frame[["stage", "stage_name"]].dropna().drop_duplicates("stage")
            st = st[pd.to_numeric(st["stage"], errors="coerce") > 0]
            return [str(s) for s in st.sort_values("stage")["stage_name"]]
    return []


def _unit_label(names: dict[str, str], unit) -> str:
    uid = str(unit)
    return f"{names[uid]} ({uid})" if uid in names else uid


def _plan_part(run: RunFolder, figs: FigureSink) -> list[Markup]:
    memo = run.table("trigger_plan_memo")
    scores = run.table("trigger_plan_scores")
    impact = str(memo["impact"].iloc[0]) if memo is not None and len(memo) else "impact"
    out = [el("h3", W.PLAN_TITLE), paragraph(W.PLAN_INTRO), paragraph(W.SKILL_WORDS)]
    ul = run.table("trigger_plan_uniform_local")
    n_units = _n_units(run, ul)
    if memo is not None and len(memo) and "exposed_units" in memo.columns:
        out.append(paragraph(W.exposure_sentence(memo["exposed_units"].iloc[0], n_units,
                                                 impact)))
    if memo is not None and len(memo):
        out.append(el("h4", W.MEMO_HEAD))
        out.append(el("ul", *[el("li", memo_sentence(r)) for _, r in memo.iterrows()],
                      class_="memo"))
    if scores is not None and len(scores):
        allrows = sel(scores, by="all") if "by" in scores.columns else scores
        cols = [c for c in _SCORE_SHOWN if c in allrows.columns]
        out.append(table(allrows[cols], caption=W.SCORES_CAPTION))
        other = scores[scores["by"].astype(str) != "all"] if "by" in scores.columns else None
        if other is not None and len(other):
            cols = ["by", "group"] + [c for c in _SCORE_SHOWN if c in other.columns]
            out.append(details(W.BY_GROUP_HEAD, table(other[cols])))
    decades = run.table("trigger_plan_decades")
    if decades is not None and {"decade", "stage_name", "weeks_share"} <= set(decades.columns):
        wide = decades.pivot_table(index="decade", columns="stage_name", values="weeks_share",
                                   sort=False).reset_index()
        out.append(details(W.DECADES_HEAD, table(wide)))
    out.extend(_tuning(run, figs))
    out.extend(_timelines(run, figs))
    out.extend(_uniform_local(run, figs, ul, impact))
    return out


def _n_units(run: RunFolder, ul: pd.DataFrame | None):
    if ul is not None:
        key = COUNTY if COUNTY in ul.columns else "unit"
        if key in ul.columns:
            return int((ul[key].astype(str) != "all").groupby(ul["plan"]).sum().max())
    return None if run.counties is None else len(run.counties)


def _tuning(run: RunFolder, figs: FigureSink) -> list[Markup]:
    curve = run.table("trigger_plan_tuning")
    tuned = run.table("trigger_plan_tuned")
    out: list[Markup] = []
    if curve is None and tuned is None:
        return out
    out.append(el("h4", W.TUNED_HEAD))
    if curve is not None and len(curve):
        c = curve.assign(chosen=curve["chosen"].astype(str).str.lower().isin(("true", "1")))
        out.append(figs.add("trigger_plan_tradeoff", lambda: tuning_tradeoff(c),
                            alt=W.tradeoff_alt(c)))
    if tuned is not None and len(tuned):
        out.append(paragraph(W.tuned_sentence(tuned)))
        shown = tuned.assign(what=tuned["quantity"].astype(str).map(W.QUANTITY_LABELS)
                             .fillna(tuned["quantity"].astype(str)))
        cols = [c for c in ("quantity", "what", "estimate", "lo", "hi", "held_out", "ci",
                            "n_boot") if c in shown.columns]
        out.append(table(shown[cols]))
    return out


def _timelines(run: RunFolder, figs: FigureSink) -> list[Markup]:
    tl = run.table("trigger_plan_timeline")
    if tl is None or tl.empty or "unit" not in tl.columns:
        return []
    names = name_map(run)
    stages = _stage_names(run)
    tl = tl.assign(unit=tl["unit"].astype(str))
    out = [el("h4", W.TIMELINES_HEAD)]
    for unit in list(dict.fromkeys(tl["unit"]))[:2]:
        label = _unit_label(names, unit)
        inds = [str(i) for i in dict.fromkeys(tl.loc[tl["unit"] == unit, "indicator"])]
        out.append(figs.add(
            f"trigger_plan_timeline_{unit}",
            lambda u=unit, t=label: plan_timeline(tl, unit=u, stage_names=stages, title=t),
            alt=W.timeline_alt(label, inds, stages)))
    return out


def _uniform_local(run: RunFolder, figs: FigureSink, ul: pd.DataFrame | None,
                   impact: str) -> list[Markup]:
    if ul is None or ul.empty or "plan" not in ul.columns:
        return []
    key = COUNTY if COUNTY in ul.columns else "unit"
    ul = ul.assign(**{key: ul[key].astype(str)})
    pooled = ul[ul[key] == "all"]
    per = ul[ul[key] != "all"].copy()
    column = "entries_per_decade" if "entries_per_decade" in per.columns else \
        "weeks_in_stage_share"
    out = [el("h4", W.MAP_HEAD)]
    if len(pooled):
        out.append(paragraph(W.uniform_local_sentence(pooled, column, per)))
    pct = per["percentile"].dropna().iloc[0] if "percentile" in per.columns and \
        per["percentile"].notna().any() else None
    titles = W.map_panel_titles(pct)
    label = "entries per decade" if column == "entries_per_decade" else "share of weeks in stage"
    if run.counties is not None and key == COUNTY:
        vals = pd.to_numeric(per[column], errors="coerce")
        lo, hi = 0.0, float(np.nanmax(vals)) if vals.notna().any() else 1.0
        panels = [M.MapPanel(sel(per, plan=p).assign(**{column: pd.to_numeric(
                      sel(per, plan=p)[column], errors="coerce")}), column, title=t,
                      label=label, vmin=lo, vmax=hi)
                  for p, t in zip(("uniform", "local"), titles, strict=True)]
        out.append(figs.add("trigger_plan_uniform_local",
                            lambda: M.county_panels(run.counties, panels),
                            alt=W.uniform_local_alt(titles, label, lo, hi)))
    out.append(details(W.PER_COUNTY_PLAN, table(_scored_view(run, per, key, impact))))
    return out


def _scored_view(run: RunFolder, per: pd.DataFrame, key: str, impact: str) -> pd.DataFrame:
    """Per-unit rows with the 2x2 counts and scores blanked where nothing could be recorded
    (a county without water systems is not scored for restrictions: no false alarms)."""
    counts = [c for c in _COUNTS if c in per.columns]
    shown = per.copy()
    if counts:
        n = shown[counts].apply(pd.to_numeric, errors="coerce").fillna(0).sum(axis=1)
        unscored = (n == 0).to_numpy()
        scored_cols = counts + [c for c in ("hit_rate", "false_alarm_ratio",
                                            "peirce_skill_score") if c in shown.columns]
        shown[scored_cols] = shown[scored_cols].astype(object)
        shown.loc[unscored, scored_cols] = ""
        shown.insert(0, "scored", np.where(unscored, W.not_scored_label(impact), "yes"))
    shown = with_names(run, shown) if key == COUNTY else shown
    lead = [c for c in (COUNTY, "county_name", "region", "plan", "scored") if c in shown]
    return shown[lead + [c for c in shown.columns if c not in lead]]


# ------------------------------------------------------------------ single-index check

def _single_index(run: RunFolder, figs: FigureSink, trig, timeline, *,
                  short: bool) -> list[Markup]:
    """The one-index audit of ``triggers.csv``: in full without a plan, pooled rows only
    (inside a collapsed block) when the plan replay supersedes it."""
    parts: list[Markup] = []
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
                parts.append(table(pooled[cols], caption=W.POOLED_CAPTION))
                parts.append(paragraph(W.trigger_comparison_sentence(pooled)))
            if short:
                continue
            per = sub[(sub[COUNTY] != "all").fillna(True).to_numpy(bool)] if COUNTY in sub else sub
            parts.extend(_single_map(run, figs, per, key, label))
            parts.append(details(W.PER_COUNTY_OLD, table(with_names(run, per))))
    if not short and timeline is not None and not timeline.empty:
        parts.append(el("h3", W.OLD_TIMELINES_HEAD))
        targets = (list(dict.fromkeys(timeline["target"].astype(str)))
                   if "target" in timeline.columns else [None])
        for tgt in targets:
            sub = sel(timeline, target=tgt) if tgt is not None else timeline
            counties = ", ".join(dict.fromkeys(sub[COUNTY].astype(str)))
            parts.append(figs.add(
                f"trigger_timeline_{tgt or 'all'}",
                lambda t=tgt: trigger_timeline(timeline, target=t, county_names=name_map(run)),
                alt=W.single_timeline_alt(tgt, counties)))
    return parts


def _single_map(run: RunFolder, figs: FigureSink, per: pd.DataFrame, key, label) -> list[Markup]:
    if run.counties is None or not {"scope", "threshold", COUNTY} <= set(per.columns):
        return []
    uni, loc = sel(per, scope="uniform"), sel(per, scope="local")
    thr = pd.to_numeric(per["threshold"], errors="coerce")
    if uni.empty or loc.empty or not thr.notna().any():
        return []
    lo, hi = float(thr.min()), float(thr.max())
    panels = [M.MapPanel(uni, "threshold", title="uniform threshold", label="index value",
                         vmin=lo, vmax=hi),
              M.MapPanel(loc, "threshold", title="local threshold", label="index value",
                         vmin=lo, vmax=hi)]
    return [figs.add(
        f"trigger_map_{'_'.join(map(str, key))}",
        lambda: M.county_panels(run.counties, panels, suptitle=label),
        alt=W.single_map_alt(label, lo, hi))]
