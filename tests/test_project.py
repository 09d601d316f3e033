"""Project file: defaults, round trip of the rendered file, and error messages."""

import tomllib

import pytest

from impactlink.project import (
    AuditLadder,
    ProjectError,
    load_project,
    project_from_dict,
    render_project_file,
)


def test_rendered_file_round_trips_to_defaults(tmp_path):
    text = render_project_file({"climate": "climate.csv", "counties": "counties.geojson"})
    (tmp_path / "impactlink.toml").write_text(text)
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
        ({"indices": {"scale_weeks": [4]}}, r"\[indices\] has unknown key\(s\) \['scale_weeks'\]"),
        ({"colour": {}}, r"top level has unknown key"),
        ({"impacts": {"x": {"source": "tweets"}}}, r"source must be one of"),
        ({"models": {"link": "cloglog"}}, r"\[models\] link must be one of"),
        ({"calibration": {"start_year": 2000, "end_year": 1990}}, r"end_year 1990 is before start_year 2000"),
        ({"audit": {"thresholds": [-1.0], "stages": ["a", "b"]}}, r"1 thresholds but 2 stage names"),
        ({"link": {"lags_weeks": [-1]}}, r"lags_weeks must be >= 0"),
        ({"tables": {"weather": "w.csv"}}, r"unknown table\(s\) \['weather'\]"),
    ],
)
def test_bad_settings_name_the_section(raw, message):
    with pytest.raises(ProjectError, match=message):
        project_from_dict(raw)


def test_missing_and_broken_files(tmp_path):
    with pytest.raises(ProjectError, match="does not exist; create one with `impactlink init FOLDER`"):
        load_project(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[project\nname=1")
    with pytest.raises(ProjectError, match="is not valid TOML"):
        load_project(bad)
