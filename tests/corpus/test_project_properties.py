"""Property tests of the project file: no generated file makes ``load_project`` raise anything
but the tool's own errors, and every exact fix the schema proposes is itself valid.

Each example is the committed scenario's project with random TOML values (any type, any
range, nested lists and tables, dates) written under randomly chosen keys of every table.
"""

from __future__ import annotations

import atexit
import copy
import datetime as dt
import json
import math
import shutil
import tempfile
import tomllib
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from impactlink.errors import ImpactlinkError, ProjectError
from impactlink.project import Project, load_project
from impactlink.project_schema import IMPACT_OPTIONS, SECTIONS

SCENARIO = Path(__file__).resolve().parents[2] / "scenario_data"
RAW = tomllib.loads((SCENARIO / "impactlink.toml").read_text(encoding="utf-8"))
RAW["project"]["data_dir"] = str(SCENARIO)
RAW["project"]["output_dir"] = "out"
RAW["triggers"]["plan"] = str(SCENARIO / "trigger_plan.toml")
for _section in ("contrast", "report", "formats", "units"):  # tables the scenario does not write
    RAW.setdefault(_section, {})

#: Every key the schema knows, as a path into the parsed file.
KEY_PATHS: list[tuple] = [(s, k) for s in SECTIONS if s != "audit" for k in SECTIONS[s]]
KEY_PATHS += [("audit", i, k) for i in range(len(RAW["audit"])) for k in SECTIONS["audit"]]
KEY_PATHS += [("impacts", name, k) for name, spec in RAW["impacts"].items()
              for k in ("source", *IMPACT_OPTIONS[spec["source"]])]
KEY_PATHS += [("tables", k) for k in RAW["tables"]]

_text = st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=12)
#: Keys the schema does not know (typos and random names), in every table.
UNKNOWN_PATHS = st.tuples(st.sampled_from([s for s in SECTIONS if s != "audit"] + ["tables"]),
                          _text | st.sampled_from(["seeds", "scale_weeks", "yeilds"]))
_scalar = (st.integers(-10**6, 10**6) | st.integers() | st.floats(allow_nan=True)
           | st.booleans() | _text | st.sampled_from(["true", "13", "4, 8", "spi", "", " "])
           | st.dates(min_value=dt.date(1000, 1, 1)))
VALUES = st.recursive(_scalar, lambda inner: st.lists(inner, max_size=4)
                      | st.dictionaries(_text, inner, max_size=3), max_leaves=8)


def toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, dt.date):
        return v.isoformat()
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    return "{ " + ", ".join(f"{json.dumps(k, ensure_ascii=False)} = {toml_value(x)}"
                            for k, x in v.items()) + " }"


def toml_file(raw: dict) -> str:
    lines = []
    for section, body in raw.items():
        if section == "audit":
            for lad in body if isinstance(body, list) else [body]:
                lines.append("[[audit]]")
                lines += [f"{json.dumps(k, ensure_ascii=False)} = {toml_value(v)}" for k, v in lad.items()]
        elif section == "impacts":
            for name, spec in body.items():
                lines.append(f"[impacts.{json.dumps(name, ensure_ascii=False)}]")
                lines += [f"{json.dumps(k, ensure_ascii=False)} = {toml_value(v)}" for k, v in spec.items()]
        else:
            lines.append(f"[{section}]")
            lines += [f"{json.dumps(k, ensure_ascii=False)} = {toml_value(v)}" for k, v in body.items()]
    return "\n".join(lines) + "\n"


def put(raw: dict, path: tuple, value) -> None:
    node = raw
    for step in path[:-1]:
        node = node[step]
    node[path[-1]] = value


FOLDER = Path(tempfile.mkdtemp(prefix="impactlink_prop_"))  # one file, rewritten per example
atexit.register(shutil.rmtree, FOLDER, True)


def write(raw: dict) -> Path:
    path = FOLDER / "impactlink.toml"
    text = toml_file(raw)
    assert tomllib.loads(text) is not None  # the generator writes valid TOML
    path.write_text(text, encoding="utf-8")
    return path


def test_unmodified_scenario_loads():
    assert isinstance(load_project(write(copy.deepcopy(RAW))), Project)


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(KEY_PATHS) | UNKNOWN_PATHS, VALUES), min_size=1,
                max_size=4))
def test_no_generated_project_file_raises_anything_but_impactlink_errors(edits):
    raw = copy.deepcopy(RAW)
    for path, value in edits:
        put(raw, path, value)
    try:
        project = load_project(write(raw))
    except ImpactlinkError as exc:
        assert isinstance(exc, ProjectError)
        assert exc.problems and all(p.count(": ") >= 2 and "\n" not in p for p in exc.problems)
    else:
        assert isinstance(project, Project)


@settings(max_examples=150, deadline=None)
@given(st.sampled_from([p for p in KEY_PATHS if p[0] != "tables" and p[-1] != "source"]),
       VALUES)
def test_an_exact_fix_is_valid(path, value):
    """When the schema says "write <key> = <value>" (no "e.g."), writing it clears the key's
    own type, range and order problem (a rule between keys may still apply)."""
    raw = copy.deepcopy(RAW)
    put(raw, path, value)
    try:
        load_project(write(raw))
        return
    except ProjectError as exc:
        name = ".".join(f"[{p + 1}]" if isinstance(p, int) else p for p in path)
        name = name.replace(".[", "[")
        mine = [p for p in exc.problems if f": {name}: got " in p]  # the key's own problems
    for line in mine:
        fix = line.rsplit("; ", 1)[1]
        if not fix.startswith(f"write {path[-1]} = "):
            continue
        text = fix.removeprefix(f"write {path[-1]} = ").removesuffix(" (no quotes)")
        put(raw, path, tomllib.loads(f"v = {text}")["v"])
        try:
            load_project(write(raw))
        except ProjectError as again:
            # the key's own type / range / order problems say "expected"; a rule between keys
            # (e.g. percentile ladders must lie in 0..100) may still apply
            own = [p for p in again.problems if f": {name}: got " in p and ", expected " in p]
            assert not own, (line, again.problems)
