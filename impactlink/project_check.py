"""Walk a parsed project file and list every problem at once (see :mod:`impactlink.project_schema`).

:func:`check_raw` needs only the mapping :mod:`tomllib` returns; :func:`check_files` adds what
needs the disk (folders and files that do not exist, impacts whose source tables are absent).
Both return :class:`~impactlink.project_schema.Problem` records in file order; nothing is
computed before the list is empty.

Examples
--------
>>> [p.line("impactlink.toml") for p in check_raw({"indices": {"scales_weeks": "13"}})]
['impactlink.toml: indices.scales_weeks: got "13" (text), expected a non-empty list of whole numbers from 1 to 520, each once; write scales_weeks = [13] (no quotes)']
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from impactlink.project_schema import (
    IMPACT_OPTIONS,
    IMPACT_TABLES,
    INPUT_STAGE_OPTIONS,
    KNOWN_INDICES,
    SECTIONS,
    TOP_LEVEL,
    Key,
    Problem,
    as_list,
    check_value,
    describe,
    is_int,
    toml_text,
)
from impactlink.schema import TABLES

__all__ = ["check_raw", "check_files", "found_tables"]


# --------------------------------------------------------------------------- the walk
def check_raw(raw: Mapping[str, Any], *, option_values: bool = True) -> list[Problem]:
    """Every problem of a parsed project file, in file order.

    Parameters
    ----------
    raw : mapping
        What :func:`tomllib.loads` returned.
    option_values : bool, default True
        Also check the values of the options the inputs stage reads
        (:data:`INPUT_STAGE_OPTIONS`); their names are always checked.

    Returns
    -------
    list of Problem
        Empty when the file is valid.
    """
    out: list[Problem] = []
    out += _unknown("", raw, TOP_LEVEL, "top-level table")
    for section in ("project", "calibration", "indices", "link", "models", "skill", "triggers",
                    "contrast", "formats", "units"):
        d = raw.get(section, {})
        if _is_table(section, "", d, out):
            out += _keys(section, d, SECTIONS[section])
    tables = raw.get("tables", {})
    if _is_table("tables", "", tables, out):
        out += _unknown("tables", tables, tuple(TABLES), "table")
        for k, v in tables.items():
            if k in TABLES:
                out += check_value("tables", k, v, Key("text", example=f'"{k}.csv"'))
    out += _audit(raw.get("audit", [{}]), raw)
    impacts = raw.get("impacts", {})
    if _is_table("impacts", "", impacts, out):
        for name, spec in impacts.items():
            out += _impact(name, spec, option_values)
    out += _cross(raw)
    return out


def check_files(raw: Mapping[str, Any], base: Path, *, tables_found: set[str]) -> list[Problem]:
    """Problems that need the disk: missing data folder or table files, and impacts whose
    source tables are neither named under ``[tables]`` nor found in the data folder.

    Parameters
    ----------
    raw : mapping
        A parsed project file without :func:`check_raw` problems.
    base : Path
        The folder holding the project file.
    tables_found : set of str
        Contract names of the tables found in the data folder by file name.
    """
    out: list[Problem] = []
    proj = raw.get("project", {})
    data_dir = (base / proj.get("data_dir", ".")).resolve()
    if not data_dir.is_dir():
        out.append(Problem("project", "data_dir", f"the folder {data_dir} does not exist",
                           "create it, or write the folder that holds your tables"))
    named = set()
    for k, v in raw.get("tables", {}).items():
        named.add(k)
        p = (data_dir / v).resolve()
        if not p.exists():
            out.append(Problem("tables", k, f"the file {p} does not exist",
                               "check the name and folder (paths are relative to data_dir)"))
    plan = raw.get("triggers", {}).get("plan") if isinstance(raw.get("triggers"), dict) else None
    if isinstance(plan, str) and not (base / plan).resolve().exists():
        out.append(Problem("triggers", "plan", f"the file {(base / plan).resolve()} does not exist",
                           "check the name (relative to the project file's folder)"))
    present = named | tables_found
    for name, spec in raw.get("impacts", {}).items():
        source = spec.get("source")
        groups = IMPACT_TABLES.get(source, ())
        if groups and not any(set(g) <= present for g in groups):
            need = " or ".join(" and ".join(g) for g in groups)
            missing = [t for t in groups[0] if t not in present]
            out.append(Problem(f"impacts.{name}", "source",
                               f"source {source!r} needs the {need} table(s), none found",
                               f"add {missing[0]} = \"{missing[0]}.csv\" under [tables] or "
                               f"remove [impacts.{name}]"))
        trait = spec.get("weight_trait")
        if trait and "traits" not in present:
            out.append(Problem(f"impacts.{name}", "weight_trait",
                               f"weight_trait {trait!r} needs a traits table, none found",
                               'add traits = "traits.csv" under [tables]'))
    return out


# --------------------------------------------------------------------------- steps
def found_tables(raw: dict[str, Any], base: Path) -> set[str]:
    """Contract tables found by file name in the data folder (as the inputs stage finds them)."""
    from impactlink.inputs.discover import SUPPORTED_EXTENSIONS  # the inputs stage's list

    folder = (base / raw.get("project", {}).get("data_dir", ".")).resolve()
    if not folder.is_dir():
        return set()
    names = {n.lower(): n for n in TABLES}
    return {names[p.stem.lower()] for p in folder.iterdir()
            if p.is_file() and p.stem.lower() in names and p.suffix.lower() in SUPPORTED_EXTENSIONS}


def _is_table(section: str, key: str, d: Any, out: list[Problem]) -> bool:
    if isinstance(d, Mapping):
        return True
    out.append(Problem(section if key else "", key or section,
                       f"got {describe(d)}, expected a table",
                       f"write [{section}{'.' + key if key else ''}] on its own line and the "
                       "keys under it"))
    return False


def _unknown(table: str, d: Mapping[str, Any], allowed: tuple[str, ...] | Any, what: str
             ) -> list[Problem]:
    allowed = tuple(allowed)
    out = []
    for k in d:
        if k in allowed:
            continue
        close = difflib.get_close_matches(str(k), allowed, n=1, cutoff=0.6)
        fix = (f"did you mean {close[0]}?" if close else
               f"remove it; known: {', '.join(sorted(allowed))}")
        out.append(Problem(table, str(k), f"unknown {what}", fix))
    return out


def _keys(table: str, d: Mapping[str, Any], schema: dict[str, Key]) -> list[Problem]:
    out = _unknown(table, d, tuple(schema), "key")
    for k, v in d.items():
        if k in schema:
            out += check_value(table, k, v, schema[k])
    return out


def _audit(raw: Any, whole: Mapping[str, Any]) -> list[Problem]:
    ladders = [raw] if isinstance(raw, Mapping) else raw
    if not isinstance(ladders, list):
        return [Problem("", "audit", f"got {describe(raw)}, expected [[audit]] tables",
                        "write each ladder under its own [[audit]] line")]
    out: list[Problem] = []
    names = []
    for i, lad in enumerate(ladders, start=1):
        table = f"audit[{i}]"
        if not isinstance(lad, Mapping):
            out.append(Problem("", table, f"got {describe(lad)}, expected a table",
                               "write the ladder's keys under an [[audit]] line"))
            continue
        got = _keys(table, lad, SECTIONS["audit"])
        out += got
        names.append(lad.get("name", "spi_ladder"))
        bad = {p.key for p in got}
        thr = lad.get("thresholds", (-1.0, -1.5, -2.0))
        stages = lad.get("stages", ("moderately_dry", "severely_dry", "extremely_dry"))
        if {"thresholds", "stages"} & set(lad) and not {"thresholds", "stages"} & bad \
                and len(thr) != len(stages):
            out.append(Problem(table, "stages", f"{len(thr)} thresholds but {len(stages)} stage "
                               "names", "give one stage name per threshold"))
        if lad.get("kind") == "percentile" and "thresholds" not in bad:
            if any(not 0 < t < 100 for t in thr):
                out.append(Problem(table, "thresholds", f"got {toml_text(thr)}, percentiles must "
                                   "be between 0 and 100", "write e.g. thresholds = [25, 10, 4]"))
        if not {"early", "late"} & bad and lad.get("early") and lad.get("late"):
            if lad["early"][1] >= lad["late"][0]:
                out.append(Problem(table, "late", f"starts in {lad['late'][0]}, not after the "
                                   f"early period {toml_text(lad['early'])}",
                                   "give an early period that ends before the late one"))
        if "index" in lad and "index" not in bad:
            out += _audit_index(table, lad["index"], whole)
        sw = lad.get("scale_weeks")
        ind = whole.get("indices", {})
        if is_int(sw) and isinstance(ind, Mapping) and "scale_weeks" not in bad:
            weeks = ind.get("scales_weeks", [4, 8, 13, 26, 39, 52, 104])
            months = ind.get("scales_months", [1, 2, 3, 6, 9, 12, 24])
            valid = all(not check_value("indices", k, v, SECTIONS["indices"][k])
                        for k, v in (("scales_weeks", weeks), ("scales_months", months)))
            if valid and sw not in {*weeks, *months}:
                out.append(Problem(table, "scale_weeks", f"{sw} is not one of [indices] "
                                   "scales_weeks or scales_months",
                                   f"add {sw} to [indices] scales_weeks, or audit a computed scale"))
    dup = sorted({n for n in names if isinstance(n, str) and names.count(n) > 1})
    if dup:
        out.append(Problem("audit", "name", f"ladder name {dup[0]!r} is used twice",
                           "give each [[audit]] ladder its own name"))
    return out


def _audit_index(table: str, index: str, whole: Mapping[str, Any]) -> list[Problem]:
    ind = whole.get("indices", {})
    if not isinstance(ind, Mapping):
        return []
    if any(check_value("indices", k, ind[k], SECTIONS["indices"][k])
           for k in ("indices", "indicators") if k in ind):
        return []  # reported on [indices] itself
    computed = [str(x) for x in as_list(ind.get("indices", KNOWN_INDICES))]
    supplied = [str(x) for x in as_list(ind.get("indicators", ()))]
    if index in KNOWN_INDICES and index not in computed:
        return [Problem(table, "index", f"{index!r} is not computed ([indices] indices = "
                        f"{toml_text(computed)})", f'add "{index}" to [indices] indices')]
    if index not in KNOWN_INDICES and supplied and index not in supplied:
        return [Problem(table, "index", f"{index!r} is neither a computed index nor one of "
                        f"[indices] indicators {toml_text(supplied)}",
                        f"write one of {', '.join([*computed, *supplied])}")]
    return []


def _impact(name: str, spec: Any, option_values: bool) -> list[Problem]:
    table = f"impacts.{name}"
    if not isinstance(spec, Mapping):
        return [Problem("impacts", str(name), f"got {describe(spec)}, expected a table",
                        f"write [impacts.{name}] on its own line with source = ... under it")]
    source = spec.get("source")
    if not isinstance(source, str) or source not in IMPACT_OPTIONS:
        found = "no source" if source is None else f"source {describe(source)}"
        choices = ", ".join(f'"{s}"' for s in IMPACT_OPTIONS)
        return [Problem(table, "source", f"{found}; expected one of {choices}",
                        f'write e.g. source = "{next(iter(IMPACT_OPTIONS))}"')]
    schema = IMPACT_OPTIONS[source]
    out = _unknown(table, {k: v for k, v in spec.items() if k != "source"}, tuple(schema),
                   f"option for source {source!r}")
    for k, v in spec.items():
        if k in schema and (option_values or k not in INPUT_STAGE_OPTIONS):
            out += check_value(table, k, v, schema[k])
    bad = {p.key for p in out}
    nb, nm = spec.get("baseline_years"), spec.get("min_baseline_years")
    if isinstance(nb, int) and isinstance(nm, int) and not {"baseline_years",
                                                              "min_baseline_years"} & bad:
        if nm > nb:
            out.append(Problem(table, "min_baseline_years", f"{nm} is more than baseline_years "
                               f"{nb}", f"write min_baseline_years = {nb} or less"))
    lad, ol = spec.get("ladder"), spec.get("onset_level")
    if isinstance(lad, list) and isinstance(ol, int) and lad and not {"ladder", "onset_level"} & bad:
        if ol > len(lad):
            out.append(Problem(table, "onset_level", f"{ol} is above the top of the ladder "
                               f"(level {len(lad)})", f"write onset_level = 1 to {len(lad)}"))
    return out


def _cross(raw: Mapping[str, Any]) -> list[Problem]:
    """Checks between keys of one table (each key already has the right type)."""
    out = []
    cal = raw.get("calibration", {})
    if isinstance(cal, Mapping):
        s, e = cal.get("start_year", 1991), cal.get("end_year", 2020)
        if is_int(s) and is_int(e) and e < s:
            out.append(Problem("calibration", "end_year", f"{e} is before start_year {s}",
                               f"write end_year = {s} or later (or swap the two years)"))
    link = raw.get("link", {})
    crs = link.get("equal_area_crs") if isinstance(link, Mapping) else None
    if isinstance(crs, str):
        out += _crs(crs)
    return out


def _crs(text: str) -> list[Problem]:
    try:
        from pyproj import CRS
        from pyproj.exceptions import CRSError
    except ImportError:  # pragma: no cover - pyproj comes with geopandas
        return []
    try:
        crs = CRS.from_user_input(text)
    except CRSError:
        return [Problem("link", "equal_area_crs", f"{text!r} is not a coordinate reference "
                        "system pyproj knows", 'write an EPSG code, e.g. "EPSG:5070"')]
    if not crs.is_projected:
        return [Problem("link", "equal_area_crs", f"{text!r} is not projected (areas would be in "
                        "square degrees)", 'write an equal-area projection, e.g. "EPSG:5070"')]
    return []
