"""The one error tree: every user error is an ImpactlinkError of its stage, and the command
line turns it into one line with exit code 2, while a bug keeps its traceback."""

from __future__ import annotations

import ast
import builtins
import importlib
import pkgutil
import shutil
from pathlib import Path

import pytest

import impactlink
from impactlink import errors
from impactlink.cli import main

PACKAGE = Path(impactlink.__file__).parent
SCENARIO = PACKAGE.parent / "scenario_data"

#: Built-in exceptions that mean "a bug in the caller's code", never a user's mistake.
PROGRAMMER_ERRORS = {"TypeError", "RuntimeError", "AssertionError", "NotImplementedError",
                     "StopIteration",
                     "RunInterrupted"}  # SIGTERM turned into KeyboardInterrupt, not a mistake
#: Container look-ups by key in the Python API (``cube["spi", 4]``), as a mapping does.
LOOKUP_ERRORS = {("indices/cube.py", "KeyError"), ("indices/audit.py", "KeyError")}


def _raises() -> list[tuple[str, int, str]]:
    found = []
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Raise) and node.exc is not None:
                exc = node.exc.func if isinstance(node.exc, ast.Call) else node.exc
                if isinstance(exc, ast.Name) and exc.id[0].isupper():
                    found.append((path.relative_to(PACKAGE).as_posix(), node.lineno, exc.id))
    return found


def _resolve(module_path: str, name: str):
    mod_name = "impactlink." + module_path[:-3].replace("/", ".").removesuffix(".__init__")
    module = importlib.import_module(mod_name)
    # names imported inside a function are not module attributes: look in the tree too
    return (getattr(module, name, None) or getattr(errors, name, None)
            or getattr(builtins, name, None))


def test_every_raise_is_an_impactlink_error_or_a_programmer_error():
    bad = []
    for path, line, name in _raises():
        if name in PROGRAMMER_ERRORS or (path, name) in LOOKUP_ERRORS:
            continue
        cls = _resolve(path, name)
        if not (isinstance(cls, type) and issubclass(cls, errors.ImpactlinkError)):
            bad.append(f"{path}:{line}: raise {name}")
    assert not bad, "user errors must be raised as a stage's ImpactlinkError:\n" + "\n".join(bad)


def test_every_warning_class_is_an_impactlink_warning():
    bad = []
    for info in pkgutil.walk_packages([str(PACKAGE)], prefix="impactlink."):
        module = importlib.import_module(info.name)
        for obj in vars(module).values():
            if (isinstance(obj, type) and issubclass(obj, Warning)
                    and obj.__module__.startswith("impactlink")
                    and not issubclass(obj, errors.ImpactlinkWarning)):
                bad.append(f"{obj.__module__}.{obj.__name__}")
    assert not bad


def test_each_stage_has_one_error_class_under_the_base():
    assert set(errors.STAGE_ERRORS) >= {"project", "inputs", "indices", "link", "models",
                                         "skill", "triggers", "contrast", "report"}
    for cls in errors.STAGE_ERRORS.values():
        assert issubclass(cls, errors.ImpactlinkError)
    assert len(set(errors.STAGE_ERRORS.values())) == len(errors.STAGE_ERRORS)


# ----------------------------------------------------------------------------- CLI, per stage
def _one_line_error(capsys, argv, *needles):
    rc = main(argv)
    err = capsys.readouterr().err
    assert rc == 2, err
    lines = err.strip().splitlines()
    errs = [ln for ln in lines if ln.startswith("impactlink: error:")]
    assert len(errs) == 1, err
    assert "Traceback" not in err
    for needle in needles:
        assert needle in errs[0], (needle, errs[0])
    return errs[0]


@pytest.fixture()
def project(tmp_path):
    """A copy of the committed scenario's small tables with a project file."""
    for f in ("counties.geojson", "climate.parquet", "yields.csv", "traits.csv"):
        shutil.copy(SCENARIO / f, tmp_path / f)
    text = (
        '[project]\nname = "t"\noutput_dir = "out"\nseed = 1\n'
        '[tables]\ncounties = "counties.geojson"\nclimate = "climate.parquet"\n'
        'yields = "yields.csv"\n'
        '[indices]\nscales_weeks = [13]\nindices = ["spi"]\n'
        '[impacts.maize]\nsource = "yields"\ncrop = "maize"\npractice = "rainfed"\n'
    )
    (tmp_path / "impactlink.toml").write_text(text, encoding="utf-8")
    return tmp_path


def test_project_mistake_is_one_line(project, capsys):
    p = project / "impactlink.toml"
    p.write_text(p.read_text().replace('seed = 1', 'sede = 1'), encoding="utf-8")
    _one_line_error(capsys, ["check", str(p)], "sede")


@pytest.mark.parametrize("command", ["check", "run"])
def test_inputs_missing_file_is_one_line(project, capsys, command):
    (project / "yields.csv").unlink()
    _one_line_error(capsys, [command, str(project / "impactlink.toml")], "yields.csv")


@pytest.mark.parametrize("command", ["check", "run"])
def test_inputs_missing_column_is_one_line(project, capsys, command):
    path = project / "yields.csv"
    path.write_text(path.read_text().replace("yield", "harvest", 1), encoding="utf-8")
    _one_line_error(capsys, [command, str(project / "impactlink.toml")], "yields.csv", "yield")


@pytest.mark.parametrize("command", ["check", "run"])
def test_inputs_latin1_csv_is_one_line(project, capsys, command):
    path = project / "yields.csv"
    text = path.read_text(encoding="utf-8")
    lines = text.splitlines()
    lines[1] = lines[1].replace("maize", "maïze")
    path.write_bytes("\n".join(lines).encode("latin-1"))
    _one_line_error(capsys, [command, str(project / "impactlink.toml")], "yields.csv")


@pytest.mark.parametrize("command", ["check", "run"])
def test_link_unknown_impact_option_is_one_line(project, capsys, command):
    p = project / "impactlink.toml"
    p.write_text(p.read_text() + "clas_pct = [10, 20]\n", encoding="utf-8")
    _one_line_error(capsys, [command, str(p)], "clas_pct")


def test_report_on_a_folder_that_is_not_a_run_is_one_line(tmp_path, capsys):
    _one_line_error(capsys, ["report", str(tmp_path / "nowhere")], "nowhere")


def test_a_bug_keeps_its_traceback(project, monkeypatch):
    import impactlink.inputs as inputs

    def broken(*args, **kwargs):
        raise ZeroDivisionError("a bug")

    monkeypatch.setattr(inputs, "read_inputs", broken)
    with pytest.raises(ZeroDivisionError):
        main(["check", str(project / "impactlink.toml")])


def test_several_project_mistakes_are_listed_one_line_each(project, capsys):
    p = project / "impactlink.toml"
    p.write_text(p.read_text().replace("seed = 1", 'seed = "twenty"') + "clas_pct = [10, 20]\n",
                 encoding="utf-8")
    assert main(["check", str(p)]) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.startswith("impactlink: error:")]
    assert len(err) == 2 and any("seed" in ln for ln in err) and any("clas_pct" in ln for ln in err)
