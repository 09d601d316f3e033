"""County contrasts section: the explained look-alike pair per annual target, the ranked
look-alike pairs, the trait odds ratios and observed-over-expected events per county.

Reads ``contrast.csv`` (the parts of the explained pair, with intervals),
``contrast_summary.csv``, ``contrast_lookalikes.csv``, ``contrast_trajectories.csv``,
``contrast_traits.csv`` (see :mod:`impactlink.contrast.explain`), ``contrast_terms.csv``
(trait odds ratios), ``county_excess.csv`` and ``contrast_pairs.csv``. A run folder written
before the pair decomposition existed holds the odds ratios in ``contrast.csv``; they are
read from there when the file has their columns. Every sentence comes from
:mod:`impactlink.report.words_contrast` or :mod:`impactlink.report.words_sections`.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report import maps as M
from impactlink.report import words_contrast as W
from impactlink.report.common import FigureSink, absent, data_files, section, with_names
from impactlink.report.figures_contrast import odds_ratio_chart
from impactlink.report.figures_contrast_pair import contrast_figure
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import fmt_interval, fmt_num
from impactlink.report.words_sections import CONTRAST_INTRO
from impactlink.schema import COUNTY

TITLE = "County contrasts"
_TERM_COLUMNS = {"term", "odds_ratio_per_sd", "or_lo", "or_hi"}


def contrast_section(run: RunFolder, figs: FigureSink) -> Markup:
    """The county-contrast section of the report."""
    parts_t, terms = _parts_and_terms(run)
    summary = run.table("contrast_summary")
    excess = run.table("county_excess")
    pairs = run.table("contrast_pairs")
    if parts_t is None and terms is None and excess is None and summary is None:
        return section("contrast", TITLE, absent())
    out: list[Markup] = [paragraph(CONTRAST_INTRO), paragraph(W.CAUTION, class_="caution")]
    targets = _targets(summary, terms, excess)
    for tgt in targets:
        out.append(el("h3", tgt or "all targets"))
        out.extend(_explained(run, figs, tgt, parts_t))
        out.extend(_lookalikes(run, tgt))
        out.extend(_terms(run, figs, tgt, terms, excess))
    if pairs is not None and not pairs.empty:
        out.append(el("h3", W.PAIRS_HEAD))
        out.append(details(W.PAIRS_DETAILS, table(with_names(run, pairs))))
    out.append(data_files(run, "contrast", "contrast_summary", "contrast_lookalikes",
                          "contrast_trajectories", "contrast_traits", "contrast_terms",
                          "county_excess", "contrast_pairs"))
    return section("contrast", TITLE, *out)


def _parts_and_terms(run: RunFolder):
    con = run.table("contrast")
    terms = run.table("contrast_terms")
    if con is not None and _TERM_COLUMNS <= set(con.columns) and "part" not in con.columns:
        return None, (terms if terms is not None else con)  # an older run folder
    return con, terms


def _targets(*frames) -> list:
    found: list = []
    for f in frames:
        if f is not None and not f.empty and "target" in f.columns:
            found.extend(f["target"].astype(str))
    if not found:
        return [None]
    return list(dict.fromkeys(found))


def _for(frame: pd.DataFrame | None, tgt) -> pd.DataFrame | None:
    if frame is None or tgt is None or "target" not in frame.columns:
        return frame
    return frame[frame["target"].astype(str) == tgt]


def _ids(frame: pd.DataFrame, *cols: str) -> pd.DataFrame:
    """County id columns as text (the run folder may have read them as numbers)."""
    return frame.assign(**{c: frame[c].astype(str) for c in cols if c in frame.columns})


def _explained(run: RunFolder, figs: FigureSink, tgt, parts_t) -> list[Markup]:
    summary = _for(run.table("contrast_summary"), tgt)
    if summary is None or summary.empty:
        return []
    summary = _ids(summary, "county_a", "county_b")
    row = summary.iloc[0]
    out = [el("h4", W.PAIR_HEAD), paragraph(W.PAIR_INTRO)]
    try:
        out.append(paragraph(W.contrast_paragraph(row), class_="memo"))
    except (ValueError, KeyError) as exc:  # ReportError is a ValueError
        out.append(absent(str(exc)))
    traj = _for(run.table("contrast_trajectories"), tgt)
    traits = _for(run.table("contrast_traits"), tgt)
    if traj is not None and traits is not None:
        tr = _ids(traj, COUNTY)
        out.append(figs.add(f"contrast_pair_{tgt or 'all'}",
                            lambda: contrast_figure(summary.head(1), tr, traits),
                            alt=W.pair_figure_alt(row)))
    p = _for(parts_t, tgt)
    if p is not None and not p.empty and {"part", "estimate"} <= set(p.columns):
        out.append(table(_parts_view(p, traits), caption=W.parts_caption(row), digits=1))
    return out


def _parts_view(parts: pd.DataFrame, traits: pd.DataFrame | None) -> pd.DataFrame:
    """Probability-scale parts in percentage points, traits by their plain label."""
    p = parts
    if "scale" in p.columns:
        p = p[p["scale"].astype(str) == "probability"]
    if "term" in p.columns:
        p = p[p["term"].fillna("").astype(str) == ""]
    labels = {}
    if traits is not None and {"trait", "label"} <= set(traits.columns):
        labels = dict(zip(traits["trait"].astype(str), traits["label"].astype(str),
                          strict=True))
    trait = p["trait"].fillna("").astype(str) if "trait" in p.columns else pd.Series(
        "", index=p.index)
    order = {"p_a": 0, "p_b": 1, "total": 2, "exposure": 3, "sensitivity": 4,
             "unexplained": 6}
    view = pd.DataFrame({
        "part": [W.PART_LABELS.get(str(k), str(k)) if t == "" else
                 f"sensitivity: {labels.get(t, t.replace('_', ' '))}"
                 for k, t in zip(p["part"].astype(str), trait, strict=True)],
        "points": 100.0 * pd.to_numeric(p["estimate"], errors="coerce").to_numpy(),
        "lo": 100.0 * pd.to_numeric(p.get("lo"), errors="coerce").to_numpy(),
        "hi": 100.0 * pd.to_numeric(p.get("hi"), errors="coerce").to_numpy(),
        "_o": [order.get(str(k), 9) + (0.5 if t else 0.0)
               for k, t in zip(p["part"].astype(str), trait, strict=True)],
    })
    for side, col in (("a", "p_a"), ("b", "p_b")):
        if f"county_name_{side}" in p.columns and len(p):
            label = f"modelled chance of an impact, {p[f'county_name_{side}'].iloc[0]}"
            view.loc[view["part"] == W.PART_LABELS[col], "part"] = label
    return view.sort_values("_o", kind="mergesort").drop(columns="_o").reset_index(drop=True)


def _lookalikes(run: RunFolder, tgt) -> list[Markup]:
    looks = _for(run.table("contrast_lookalikes"), tgt)
    if looks is None or looks.empty:
        return []
    looks = _ids(looks, "county_a", "county_b")
    shown = looks.copy()
    for side in ("a", "b"):
        shown[f"county_{side}"] = (shown[f"county_name_{side}"].astype(str) + " ("
                                   + shown[f"county_{side}"] + ")")
    drop = [c for c in ("impact", "target", "county_name_a", "county_name_b") if c in shown]
    shown = shown.drop(columns=drop)
    return [el("h4", W.LOOKALIKE_HEAD), paragraph(W.LOOKALIKE_INTRO),
            table(shown, caption=W.lookalike_caption(tgt or "all targets"), digits=2)]


def _terms(run: RunFolder, figs: FigureSink, tgt, terms, excess) -> list[Markup]:
    out: list[Markup] = []
    sub = _for(terms, tgt)
    if sub is not None and not sub.empty:
        out.append(el("h4", W.TERMS_HEAD))
        if _TERM_COLUMNS <= set(sub.columns):
            rows = sub.dropna(subset=["odds_ratio_per_sd"])
            items = [f"{r['term']} {fmt_interval(r['odds_ratio_per_sd'], r['or_lo'], r['or_hi'])}"
                     for _, r in rows.iterrows()]
            out.append(figs.add(f"contrast_{tgt or 'all'}",
                                lambda s=sub, t=tgt: odds_ratio_chart(s, target=t),
                                alt=W.terms_alt(tgt or "all targets", items)))
        drop = [c for c in ("impact", "target", "index", "scale_weeks", "lag_weeks") if c in sub]
        out.append(table(sub.drop(columns=drop)))
    if excess is not None and run.counties is not None and "ratio" in excess.columns:
        ex = _for(excess, tgt)
        if ex is not None and not ex.empty:
            label = tgt or "all targets"
            out.append(figs.add(
                f"county_excess_{tgt or 'all'}",
                lambda e=ex, t=label: M.county_map(run.counties, e, "ratio",
                                                   title=W.excess_title(t),
                                                   label=W.EXCESS_LABEL),
                alt=W.excess_alt(label, fmt_num(ex["ratio"].min()), fmt_num(ex["ratio"].max()))))
            out.append(details(W.EXCESS_DETAILS, table(with_names(run, ex))))
    return out


__all__ = ["contrast_section"]
