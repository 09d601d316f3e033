"""One-defect corpus for the project file: each case is the committed scenario's
``impactlink.toml`` with one mistake, and the exact problem line ``impactlink check`` reports.

The data folder of every case is a folder of links to the scenario's tables, so a case can
also drop a table. Every expected line names the file, the table and key, what was found and
what to write instead.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from impactlink.errors import ImpactlinkError, ProjectError
from impactlink.project import load_project

SCENARIO = Path(__file__).resolve().parents[2] / "scenario_data"
TEXT = (SCENARIO / "impactlink.toml").read_text(encoding="utf-8")


def make_case(tmp_path: Path, old: str, new: str, *, drop: tuple[str, ...] = ()) -> Path:
    """Write the scenario project with ``old`` replaced by ``new`` into ``tmp_path``, with
    links to the scenario's tables except those in ``drop``; return the project file."""
    data = tmp_path / "data"
    data.mkdir()
    for f in SCENARIO.iterdir():
        if f.is_file() and f.name not in drop and f.suffix != ".toml":
            (data / f.name).symlink_to(f)
    text = TEXT.replace('data_dir = "."', 'data_dir = "data"').replace(
        'output_dir = "../reports/scenario"', 'output_dir = "out"')
    if old:
        assert text.count(old) == 1, f"the case's text {old!r} must occur once"
        text = text.replace(old, new)
    (tmp_path / "trigger_plan.toml").symlink_to(SCENARIO / "trigger_plan.toml")
    path = tmp_path / "impactlink.toml"
    path.write_text(text, encoding="utf-8")
    return path


# (case id, text to replace, replacement, problem line after "<file>: ")
CASES = [
    ("class_edges_out_of_order", "class_pct = [10, 20, 30]", "class_pct = [30, 20, 10]",
     "impacts.maize_shortfall.class_pct: got [30, 20, 10] (not strictly increasing), expected a "
     "non-empty list of numbers above 0 and up to 100, strictly increasing; write class_pct = "
     "[10, 20, 30]"),
    ("true_in_quotes", "episodic = true", 'episodic = "true"',
     'impacts.restrictions.episodic: got "true" (text), expected true or false (no quotes); '
     "write episodic = true (no quotes)"),
    ("season_week_60", "season_week = 34", "season_week = 60",
     "impacts.maize_shortfall.season_week: got 60, expected a whole number from 1 to 53; write "
     "e.g. season_week = 31"),
    ("scales_as_text", "scales_weeks = [4, 8, 13, 26, 39, 52, 104]", 'scales_weeks = "13"',
     'indices.scales_weeks: got "13" (text), expected a non-empty list of whole numbers from 1 '
     "to 520, each once; write scales_weeks = [13] (no quotes)"),
    ("seed_in_words", "seed = 20261202", 'seed = "twenty"',
     'project.seed: got "twenty" (text), expected a whole number >= 0; write e.g. seed = 0'),
    ("empty_scale_list", "scales_weeks = [4, 8, 13, 26, 39, 52, 104]", "scales_weeks = []",
     "indices.scales_weeks: got an empty list, expected a non-empty list of whole numbers from 1 "
     "to 520, each once; write e.g. scales_weeks = [4, 8, 13, 26, 52]"),
    ("misspelt_impact_option", "class_pct = [10, 20, 30]", "clas_pct = [10, 20, 30]",
     "impacts.maize_shortfall.clas_pct: unknown option for source 'yields'; did you mean "
     "class_pct?"),
    ("unknown_table_key", 'traits = "traits.csv"', 'traits = "traits.csv"\nweather = "w.csv"',
     "tables.weather: unknown table; remove it; known: climate, counties, coverage, "
     "field_reports, indicators, notice_snapshots, notices, price_index, prices, traits, "
     "water_systems, yields"),
    ("misspelt_table_key", 'yields = "yields.csv"', 'yeilds = "yields.csv"',
     "tables.yeilds: unknown table; did you mean yields?"),
    ("misspelt_section_key", "seed = 20261202", "seeds = 20261202",
     "project.seeds: unknown key; did you mean seed?"),
    ("unknown_section", "[triggers]", "[colour]\nramp = 1\n\n[triggers]",
     "colour: unknown top-level table; remove it; known: audit, calibration, contrast, formats, "
     "impacts, indices, link, models, project, report, skill, tables, triggers, units"),
    ("calibration_reversed", "end_year = 2020", "end_year = 1985",
     "calibration.end_year: 1985 is before start_year 1991; write end_year = 1991 or later (or "
     "swap the two years)"),
    ("min_valid_days_9", "min_valid_days = 6", "min_valid_days = 9",
     "indices.min_valid_days: got 9, expected a whole number from 1 to 7; write e.g. "
     "min_valid_days = 6"),
    ("pet_method_unknown", 'pet_method = "hargreaves"', 'pet_method = "penman"',
     'indices.pet_method: got "penman" (text), expected one of "hargreaves", "thornthwaite", '
     '"supplied"; write e.g. pet_method = "hargreaves"'),
    ("index_unknown", 'indices = ["spi", "spei", "eddi"]', 'indices = ["spi", "pdsi"]',
     'indices.indices: got ["spi", "pdsi"] (a list), expected a list of texts from "spi", '
     '"spei", "eddi", each once; write e.g. indices = ["spi", "spei", "eddi"]'),
    ("audit_kind_unknown", 'kind = "value"', 'kind = "values"',
     'audit[1].kind: got "values" (text), expected one of "value", "percentile"; write e.g. '
     'kind = "value"'),
    ("audit_thresholds_increasing", "thresholds = [-1.0, -1.5, -2.0]",
     "thresholds = [-2.0, -1.5, -1.0]",
     "audit[1].thresholds: got [-2.0, -1.5, -1.0] (not strictly decreasing, mildest stage "
     "first), expected a non-empty list of numbers, strictly decreasing; write thresholds = "
     "[-1.0, -1.5, -2.0]"),
    ("audit_stage_count", 'stages = ["heads_up", "conserve", "restrict"]',
     'stages = ["heads_up", "restrict"]',
     "audit[2].stages: 3 thresholds but 2 stage names; give one stage name per threshold"),
    ("audit_percentile_above_100", "thresholds = [25.0, 10.0, 4.0]",
     "thresholds = [125.0, 10.0, 4.0]",
     "audit[2].thresholds: got [125.0, 10.0, 4.0], percentiles must be between 0 and 100; "
     "write e.g. thresholds = [25, 10, 4]"),
    ("audit_scale_not_computed", "scale_weeks = 26", "scale_weeks = 27",
     "audit[2].scale_weeks: 27 is not one of [indices] scales_weeks or scales_months; add 27 "
     "to [indices] scales_weeks, or audit a computed scale"),
    ("audit_periods_overlap", "early = [1981, 2002]\nlate = [2003, 2025]\nn_boot = 300\n\n"
     "[[audit]]", "early = [1981, 2010]\nlate = [2003, 2025]\nn_boot = 300\n\n[[audit]]",
     "audit[1].late: starts in 2003, not after the early period [1981, 2010]; give an early "
     "period that ends before the late one"),
    ("negative_lag", "lags_weeks = [0, 2, 4, 8, 13, 26]", "lags_weeks = [0, -2]",
     "link.lags_weeks: got [0, -2] (a list), expected a non-empty list of whole numbers from 0 "
     "to 520, each once; write e.g. lags_weeks = [0, 2, 4, 8, 13, 26]"),
    ("crs_not_projected", 'equal_area_crs = "EPSG:5070"', 'equal_area_crs = "EPSG:4326"',
     "link.equal_area_crs: 'EPSG:4326' is not projected (areas would be in square degrees); "
     'write an equal-area projection, e.g. "EPSG:5070"'),
    ("model_link_unknown", 'link = "logit"', 'link = "cloglog"',
     'models.link: got "cloglog" (text), expected one of "logit", "probit"; write e.g. link = '
     '"logit"'),
    ("curve_ci_in_percent", "curve_ci = 0.9", "curve_ci = 90",
     "models.curve_ci: got 90, expected a number above 0 and below 1; write e.g. curve_ci = 0.9"),
    ("k_folds_1", "k_folds = 5", "k_folds = 1",
     "skill.k_folds: got 1, expected a whole number from 2 to 1000; write e.g. k_folds = 5"),
    ("cv_misspelt", 'cv = "leave_one_year_out"', 'cv = "leave_one_year"',
     'skill.cv: got "leave_one_year" (text), expected one of "leave_one_year_out", '
     '"blocked_k_fold", "leave_one_region_out"; write e.g. cv = "leave_one_year_out"'),
    ("pairs_as_number", "pairs = true", "pairs = 1",
     "skill.pairs: got 1, expected true or false (no quotes); write e.g. pairs = true"),
    ("entry_weeks_0", "entry_weeks = 2", "entry_weeks = 0",
     "triggers.entry_weeks: got 0, expected a whole number from 1 to 520; write e.g. "
     "entry_weeks = 2"),
    ("jobs_0", "jobs = 1", "jobs = 0",
     "project.jobs: got 0, expected a whole number from 1 to 1024; write e.g. jobs = 1"),
    ("impact_source_unknown", 'source = "field_reports"', 'source = "tweets"',
     'impacts.crop_reports.source: source "tweets" (text); expected one of "yields", "prices", '
     '"notices", "field_reports"; write e.g. source = "yields"'),
    ("window_stat_median", 'window_stat = "mean"', 'window_stat = "median"',
     'impacts.hay_price_spike.window_stat: got "median" (text), expected one of "value", "min", '
     '"mean"; write e.g. window_stat = "value"'),
    ("trend_cubic", 'trend = "linear"', 'trend = "cubic"',
     'impacts.maize_shortfall.trend: got "cubic" (text), expected one of "auto", "linear", '
     '"quadratic", "lowess"; write e.g. trend = "auto"'),
    ("horizon_repeats", "horizon_weeks = [4, 13]", "horizon_weeks = [4, 4]",
     "impacts.restrictions.horizon_weeks: got [4, 4] (a value repeats), expected a non-empty "
     "list of whole numbers from 1 to 520, each once; write horizon_weeks = [4]"),
    ("stage_level_in_words", "caution = 1,", 'caution = "one",',
     'impacts.restrictions.stage_names: got a table, expected issuer -> { stage name = whole '
     'level >= 0 }; write e.g. stage_names = { "Pine Utility" = { voluntary = 1 } }'),
    ("ladder_as_number", "ladder = [1, 2, 3]", "ladder = 3",
     "impacts.restrictions.ladder: got 3, expected a list of level names or numbers, mildest "
     'first; write e.g. ladder = ["caution", "cutback", "ration"]'),
    ("onset_above_ladder", "episodic = true", "episodic = true\nonset_level = 5",
     "impacts.restrictions.onset_level: 5 is above the top of the ladder (level 3); write "
     "onset_level = 1 to 3"),
    ("baseline_years_0", "baseline_years = 5", "baseline_years = 0",
     "impacts.hay_price_spike.baseline_years: got 0, expected a whole number from 1 to 100; "
     "write e.g. baseline_years = 5"),
    ("sector_empty_text", 'sector = "crops"', 'sector = ""',
     'impacts.crop_reports.sector: got "" (text), expected a text or a list of texts; write '
     'e.g. sector = "crops"'),
    ("seed_negative", "seed = 20261202", "seed = -3",
     "project.seed: got -3, expected a whole number >= 0; write e.g. seed = 0"),
]


@pytest.mark.parametrize(("old", "new", "expected"), [c[1:] for c in CASES],
                         ids=[c[0] for c in CASES])
def test_one_defect_gives_one_exact_problem(tmp_path, old, new, expected):
    path = make_case(tmp_path, old, new)
    with pytest.raises(ProjectError) as info:
        load_project(path)
    assert info.value.problems == (f"{path}: {expected}",)
    assert str(info.value) == f"{path}: {expected}"  # one problem: the message is that line


def test_file_path_that_does_not_exist_is_named_resolved(tmp_path):
    path = make_case(tmp_path, 'yields = "yields.csv"', 'yields = "yields_2020.csv"')
    with pytest.raises(ProjectError) as info:
        load_project(path)
    missing = (tmp_path / "data" / "yields_2020.csv").resolve()
    assert info.value.problems == (
        f"{path}: tables.yields: the file {missing} does not exist; check the name and folder "
        "(paths are relative to data_dir)",)


def test_data_folder_that_does_not_exist(tmp_path):
    path = make_case(tmp_path, "", "")
    path.write_text(path.read_text().replace('data_dir = "data"', 'data_dir = "dtaa"'))
    with pytest.raises(ProjectError) as info:
        load_project(path)
    assert info.value.problems[0] == (
        f"{path}: project.data_dir: the folder {(tmp_path / 'dtaa').resolve()} does not exist; "
        "create it, or write the folder that holds your tables")


def test_impact_whose_source_table_is_absent(tmp_path):
    path = make_case(tmp_path, 'yields = "yields.csv"\n', "", drop=("yields.csv",))
    with pytest.raises(ProjectError) as info:
        load_project(path)
    assert info.value.problems == (
        f"{path}: impacts.maize_shortfall.source: source 'yields' needs the yields table(s), "
        'none found; add yields = "yields.csv" under [tables] or remove [impacts.maize_shortfall]',)


def test_source_table_found_in_the_data_folder_is_enough(tmp_path):
    """A table not named under [tables] but present in the data folder counts (as the inputs
    stage finds it by name)."""
    path = make_case(tmp_path, 'yields = "yields.csv"\n', "")
    assert load_project(path).impacts[0].source == "yields"


def test_byte_order_mark_is_accepted(tmp_path):
    path = make_case(tmp_path, "", "")
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    assert load_project(path).seed == 20261202


def test_invalid_toml_names_the_file(tmp_path):
    path = make_case(tmp_path, "[models]", "[models")
    with pytest.raises(ProjectError, match=re.escape(f"project file {path} is not valid TOML")):
        load_project(path)


def test_not_utf8_names_the_file(tmp_path):
    path = make_case(tmp_path, "", "")
    path.write_bytes(path.read_bytes().replace(b"Vellmora", b"Vellm\xf6ra"))
    with pytest.raises(ProjectError, match=r"is not UTF-8 text \(byte \d+\); save it as UTF-8"):
        load_project(path)


def test_every_problem_is_listed_at_once(tmp_path):
    path = make_case(tmp_path, "seed = 20261202", 'seed = "twenty"')
    path.write_text(path.read_text().replace("season_week = 34", "season_week = 60")
                    .replace('link = "logit"', 'link = "cloglog"'))
    with pytest.raises(ProjectError) as info:
        load_project(path)
    exc = info.value
    assert [p.split(": ")[1] for p in exc.problems] == [
        "project.seed", "models.link", "impacts.maize_shortfall.season_week"]
    lines = str(exc).splitlines()
    assert lines[0] == f"{path}: 3 problems in the project file; fix each:"
    assert lines[1:] == list(exc.problems)
    assert isinstance(exc, ImpactlinkError)
