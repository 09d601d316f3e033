"""Project file: defaults, round trip of the rendered file, and error messages."""

import tomllib

import pytest

from impactlink.project import (
    AuditLadder,
    ProjectError,
    load_project,
    project_from_dict,
)
from impactlink.project_template import render_project_file


def test_rendered_file_round_trips_to_defaults(tmp_path):
    text = render_project_file({"climate": "climate.csv", "counties": "counties.geojson"})
    (tmp_path / "impactlink.toml").write_text(text)
    for name in ("climate.csv", "counties.geojson"):  # load_project checks that files exist
        (tmp_path / name).write_text("")
    p = load_project(tmp_path)  # a folder finds impactlink.toml
    assert p.calibration.start_year == 1991 and p.calibration.end_year == 2020
    assert p.indices.scales_weeks == (4, 8, 13, 26, 39, 52, 104)
    assert p.audit[0] == AuditLadder()
    assert p.tables["climate"] == (tmp_path / "climate.csv").resolve()


def test_default_ladder_is_mckee_classes():
    # McKee et al. (1993) / WMO SPI User Guide (2012): moderately dry -1.0, severely -1.5, extremely -2.0
    lad = AuditLadder()
    assert lad.thresholds == (-1.0, -1.5, -2.0)


def test_impacts_with_issuer_stage_names_round_trip(tmp_path):
    text = render_project_file(
        {"climate": "c.csv"},
        impacts={"restrictions": {"source": "notices", "stage_names": {"Quill Water": {"amber": 2}}}},
    )
    p = project_from_dict(tomllib.loads(text), base=tmp_path)
    (spec,) = p.impacts
    assert spec.source == "notices"
    assert spec.options["stage_names"] == {"Quill Water": {"amber": 2}}


@pytest.mark.parametrize(
    "raw, message",
    [
        ({"indices": {"scale_weeks": [4]}}, r"indices\.scale_weeks: unknown key; did you mean scales_weeks\?"),
        ({"colour": {}}, r"colour: unknown top-level table"),
        ({"impacts": {"x": {"source": "tweets"}}}, r"impacts\.x\.source: source \"tweets\" \(text\); expected one of"),
        ({"models": {"link": "cloglog"}}, r"models\.link: got \"cloglog\" \(text\), expected one of \"logit\", \"probit\""),
        ({"calibration": {"start_year": 2000, "end_year": 1990}}, r"calibration\.end_year: 1990 is before start_year 2000"),
        ({"audit": {"thresholds": [-1.0], "stages": ["a", "b"]}}, r"audit\[1\]\.stages: 1 thresholds but 2 stage names"),
        ({"link": {"lags_weeks": [-1]}}, r"link\.lags_weeks: got \[-1\] \(a list\), expected a non-empty list of whole numbers from 0"),
        ({"tables": {"weather": "w.csv"}}, r"tables\.weather: unknown table"),
        ({"project": 3}, r"project: got 3, expected a table; write \[project\] on its own line"),
        ({"audit": [1]}, r"audit\[1\]: got 1, expected a table"),
        ({"impacts": {"x": {"source": "yields", "crop": []}}}, r"impacts\.x\.crop: got \[\] \(a list\), expected a text or a list of texts"),
        ({"impacts": {"x": {"source": "prices", "baseline_years": 3, "min_baseline_years": 4}}},
         r"impacts\.x\.min_baseline_years: 4 is more than baseline_years 3; write min_baseline_years = 3 or less"),
        ({"indices": {"scales_weeks": [4.0, 13]}}, r"write scales_weeks = \[4, 13\]$"),
    ],
)
def test_bad_settings_name_the_table_and_key(raw, message):
    with pytest.raises(ProjectError, match=message):
        project_from_dict(raw)


def test_input_stage_options_are_left_to_the_inputs_stage_in_code():
    """Built in code, the options the inputs stage reads (ladder, stage_names, severity_range)
    are checked there; load_project (complete=True) checks them in the schema."""
    raw = {"impacts": {"x": {"source": "notices", "ladder": 3}}}
    assert project_from_dict(raw).impacts[0].options == {"ladder": 3}
    with pytest.raises(ProjectError, match=r"impacts\.x\.ladder: got 3, expected a list"):
        project_from_dict(raw, complete=True)


def test_impact_option_names_match_the_linking_stage():
    """The schema's option names are the ones the linking stage accepts (one list each)."""
    from impactlink.link.notices import NOTICE_OPTIONS
    from impactlink.link.prices import PRICE_OPTIONS
    from impactlink.link.reports import REPORT_OPTIONS
    from impactlink.link.yields import YIELD_OPTIONS
    from impactlink.project_schema import IMPACT_OPTIONS

    assert set(IMPACT_OPTIONS["yields"]) == YIELD_OPTIONS
    assert set(IMPACT_OPTIONS["prices"]) == PRICE_OPTIONS
    assert set(IMPACT_OPTIONS["notices"]) == NOTICE_OPTIONS
    assert set(IMPACT_OPTIONS["field_reports"]) == REPORT_OPTIONS


def test_schema_covers_every_settings_field():
    """Every field of every settings dataclass has a schema key, and every default passes."""
    import dataclasses

    from impactlink.project import (
        Calibration,
        ContrastSettings,
        IndexSettings,
        LinkSettings,
        ModelSettings,
        SkillSettings,
        TriggerSettings,
    )
    from impactlink.project_schema import SECTIONS, check_value

    for section, cls in [("calibration", Calibration), ("indices", IndexSettings),
                         ("audit", AuditLadder), ("link", LinkSettings),
                         ("models", ModelSettings), ("skill", SkillSettings),
                         ("triggers", TriggerSettings), ("contrast", ContrastSettings)]:
        defaults = cls() if section != "audit" else AuditLadder()
        assert {f.name for f in dataclasses.fields(cls)} == set(SECTIONS[section])
        for f in dataclasses.fields(cls):
            v = getattr(defaults, f.name)
            v = list(v) if isinstance(v, tuple) else v
            if v is None:  # an optional key whose default is "not written"
                continue
            assert check_value(section, f.name, v, SECTIONS[section][f.name]) == [], f.name


def test_error_keeps_problems_through_pickling():
    import pickle

    exc = ProjectError("a.toml: 2 problems\na\nb", problems=("a", "b"))
    back = pickle.loads(pickle.dumps(exc))
    assert back.problems == ("a", "b") and str(back) == str(exc)


def test_missing_and_broken_files(tmp_path):
    with pytest.raises(ProjectError, match="does not exist; create one with `impactlink init FOLDER`"):
        load_project(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[project\nname=1")
    with pytest.raises(ProjectError, match="is not valid TOML"):
        load_project(bad)
