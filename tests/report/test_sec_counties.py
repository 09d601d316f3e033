"""County cards: every county in a small run; only the listed ones (or none, with a summary by
region) in a large one; every link on the page lands on an element of the page."""

from __future__ import annotations

import json
import re

import pandas as pd
from _pageparse import SectionPage

from impactlink.report.common import card_counties
from impactlink.report.runfolder import read_run_folder
from impactlink.report.sec_counties import finder_section


def _run(make_run, tmp_path, **report):
    folder = make_run(tmp_path / "run")
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    man["project"]["report"] = report
    (folder / "manifest.json").write_text(json.dumps(man), encoding="utf-8")
    return read_run_folder(folder)


def _targets(markup: str) -> tuple[set[str], set[str]]:
    ids = set(re.findall(r'\sid="([^"]+)"', markup))
    hrefs = set(re.findall(r'href="#([^"]+)"', markup))
    return ids, hrefs


def test_a_small_run_cards_every_county(make_run, tmp_path):
    run = _run(make_run, tmp_path)
    choice = card_counties(run)
    assert choice.every and len(choice.ids) == 6
    markup = str(finder_section(run))
    assert markup.count('class="county-card"') == 6
    ids, hrefs = _targets(markup)
    assert {h for h in hrefs if h.startswith("county-")} <= ids


def test_above_max_cards_no_card_but_a_region_summary(make_run, tmp_path):
    run = _run(make_run, tmp_path, county_cards=[], max_cards=4)
    markup = str(finder_section(run))
    page = SectionPage(markup)
    assert 'class="county-card"' not in markup
    assert "holds 6 counties, more than the 4" in page.text
    assert "[report] county_cards" in page.text
    assert 'href="#county-' not in markup  # no link to a card that is not drawn
    region = next(t for t in page.tables if "region" in t["header"])
    assert {r[0]: r[1] for r in region["rows"]} == {"Lowland": "3", "Upland": "3"}
    # the median of each region's county skill, computed here from the run's own layer
    best = run.layers["best_candidate"]
    best = pd.DataFrame(best.drop(columns="geometry"))
    names = run.counties.set_index("county_id")["region"]
    best = best.assign(region=best["county_id"].map(names))
    want = best[best["impact"] == "crop_shortfall"].groupby("region")["skill"].median()
    col = region["header"].index("Crop shortfall: median county skill")
    got = {r[0]: float(r[col]) for r in region["rows"]}
    assert got == {k: round(float(v), 2) for k, v in want.items()}
    assert "click one" not in page.text


def test_listed_counties_by_id_or_name_and_unknown_ones_named(make_run, tmp_path):
    run = _run(make_run, tmp_path, county_cards=["90001", "elkwash", "Nowhere Flats"],
               max_cards=300)
    choice = card_counties(run)
    assert choice.ids == ("90001", "90004") and choice.unknown == ("Nowhere Flats",)
    markup = str(finder_section(run))
    assert markup.count('class="county-card"') == 2
    ids, hrefs = _targets(markup)
    assert {h for h in hrefs if h.startswith("county-")} <= ids
    assert "Nowhere Flats" in SectionPage(markup).text
