"""The command line: instant help, one-line errors."""

import subprocess
import sys

from impactlink.cli import main


def test_help_lists_every_stage(capsys):
    assert main([]) == 0
    out = capsys.readouterr().out
    for cmd in ("scenario", "init", "check", "indices", "audit", "link", "rank", "outlook",
                "triggers", "contrast", "run", "report", "demo"):
        assert cmd in out


def test_help_does_not_import_heavy_libraries():
    code = (
        "import sys, impactlink.cli as c; c.build_parser();"
        "print(any(m in sys.modules for m in ('statsmodels', 'sklearn', 'geopandas', 'matplotlib')))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_missing_project_is_one_line_error(tmp_path, capsys):
    rc = main(["check", str(tmp_path / "missing.toml")])
    assert rc == 2
    err = capsys.readouterr().err
    assert err.startswith("impactlink: error: project file") and "impactlink init" in err


def test_check_fatal_input_error_names_the_file(tmp_path, capsys):
    # a climate table without its precipitation column is fatal: one line naming the file
    (tmp_path / "counties.geojson").write_text(
        '{"type":"FeatureCollection","features":[{"type":"Feature","properties":'
        '{"county_id":"90001"},"geometry":{"type":"Polygon","coordinates":'
        '[[[0,0],[1,0],[1,1],[0,1],[0,0]]]}}]}'
    )
    (tmp_path / "climate.csv").write_text("county_id,date,rain\n90001,2001-01-01,3.0\n")
    assert main(["init", str(tmp_path)]) == 0
    capsys.readouterr()
    rc = main(["check", str(tmp_path / "impactlink.toml")])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("impactlink: error:") and "climate.csv" in err and "precip_mm" in err
    assert err.count("\n") == 1


def test_scenario_then_check_counts_reconcile(tmp_path, capsys):
    assert main(["scenario", "--seed", "5", "--out", str(tmp_path)]) == 0
    assert main(["init", str(tmp_path)]) == 0
    capsys.readouterr()
    assert main(["check", str(tmp_path), "--out", str(tmp_path / "out")]) == 0
    out = capsys.readouterr().out
    assert "read" in out and "climate.parquet" in out and "next: impactlink run" in out
    import json

    m = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert all(r["rows_read"] == r["rows_used"] + r["rows_rejected"] for r in m["inputs"])


def test_every_subcommand_help_has_a_description_and_an_example(capsys):
    import pytest

    from impactlink.cli import EXAMPLES, build_parser

    parser = build_parser()
    for name, example in EXAMPLES.items():
        with pytest.raises(SystemExit):
            parser.parse_args([name, "--help"])
        out = capsys.readouterr().out
        assert "example:" in out and example.split("#")[0].strip() in out, name
        assert "not causes" in out, name
