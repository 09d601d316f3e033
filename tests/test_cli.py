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
