"""build_report: a pure function of the run folder, robust to missing tables."""

from __future__ import annotations

import base64
import json
import re
from html.parser import HTMLParser

import pandas as pd
import pyogrio
import pytest

from impactlink.report import ReportError, ReportWarning, build_report, read_run_folder
from impactlink.report import build as build_module
from impactlink.report.build import AFTER_MAIN, SECTIONS
from impactlink.report.common import FigureSink
from impactlink.report.sec_contrast import contrast_section
from impactlink.report.sec_data import data_section
from impactlink.report.sec_outlook import outlook_section
from impactlink.report.sec_skill import (
    maps_section,
    persistence_section,
    reliability_section,
    skill_section,
)
from impactlink.report.sec_triggers import triggers_section
from impactlink.report.text import CAUTIONS
from impactlink.report.words_methods import METHODS, REFERENCES

NOT_COMPUTED = "Not computed in this run."


class _Sections(HTMLParser):
    """Map section id -> its text; collect images and links."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.text: dict[str, list[str]] = {}
        self.order: list[str] = []
        self.imgs: list[dict] = []
        self.hrefs: list[str] = []
        self._current = "_top"
        self._skip = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section":
            self._current = a["id"]
            self.order.append(a["id"])
        if tag == "img":
            self.imgs.append(a)
        if tag == "a":
            self.hrefs.append(a.get("href", ""))
        if tag in ("style",):
            self._skip = True

    def handle_endtag(self, tag):
        if tag == "section":
            self._current = "_between"
        if tag == "style":
            self._skip = False

    def handle_data(self, data):
        if not self._skip:
            self.text.setdefault(self._current, []).append(data)

    def section(self, sid: str) -> str:
        return " ".join(" ".join(self.text.get(sid, [])).split())


def _parse(path) -> tuple[str, _Sections]:
    return _parse_markup(path.read_text(encoding="utf-8"))


def _parse_markup(text: str) -> tuple[str, _Sections]:
    p = _Sections()
    p.feed(text)
    return text, p


def test_full_run_writes_page_figures_tables_and_layers(built):
    run, html, messages = built
    assert html == run / "report.html"
    text, p = _parse(html)
    pngs = sorted((run / "figures").glob("*.png"))
    assert len(pngs) == len(p.imgs) >= 15
    for img in p.imgs:
        assert img["alt"].strip(), "every image has alt text"
        payload = base64.b64decode(img["src"].removeprefix("data:image/png;base64,"))
        assert payload[:8] == b"\x89PNG\r\n\x1a\n"
    # No network dependency: no external source, stylesheet or script.
    assert not re.search(r"""(src|href)=["']?(https?:)?//""", text)
    assert "<script" not in text and "<link" not in text
    # Tables: a Parquet copy beside each CSV, same content.
    for name in ("skill", "audit", "outlook", "curves"):
        csv = pd.read_csv(run / f"{name}.csv", dtype={"county_id": str})
        pq = pd.read_parquet(run / f"{name}.parquet")
        assert list(pq.columns) == list(csv.columns) and len(pq) == len(csv)
    layers = {row[0] for row in pyogrio.list_layers(run / "counties.gpkg")}
    assert {"counties", "best_candidate", "audit", "outlook"} <= layers
    audit_layer = pyogrio.read_dataframe(run / "counties.gpkg", layer="audit")
    assert set(audit_layer["period"]) == {"record"}
    assert any("report:" in m for m in messages) and str(html) in messages[-1]


def test_first_screen_has_cautions_then_an_answer_per_impact(built):
    run, html, _ = built
    text, p = _parse(html)
    top = p.section("_top")
    assert "Read with care" in top
    assert "Association, not cause" in top and "Decisions" in top
    # The fake run is not the scenario (project name "Tallow Creek..."): no demo banner.
    assert "Invented data" not in top
    # One plain answer per primary impact (derived targets onset / escalation are not on it).
    for words in ("Crop shortfall", "Water-use restrictions: restriction level in force",
                  "ranked probability skill score", "Brier skill score", "90 % interval",
                  "Climatology (score 0)", "Persistence (score 0.12)"):
        assert words in top, words
    assert "new restriction episode" not in top and "onset" not in top
    # Persistence scores 0.12 in the fake skill table; the read-off must follow the numbers.
    assert "beats every baseline" not in top
    for who in ("Drought committee", "Extension agent", "Researcher"):
        assert who in top
    assert p.order[0] == "data"  # the main part follows the first screen
    assert "glossary" in p.order and "finder" in p.order
    summary = p.section("summary")
    for words in ("13-week time scale", "skill score", "statistically as good",
                  "events among 600", "the index adds warning beyond persistence"):
        assert words in summary, words
    # The derived targets are in the appendix.
    assert "a new restriction episode starting" in p.section("appendix")


def test_data_section_shows_inputs_rejections_and_event_counts(built):
    _, html, _ = built
    _, p = _parse(html)
    data = p.section("data")
    assert "climate.csv" in data and "1981-01-01" in data and "2025-06-01" in data
    assert "missing-value sentinel -999" in data and "start_date after end_date" in data
    assert "restrictions:state" in data and "events" in data
    assert "outside_coverage" in data


def test_cautions_and_methods_carry_required_text(built):
    _, html, _ = built
    _, p = _parse(html)
    cautions = p.section("cautions")
    assert "statistical association" in cautions and "do not show that dryness caused" in cautions
    for limit in ("coverage", "reporting", "Short records", "few events"):
        assert limit in cautions
    assert "responsible authorities" in cautions and "local codes" in cautions
    assert "licensed professional practice" in cautions
    assert [h for h, _ in CAUTIONS][0] in cautions
    methods = p.section("methods")
    for ref in ("McKee", "Vicente-Serrano", "Hobbins", "Hargreaves", "Allen", "McCullagh",
                "Brier", "Murphy", "Singer", "Efron"):
        assert ref in methods


def test_persistence_comparison_for_restriction_targets(built):
    _, html, _ = built
    _, p = _parse(html)
    skill = p.section("persistence")
    assert "Warning beyond persistence" in skill
    for target in ("restriction level in force each week", "a new restriction episode starting",
                   "a move to a stricter level"):
        assert f"For {target}, the index adds warning beyond persistence (knowing" in skill
    for label in ("index alone", "persistence alone", "index + persistence"):
        assert label in skill


def test_provenance_lists_checksums_versions_seed(built):
    _, html, _ = built
    _, p = _parse(html)
    prov = p.section("provenance")
    assert "ab" * 32 in prov and "cd" * 32 in prov
    assert "numpy" in prov and "seed" in prov and "skill" in prov
    assert "How each index was computed" in prov and "EDDI, <non-parametric>" in prov
    assert "[1991, 2020]" in prov


def test_rebuilding_gives_the_same_page(built):
    run, html, _ = built
    first = html.read_text(encoding="utf-8")
    second = build_report(run).read_text(encoding="utf-8")
    assert first == second


def test_every_id_on_the_page_is_unique(built):
    # HTML Living Standard, "the id attribute": an id is unique in its document (maps drawn
    # inline as SVG share the document, so their patterns and gradients need their own ids)
    import re
    from collections import Counter

    page = built[1].read_text(encoding="utf-8")
    ids = Counter(re.findall(r'\sid="([^"]+)"', page))
    assert len(ids) > 20
    assert [i for i, n in ids.items() if n > 1] == []
    for ref in set(re.findall(r'url\(#([^)]+)\)', page)) | set(re.findall(r'href="#([^"]+)"', page)):
        assert ref in ids, ref  # every in-page link and fill reference lands on an element


FILES = ["skill.csv", "skill_summary.csv", "reliability.csv", "curves.csv", "crossings.csv",
         "audit.csv", "outlook.csv", "reconciliation.csv", "rejected_rows.csv", "manifest.json",
         "counties.gpkg", "triggers.csv", "trigger_timeline.csv", "contrast.csv",
         "county_excess.csv", "contrast_pairs.csv"]


def test_every_section_survives_when_all_tables_are_missing(tmp_path, make_run):
    run = make_run(tmp_path / "run", skip=FILES)
    html = build_report(run)
    _, p = _parse(html)
    for sid in ("curves", "skill", "reliability", "maps", "audit", "triggers", "contrast",
                "outlook"):
        assert NOT_COMPUTED in p.section(sid), sid
    assert "Not computed in this run" in p.section("summary")
    assert "manifest.json is missing" in p.section("provenance")
    assert "Association, not cause" in p.section("_top")
    assert p.imgs == []


@pytest.mark.parametrize(("missing", "sid"), [
    ("skill.csv", "skill"), ("counties.gpkg", "maps"), ("curves.csv", "curves"),
    ("audit.csv", "audit"), ("outlook.csv", "outlook"), ("reliability.csv", "reliability"),
])
def test_one_missing_table_costs_only_its_own_section(tmp_path, make_run, missing, sid):
    run = read_run_folder(make_run(tmp_path / "run", skip=[missing]))
    builders = {s: b for s, _, b in SECTIONS + AFTER_MAIN}
    sink = FigureSink()
    assert NOT_COMPUTED in builders[sid](run, sink)
    # A section that does not need the missing file still draws.
    other = "reliability" if sid != "reliability" else "curves"
    assert NOT_COMPUTED not in builders[other](run, sink) and sink.files


def test_trigger_section_compares_uniform_and_local_plans(built):
    run, html, _ = built
    _, p = _parse(html)
    trig = p.section("triggers")
    assert "local thresholds score 0.40 against 0.35 for one uniform threshold" in trig
    assert "on years held out of the tuning, 0.33 against 0.34" in trig
    assert (run / "figures" / "trigger_timeline_restrictions_state.png").exists()
    assert (run / "figures" / "trigger_map_restrictions_restrictions_state.png").exists()
    assert "Alder Bend" in trig


def test_contrast_section_shows_traits_and_county_excess(built):
    run, html, _ = built
    _, p = _parse(html)
    con = p.section("contrast")
    alts = " ".join(i["alt"] for i in p.imgs)
    assert "irrigated_share 0.70 (0.50 to 0.95)" in alts
    assert "irrigated_share" in con and "0.950" in con
    assert "association" in con.lower() and "not effects" in con
    assert (run / "figures" / "county_excess_crop_shortfall_class.png").exists()


def test_trigger_and_contrast_sections_each_work_alone(tmp_path, make_run):
    folder = make_run(tmp_path / "run", skip=["trigger_timeline.csv", "county_excess.csv",
                                             "contrast.csv"])
    run = read_run_folder(folder)
    sink = FigureSink()
    _, p = _parse_markup(triggers_section(run, sink))
    assert "Replay timelines" not in p.section("triggers")
    assert NOT_COMPUTED in contrast_section(run, sink)
    assert any(name.startswith("trigger_map") for name in sink.files)


def test_damaged_table_warns_and_is_named(tmp_path, make_run):
    folder = make_run(tmp_path / "run")
    pd.DataFrame({"impact": ["x"], "unexpected": [1]}).to_csv(folder / "skill.csv", index=False)
    with pytest.warns(ReportWarning, match=r"skill: lacks column\(s\)"):
        run = read_run_folder(folder)
    _, p = _parse_markup(data_section(run, FigureSink()))
    assert "skill: lacks column(s)" in p.section("data")
    assert NOT_COMPUTED in skill_section(run, FigureSink())


def test_a_failing_section_is_replaced_by_a_note(tmp_path, make_run, monkeypatch):
    folder = make_run(tmp_path / "run", skip=FILES)

    def broken(run, figs):
        raise KeyError("surprise")

    monkeypatch.setattr(build_module, "SECTIONS", (("methods", "Methods", broken),))
    with pytest.warns(ReportWarning, match="report section 'methods' failed"):
        html = build_report(folder)
    assert "could not be built from this run" in html.read_text(encoding="utf-8")


def test_missing_run_folder_is_a_clear_error(tmp_path):
    with pytest.raises(ReportError, match=r"does not exist or is not a folder; pass the output"):
        build_report(tmp_path / "nowhere")


def test_skill_stage_model_names_are_understood(tmp_path, make_run):
    # The skill stage names single candidates "index", the combined model
    # "index_persistence", and writes one persistence baseline per lag.
    folder = make_run(tmp_path / "run")
    skill = pd.read_csv(folder / "skill.csv")
    skill["model"] = skill["model"].replace({"logistic": "index", "ordinal_logit": "index",
                                             "index_plus_persistence": "index_persistence"})
    extra = skill[skill["model"] == "persistence"].assign(lag_weeks=8, bss=0.01)
    pd.concat([skill, extra]).to_csv(folder / "skill.csv", index=False)
    run = read_run_folder(folder)
    sink = FigureSink()
    _, p = _parse_markup(persistence_section(run, sink))
    text = p.section("persistence")
    assert "Warning beyond persistence" in text and "index + persistence" in text
    assert "persistence_restrictions.png" in sink.files


def test_skill_stage_reliability_and_local_tables_are_drawn(tmp_path, make_run):
    # Reliability as the skill stage writes it (score-module column names, no impact or
    # model), and per-county best candidates from skill_local.csv instead of a GIS layer.
    folder = make_run(tmp_path / "run")
    pd.DataFrame(dict(target="state", bin=[0, 5], p_lo=[0.0, 0.5], p_hi=[0.1, 0.6],
                      mean_forecast=[0.05, 0.55], observed_frequency=[0.04, 0.6], n=[300, 20],
                      events=[12, 12])).to_csv(folder / "reliability.csv", index=False)
    import pyogrio

    counties = pyogrio.read_dataframe(folder / "counties.gpkg", layer="counties")
    (folder / "counties.gpkg").unlink()
    counties.to_file(folder / "counties.gpkg", layer="counties", driver="GPKG")
    pd.DataFrame(dict(impact="restrictions", target="state", level=["unit", "unit", "region"],
                      unit=["90000", "90001", "Upland"], index=["spi", "spei", "spi"],
                      scale_weeks=13, lag_weeks=4, rpss=[0.2, 0.1, 0.15], events=[5, 9, 14],
                      n=100)).to_csv(folder / "skill_local.csv", index=False)
    run = read_run_folder(folder)
    sink = FigureSink()
    _, p = _parse_markup(reliability_section(run, sink) + maps_section(run, sink))
    assert "reliability_restrictions_state.png" in sink.files
    maps = p.section("maps")
    assert "SPEI over 13 weeks, 4 weeks ahead" in maps and "Brackwater" in maps
    assert "0.150" not in maps  # the region row (level "region") is not a county
    assert "Brackwater: SPEI" in maps  # the county's name and value in the map's <title>


def test_every_reference_is_cited_and_every_citation_listed():
    import re as _re

    text = " ".join(body for _, body in METHODS)
    cited = set(_re.findall(r"([A-Z][\w\u00C0-\u017F-]+)(?: et al\.| & [A-Z][\w-]+)? \(?(\d{4})", text))
    listed = set()
    for ref in REFERENCES:
        author = ref.split(",")[0].split(" (")[0]
        year = _re.search(r"\((\d{4})\)", ref).group(1)
        listed.add((author.split()[-1] if author.startswith("World") else author, year))
    listed = {("WMO", y) if a == "Organization" else (a, y) for a, y in listed}
    missing_in_list = {c for c in cited if c not in listed and c[0] != "ISO"}  # ISO 8601 weeks
    uncited = {item for item in listed if item not in cited}
    assert missing_in_list == set() and uncited == set(), (missing_in_list, uncited)


def test_link_summary_gives_record_lengths_and_events_per_target(tmp_path, make_run):
    folder = make_run(tmp_path / "run")
    pd.DataFrame(dict(target=["restrictions:onset"], impact="restrictions", grain="county_week",
                      rows=[5000], events=[77], events_by_level=["0:4923;1:77"], years=[31],
                      first_year=[1994], last_year=[2024], units=[6])).to_csv(
        folder / "link_summary.csv", index=False)
    run = read_run_folder(folder)
    _, p = _parse_markup(data_section(run, FigureSink()))
    data = p.section("data")
    assert "restrictions:onset" in data and "0:4923;1:77" in data and "1994" in data
    assert "restrictions:state" not in data.split("Impact targets")[1].split("Rejected")[0]


def test_outlook_maps_the_first_level_and_tabulates_all(tmp_path, make_run):
    folder = make_run(tmp_path / "run")
    ids = ["90000", "90001"]
    rows = [dict(county_id=c, impact="crop", target="crop:class", horizon_weeks=h, level_k=k,
                 level_label=lab, prob=p, as_of_week="2025-06-02")
            for c in ids for h in (0, 4) for k, lab, p in ((1, "minor", 0.6), (2, "major", 0.2))]
    pd.DataFrame(rows).to_csv(folder / "outlook.csv", index=False)
    run = read_run_folder(folder)
    sink = FigureSink()
    _, p = _parse_markup(outlook_section(run, sink))
    assert sink.files == {}  # maps are inline SVG now, not PNG figures
    markup = outlook_section(run, FigureSink())
    assert markup.count('<svg') == 2 and markup.count("<title>") == 2 * 6
    text = p.section("outlook")
    assert "Chance now" in text and "Chance 4 weeks ahead" in text
    assert "minor" in text and "major" in text and "2025-06-02" in text


def test_outlook_says_when_a_season_has_closed_and_reads_tuple_cells(tmp_path, make_run):
    # A crop season ending ISO week 34; the outlook is dated week 52 of the same year.
    folder = make_run(tmp_path / "run")
    rows = [dict(county_id=c, impact="crop", target="crop:class", index="spei", scale_weeks=13,
                 lag_weeks=0, horizon_weeks=0, level_k=1, level_label="shortfall_10pct",
                 prob=0.97, as_of_week="2025-12-22", model="('crop:class', 'spei', 13, 0)")
            for c in ("90000", "90001")]
    pd.DataFrame(rows).to_csv(folder / "outlook.csv", index=False)
    man = json.loads((folder / "manifest.json").read_text())
    man.setdefault("project", {})["impacts"] = [
        {"name": "crop", "source": "yields", "options": {"season_week": 34}}]
    (folder / "manifest.json").write_text(json.dumps(man))
    markup = outlook_section(read_run_folder(folder), FigureSink())
    assert "<svg" not in markup  # a closed season is not drawn as a forecast
    assert "season window (ending ISO week 34" in markup and "closed" in markup
    assert "cannot be given yet" in markup and "longest fitted lead (0 weeks)" in markup
    from impactlink.report.sec_outlook import scalar_columns

    tidy = scalar_columns(pd.DataFrame(rows))
    assert tidy["model"].iloc[0] == "crop:class, spei, 13, 0"
