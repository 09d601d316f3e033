"""Outlook section: chance of each impact now and some weeks ahead, per county.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report import maps as M
from impactlink.report.common import (
    FigureSink,
    absent,
    data_files,
    pair_title,
    section,
    sel,
    with_names,
)
from impactlink.report.html import Markup, details, el, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.text import fmt_num
from impactlink.schema import COUNTY


def outlook_section(run: RunFolder, figs: FigureSink) -> Markup:
    out = run.table("outlook")
    if out is None or out.empty:
        return section("outlook", "Outlook", absent())
    as_of = ", ".join(dict.fromkeys(out["as_of_week"].astype(str))) if "as_of_week" in out else "?"
    parts = [paragraph(f"Chance of each impact now and some weeks ahead, from index values up "
                       f"to the week of {as_of}. These are chances, not predictions of "
                       "certainty.")]
    keys = [k for k in ("impact", "target") if k in out.columns]
    # One map per target, for its first impact level (the most likely to be reached); the
    # tables carry every level.
    for key, sub in out.groupby(keys, sort=False):
        key = key if isinstance(key, tuple) else (key,)
        title = pair_title(*key) if len(key) == 2 else str(key[0])
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
            panels = [M.MapPanel(sel(first, horizon_weeks=h), "prob",
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
        parts.append(details("Per-county chances", table(with_names(run, ranked))))
    parts.append(data_files(run, "outlook"))
    return section("outlook", "Outlook", *parts)
