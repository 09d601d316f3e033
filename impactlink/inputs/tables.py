"""Read one contract table: columns checked, cells coerced, row rules applied, types fixed."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import InputError
from impactlink.inputs._files import read_raw
from impactlink.inputs._rules import TableCheck, number_column
from impactlink.inputs.counties import _read_counties
from impactlink.inputs.table_rules import (
    _RULES,
    DEFAULT_LADDER,
    DEFAULT_SEVERITY_RANGE,
    _reject_duplicates,
    _reject_unknown_counties,
    _warn_unknown_regions,
)
from impactlink.project import Project
from impactlink.schema import COUNTY, REGION, TABLES, TableSpec


@dataclass
class _Context:
    """What one table's rules need to know about the project and the other tables."""

    n_levels: int
    stage_names: dict[tuple[str, str], int]
    severity_range: tuple[int, int]
    county_ids: pd.Index | None = None
    id_width: int | None = None
    regions: set[str] | None = None

    @classmethod
    def from_project(cls, project: Project) -> _Context:
        ladder: tuple = DEFAULT_LADDER
        names: dict[tuple[str, str], int] = {}
        sev = DEFAULT_SEVERITY_RANGE
        for spec in project.impacts:
            opts = spec.options
            where = f"[impacts.{spec.name}]"
            if spec.source == "notices":
                if "ladder" in opts:
                    if not isinstance(opts["ladder"], (list, tuple)) or not opts["ladder"]:
                        raise InputError(
                            f"{where} ladder must be a list of level names (levels 1..K), got "
                            f"{opts['ladder']!r}"
                        )
                    if len(opts["ladder"]) >= len(ladder):  # several ladders: the longest
                        ladder = tuple(opts["ladder"])
                stage_names = opts.get("stage_names") or {}
                if not isinstance(stage_names, dict) or not all(
                    isinstance(t, dict) for t in stage_names.values()
                ):
                    raise InputError(
                        f"{where} stage_names must map issuer -> {{stage name -> level}}, e.g. "
                        f'[{where[1:-1]}.stage_names."Pine Utility"] then "Voluntary" = 1'
                    )
                for issuer, table in stage_names.items():
                    for stage, level in table.items():
                        if isinstance(level, bool) or not isinstance(level, int) or level < 0:
                            raise InputError(
                                f"{where} stage_names: {issuer!r} stage {stage!r} must map to "
                                f"a whole level >= 0, got {level!r}"
                            )
                        names[(str(issuer).strip(), str(stage).strip().lower())] = level
            if spec.source == "field_reports" and "severity_range" in opts:
                rng = opts["severity_range"]
                if (
                    not isinstance(rng, (list, tuple))
                    or len(rng) != 2
                    or not all(isinstance(x, int) for x in rng)
                    or rng[0] > rng[1]
                ):
                    raise InputError(
                        f"{where} severity_range must be [lowest, highest] whole numbers, got "
                        f"{rng!r}"
                    )
                sev = (int(rng[0]), int(rng[1]))
        for pos, step in enumerate(ladder, start=1):
            if isinstance(step, str):  # a ladder of names: name -> its position
                names.setdefault(("*", step.strip().lower()), pos)
        return cls(n_levels=len(ladder), stage_names=names, severity_range=sev)

    def set_counties(self, counties: pd.DataFrame) -> None:
        ids = counties[COUNTY]
        self.county_ids = pd.Index(ids.unique())
        lengths = ids.str.len()
        if len(ids) and ids.str.fullmatch(r"\d+").all() and lengths.nunique() == 1:
            self.id_width = int(lengths.iloc[0])
        if REGION in counties:
            self.regions = set(counties[REGION])



def _read_table(
    name: str, path: Path, ctx: _Context, notes: list[str]
) -> tuple[pd.DataFrame, TableCheck]:
    spec = TABLES[name]
    frame = read_raw(path, geometry=spec.geometry, point_columns="lon" in spec.optional)
    if path.suffix.lower() == ".shp":  # shapefiles cut field names to 10 characters
        cut = {c[:10]: c for c in (*spec.required, *spec.optional) if len(c) > 10}
        frame = frame.rename(columns={k: v for k, v in cut.items() if v not in frame.columns})
    _check_columns(spec, frame, path)
    if name == "counties":
        return _read_counties(frame, path, notes)
    check = TableCheck(name, str(path), frame)
    check.reject_blank_rows()
    columns = _declared_columns(spec, frame)
    for col in columns:
        kind = spec.required.get(col) or spec.optional[col]
        check.coerce(col, kind, required=col in spec.required)
        if kind == "id":
            _restore_zeros(check, col, ctx, notes)
    extra = [c for c in frame.columns if c not in columns]
    if name == "traits":
        _coerce_traits(check, extra, path)
        columns += extra
    elif extra:
        notes.append(
            f"{path}: column(s) {extra} are not part of the {name} table and are kept as text "
            f"(known columns: {list(spec.required) + list(spec.optional)})"
        )
    _units_as_read(name, path, check, columns, ctx)
    rule = _RULES.get(name)
    if rule is not None:
        rule(check, ctx)
    _reject_unknown_counties(check, ctx, path)
    _warn_unknown_regions(check, ctx, path, notes)
    _reject_duplicates(check, spec)
    clean = check.used(columns + extra if name != "traits" else columns)
    clean = _final_types(name, clean, check)
    return clean, check


def _units_as_read(name: str, path: Path, check: TableCheck, columns: list[str],
                   ctx: _Context) -> None:
    """Unit mistakes stop the run before any row rule (see
    :func:`impactlink.inputs.plausibility.unit_findings`): on the converted values of the rows
    whose cells all read (of known counties, first of each key), so a Fahrenheit column is
    named as one, not half-rejected as temperatures out of range."""
    from impactlink.inputs._cadence import first_rows, with_county_codes
    from impactlink.inputs.plausibility import fatal_line, unit_findings

    if name not in ("climate", "yields", "prices") or not check.alive.any():
        return
    alive = check.alive
    every = bool(alive.all())  # no row rejected yet: the columns as they are (no copy)
    frame = pd.DataFrame({c: check.clean[c] if every else check.clean[c][alive]
                          for c in columns if c in check.clean})
    frame = with_county_codes(frame)  # one categorical: membership, repeats and checks on codes
    keep = np.ones(len(frame), dtype=bool)
    if ctx.county_ids is not None and COUNTY in frame:
        known = frame[COUNTY].cat.categories.isin(ctx.county_ids)
        keep &= known[frame[COUNTY].cat.codes.to_numpy()] & (frame[COUNTY].cat.codes >= 0).to_numpy()
    keep &= first_rows(frame, [k for k in TABLES[name].key if k in frame])
    if not keep.all():
        frame = frame[keep]
    found = unit_findings(frame, name, file=str(path))
    if found:
        raise InputError(fatal_line(found))


def _check_columns(spec: TableSpec, frame: pd.DataFrame, path: Path) -> None:
    found = [c for c in frame.columns if c != "geometry"]
    missing = [c for c in spec.required if c != "geometry" and c not in frame.columns]
    if missing:
        import difflib

        hints = []
        lower = {str(c).lower(): c for c in found}
        for m in missing:
            close = difflib.get_close_matches(m, list(lower), n=1, cutoff=0.6)
            if close:
                hints.append(f"{lower[close[0]]!r} -> {m!r}")
        hint = f" (rename {', '.join(hints)})" if hints else ""
        if len(found) == 1 and any(sep in str(found[0]) for sep in (";", "\t", "|")):
            hint += "; the file seems to use another separator: save it with commas"
        raise InputError(
            f"{path}: the {spec.name} table lacks required column(s) {missing}; found "
            f"{found}; expected {[c for c in spec.required if c != 'geometry']}{hint}. "
            f"Rename or add the column(s)"
        )
    if spec.either and not any(all(c in frame.columns for c in g) for g in spec.either):
        groups = " or ".join("+".join(g) for g in spec.either)
        raise InputError(
            f"{path}: the {spec.name} table needs {groups} columns to place each row; found "
            f"{found}. Add {' or '.join(' and '.join(g) for g in spec.either)}"
        )


def _declared_columns(spec: TableSpec, frame: pd.DataFrame) -> list[str]:
    cols = [c for c in spec.required if c != "geometry"]
    return cols + [c for c in spec.optional if c in frame.columns]


def _restore_zeros(check: TableCheck, col: str, ctx: _Context, notes: list[str]) -> None:
    """Ids stored as numbers lost their leading zeros; restore them to the counties' width."""
    raw = check.frame[col]
    if not pd.api.types.is_numeric_dtype(raw.dtype) or ctx.id_width is None:
        return
    s = check.clean[col]
    short = (s != "") & (s.str.len() < ctx.id_width)
    if short.any():
        check.clean[col] = s.where(~short, s.str.zfill(ctx.id_width))
        notes.append(
            f"{check.file}: column {col!r} is stored as numbers; leading zeros restored to "
            f"{ctx.id_width} digits in {int(short.sum())} rows (store ids as text to avoid this)"
        )


def _coerce_traits(check: TableCheck, extra: list[str], path: Path) -> None:
    for col in extra:
        values, missing, bad = number_column(check.frame[col])
        if bad.any() and not (~missing & ~bad).any():
            raise InputError(
                f"{path}: traits column {col!r} holds no numbers (e.g. "
                f"{check.frame[col][bad].iloc[0]!r}); traits must be numeric: remove the "
                f"column or encode it as numbers (e.g. 0/1 per category)"
            )
        check.clean[col], _ = check._number(col, check.frame[col], "float")



def _final_types(name: str, clean: pd.DataFrame, check: TableCheck) -> pd.DataFrame:
    for col in clean.columns:  # a blank optional text cell is missing (NA), not ""
        if pd.api.types.is_string_dtype(clean[col].dtype):
            clean[col] = clean[col].where(clean[col] != "")
    if name == "yields":
        clean["year"] = clean["year"].astype(np.int64)
    for col in ("level", "stage"):
        if col in clean and name in ("notices", "notice_snapshots"):
            clean[col] = clean[col].astype(np.int64)
            clean[f"{col}_label"] = check.clean[f"{col}_label"][check.alive].reset_index(drop=True)
    if name == "field_reports" and "severity" in clean:
        clean["severity"] = clean["severity"].round().astype("Int64")
    return clean

