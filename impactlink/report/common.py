"""Helpers shared by the report's sections: the figure sink, section frames,
row selection and county name maps.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from impactlink.errors import ReportError, ReportWarning
from impactlink.report.fig_style import figure_png
from impactlink.report.html import Markup, el, image, join, link, paragraph
from impactlink.report.runfolder import RunFolder
from impactlink.report.svgmap import MapShapes, map_shapes
from impactlink.report.text import impact_name, target_name
from impactlink.schema import COUNTY

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

        Any error from ``draw`` becomes a short note in the page and a warning. Without a
        ``caption`` the first sentence of ``alt`` is shown under the figure.
        """
        try:
            fig = draw()
        except (ReportError, ValueError, KeyError, TypeError, IndexError) as exc:
            message = f"Figure {name!r} could not be drawn: {exc}"
            warnings.warn(message, ReportWarning, stacklevel=2)
            return paragraph(message, class_="absent")
        png = figure_png(fig)
        if caption is None:  # every figure gets a caption: the first sentence of its alt text
            caption = alt.split(". ")[0].rstrip(".") + "."
        file = slug(name) + ".png"
        self.files[file] = png
        self.alts[file] = alt
        return image(png, alt=alt, caption=caption, name=file)


def slug(text: str) -> str:
    keep = "".join(ch if ch.isalnum() else "_" for ch in str(text).lower())
    return "_".join(part for part in keep.split("_") if part)[:80] or "figure"


def pair_title(impact, target) -> str:
    return f"{impact_name(impact)}: {target_name(impact, target)}"


def absent(what: str = NOT_COMPUTED) -> Markup:
    return paragraph(what, class_="absent")


def section(sid: str, title: str, *content) -> Markup:
    return el("section", el("h2", title), *content, id=sid)


def data_files(run: RunFolder, *names: str) -> Markup:
    present = []
    for name in names:
        for ext in (".csv", ".parquet", ".gpkg", ".json"):
            if (run.path / f"{name}{ext}").exists():
                present.append(link(f"{name}{ext}", f"{name}{ext}"))
    if not present:
        return Markup("")
    return el("p", "Numbers behind this section: ", join(present, ", "), class_="files")


def sel(frame: pd.DataFrame, **equal) -> pd.DataFrame:
    mask = np.ones(len(frame), dtype=bool)
    for col, value in equal.items():
        mask &= (frame[col] == value).fillna(False).to_numpy(dtype=bool)
    return frame.loc[mask]


def impact_target_pairs(frame: pd.DataFrame) -> list[tuple[str, str]]:
    return list(dict.fromkeys(zip(frame["impact"].astype(str), frame["target"].astype(str),
                                  strict=True)))


def setting(run: RunFolder, part: str, key: str, default):
    """One project setting of the run, as recorded in ``manifest.json`` (``project.PART.KEY``)."""
    value = ((run.manifest or {}).get("project") or {}).get(part, {}).get(key)
    return default if value is None else value


def score_for(run: RunFolder, impact: str, target: str) -> str:
    summary = run.table("skill_summary")
    if summary is not None:
        row = sel(summary, impact=impact, target=target)
        if not row.empty and pd.notna(row["ranking_score"].iloc[0]):
            return str(row["ranking_score"].iloc[0])
    skill = run.table("skill")
    if skill is not None and "rpss" in skill.columns:
        if sel(skill, impact=impact, target=target)["rpss"].notna().any():
            return "rpss"
    return "bss"


def county_names(run: RunFolder) -> pd.DataFrame | None:
    if run.counties is None:
        return None
    cols = [c for c in (COUNTY, "county_name", "region") if c in run.counties.columns]
    return pd.DataFrame(run.counties[cols])


@dataclass(frozen=True)
class CardChoice:
    """Which counties get a one-page card (``[report] county_cards`` / ``max_cards``)."""

    ids: tuple[str, ...]          # carded counties, in the run's county order
    unknown: tuple[str, ...]      # listed ids or names that are not counties of the run
    total: int                    # counties in the run
    limit: int                    # max_cards
    listed: bool                  # True when the project file lists the counties

    @property
    def every(self) -> bool:
        return len(self.ids) == self.total


def card_counties(run: RunFolder) -> CardChoice:
    """The counties with a card: those listed in ``[report] county_cards`` (ids or names,
    matched by their normal form: case, spaces, Unicode form), else every county when there are at most ``max_cards``, else none."""
    names = county_names(run)
    limit = int(setting(run, "report", "max_cards", 300))
    wanted = [str(c) for c in setting(run, "report", "county_cards", [])]
    if names is None or names.empty:
        return CardChoice((), tuple(wanted), 0, limit, bool(wanted))
    ids = names[COUNTY].astype(str)
    if not wanted:
        chosen = tuple(ids) if len(ids) <= limit else ()
        return CardChoice(chosen, (), len(ids), limit, False)
    label = names["county_name"].astype(str) if "county_name" in names.columns else ids
    from impactlink.inputs.keys import normalise_key  # the one normal form of text keys

    key = {normalise_key(k): i for k, i in zip(label, ids, strict=True)}
    key.update({normalise_key(i): i for i in ids})
    hit = {key[normalise_key(w)] for w in wanted if normalise_key(w) in key}
    return CardChoice(tuple(i for i in ids if i in hit),
                      tuple(w for w in wanted if normalise_key(w) not in key), len(ids), limit,
                      True)


def page_shapes(run: RunFolder) -> MapShapes:
    """County outlines for the page's maps, linking the counties that have a card."""
    choice = card_counties(run)
    return map_shapes(run.counties, linked=None if choice.every else frozenset(choice.ids))


def impact_of(run: RunFolder) -> dict[str, str]:
    """target -> impact, from whichever table names both."""
    for name in ("skill_summary", "skill", "curves"):
        frame = run.table(name)
        if frame is not None and {"impact", "target"} <= set(frame.columns):
            return dict(zip(frame["target"].astype(str), frame["impact"].astype(str),
                            strict=True))
    return {}


def name_map(run: RunFolder) -> dict[str, str]:
    names = county_names(run)
    if names is None or "county_name" not in names.columns:
        return {}
    return dict(zip(names[COUNTY].astype(str), names["county_name"].astype(str), strict=True))


def with_names(run: RunFolder, frame: pd.DataFrame) -> pd.DataFrame:
    names = county_names(run)
    if names is None or COUNTY not in frame.columns:
        return frame
    out = frame.merge(names, on=COUNTY, how="left")
    lead = [c for c in (COUNTY, "county_name", "region") if c in out.columns]
    return out[lead + [c for c in out.columns if c not in lead]]


def not_drawn(sid: str, title: str, exc: Exception) -> Markup:
    """Stand-in for a section whose builder failed on unexpected data."""
    return section(sid, title, absent(
        f"This section could not be built from this run's tables ({type(exc).__name__}: "
        f"{exc})."))


def primary_pairs(run: RunFolder, pairs: list[tuple[str, str]]) -> list[tuple[str, str]]:
    """The (impact, target) pairs that are an impact's primary target; the main sections
    draw figures for these only (derived thresholds and horizons are in the appendix). All
    pairs when the run has no skill summary to tell them apart."""
    summary = run.table("skill_summary")
    if summary is None or summary.empty or "target" not in summary.columns:
        return pairs
    from impactlink.report.sec_answers import primary_rows

    keep = set(primary_rows(summary)["target"].astype(str))
    known = set(summary["target"].astype(str))
    return [(i, t) for i, t in pairs if t in keep or t not in known]
