"""County finder: an index of counties by name, a clickable map, and one card per county
(best candidate and curve, threshold audit, outlook, trigger replay, contrast pair), each
printable on one page.
"""

from __future__ import annotations

import pandas as pd

from impactlink.report.common import (
    FigureSink,
    absent,
    county_names,
    impact_of,
    section,
    sel,
)
from impactlink.report.html import Markup, el, link, paragraph, table
from impactlink.report.runfolder import RunFolder
from impactlink.report.sec_answers import primary_rows
from impactlink.report.sec_outlook import _impact_options, season_note
from impactlink.report.svgmap import map_shapes, svg_map
from impactlink.report.text import (
    fmt_interval,
    fmt_num,
    impact_name,
    index_name,
    level_name,
    row_label,
    target_name,
)
from impactlink.schema import COUNTY

__all__ = ["finder_section", "county_anchor"]


def county_anchor(county_id) -> str:
    """The id of a county's card ("county-90001")."""
    return f"county-{county_id}"


def finder_section(run: RunFolder, figs: FigureSink | None = None) -> Markup:
    """The county index (names as links), a map whose counties link to their cards, and
    the cards."""
    names = county_names(run)
    if names is None or names.empty:
        return section("finder", "County finder", absent("No county outlines in this run."))
    if "county_name" not in names.columns:
        names = names.assign(county_name=names[COUNTY].astype(str))
    names = names.assign(**{COUNTY: names[COUNTY].astype(str)}).sort_values("county_name")
    index = el("ul", *[el("li", link("#" + county_anchor(c), n))
                       for c, n in zip(names[COUNTY], names["county_name"], strict=True)],
               class_="finder", aria_label="counties by name")
    parts = [paragraph("Find a county by name, or click it on the map, to open its one-page "
                       "card."), index]
    if run.counties is not None:
        region = (dict(zip(names[COUNTY], names["region"].astype(str), strict=True))
                  if "region" in names.columns else {})
        vals = names[[COUNTY]].assign(region=names[COUNTY].map(region)) if region else None
        parts.append(svg_map(map_shapes(run.counties), vals, "region" if region else None,
                             title="Counties (click one to open its card)", unit="region",
                             kind="categorical", n_labels=10,
                             caption="Counties coloured by region; hover a county for its "
                                     "name, click it for its card."))
    cards = _Cards(run)
    parts += [cards.card(c, n, names) for c, n in zip(names[COUNTY], names["county_name"],
                                                     strict=True)]
    return section("finder", "County finder", *parts)


class _Cards:
    """Per-county slices of each table, grouped once (not filtered once per county)."""

    def __init__(self, run: RunFolder) -> None:
        owner = impact_of(run)
        self.best = _group(_with_impact(_best(run), owner), COUNTY)
        self.audit = _group(_full_period(run.table("audit")), COUNTY)
        self.outlook = _group(_with_impact(run.table("outlook"), owner), COUNTY)
        self.triggers = _group(run.table("triggers"), COUNTY)
        self.pairs = _with_impact(run.table("contrast_pairs"), owner)
        self.crossings = run.table("crossings")
        self.options = _impact_options(run.manifest or {})
        summary = run.table("skill_summary")
        self.primary = (set(primary_rows(summary)["target"].astype(str))
                        if summary is not None and not summary.empty else None)
        self.names = {}
        n = county_names(run)
        if n is not None and "county_name" in n.columns:
            self.names = dict(zip(n[COUNTY].astype(str), n["county_name"].astype(str),
                                  strict=True))

    def card(self, cid: str, name: str, names: pd.DataFrame) -> Markup:
        row = names[names[COUNTY] == cid]
        region = (str(row["region"].iloc[0]) if "region" in row.columns and not row.empty
                  else "")
        parts = [el("h3", name, el("span", f" county {cid}" + (f", {region} region"
                                                               if region else ""),
                                   class_="meta"))]
        parts += [el("h4", "Best predictor here"), self._best(cid)]
        parts += [el("h4", "Outlook"), self._outlook(cid)]
        parts += [el("h4", "Threshold audit"), self._audit(cid)]
        parts += [el("h4", "Trigger plan replay"), self._triggers(cid)]
        parts += [el("h4", "Contrast pair"), self._pair(cid)]
        parts.append(paragraph(link("#finder", "back to the county index"), class_="files"))
        return el("article", *parts, class_="county-card", id=county_anchor(cid))

    def _best(self, cid: str) -> Markup:
        rows = self.best.get(cid)
        if rows is None or rows.empty:
            return absent("No county-level skill in this run.")
        items = []
        for _, r in rows.iterrows():
            if self.primary is not None and str(r.get("target")) not in self.primary:
                continue
            what = row_label(r)
            skill = f", local skill score {fmt_num(r['skill'])}" if "skill" in r.index else ""
            ev = f", {int(r['events'])} cases" if pd.notna(r.get("events")) else ""
            if pd.notna(r.get("events")) and int(r["events"]) == 0:
                skill, ev = "", ", not scored here (no cases in this county)"
            curve = self._curve(r)
            items.append(el("li", el("strong", f"{impact_name(r['impact'])}"
                                               f" ({target_name(r['impact'], r['target'])}): "),
                            f"{what}{skill}{ev}.{curve}"))
        return el("ul", *items)

    def _curve(self, r) -> str:
        cr = self.crossings
        if cr is None or cr.empty:
            return ""
        sub = sel(cr, target=r["target"])
        sub = sub[(pd.to_numeric(sub["prob_level"], errors="coerce") == 0.5).to_numpy(bool)]
        if sub.empty:
            return ""
        first = sub.sort_values("level_k").iloc[0]
        if not pd.notna(first.get("x_cross")):
            return ""
        return (f" State-wide curve: a 50 % chance of {level_name(first.get('level_label'))} "
                f"at index {fmt_num(first['x_cross'])}.")

    def _outlook(self, cid: str) -> Markup:
        rows = self.outlook.get(cid)
        if rows is None or rows.empty:
            return absent("No outlook for this county.")
        if "level_k" in rows.columns:
            rows = rows[rows["level_k"] == rows.groupby("target")["level_k"].transform("min")]
        items = []
        for target, sub in rows.groupby("target", sort=False):
            if self.primary is not None and str(target) not in self.primary:
                continue
            r = sub.iloc[0]
            have = sub[pd.to_numeric(sub["prob"], errors="coerce").notna().to_numpy(bool)]
            lev = f", {level_name(r['level_label'])}" if pd.notna(r.get("level_label")) else ""
            head = f"{impact_name(r['impact'])}, {target_name(r['impact'], target)}{lev}: "
            if have.empty:
                items.append(el("li", head + f"no value ({r.get('note') or 'not given'})."))
                continue
            if season_note(sub, self.options.get(str(r["impact"])) or {}):
                items.append(el("li", head + "this year's season window has closed; no chance "
                                             "for the next season yet (see the outlook)."))
                continue
            if "lag_weeks" in have.columns:
                have = have.sort_values("lag_weeks")
            near = have.iloc[0]
            week = near.get("valid_week")
            items.append(el("li", head + fmt_interval(near["prob"], near.get("prob_lo"),
                                                      near.get("prob_hi"))
                            + (f" for the week of {week}" if pd.notna(week) else "") + "."))
        return el("ul", *items) if items else absent("No outlook for this county.")

    def _audit(self, cid: str) -> Markup:
        rows = self.audit.get(cid)
        if rows is None or rows.empty:
            return absent("No threshold audit for this county.")
        cols = {"ladder": "ladder", "stage": "stage", "threshold": "threshold",
                "ratio": "observed / expected"}
        out = rows[[c for c in cols if c in rows.columns]].rename(columns=cols)
        if {"ratio_lo", "ratio_hi"} <= set(rows.columns):
            out["observed / expected"] = [fmt_interval(a, b, c) for a, b, c in zip(
                rows["ratio"], rows["ratio_lo"], rows["ratio_hi"], strict=True)]
        tidy = {c: out[c].astype(str).str.replace("_", " ") for c in ("ladder", "stage")
                if c in out.columns}
        return table(out.assign(**tidy), digits=2)

    def _triggers(self, cid: str) -> Markup:
        rows = self.triggers.get(cid)
        if rows is None or rows.empty:
            return absent("No trigger replay row for this county.")
        rows = rows.assign(index=rows["index"].map(index_name)) if "index" in rows else rows
        cols = {"scope": "plan", "index": "index", "scale_weeks": "time scale (weeks)",
                "threshold": "threshold",
                "activations": "activations", "hit_rate": "hit rate",
                "false_alarm_ratio": "false-alarm ratio", "peirce_skill": "Peirce skill"}
        return table(rows[[c for c in cols if c in rows.columns]].rename(columns=cols).head(4),
                     digits=2)

    def _pair(self, cid: str) -> Markup:
        p = self.pairs
        if p is None or p.empty or not {"county_a", "county_b"} <= set(p.columns):
            return absent("No contrast pair in this run.")
        a, b = p["county_a"].astype(str), p["county_b"].astype(str)
        rows = p[((a == cid) | (b == cid)).to_numpy(bool)]
        if rows.empty:
            return absent("This county is in no contrast pair.")
        items = []
        for _, r in rows.head(3).iterrows():
            mine = "a" if str(r["county_a"]) == cid else "b"
            other = str(r["county_b"] if mine == "a" else r["county_a"])
            items.append(el("li", f"{impact_name(r['impact'])}: with ",
                            link("#" + county_anchor(other), self.names.get(other, other)),
                            f": impact rate here {fmt_num(r[f'rate_{mine}'])}, there "
                            f"{fmt_num(r['rate_' + ('b' if mine == 'a' else 'a')])}"
                            + (f"; largest trait gap: {str(r['largest_trait_gap']).replace('_', ' ')}"
                               if pd.notna(r.get("largest_trait_gap")) else "") + "."))
        return el("ul", *items)


def _group(frame: pd.DataFrame | None, key: str) -> dict[str, pd.DataFrame]:
    if frame is None or frame.empty or key not in frame.columns:
        return {}
    return {str(k): g for k, g in frame.groupby(frame[key].astype(str), sort=False)}


def _with_impact(frame: pd.DataFrame | None, owner: dict[str, str]) -> pd.DataFrame | None:
    """Add an ``impact`` column from ``target`` where a table lacks it."""
    if frame is None or "impact" in frame.columns or "target" not in frame.columns:
        return frame
    return frame.assign(impact=frame["target"].astype(str).map(owner).fillna(""))


def _full_period(audit: pd.DataFrame | None) -> pd.DataFrame | None:
    if audit is None or "period" not in audit.columns:
        return audit
    return audit[(audit["period"] == "full").fillna(False).to_numpy(bool)]


def _best(run: RunFolder) -> pd.DataFrame | None:
    from impactlink.report.sec_skill import best_per_county

    return best_per_county(run)
