"""County contrasts section: county traits against impacts at similar index values.
"""

from __future__ import annotations

from impactlink.report import maps as M
from impactlink.report.common import FigureSink, absent, data_files, section, sel, with_names
from impactlink.report.figures_contrast import odds_ratio_chart
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import fmt_interval, fmt_num
from impactlink.report.words_sections import CONTRAST_INTRO


def contrast_section(run: RunFolder, figs: FigureSink) -> Markup:
    con = run.table("contrast")
    excess = run.table("county_excess")
    pairs = run.table("contrast_pairs")
    title = "County contrasts"
    if con is None and excess is None:
        return section("contrast", title, absent())
    parts = [paragraph(
        CONTRAST_INTRO)]
    if con is not None and not con.empty:
        targets = (list(dict.fromkeys(con["target"].astype(str)))
                   if "target" in con.columns else [None])
        for tgt in targets:
            sub = sel(con, target=tgt) if tgt is not None else con
            parts.append(el("h3", tgt or "all targets"))
            if {"term", "odds_ratio_per_sd", "or_lo", "or_hi"} <= set(sub.columns):
                terms = sub.dropna(subset=["odds_ratio_per_sd"])
                parts.append(figs.add(
                    f"contrast_{tgt or 'all'}",
                    lambda s=sub, t=tgt: odds_ratio_chart(s, target=t),
                    alt=(f"Odds ratios per standard deviation of each county trait for "
                         f"{tgt or 'all targets'}: " + "; ".join(
                             f"{r['term']} {fmt_interval(r['odds_ratio_per_sd'], r['or_lo'], r['or_hi'])}"
                             for _, r in terms.iterrows()) + ".")))
            parts.append(table(sub))
            if excess is not None and run.counties is not None and "ratio" in excess.columns:
                ex = sel(excess, target=tgt) if tgt is not None and "target" in excess else excess
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
                                         table(with_names(run, ex))))
    if pairs is not None and not pairs.empty:
        parts.append(el("h3", "Matched pairs"))
        parts.append(details("Counties with similar dryness but different impacts",
                             table(with_names(run, pairs))))
    parts.append(data_files(run, "contrast", "county_excess", "contrast_pairs"))
    return section("contrast", title, *parts)
