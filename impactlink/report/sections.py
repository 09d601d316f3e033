"""The sections of the report, each built from a :class:`RunFolder`.

Every section is a function ``(run, figs) -> Markup``. A section whose inputs are missing
says so in one line; a figure that cannot be drawn from the data at hand is replaced by a
note (and a :class:`ReportWarning`), so one odd table never stops the page.
"""

from __future__ import annotations

import json
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.report import figures as F
from impactlink.report import maps as M
from impactlink.report.html import Markup, details, el, image, join, link, paragraph, table
from impactlink.report.runfolder import ReportWarning, RunFolder
from impactlink.report.text import (
    CAUTIONS,
    CAUTIONS_SHORT,
    answer_card,
    candidate_label,
    fmt_interval,
    fmt_num,
    index_name,
    score_label,
    target_label,
)
from impactlink.schema import COUNTY

__all__ = ["FigureSink", "SECTIONS", "cautions_banner", "answer_cards", "contents", "not_drawn",
           "REFERENCES"]

NOT_COMPUTED = "Not computed in this run."


@dataclass
class FigureSink:
    """Renders figures to PNG, keeps them for writing to ``figures/`` and embeds them.

    Attributes
    ----------
    files : dict
        File name -> PNG bytes of every figure drawn so far.
    alts : dict
        File name -> alt text.
    """

    files: dict[str, bytes] = field(default_factory=dict)
    alts: dict[str, str] = field(default_factory=dict)

    def add(self, name: str, draw, *, alt: str, caption: str | None = None) -> Markup:
        """Draw a figure (``draw()`` returns a Figure) and return its embedded image.

        Any error from ``draw`` becomes a short note in the page and a warning.
        """
        try:
            fig = draw()
        except (F.ReportError, ValueError, KeyError, TypeError, IndexError) as exc:
            message = f"Figure {name!r} could not be drawn: {exc}"
            warnings.warn(message, ReportWarning, stacklevel=2)
            return paragraph(message, class_="absent")
        png = F.figure_png(fig)
        file = _slug(name) + ".png"
        self.files[file] = png
        self.alts[file] = alt
        return image(png, alt=alt, caption=caption, name=file)


def _slug(text: str) -> str:
    keep = "".join(ch if ch.isalnum() else "_" for ch in str(text).lower())
    return "_".join(part for part in keep.split("_") if part)[:80] or "figure"


def _title(impact, target) -> str:
    return f"{impact} \u2014 {target_label(impact, target)}"


def _absent(what: str = NOT_COMPUTED) -> Markup:
    return paragraph(what, class_="absent")


def _section(sid: str, title: str, *content) -> Markup:
    return el("section", el("h2", title), *content, id=sid)


def _files(run: RunFolder, *names: str) -> Markup:
    present = []
    for name in names:
        for ext in (".csv", ".parquet", ".gpkg", ".json"):
            if (run.path / f"{name}{ext}").exists():
                present.append(link(f"{name}{ext}", f"{name}{ext}"))
    if not present:
        return Markup("")
    return el("p", "Numbers behind this section: ", join(present, ", "), class_="files")


def _sel(frame: pd.DataFrame, **equal) -> pd.DataFrame:
    mask = np.ones(len(frame), dtype=bool)
    for col, value in equal.items():
        mask &= (frame[col] == value).fillna(False).to_numpy(dtype=bool)
    return frame.loc[mask]


def _pairs(frame: pd.DataFrame) -> list[tuple[str, str]]:
    return list(dict.fromkeys(zip(frame["impact"].astype(str), frame["target"].astype(str),
                                  strict=True)))


def _score_for(run: RunFolder, impact: str, target: str) -> str:
    summary = run.table("skill_summary")
    if summary is not None and "score_name" in summary.columns:
        row = _sel(summary, impact=impact, target=target)
        if not row.empty and pd.notna(row["score_name"].iloc[0]):
            return str(row["score_name"].iloc[0])
    skill = run.table("skill")
    if skill is not None and "rpss" in skill.columns:
        if _sel(skill, impact=impact, target=target)["rpss"].notna().any():
            return "rpss"
    return "bss"


def _county_names(run: RunFolder) -> pd.DataFrame | None:
    if run.counties is None:
        return None
    cols = [c for c in (COUNTY, "county_name", "region") if c in run.counties.columns]
    return pd.DataFrame(run.counties[cols])


def _impact_of(run: RunFolder) -> dict[str, str]:
    """target -> impact, from whichever table names both."""
    for name in ("skill_summary", "skill", "curves"):
        frame = run.table(name)
        if frame is not None and {"impact", "target"} <= set(frame.columns):
            return dict(zip(frame["target"].astype(str), frame["impact"].astype(str),
                            strict=True))
    return {}


def _name_map(run: RunFolder) -> dict[str, str]:
    names = _county_names(run)
    if names is None or "county_name" not in names.columns:
        return {}
    return dict(zip(names[COUNTY].astype(str), names["county_name"].astype(str), strict=True))


def _with_names(run: RunFolder, frame: pd.DataFrame) -> pd.DataFrame:
    names = _county_names(run)
    if names is None or COUNTY not in frame.columns:
        return frame
    out = frame.merge(names, on=COUNTY, how="left")
    lead = [c for c in (COUNTY, "county_name", "region") if c in out.columns]
    return out[lead + [c for c in out.columns if c not in lead]]


# ---------------------------------------------------------------------- first screen
def cautions_banner() -> Markup:
    """The short cautions box shown on the first screen."""
    items = [el("li", el("strong", head + ": "), body) for head, body in CAUTIONS_SHORT]
    return el("aside", el("strong", "Read with care "), "(", link("#cautions", "full text"), ")",
              el("ul", *items), class_="cautions", aria_label="cautions")


def answer_cards(run: RunFolder, figs: FigureSink | None = None) -> Markup:
    """Per-impact answer cards: which index and time scale, how good, how sure."""
    summary = run.table("skill_summary")
    if summary is None or summary.empty:
        return _section("summary", "What this run found", _absent(
            "Not computed in this run: no skill summary was written, so no index can be "
            "recommended."))
    skill = run.table("skill")
    cards, glance = [], []
    for impact, rows in summary.groupby("impact", sort=False):
        if "role" in rows.columns:
            rows = rows.assign(_p=(rows["role"] != "primary").fillna(True)).sort_values(
                "_p", kind="stable")
        answers = [answer_card(r, skill) for _, r in rows.iterrows()]
        main, others = answers[0], answers[1:]
        glance.append(el("li", el("strong", f"{impact}: "), _glance(rows.iloc[0], main)))
        dl = el("dl",
                el("dt", "Best predictor"), el("dd", main.which),
                el("dt", "How good"), el("dd", main.how_good),
                el("dt", "Against baselines"), el("dd", main.baselines or "No baselines scored."),
                el("dt", "How sure"), el("dd", main.how_sure),
                el("dt", "Evidence"), el("dd", main.rests_on),
                *( [el("dt", "Beyond persistence"), el("dd", main.persistence)]
                   if main.persistence else []))
        extra = [el("li", el("strong", f"{target_label(a.impact, a.target)}: "), f"{a.which}. {a.verdict} "
                    f"{a.how_sure} {a.persistence}".strip()) for a in others]
        cards.append(el(
            "article",
            el("h3", _title(impact, main.target)),
            paragraph(main.verdict, class_="verdict"),
            dl,
            el("ul", *extra, class_="others") if extra else Markup(""),
            class_="card",
        ))
    return _section("summary", "What this run found",
                    el("ul", *glance, class_="glance", aria_label="at a glance"),
                    paragraph("Each card below gives, for one impact, the index, time scale and "
                              "lag that predicted it best out of sample, how much better than "
                              "the baselines, and how sure we can be.", class_="note"),
                    el("div", *cards, class_="cards"),
                    _files(run, "skill_summary"))


def _glance(row: pd.Series, answer) -> str:
    """One line per impact for the top of the page: best candidate, skill, verdict, events."""
    label = candidate_label(row.get("best_index"), row.get("best_scale_weeks"),
                            row.get("best_lag_weeks"), short=True)
    skill = fmt_interval(row.get("nested_skill"), row.get("nested_lo"), row.get("nested_hi"))
    events = row.get("events")
    tail = f", {int(events)} events" if pd.notna(events) else ""
    short = answer.verdict.split(":")[0].rstrip(".")
    return f"{label} \u2014 skill {skill}; {short[:1].lower() + short[1:]}{tail}."


def contents(entries: list[tuple[str, str]]) -> Markup:
    """Table of contents (hidden in print)."""
    return el("nav", el("ol", *[el("li", link(f"#{sid}", title)) for sid, title in entries]),
              aria_label="contents")


# ------------------------------------------------------------------------- data section
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
            parts.append(figs.add("record_timeline", lambda: F.record_timeline(inputs),
                                  alt=f"Bar chart of the record span of each input: {spans}."))
    else:
        parts.append(_absent("Inputs: not recorded in this run (no manifest.json)."))
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
        parts.append(_absent("No list of rejected rows in this run."))
    elif rej.empty:
        parts.append(paragraph("No input row was rejected."))
    else:
        counts = (rej.groupby(["table", "reason"], dropna=False).size()
                  .rename("rows").reset_index().sort_values("rows", ascending=False))
        parts.append(table(counts, caption="Why rows were rejected"))
        parts.append(details(f"First rows of {len(rej)} rejected", table(rej, max_rows=50)))
    names = _county_names(run)
    if names is not None:
        parts.append(el("h3", "Counties"))
        parts.append(details(f"{len(names)} counties in the study area", table(names)))
    if run.problems:
        parts.append(el("h3", "Files that could not be used"))
        parts.append(el("ul", *[el("li", p) for p in run.problems]))
    parts.append(_files(run, "reconciliation", "link_summary", "rejected_rows", "manifest"))
    return _section("data", "Data and coverage", *parts)


# ------------------------------------------------------------------------------ curves
def curves_section(run: RunFolder, figs: FigureSink) -> Markup:
    curves = run.table("curves")
    if curves is None or curves.empty:
        return _section("curves", "Impact curves", _absent())
    crossings = run.table("crossings")
    parts = [paragraph("How the chance of each impact level rises as the best index gets "
                       "drier. Shaded bands are intervals; crosses mark where a curve passes a "
                       "chance of 10, 25 or 50 %.")]
    for impact, target in _pairs(curves):
        sub = _sel(curves, impact=impact, target=target)
        first = sub.iloc[0]
        parts.append(el("h3", _title(impact, target)))
        cr = None
        if crossings is not None:
            cr = _sel(crossings, impact=impact, target=target)
        alt = (f"Impact curve for {impact}, {target}: chance of impact from 0 to 1 against "
               f"{candidate_label(first['index'], first['scale_weeks'], first.get('lag_weeks'))}"
               " values; the chance rises as the index gets drier.")
        if cr is not None and not cr.empty:
            mid = cr.sort_values("prob_level").iloc[len(cr) // 2]
            alt += (f" The curve for '{mid.get('level_label', '')}' passes "
                    f"{fmt_num(mid['prob_level'])} at index value {fmt_num(mid['x_cross'])}.")
        parts.append(figs.add(f"curve_{impact}_{target}",
                              lambda s=sub, c=cr, i=impact, t=target: F.impact_curves(
                                  s, c, impact=i, target=t), alt=alt))
        if cr is not None and not cr.empty:
            cols = [c for c in ("level_label", "prob_level", "x_cross", "x_lo", "x_hi")
                    if c in cr.columns]
            parts.append(table(cr[cols], caption="Index value at which each chance is reached"))
    parts.append(_files(run, "curves", "crossings"))
    return _section("curves", "Impact curves", *parts)


# ------------------------------------------------------------------------------- skill
def skill_section(run: RunFolder, figs: FigureSink) -> Markup:
    skill = run.table("skill")
    if skill is None or skill.empty:
        return _section("skill", "Skill by index, time scale and lag", _absent())
    parts = [paragraph(
        "Out-of-sample skill of every candidate, scored on years left out of the fit. Darker "
        "cells are better; hatched cells are no better than the climatological base rate; "
        "a dot marks candidates statistically as good as the best, and the framed cell is the "
        "best.")]
    for impact, target in _pairs(skill):
        score = _score_for(run, impact, target)
        if score not in skill.columns:
            continue
        sub = _sel(skill, impact=impact, target=target)
        cand = F._candidates(sub).dropna(subset=[score])
        if cand.empty:
            continue
        best = cand.loc[cand[score].idxmax()]
        parts.append(el("h3", _title(impact, target)))
        label = candidate_label(best["index"], best["scale_weeks"], best["lag_weeks"])
        parts.append(figs.add(
            f"skill_{impact}_{target}",
            lambda s=sub, i=impact, t=target, sc=score: F.skill_heatmap(
                s, impact=i, target=t, score=sc),
            alt=(f"Heat maps of {score_label(score)} for {impact}, {target}, by time scale "
                 f"(weeks, rows) and lag (weeks, columns), one panel per index "
                 f"({', '.join(index_name(i) for i in sorted(cand['index'].unique()))}). "
                 f"Best: {label}, score {fmt_num(best[score])}.")))
        if {f"{score}_lo", f"{score}_hi"} <= set(sub.columns):
            parts.append(figs.add(
                f"candidates_{impact}_{target}",
                lambda s=sub, i=impact, t=target, sc=score: F.candidate_intervals(
                    s, impact=i, target=t, score=sc),
                alt=(f"Dot-and-interval chart of the ten best candidates for {impact}, "
                     f"{target}, with seasonal and persistence baselines as vertical lines. "
                     f"Best: {label}, {fmt_interval(best[score], best[f'{score}_lo'], best[f'{score}_hi'])}.")))
    parts.append(_persistence_part(run, figs))
    parts.append(_files(run, "skill", "skill_summary"))
    return _section("skill", "Skill by index, time scale and lag", *parts)


def _persistence_part(run: RunFolder, figs: FigureSink) -> Markup:
    skill = run.table("skill")
    if skill is None:
        return Markup("")
    combo = skill["model"].isin(F.PERSISTENCE_COMBOS).fillna(False).to_numpy(bool)
    impacts = list(dict.fromkeys(skill.loc[combo, "impact"].astype(str)))
    if not impacts:
        return Markup("")
    parts = [el("h3", "Warning beyond persistence"),
             paragraph("Where an impact tends to continue once it has started, simply "
                       "assuming it continues (persistence) is a strong baseline. These "
                       "charts compare the index alone, persistence alone, and both together.")]
    summary = run.table("skill_summary")
    for impact in impacts:
        targets = list(dict.fromkeys(_sel(skill, impact=impact)["target"].astype(str)))
        score = _score_for(run, impact, targets[0])
        if not {score, f"{score}_lo", f"{score}_hi"} <= set(skill.columns):
            continue
        rows = []
        for tgt in targets:
            g = _sel(skill, impact=impact, target=tgt)
            lag, picks = F.persistence_picks(g, score)
            labels = ("index alone", "persistence alone", "index + persistence")
            for label, r in zip(labels, picks, strict=True):
                if r is None:
                    continue
                what = (candidate_label(r["index"], r["scale_weeks"], r["lag_weeks"], short=True)
                        if pd.notna(r["index"]) else "")
                rows.append({"target": target_label(impact, tgt),
                             "lag_weeks": lag if lag is not None else r.get("lag_weeks"),
                             "model": label, "candidate": what,
                             score_label(score): fmt_interval(r[score], r[f"{score}_lo"],
                                                              r[f"{score}_hi"])})
        parts.append(figs.add(
            f"persistence_{impact}",
            lambda i=impact, sc=score: F.persistence_comparison(skill, impact=i, score=sc),
            alt=(f"Dot-and-interval chart for {impact}: {score_label(score)} of the index alone, "
                 f"persistence alone and index plus persistence, for {', '.join(targets)}.")))
        parts.append(table(pd.DataFrame(rows), caption=f"{impact}: with and without persistence"))
        if summary is not None:
            sentences = [answer_card(r).persistence
                         for _, r in _sel(summary, impact=impact).iterrows()]
            parts.append(el("ul", *[el("li", s) for s in sentences if s]))
    return join(parts)


# ------------------------------------------------------------------------- reliability
def reliability_section(run: RunFolder, figs: FigureSink) -> Markup:
    rel = run.table("reliability")
    if rel is None or rel.empty:
        return _section("reliability", "Reliability", _absent())
    parts = [paragraph("Do stated chances come true as often as they say? Points on the dashed "
                       "diagonal are reliable; points below it mean the model over-warns, above "
                       "it under-warns. Bars show how many forecasts fell in each bin.")]
    if "impact" not in rel.columns:
        rel = rel.assign(impact=rel["target"].map(_impact_of(run)).fillna(""))
    if "model" not in rel.columns:
        rel = rel.assign(model="best candidate")
    for impact, target in _pairs(rel):
        sub = _sel(rel, impact=impact, target=target)
        models = ", ".join(dict.fromkeys(sub["model"].astype(str)))
        parts.append(el("h3", _title(impact, target)))
        parts.append(figs.add(
            f"reliability_{impact}_{target}",
            lambda s=sub, i=impact, t=target: F.reliability_diagram(s, impact=i, target=t),
            alt=(f"Reliability diagram for {impact}, {target}: observed frequency (0 to 1) "
                 f"against forecast chance (0 to 1) for models {models}, with forecast counts "
                 "per bin below.")))
    parts.append(_files(run, "reliability"))
    return _section("reliability", "Reliability", *parts)


# -------------------------------------------------------------------------------- maps
def maps_section(run: RunFolder, figs: FigureSink) -> Markup:
    best = _best_per_county(run)
    if run.counties is None or best is None or len(best) == 0:
        return _section("maps", "County maps", _absent())
    parts = [paragraph("Per county: which candidate predicted best, how well, and how many "
                       "events that estimate rests on. Few events mean a fragile estimate.")]
    keys = ["impact", "target"] if "target" in best.columns else ["impact"]
    for key, sub in best.groupby(keys, sort=False):
        key = key if isinstance(key, tuple) else (key,)
        title = " \u2014 ".join(str(k) for k in key)
        sub = sub.assign(candidate=[
            candidate_label(r.get("index"), r.get("scale_weeks"), r.get("lag_weeks"), short=True)
            for _, r in sub.iterrows()])
        panels = [M.MapPanel(sub, "candidate", title="best candidate", label="candidate",
                             kind="categorical")]
        if "skill" in sub.columns:
            panels.append(M.MapPanel(sub, "skill", title="skill", label="skill score (0 = base rate)"))
        if "events" in sub.columns:
            panels.append(M.MapPanel(sub, "events", title="events", label="events (count)"))
        n_cand = sub["candidate"].nunique()
        parts.append(el("h3", title))
        parts.append(figs.add(
            f"map_best_{'_'.join(map(str, key))}",
            lambda p=panels, t=title: M.county_panels(run.counties, p, suptitle=t),
            alt=(f"County maps for {title}: best candidate ({n_cand} different candidates across "
                 f"{len(sub)} counties), skill score, and number of events per county.")))
        cols = [c for c in ("county_id", "candidate", "skill", "events") if c in sub.columns]
        parts.append(details("Per-county values", table(_with_names(run, sub[cols]))))
    parts.append(paragraph("Layers for GIS use are in ", link("counties.gpkg", "counties.gpkg"),
                           ".", class_="files"))
    parts.append(_files(run, "skill_local"))
    return _section("maps", "County maps", *parts)


def _best_per_county(run: RunFolder) -> pd.DataFrame | None:
    """Best candidate per county: the ``best_candidate`` layer, else the county rows
    (``level == "unit"``) of ``skill_local.csv``."""
    layer = run.layers.get("best_candidate")
    if layer is not None and len(layer):
        return pd.DataFrame(layer.drop(columns="geometry", errors="ignore"))
    local = run.table("skill_local")
    if local is None or local.empty:
        return None
    if "level" in local.columns:
        local = local[(local["level"] == "unit").fillna(False).to_numpy(bool)]
    out = local.rename(columns={"unit": COUNTY})
    if "skill" not in out.columns:
        for score in ("rpss", "bss"):
            if score in out.columns:
                out = out.assign(skill=out[score])
                break
    if "impact" not in out.columns:
        out = out.assign(impact=out["target"].map(_impact_of(run)).fillna(""))
    return out


# ------------------------------------------------------------------------------- audit
def audit_section(run: RunFolder, figs: FigureSink) -> Markup:
    audit = run.table("audit")
    if audit is None or audit.empty:
        return _section("audit", "Threshold audit", _absent())
    parts = [paragraph(
        "Does each stage of a threshold ladder occur as often as its definition implies? A "
        "ratio of observed to expected share of weeks above 1 means the stage is reached more "
        "often than intended. The local threshold is the index value that would give the "
        "expected share in that county. Drift compares an early and a late period.")]
    for ladder, sub in audit.groupby("ladder", sort=False):
        parts.append(el("h3", f"Ladder {ladder}"))
        rec = _sel(sub, period=F.record_period(sub))
        med = rec.groupby("stage", observed=True)["observed_share"].median()
        alt_stages = "; ".join(
            f"{st}: expected {fmt_num(rec[rec['stage'] == st]['expected_share'].median(), 3)}, "
            f"median observed {fmt_num(v, 3)}" for st, v in med.items())
        parts.append(figs.add(
            f"audit_{ladder}",
            lambda s=sub, lad=ladder: F.audit_shares(s, ladder=lad),
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
        parts.append(details("Per-county audit", table(_with_names(run, sub[cols]))))
    parts.append(_files(run, "audit"))
    return _section("audit", "Threshold audit", *parts)


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


# ------------------------------------------------------------- triggers and contrasts
def triggers_section(run: RunFolder, figs: FigureSink) -> Markup:
    trig = run.table("triggers")
    timeline = run.table("trigger_timeline")
    title = "Trigger plan replay and tuning"
    if trig is None and timeline is None:
        return _section("triggers", title, _absent())
    parts = [paragraph(
        "How a trigger plan (switch on after the index stays beyond its threshold for the "
        "entry weeks, off after the exit weeks) would have performed over the record: one "
        "threshold for every county (uniform) against thresholds tuned per county (local). "
        "Hit rate and false-alarm ratio are shares of impact episodes and activations; the "
        "Peirce skill score is hit rate minus false-alarm rate (0 = no skill).")]
    if trig is not None and not trig.empty:
        keys = [k for k in ("impact", "target") if k in trig.columns]
        groups = trig.groupby(keys, sort=False) if keys else [((), trig)]
        for key, sub in groups:
            key = key if isinstance(key, tuple) else (key,)
            label = " \u2014 ".join(str(k) for k in key) or "trigger plans"
            parts.append(el("h3", label))
            pooled = _sel(sub, county_id="all") if COUNTY in sub.columns else sub
            cols = [c for c in ("scope", "index", "scale_weeks", "threshold", "entry_weeks",
                                "exit_weeks", "activations", "hit_rate", "false_alarm_ratio",
                                "peirce_skill", "cv_peirce_skill", "lead_weeks_median",
                                "events") if c in pooled.columns]
            if not pooled.empty:
                parts.append(table(pooled[cols], caption="All counties together"))
                parts.append(paragraph(_trigger_sentence(pooled)))
            per = sub[(sub[COUNTY] != "all").fillna(True).to_numpy(bool)] if COUNTY in sub else sub
            if run.counties is not None and {"scope", "threshold", COUNTY} <= set(per.columns):
                uni = _sel(per, scope="uniform")
                loc = _sel(per, scope="local")
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
            parts.append(details("Per-county plans", table(_with_names(run, per))))
    if timeline is not None and not timeline.empty:
        parts.append(el("h3", "Replay timelines"))
        targets = (list(dict.fromkeys(timeline["target"].astype(str)))
                   if "target" in timeline.columns else [None])
        for tgt in targets:
            sub = _sel(timeline, target=tgt) if tgt is not None else timeline
            counties = ", ".join(dict.fromkeys(sub[COUNTY].astype(str)))
            parts.append(figs.add(
                f"trigger_timeline_{tgt or 'all'}",
                lambda t=tgt: F.trigger_timeline(timeline, target=t,
                                                 county_names=_name_map(run)),
                alt=(f"Timelines of the trigger replay{' for ' + tgt if tgt else ''} in "
                     f"counties {counties}: weekly index value over the last 20 years, the "
                     "uniform and local thresholds, weeks each plan was on, and weeks with a "
                     "recorded impact.")))
    parts.append(_files(run, "triggers", "trigger_timeline"))
    return _section("triggers", title, *parts)


def _trigger_sentence(pooled: pd.DataFrame) -> str:
    if "scope" not in pooled.columns or "peirce_skill" not in pooled.columns:
        return ""
    by = {str(r["scope"]): r for _, r in pooled.iterrows()}
    if not {"uniform", "local"} <= set(by):
        return ""
    u, loc = by["uniform"], by["local"]
    text = (f"Replayed on the whole record, local thresholds score {fmt_num(loc['peirce_skill'])} "
            f"against {fmt_num(u['peirce_skill'])} for one uniform threshold")
    if "cv_peirce_skill" in pooled.columns and pd.notna(loc.get("cv_peirce_skill")):
        text += (f"; on years held out of the tuning, {fmt_num(loc['cv_peirce_skill'])} against "
                 f"{fmt_num(u.get('cv_peirce_skill'))}")
    return text + ". Tuned thresholds always look better on the years they were tuned on."


def contrast_section(run: RunFolder, figs: FigureSink) -> Markup:
    con = run.table("contrast")
    excess = run.table("county_excess")
    pairs = run.table("contrast_pairs")
    title = "County contrasts"
    if con is None and excess is None:
        return _section("contrast", title, _absent())
    parts = [paragraph(
        "Why did some counties suffer more than others at similar index values? County "
        "traits are added to the index model; an odds ratio above 1 means more impacts than "
        "the index alone predicts where the trait is higher. These are associations between "
        "county characteristics and recorded impacts, not effects.")]
    if con is not None and not con.empty:
        targets = (list(dict.fromkeys(con["target"].astype(str)))
                   if "target" in con.columns else [None])
        for tgt in targets:
            sub = _sel(con, target=tgt) if tgt is not None else con
            parts.append(el("h3", tgt or "all targets"))
            if {"term", "odds_ratio_per_sd", "or_lo", "or_hi"} <= set(sub.columns):
                terms = sub.dropna(subset=["odds_ratio_per_sd"])
                parts.append(figs.add(
                    f"contrast_{tgt or 'all'}",
                    lambda s=sub, t=tgt: F.odds_ratio_chart(s, target=t),
                    alt=(f"Odds ratios per standard deviation of each county trait for "
                         f"{tgt or 'all targets'}: " + "; ".join(
                             f"{r['term']} {fmt_interval(r['odds_ratio_per_sd'], r['or_lo'], r['or_hi'])}"
                             for _, r in terms.iterrows()) + ".")))
            parts.append(table(sub))
            if excess is not None and run.counties is not None and "ratio" in excess.columns:
                ex = _sel(excess, target=tgt) if tgt is not None and "target" in excess else excess
                if not ex.empty:
                    parts.append(figs.add(
                        f"county_excess_{tgt or 'all'}",
                        lambda e=ex, t=tgt: M.county_map(
                            run.counties, e, "ratio", title=f"observed / expected events \u2014 {t}",
                            label="ratio (1 = as the index predicts)"),
                        alt=(f"County map of observed over expected impact events for "
                             f"{tgt or 'all targets'}, given the index alone; ratios range from "
                             f"{fmt_num(ex['ratio'].min())} to {fmt_num(ex['ratio'].max())}.")))
                    parts.append(details("Per-county observed and expected events",
                                         table(_with_names(run, ex))))
    if pairs is not None and not pairs.empty:
        parts.append(el("h3", "Matched pairs"))
        parts.append(details("Counties with similar dryness but different impacts",
                             table(_with_names(run, pairs))))
    parts.append(_files(run, "contrast", "county_excess", "contrast_pairs"))
    return _section("contrast", title, *parts)


# ----------------------------------------------------------------------------- outlook
def outlook_section(run: RunFolder, figs: FigureSink) -> Markup:
    out = run.table("outlook")
    if out is None or out.empty:
        return _section("outlook", "Outlook", _absent())
    as_of = ", ".join(dict.fromkeys(out["as_of_week"].astype(str))) if "as_of_week" in out else "?"
    parts = [paragraph(f"Chance of each impact now and some weeks ahead, from index values up "
                       f"to the week of {as_of}. These are chances, not predictions of "
                       "certainty.")]
    keys = [k for k in ("impact", "target") if k in out.columns]
    # One map per target, for its first impact level (the most likely to be reached); the
    # tables carry every level.
    for key, sub in out.groupby(keys, sort=False):
        key = key if isinstance(key, tuple) else (key,)
        title = _title(*key) if len(key) == 2 else str(key[0])
        parts.append(el("h3", title))
        first = sub
        what = title
        if "level_k" in sub.columns and sub["level_k"].notna().any():
            k1 = sub["level_k"].min()
            first = sub[(sub["level_k"] == k1).fillna(False).to_numpy(bool)]
            if "level_label" in first.columns and first["level_label"].notna().any():
                what = f"{title}: at least '{first['level_label'].dropna().iloc[0]}'"
        horizons = sorted(pd.to_numeric(first["horizon_weeks"], errors="coerce").dropna().unique())
        if run.counties is not None and horizons:
            panels = [M.MapPanel(_sel(first, horizon_weeks=h), "prob",
                                 title="now" if h == 0 else f"{int(h)} weeks ahead",
                                 label="chance (0\u20131)", vmin=0.0, vmax=1.0) for h in horizons]
            prob = pd.to_numeric(first["prob"], errors="coerce")
            parts.append(figs.add(
                f"outlook_{'_'.join(map(str, key))}",
                lambda p=panels, t=what: M.county_panels(run.counties, p, suptitle=t),
                alt=(f"County maps of the chance of {what} at horizons "
                     f"{', '.join(str(int(h)) for h in horizons)} weeks; chances range from "
                     f"{fmt_num(prob.min())} to {fmt_num(prob.max())}.")))
        cols = [c for c in (COUNTY, "horizon_weeks", "level_label", "prob", "prob_lo", "prob_hi",
                            "index", "scale_weeks", "lag_weeks", "note") if c in sub.columns]
        order = [c for c in ("horizon_weeks", "level_k", "prob") if c in sub.columns]
        ranked = sub.sort_values(order, ascending=[True] * (len(order) - 1) + [False])[cols]
        parts.append(details("Per-county chances", table(_with_names(run, ranked))))
    parts.append(_files(run, "outlook"))
    return _section("outlook", "Outlook", *parts)


# ----------------------------------------------------------------------------- methods
REFERENCES = (
    "Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration: "
    "guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56. "
    "FAO, Rome.",
    "Beguería, S., Vicente-Serrano, S. M., Reig, F. and Latorre, B. (2014). Standardized "
    "precipitation evapotranspiration index (SPEI) revisited: parameter fitting, "
    "evapotranspiration models, tools, datasets and drought monitoring. International "
    "Journal of Climatology, 34(10), 3001\u20133023. doi:10.1002/joc.3887",
    "Brier, G. W. (1950). Verification of forecasts expressed in terms of probability. "
    "Monthly Weather Review, 78(1), 1\u20133. doi:10.1175/1520-0493(1950)078<0001:VOFEIT>2.0.CO;2",
    "Efron, B. and Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall, "
    "New York.",
    "Epstein, E. S. (1969). A scoring system for probability forecasts of ranked categories. "
    "Journal of Applied Meteorology, 8(6), 985\u2013987.",
    "Gringorten, I. I. (1963). A plotting rule for extreme probability paper. Journal of "
    "Geophysical Research, 68(3), 813\u2013814.",
    "Hargreaves, G. H. and Samani, Z. A. (1985). Reference crop evapotranspiration from "
    "temperature. Applied Engineering in Agriculture, 1(2), 96\u201399.",
    "Hobbins, M. T., Wood, A., McEvoy, D. J., Huntington, J. L., Morton, C., Anderson, M. and "
    "Hain, C. (2016). The Evaporative Demand Drought Index. Part I: Linking drought evolution "
    "to variations in evaporative demand. Journal of Hydrometeorology, 17(6), 1745\u20131761. "
    "doi:10.1175/JHM-D-15-0121.1",
    "Hosking, J. R. M. (1990). L-moments: analysis and estimation of distributions using "
    "linear combinations of order statistics. Journal of the Royal Statistical Society B, "
    "52(1), 105\u2013124.",
    "Künsch, H. R. (1989). The jackknife and the bootstrap for general stationary "
    "observations. The Annals of Statistics, 17(3), 1217\u20131241.",
    "McCullagh, P. (1980). Regression models for ordinal data. Journal of the Royal "
    "Statistical Society B, 42(2), 109\u2013142.",
    "McKee, T. B., Doesken, N. J. and Kleist, J. (1993). The relationship of drought "
    "frequency and duration to time scales. Proceedings of the 8th Conference on Applied "
    "Climatology, American Meteorological Society, Boston, 179\u2013184.",
    "Murphy, A. H. (1973). A new vector partition of the probability score. Journal of "
    "Applied Meteorology, 12(4), 595\u2013600.",
    "Peirce, C. S. (1884). The numerical measure of the success of predictions. Science, "
    "4(93), 453\u2013454.",
    "Singer, J. D. and Willett, J. B. (1993). It's about time: using discrete-time survival "
    "analysis to study duration and the timing of events. Journal of Educational Statistics, "
    "18(2), 155\u2013195.",
    "Stagge, J. H., Tallaksen, L. M., Gudmundsson, L., Van Loon, A. F. and Stahl, K. (2015). "
    "Candidate distributions for climatological drought indices (SPI and SPEI). "
    "International Journal of Climatology, 35(13), 4027\u20134040. doi:10.1002/joc.4267",
    "Thom, H. C. S. (1958). A note on the gamma distribution. Monthly Weather Review, 86(4), "
    "117\u2013122.",
    "Thornthwaite, C. W. (1948). An approach toward a rational classification of climate. "
    "Geographical Review, 38(1), 55\u201394.",
    "Varma, S. and Simon, R. (2006). Bias in error estimation when using cross-validation for "
    "model selection. BMC Bioinformatics, 7, 91. doi:10.1186/1471-2105-7-91",
    "Vicente-Serrano, S. M., Beguería, S. and López-Moreno, J. I. (2010). A multiscalar "
    "drought index sensitive to global warming: the Standardized Precipitation "
    "Evapotranspiration Index. Journal of Climate, 23(7), 1696\u20131718. "
    "doi:10.1175/2009JCLI2909.1",
    "Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd edition. "
    "Academic Press, Oxford.",
    "World Meteorological Organization (2012). Standardized Precipitation Index User Guide "
    "(M. Svoboda, M. Hayes and D. Wood). WMO-No. 1090, Geneva.",
)

_METHODS = (
    ("Indices",
     "Climate records are summed into ISO 8601 weeks and accumulated over each time scale; "
     "each week of the year gets its own distribution, fitted over the calibration period. "
     "The standardized precipitation index (SPI; McKee et al. 1993; WMO 2012) maps "
     "accumulated precipitation through a gamma distribution (maximum likelihood started "
     "from Thom 1958, with a share of exact zeros as in Stagge et al. 2015) to the standard "
     "normal scale. The SPEI does the same for precipitation minus potential "
     "evapotranspiration with a log-logistic distribution fitted by probability-weighted "
     "moments (Vicente-Serrano et al. 2010; Beguería et al. 2014), or a GEV fitted by "
     "L-moments (Hosking 1990); potential "
     "evapotranspiration comes from temperature (Hargreaves & Samani 1985, as in FAO-56, "
     "Allen et al. 1998), from Thornthwaite (1948), or from the input. Evaporative demand "
     "(EDDI) is standardized non-parametrically (Hobbins et al. 2016) and stored with the "
     "sign turned so that negative means dry, like the other indices; supplied indicators "
     "use Gringorten (1963) plotting positions. Values are clipped to \u00b13.09."),
    ("Impact models",
     "Yes/no impacts use logistic regression; ranked impact levels use the proportional-odds "
     "model (McCullagh 1980). The onset of restrictions is modelled in discrete time "
     "(Singer & Willett 1993). Sparse counties borrow strength from their region."),
    ("Skill",
     "Every candidate (index, time scale, lag, model) is scored on whole years left out of "
     "the fit. Scores are the Brier score (Brier 1950) and the ranked probability score "
     "(Epstein 1969), expressed as skill against the climatological base rate (Wilks 2011); "
     "reliability follows the decomposition of Murphy (1973). Intervals come from a "
     "bootstrap over whole years (Efron & Tibshirani 1993; Künsch 1989). Because picking "
     "the best of many candidates flatters its score, a selection-aware (nested) estimate is "
     "reported beside the best candidate's own score (Varma & Simon 2006). Candidates whose "
     "difference from the best is within bootstrap noise are listed as statistically as "
     "good. Persistence (the impact state known when the forecast is made) is a baseline "
     "every candidate must beat."),
    ("Threshold audit",
     "For each stage of a threshold ladder, the share of weeks at or below the threshold is "
     "compared with the share its definition implies, per county, with year-block bootstrap "
     "intervals; the local threshold that would give the expected share is the empirical "
     "quantile of the county's own record."),
    ("Trigger plans",
     "A plan switches on after the index has stayed beyond its threshold for the entry "
     "weeks and off after it has stayed clear for the exit weeks. Plans are replayed over "
     "the record and scored by hit rate, false-alarm ratio and the Peirce skill score "
     "(Peirce 1884), with lead times; local thresholds are also scored on years held out "
     "of their tuning."),
    ("County contrasts and outlook",
     "County traits are added to the index model as standardized predictors with "
     "county-clustered standard errors; observed and expected event counts per county are "
     "compared with Poisson intervals. The outlook applies the fitted impact models to the "
     "latest index values at each modelled lag."),
)


def methods_section(run: RunFolder, figs: FigureSink) -> Markup:
    parts = []
    for head, text in _METHODS:
        parts.append(el("h3", head))
        parts.append(paragraph(text))
    parts.append(el("h3", "References"))
    parts.append(el("ol", *[el("li", r) for r in REFERENCES], class_="refs"))
    return _section("methods", "Methods", *parts)


def cautions_section(run: RunFolder, figs: FigureSink) -> Markup:
    parts = []
    for head, text in CAUTIONS:
        parts.append(el("h3", head))
        parts.append(paragraph(text))
    warn = (run.manifest or {}).get("warnings") or []
    if warn:
        parts.append(el("h3", "Warnings raised during this run"))
        parts.append(el("ul", *[el("li", w) for w in warn]))
    return _section("cautions", "Cautions", *parts)


# -------------------------------------------------------------------------- provenance
def provenance_section(run: RunFolder, figs: FigureSink) -> Markup:
    man = run.manifest
    if not man:
        return _section("provenance", "Provenance", _absent(
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
    parts.append(_files(run, "manifest"))
    return _section("provenance", "Provenance", *parts)


#: Sections after the first screen, in page order: (id, title, builder).
SECTIONS = (
    ("data", "Data and coverage", data_section),
    ("curves", "Impact curves", curves_section),
    ("skill", "Skill by index, time scale and lag", skill_section),
    ("reliability", "Reliability", reliability_section),
    ("maps", "County maps", maps_section),
    ("audit", "Threshold audit", audit_section),
    ("triggers", "Trigger plan replay and tuning", triggers_section),
    ("contrast", "County contrasts", contrast_section),
    ("outlook", "Outlook", outlook_section),
    ("methods", "Methods", methods_section),
    ("cautions", "Cautions", cautions_section),
    ("provenance", "Provenance", provenance_section),
)


def not_drawn(sid: str, title: str, exc: Exception) -> Markup:
    """Stand-in for a section whose builder failed on unexpected data."""
    return _section(sid, title, _absent(
        f"This section could not be built from this run's tables ({type(exc).__name__}: "
        f"{exc})."))

