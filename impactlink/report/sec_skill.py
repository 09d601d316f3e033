"""Skill stage sections: skill by candidate, persistence, reliability and county maps of
the best candidate.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report._select import PERSISTENCE_COMBOS, single_candidates
from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    impact_of,
    impact_target_pairs,
    pair_title,
    primary_pairs,
    score_for,
    section,
    sel,
    with_names,
)
from impactlink.report.figures_skill import (
    candidate_intervals,
    persistence_comparison,
    persistence_picks,
    reliability_diagram,
    skill_heatmap,
)
from impactlink.report.html import Markup, details, el, join, link, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.svgmap import map_shapes, svg_map
from impactlink.report.text import (
    fmt_interval,
    fmt_num,
    impact_name,
    index_name,
    persistence_sentence,
    row_label,
    score_label,
    target_name,
)
from impactlink.report.words_sections import (
    MAPS_INTRO,
    PERSISTENCE_INTRO,
    RELIABILITY_INTRO,
    SKILL_INTRO,
)
from impactlink.schema import COUNTY


def persistence_section(run: RunFolder, figs: FigureSink) -> Markup:
    """Warning beyond persistence: the index alone, persistence alone and both together."""
    part = _persistence_part(run, figs)
    return section("persistence", "Warning beyond persistence",
                   part if part else absent("No persistence comparison in this run."))


def skill_detail_section(run: RunFolder, figs: FigureSink) -> Markup:
    """Appendix: heat maps of every candidate's skill, for the primary targets."""
    return skill_section(run, figs, detail=True)


def skill_section(run: RunFolder, figs: FigureSink, *, detail: bool = False) -> Markup:
    sid, stitle = (("skill_detail", "Skill of every candidate") if detail
                   else ("skill", "Skill by index, time scale and lag"))
    skill = run.table("skill")
    if skill is None or skill.empty:
        return section(sid, stitle, absent())
    parts = [paragraph(
        SKILL_INTRO)]
    for impact, target in primary_pairs(run, impact_target_pairs(skill)):
        score = score_for(run, impact, target)
        if score not in skill.columns:
            continue
        sub = sel(skill, impact=impact, target=target)
        cand = single_candidates(sub).dropna(subset=[score])
        if cand.empty:
            continue
        best = cand.loc[cand[score].idxmax()]
        parts.append(el("h3", pair_title(impact, target)))
        label = row_label(best, short=False)
        if detail:
            parts.append(figs.add(
                f"skill_{impact}_{target}",
                lambda s=sub, i=impact, t=target, sc=score: skill_heatmap(
                    s, impact=i, target=t, score=sc),
                alt=(f"Heat maps of {score_label(score)} for {impact}, {target}, by time scale "
                     f"({_axes(cand)}), one panel per index "
                     f"({', '.join(index_name(i) for i in sorted(cand['index'].unique()))}). "
                     f"Best: {label}, score {fmt_num(best[score])}."),
                caption=(f"{score_label(score).capitalize()} of every candidate for "
                         f"{pair_title(impact, target)}, by time scale and "
                         f"{'window end' if 'window' in _axes(cand) else 'lag'}.")))
            continue
        if {f"{score}_lo", f"{score}_hi"} <= set(sub.columns):
            parts.append(figs.add(
                f"candidates_{impact}_{target}",
                lambda s=sub, i=impact, t=target, sc=score: candidate_intervals(
                    s, impact=i, target=t, score=sc),
                alt=(f"Dot-and-interval chart of the ten best candidates for {impact}, "
                     f"{target}, with seasonal and persistence baselines as vertical lines. "
                     f"Best: {label}, {fmt_interval(best[score], best[f'{score}_lo'], best[f'{score}_hi'])}.")))
    parts.append(data_files(run, "skill", "skill_summary"))
    return section(sid, stitle, *parts)


def _persistence_part(run: RunFolder, figs: FigureSink) -> Markup:
    skill = run.table("skill")
    if skill is None:
        return Markup("")
    combo = skill["model"].isin(PERSISTENCE_COMBOS).fillna(False).to_numpy(bool)
    impacts = list(dict.fromkeys(skill.loc[combo, "impact"].astype(str)))
    if not impacts:
        return Markup("")
    parts = [paragraph(PERSISTENCE_INTRO)]
    summary = run.table("skill_summary")
    for impact in impacts:
        targets = list(dict.fromkeys(sel(skill, impact=impact)["target"].astype(str)))
        score = score_for(run, impact, targets[0])
        if not {score, f"{score}_lo", f"{score}_hi"} <= set(skill.columns):
            continue
        rows = []
        for tgt in targets:
            g = sel(skill, impact=impact, target=tgt)
            lag, picks = persistence_picks(g, score)
            labels = ("index alone", "persistence alone", "index + persistence")
            for label, r in zip(labels, picks, strict=True):
                if r is None:
                    continue
                what = row_label(r) if pd.notna(r["index"]) else ""
                rows.append({"target": target_name(impact, tgt),
                             "lag_weeks": lag if lag is not None else r.get("lag_weeks"),
                             "model": label, "candidate": what,
                             score_label(score): fmt_interval(r[score], r[f"{score}_lo"],
                                                              r[f"{score}_hi"])})
        parts.append(figs.add(
            f"persistence_{impact}",
            lambda i=impact, sc=score: persistence_comparison(skill, impact=i, score=sc),
            alt=(f"Dot-and-interval chart for {impact_name(impact)}: {score_label(score)} of the "
                 "index alone, persistence alone and index plus persistence, for "
                 f"{'; '.join(target_name(impact, t) for t in targets)}."),
            caption=(f"{impact_name(impact)}: the index alone, persistence alone and both "
                     "together, with intervals.")))
        parts.append(table(pd.DataFrame(rows),
                           caption=f"{impact_name(impact)}: with and without persistence"))
        if summary is not None:
            sentences = [persistence_sentence(r)
                         for _, r in sel(summary, impact=impact).iterrows()]
            parts.append(el("ul", *[el("li", s) for s in sentences if s]))
    return join(parts)


def reliability_section(run: RunFolder, figs: FigureSink) -> Markup:
    rel = run.table("reliability")
    if rel is None or rel.empty:
        return section("reliability", "Reliability", absent())
    parts = [paragraph(RELIABILITY_INTRO)]
    if "impact" not in rel.columns:
        rel = rel.assign(impact=rel["target"].map(impact_of(run)).fillna(""))
    if "model" not in rel.columns:
        rel = rel.assign(model="best candidate")
    for impact, target in primary_pairs(run, impact_target_pairs(rel)):
        sub = sel(rel, impact=impact, target=target)
        models = ", ".join(dict.fromkeys(sub["model"].astype(str)))
        parts.append(el("h3", pair_title(impact, target)))
        parts.append(figs.add(
            f"reliability_{impact}_{target}",
            lambda s=sub, i=impact, t=target: reliability_diagram(s, impact=i, target=t),
            alt=(f"Reliability diagram for {impact}, {target}: observed frequency (0 to 1) "
                 f"against forecast chance (0 to 1) for models {models}, with forecast counts "
                 "per bin below.")))
    parts.append(data_files(run, "reliability"))
    return section("reliability", "Reliability", *parts)


def maps_section(run: RunFolder, figs: FigureSink) -> Markup:
    best = best_per_county(run)
    if run.counties is None or best is None or len(best) == 0:
        return section("maps", "County maps", absent())
    parts = [paragraph(MAPS_INTRO)]
    shapes = map_shapes(run.counties)
    keys = ["impact", "target"] if "target" in best.columns else ["impact"]
    # One colour scale for skill across every panel (0 to the highest county skill).
    top = float(pd.to_numeric(best.get("skill"), errors="coerce").max()) if "skill" in best else 1.0
    top = max(top if top == top else 1.0, 0.05)
    for key, sub in best.groupby(keys, sort=False):
        key = key if isinstance(key, tuple) else (key,)
        if len(key) == 2 and not primary_pairs(run, [(str(key[0]), str(key[1]))]):
            continue  # derived targets: numbers in skill_local.csv and the county cards
        title = pair_title(*key) if len(key) == 2 else impact_name(key[0])
        sub = sub.assign(candidate=[
            row_label(r) for _, r in sub.iterrows()], index_shown=sub["index"].map(index_name))
        events = sub["events"] if "events" in sub.columns else pd.Series(pd.NA, index=sub.index)
        extra = {str(c): f"{cand}" + (f", {int(e)} cases" if pd.notna(e) else "")
                 for c, cand, e in zip(sub[COUNTY], sub["candidate"], events, strict=True)}
        parts.append(el("h3", title))
        row = [svg_map(shapes, sub, "index_shown", title="Best index in each county",
                       unit="", kind="categorical", extra=extra,
                       caption=f"{title}: the index of the candidate that scored best in each "
                               f"county ({sub['candidate'].nunique()} different candidates; "
                               "hover a county for its time scale and lead).")]
        if "skill" in sub.columns:
            row.append(svg_map(shapes, sub, "skill", title="Skill in each county",
                               unit="skill score (0 = base rate)", vmin=0.0, vmax=top,
                               extra=extra,
                               caption=f"{title}: skill score of that candidate in each county "
                                       "(same colour scale on every skill map; negative "
                                       "values shown as 0)."))
        parts.append(el("div", *row, class_="maprow"))
        cols = [c for c in ("county_id", "candidate", "skill", "events") if c in sub.columns]
        parts.append(details("Per-county values", table(with_names(run, sub[cols]))))
    parts.append(paragraph("Layers for GIS use are in ", link("counties.gpkg", "counties.gpkg"),
                           ".", class_="files"))
    parts.append(data_files(run, "skill_local"))
    return section("maps", "County maps", *parts)


def best_per_county(run: RunFolder) -> pd.DataFrame | None:
    """Best candidate per county: the ``best_candidate`` layer, else the county rows
    (``level == "unit"``) of ``skill_local.csv``."""
    layer = run.layers.get("best_candidate")
    if layer is not None and len(layer):
        return _with_skill(pd.DataFrame(layer.drop(columns="geometry", errors="ignore")))
    local = run.table("skill_local")
    if local is None or local.empty:
        return None
    if "level" in local.columns:
        local = local[(local["level"] == "unit").fillna(False).to_numpy(bool)]
    out = _with_skill(local.rename(columns={"unit": COUNTY}))
    if "impact" not in out.columns:
        out = out.assign(impact=out["target"].map(impact_of(run)).fillna(""))
    return out


def _with_skill(frame: pd.DataFrame) -> pd.DataFrame:
    """Name the county's score column ``skill`` (from ``rpss`` or ``bss``)."""
    if "skill" not in frame.columns:
        for score in ("rpss", "bss"):
            if score in frame.columns:
                return frame.assign(skill=frame[score])
    return frame


def _axes(cand: pd.DataFrame) -> str:
    """The heat map's axes in words: months for monthly input, window ends for seasonal
    targets (as :func:`impactlink.report.figures_skill.skill_heatmap` draws them)."""
    monthly = "scale_months" in cand.columns and cand["scale_months"].notna().any()
    seasonal = "end_week" in cand.columns and cand["end_week"].notna().any()
    rows = "months" if monthly else "weeks"
    cols = "where the window ends, columns" if seasonal else "lag in weeks, columns"
    return f"{rows}, rows; {cols}"

