"""Impact curves section (models stage): chance of each impact level against the index.
"""

from __future__ import annotations

from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    impact_target_pairs,
    pair_title,
    primary_pairs,
    section,
    sel,
    setting,
)
from impactlink.report.figures_curves import impact_curves
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import fmt_num, level_name, percent_level, row_label
from impactlink.report.words_sections import CURVES_INTRO


def curves_section(run: RunFolder, figs: FigureSink) -> Markup:
    curves = run.table("curves")
    if curves is None or curves.empty:
        return section("curves", "Impact curves", absent())
    crossings = run.table("crossings")
    parts = [paragraph(CURVES_INTRO)]
    band = percent_level(setting(run, "models", "curve_ci", 0.9))
    for impact, target in primary_pairs(run, impact_target_pairs(curves)):
        sub = sel(curves, impact=impact, target=target)
        first = sub.iloc[0]
        parts.append(el("h3", pair_title(impact, target)))
        cr = None
        if crossings is not None:
            cr = sel(crossings, impact=impact, target=target)
        alt = (f"Impact curve for {impact}, {target}: chance of impact from 0 to 1 against "
               f"{row_label(first, short=False)}"
               " values; the chance rises as the index gets drier.")
        if cr is not None and not cr.empty:
            mid = cr.sort_values("prob_level").iloc[len(cr) // 2]
            alt += (f" The curve for '{mid.get('level_label', '')}' passes "
                    f"{fmt_num(mid['prob_level'])} at index value {fmt_num(mid['x_cross'])}.")
        parts.append(figs.add(f"curve_{impact}_{target}",
                              lambda s=sub, c=cr, i=impact, t=target: impact_curves(
                                  s, c, impact=i, target=t), alt=alt,
                              caption=(f"Chance of each level of {pair_title(impact, target)} "
                                       f"against the index, with its {band} band "
                                       "(state-wide model).")))
        if cr is not None and not cr.empty:
            cols = [c for c in ("level_label", "prob_level", "x_cross", "x_lo", "x_hi")
                    if c in cr.columns]
            shown = cr[cols]
            if "level_label" in shown.columns:
                shown = shown.assign(level_label=shown["level_label"].map(level_name))
            parts.append(details("Index value at which each chance is reached",
                                 table(shown, digits=2)))
    parts.append(data_files(run, "curves", "crossings"))
    return section("curves", "Impact curves", *parts)
