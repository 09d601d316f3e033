"""Read, coerce and validate every table of the input contract.

:func:`read_inputs` is the stage's entry point: it finds each table's file, reads it,
converts every column to its contract kind, rejects the rows that break a rule (with the
file, row number, column, value and reason), stops with an :class:`InputError` on problems
that make the whole table unusable, and returns clean frames with row counts that reconcile
(rows read = rows used + rows rejected, for every table).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink.inputs._errors import REASONS, InputError, InputWarning
from impactlink.inputs._files import checksums_for, read_raw
from impactlink.inputs._rules import REJECTED_COLUMNS, TableCheck, map_levels, number_column
from impactlink.inputs.discover import _candidates, _unsupported
from impactlink.project import Project
from impactlink.schema import COUNTY, REGION, REQUIRED_TABLES, TABLES, TableSpec

__all__ = ["InputBundle", "read_inputs", "resolve_files", "summary_frame"]

#: Plausible range of a yield year (common practice: no crop record predates 1800).
YEAR_RANGE = (1800, 2100)
#: Plausible air temperature range in degrees C (the recorded extremes are about -89 and +57).
TEMPERATURE_RANGE_C = (-90.0, 60.0)
#: Default field-report severity range when no ``severity_range`` option is given.
DEFAULT_SEVERITY_RANGE = (1, 5)
#: Default notice ladder when no ``ladder`` option is given.
DEFAULT_LADDER = (1, 2, 3)
#: Region given to counties whose file has no ``region`` column.
DEFAULT_REGION = "all"


@dataclass(frozen=True)
class InputBundle:
    """Clean input tables and the record of what was dropped and why.

    Attributes
    ----------
    tables : dict
        Contract table name -> clean frame. Ids and text are ``str``; dates are
        ``datetime64[ns]`` at midnight; numbers are ``float64`` (``year`` is ``int64``,
        notice ``level`` / snapshot ``stage`` are ``int64`` with the text as written in
        ``level_label`` / ``stage_label``). ``counties`` is a GeoDataFrame in its own CRS with
        ``county_id``, ``county_name`` (when given), ``region`` and ``geometry``.
    rejected : DataFrame
        One line per rejected cell or row: ``table``, ``file``, ``row``, ``column``,
        ``value``, ``reason``. ``row`` is the 1-based data row number in the file with the
        header excluded (row 1 is the first line under the header; for geometry files, the
        first feature). A row with several bad cells appears once per cell.
    counts : DataFrame
        One line per table: ``table``, ``file``, ``rows_read``, ``rows_used``,
        ``rows_rejected`` (distinct rows), ``date_min``, ``date_max``, ``counties`` (distinct
        county ids used). ``rows_read == rows_used + rows_rejected`` always.
    checksums : dict
        File path -> SHA-256 hex digest (shapefiles also list their side files).
    files : dict
        Contract table name -> file read.
    warnings : list of str
        Recoverable surprises (also issued as :class:`InputWarning`).
    """

    tables: dict[str, pd.DataFrame]
    rejected: pd.DataFrame
    counts: pd.DataFrame
    checksums: dict[str, str]
    files: dict[str, Path]
    warnings: list[str] = field(default_factory=list)

    def to_frame(self) -> pd.DataFrame:
        """The per-table row counts (same as :attr:`counts`)."""
        return self.counts.copy()


def read_inputs(project: Project, *, progress: Callable[[str], Any] | None = None) -> InputBundle:
    """Read and validate every input table of a project.

    Parameters
    ----------
    project : Project
        The project; ``project.tables`` names files explicitly, and tables it does not
        name are looked for by name in ``project.data_dir`` (see :func:`discover_tables`).
    progress : callable, optional
        Called with a short message as each table is read.

    Returns
    -------
    InputBundle

    Raises
    ------
    InputError
        A required table (counties, climate) is missing; a file named in the project is
        missing; a file cannot be parsed or has an unsupported extension; a required column
        is missing; the counties geometry is missing or unreadable, or a county id repeats;
        no county id of a table matches the counties table; the climate record covers fewer
        years than ``[calibration] min_years``.

    Notes
    -----
    Row-level problems reject the row and are listed in ``rejected`` with a reason from
    :data:`impactlink.inputs.REASONS`: missing required value, unparseable date or number,
    not a whole number, sentinel value (``-999`` style, :data:`impactlink.schema.SENTINELS`),
    value not finite, negative quantity, duplicate key (the later row is rejected and the
    reason names the earlier row), unknown county, end before start, level outside the
    ladder (notice levels and snapshot stages are integers 0..K, 0 meaning no restriction,
    K the length of the notices impact option ``ladder``, default 3; or an issuer's stage
    name from the option ``stage_names``, ``{issuer: {name: level}}``, or a name in a
    ladder of names), blank row, no county or coordinates, coordinates out of range, year
    out of range, tmin above tmax, temperature out of range, severity out of range, zero
    price index, missing geometry. Cell-level checks report every bad cell of a row; the rules after them
    (cross-column checks, unknown county, duplicates) look only at rows still usable.

    Traits: every column other than ``county_id`` must be numeric. A column in which no
    value reads as a number is fatal (it is not a trait; remove or encode it); a single
    unreadable value rejects that county's row with "unparseable number".
    """
    say = progress or (lambda message: None)
    files = resolve_files(project)
    notes: list[str] = []
    ctx = _Context.from_project(project)
    tables: dict[str, pd.DataFrame] = {}
    rejected: list[pd.DataFrame] = []
    counts: list[dict[str, Any]] = []
    checksums: dict[str, str] = {}
    for name, path in files.items():
        say(f"reading {name} from {path.name}")
        clean, check = _read_table(name, path, ctx, notes)
        if name == "counties":
            ctx.set_counties(clean)
        tables[name] = clean
        rejected.append(check.rejected())
        counts.append(_count_row(name, path, check, clean))
        checksums.update(checksums_for(path))
    _check_record_length(tables["climate"], files["climate"], project)
    notes += _climate_gaps(tables["climate"], tables["counties"], files["climate"], project)
    for message in notes:
        warnings.warn(message, InputWarning, stacklevel=2)
    rej = pd.concat(rejected, ignore_index=True)[REJECTED_COLUMNS]
    rej = rej.sort_values(["table", "row"], kind="stable").reset_index(drop=True)
    return InputBundle(
        tables=tables,
        rejected=rej,
        counts=pd.DataFrame(counts).astype({"counties": "Int64"}),
        checksums=checksums,
        files=dict(files),
        warnings=notes,
    )


def resolve_files(project: Project) -> dict[str, Path]:
    """Which file holds each table: the project's ``[tables]`` first, then the data folder.

    Returns contract name -> path with ``counties`` first, then the contract's order.

    Raises
    ------
    InputError
        Two files in the data folder claim a table the project does not name, or a
        required table is found nowhere.
    """
    files = {k: Path(v) for k, v in project.tables.items()}
    data_dir = Path(project.data_dir)
    found = _candidates(data_dir) if data_dir.is_dir() else {}
    for name, paths in found.items():
        if name in files:
            continue
        if len(paths) > 1:
            raise InputError(
                f"{data_dir}: {len(paths)} files claim the table {name!r}: "
                f"{', '.join(p.name for p in paths)}; keep one, or name the one to use under "
                f"[tables] in the project file ({name} = \"{paths[0].name}\")"
            )
        files[name] = paths[0]
    for name in REQUIRED_TABLES:
        if name not in files:
            odd = _unsupported(data_dir, name)
            hint = (
                f"; found {', '.join(p.name for p in odd)}, which is not a supported format "
                f"(save it as CSV or Parquet)"
                if odd
                else ""
            )
            raise InputError(
                f"required table {name!r} not found: no {name}.csv, {name}.parquet or "
                f"geometry file in {data_dir} and no '{name}' under [tables] in the project "
                f"file{hint}; add the file or name it under [tables]"
            )
    order = [n for n in TABLES if n in files]
    return {n: files[n] for n in order}


def summary_frame(bundle: InputBundle) -> pd.DataFrame:
    """One line per table for the ``check`` command.

    Columns: ``table``, ``file`` (name only), ``rows_read``, ``rows_used``,
    ``rows_rejected``, ``first`` and ``last`` (ISO dates or blank), ``counties``, and
    ``top_reasons`` (the three most frequent rejection reasons with their counts).
    """
    c = bundle.counts
    rej = bundle.rejected
    reasons = []
    for table in c["table"]:  # loop over at most a dozen tables
        r = rej.loc[rej["table"] == table, "reason"]
        r = r.str.replace(r"^duplicate of row \d+$", "duplicate", regex=True)
        top = r.value_counts().head(3)
        reasons.append("; ".join(f"{n} {why}" for why, n in top.items()))
    return pd.DataFrame(
        {
            "table": c["table"],
            "file": [Path(f).name for f in c["file"]],
            "rows_read": c["rows_read"],
            "rows_used": c["rows_used"],
            "rows_rejected": c["rows_rejected"],
            "first": c["date_min"].dt.strftime("%Y-%m-%d").fillna(""),
            "last": c["date_max"].dt.strftime("%Y-%m-%d").fillna(""),
            "counties": c["counties"],
            "top_reasons": reasons,
        }
    )


# ============================================================================ private steps
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
    rule = _RULES.get(name)
    if rule is not None:
        rule(check, ctx)
    _reject_unknown_counties(check, ctx, path)
    _warn_unknown_regions(check, ctx, path, notes)
    _reject_duplicates(check, spec)
    clean = check.used(columns + extra if name != "traits" else columns)
    clean = _final_types(name, clean, check)
    return clean, check


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


# -------------------------------------------------------------------- counties
def _read_counties(gdf, path: Path, notes: list[str]) -> tuple[pd.DataFrame, TableCheck]:
    import geopandas as gpd
    import shapely

    geom_name = gdf.geometry.name if isinstance(gdf, gpd.GeoDataFrame) else None
    if geom_name is None:
        raise InputError(
            f"{path}: the counties table has no geometry; save it as GeoPackage, GeoJSON or "
            f"Shapefile"
        )
    geoms = gdf.geometry.to_numpy()
    crs = gdf.crs
    attrs = pd.DataFrame(gdf.drop(columns=geom_name))
    check = TableCheck("counties", str(path), attrs)
    check.coerce(COUNTY, "id", required=True)
    for col in ("county_name", REGION):
        if col in attrs:
            check.coerce(col, "str", required=False)
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    check.reject(empty, "geometry", "", REASONS["geometry"])
    if pd.api.types.is_numeric_dtype(attrs[COUNTY].dtype):
        notes.append(
            f"{path}: county_id is stored as numbers; ids with leading zeros (e.g. county "
            f"GEOIDs like 01001) have lost them. Store county_id as text"
        )
    ids = check.clean[COUNTY]
    dup = ids.duplicated(keep=False).to_numpy() & check.alive
    if dup.any():
        rows = check.rows[dup][:6].tolist()
        raise InputError(
            f"{path}: county_id repeats ({sorted(set(ids[dup]))[:5]} at rows {rows}); each "
            f"county must appear once: merge the parts into one (multi)polygon per county"
        )
    valid = shapely.is_valid(geoms) | empty
    if not valid.all():
        geoms = geoms.copy()
        geoms[~valid] = shapely.make_valid(geoms[~valid])
        notes.append(f"{path}: {int((~valid).sum())} invalid geometries repaired with make_valid")
    if crs is None:
        xmin, ymin, xmax, ymax = shapely.total_bounds(geoms[~empty])
        if -180 <= xmin and xmax <= 180 and -90 <= ymin and ymax <= 90:
            crs = "EPSG:4326"
            notes.append(f"{path}: no coordinate reference system; assuming EPSG:4326 (degrees)")
        else:
            raise InputError(
                f"{path}: no coordinate reference system and the coordinates are not degrees "
                f"(bounds {xmin:.0f}, {ymin:.0f}, {xmax:.0f}, {ymax:.0f}); save the file with "
                f"its CRS (e.g. a .prj beside a shapefile)"
            )
    if not check.alive.any():
        why = check.rejected()["reason"].value_counts().to_dict()
        raise InputError(
            f"{path}: the counties table has no usable county ({check.n} rows; problems: "
            f"{why or 'none'}); each county needs a county_id and a polygon"
        )
    columns = [c for c in (COUNTY, "county_name", REGION) if c in attrs]
    clean = check.used(columns)
    if REGION not in clean:
        clean[REGION] = DEFAULT_REGION
        notes.append(
            f"{path}: no 'region' column; every county is put in region {DEFAULT_REGION!r}"
        )
    elif (clean[REGION] == "").any():
        n = int((clean[REGION] == "").sum())
        clean[REGION] = clean[REGION].where(clean[REGION] != "", DEFAULT_REGION)
        notes.append(f"{path}: {n} counties have a blank region; put in {DEFAULT_REGION!r}")
    out = gpd.GeoDataFrame(clean, geometry=geoms[check.alive], crs=crs)
    return out, check


# -------------------------------------------------------------------- table rules
def _climate(check: TableCheck, ctx: _Context) -> None:
    c = check.clean
    temps = [t for t in ("tmin_c", "tmax_c", "tmean_c") if t in c]
    lo, hi = TEMPERATURE_RANGE_C
    for t in temps:
        v = c[t].to_numpy()
        with np.errstate(invalid="ignore"):
            check.reject((v < lo) | (v > hi), t, check.raw_text(t), REASONS["temperature"])
    if "tmin_c" in c and "tmax_c" in c:
        tmin, tmax = c["tmin_c"].to_numpy(), c["tmax_c"].to_numpy()
        with np.errstate(invalid="ignore"):
            bad = tmin > tmax
        check.reject(
            bad, "tmin_c", lambda i: [f"tmin_c={a:g} > tmax_c={b:g}" for a, b in zip(tmin[i], tmax[i])],
            REASONS["tmin_tmax"],
        )


def _yields(check: TableCheck, ctx: _Context) -> None:
    y = check.clean["year"].to_numpy()
    with np.errstate(invalid="ignore"):
        bad = (y < YEAR_RANGE[0]) | (y > YEAR_RANGE[1])
    check.reject(bad, "year", check.raw_text("year"), REASONS["year"])


def _price_index(check: TableCheck, ctx: _Context) -> None:
    v = check.clean["price_index"].to_numpy()
    check.reject(v == 0, "price_index", check.raw_text("price_index"), REASONS["zero_index"])


def _notices(check: TableCheck, ctx: _Context) -> None:
    # level 0 = "restrictions lifted" (the linking stage ends open notices with it)
    _levels(check, ctx, "level", allow_zero=True)
    _end_before_start(check)
    _coordinates(check)
    c = check.clean
    has_county = (c[COUNTY] != "").to_numpy() if COUNTY in c else np.zeros(check.n, bool)
    if "lon" in c and "lat" in c:
        has_point = (c["lon"].notna() & c["lat"].notna()).to_numpy()
    else:
        has_point = np.zeros(check.n, bool)
    check.reject(~has_county & ~has_point, COUNTY, "", REASONS["no_location"])


def _notice_snapshots(check: TableCheck, ctx: _Context) -> None:
    _levels(check, ctx, "stage", allow_zero=True)
    _coordinates(check)


def _water_systems(check: TableCheck, ctx: _Context) -> None:
    _coordinates(check)


def _field_reports(check: TableCheck, ctx: _Context) -> None:
    if "severity" not in check.clean:
        return
    lo, hi = ctx.severity_range
    v = check.clean["severity"].to_numpy()
    with np.errstate(invalid="ignore"):
        bad = (v < lo) | (v > hi)
    check.reject(bad, "severity", check.raw_text("severity"), REASONS["severity"])


def _coverage(check: TableCheck, ctx: _Context) -> None:
    _end_before_start(check)
    c = check.clean
    has = np.zeros(check.n, bool)
    for col in (COUNTY, REGION):
        if col in c:
            has |= (c[col] != "").to_numpy()
    check.reject(~has, COUNTY if COUNTY in c else REGION, "", REASONS["no_area"])


_RULES: dict[str, Callable[[TableCheck, _Context], None]] = {
    "climate": _climate,
    "yields": _yields,
    "price_index": _price_index,
    "notices": _notices,
    "notice_snapshots": _notice_snapshots,
    "water_systems": _water_systems,
    "field_reports": _field_reports,
    "coverage": _coverage,
}


def _levels(check: TableCheck, ctx: _Context, col: str, *, allow_zero: bool) -> None:
    text = check.clean[col]
    levels, bad = map_levels(
        text, check.clean["issuer"], n_levels=ctx.n_levels, names=ctx.stage_names,
        allow_zero=allow_zero,
    )
    check.reject(bad, col, check.raw_text(col), REASONS["level"])
    check.clean[f"{col}_label"] = text
    check.clean[col] = pd.Series(levels, index=text.index)


def _end_before_start(check: TableCheck) -> None:
    c = check.clean
    if "end_date" not in c:
        return
    s, e = c["start_date"], c["end_date"]
    bad = (e < s).to_numpy()
    check.reject(
        bad, "end_date",
        lambda i: [f"{a:%Y-%m-%d} < {b:%Y-%m-%d}" for a, b in zip(e.iloc[i], s.iloc[i])],
        REASONS["end_before_start"],
    )


def _coordinates(check: TableCheck) -> None:
    c = check.clean
    for col, lim in (("lon", 180.0), ("lat", 90.0)):
        if col in c:
            v = c[col].to_numpy()
            with np.errstate(invalid="ignore"):
                check.reject(np.abs(v) > lim, col, check.raw_text(col), REASONS["coordinates"])


def _reject_unknown_counties(check: TableCheck, ctx: _Context, path: Path) -> None:
    if COUNTY not in check.clean or ctx.county_ids is None:
        return
    ids = check.clean[COUNTY]
    given = (ids != "").to_numpy()
    unknown = given & ~ids.isin(ctx.county_ids).to_numpy()
    live = given & check.alive
    if live.any() and not (live & ~unknown).any():
        sample = sorted(set(ids[live]))[:5]
        known = list(ctx.county_ids[:5])
        hint = ""
        stripped = set(ctx.county_ids.str.lstrip("0"))
        if any(s.lstrip("0") in stripped for s in sample):
            hint = " The ids look like they lost or gained leading zeros: store ids as text."
        raise InputError(
            f"{path}: none of the county ids in column {COUNTY!r} is in the counties table "
            f"(e.g. {sample}; counties has e.g. {known}).{hint} Use the same county ids in "
            f"every table"
        )
    check.reject(unknown, COUNTY, ids, REASONS["unknown_county"])


def _warn_unknown_regions(check: TableCheck, ctx: _Context, path: Path, notes: list[str]) -> None:
    if REGION not in check.clean or not ctx.regions or ctx.regions == {DEFAULT_REGION}:
        return
    r = check.clean[REGION]
    odd = sorted(set(r[check.alive & (r != "").to_numpy()]) - ctx.regions)
    if odd:
        notes.append(
            f"{path}: region(s) {odd[:5]} are not regions of the counties table "
            f"({sorted(ctx.regions)[:5]}); rows are kept"
        )


def _reject_duplicates(check: TableCheck, spec: TableSpec) -> None:
    """Reject the later of two usable rows with the same key; the reason names the first."""
    key = [k for k in spec.key if k in check.clean]
    if not key or not check.alive.any():
        return
    live = np.flatnonzero(check.alive)
    # One integer code per distinct key (factorize each column, fold them together and
    # re-factorize after each step so the codes stay below the row count).
    code = np.zeros(live.size, dtype=np.int64)
    for k in key:
        col, _ = pd.factorize(check.clean[k].iloc[live], use_na_sentinel=False)
        code, _ = pd.factorize(code * (int(col.max(initial=0)) + 1) + col)
    _, first, inverse = np.unique(code, return_index=True, return_inverse=True)
    first_of_row = first[inverse]
    dup = first_of_row != np.arange(live.size)
    if not dup.any():
        return
    mask = np.zeros(check.n, bool)
    mask[live[dup]] = True
    reasons = np.empty(check.n, dtype=object)
    reasons[live[dup]] = [
        REASONS["duplicate"].format(row=r) for r in check.rows[live[first_of_row[dup]]]
    ]
    parts = []
    for k in key:
        v = check.clean[k].iloc[live[dup]]
        if pd.api.types.is_datetime64_any_dtype(v.dtype):
            v = v.dt.strftime("%Y-%m-%d")
        parts.append(v.astype(object).astype(str).to_numpy())
    values = np.empty(check.n, dtype=object)
    values[live[dup]] = [" | ".join(t) for t in zip(*parts)]
    check.reject(mask, "+".join(key), values, reasons)


# -------------------------------------------------------------------- results
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


def _count_row(name: str, path: Path, check: TableCheck, clean: pd.DataFrame) -> dict[str, Any]:
    used = int(check.alive.sum())
    dmin = dmax = pd.NaT
    for col in ("date", "start_date"):
        if col in clean and len(clean):
            dmin, dmax = clean[col].min(), clean[col].max()
            break
    else:
        if "year" in clean and len(clean):
            dmin = pd.Timestamp(int(clean["year"].min()), 1, 1)
            dmax = pd.Timestamp(int(clean["year"].max()), 12, 31)
    counties = int(clean[COUNTY].replace("", np.nan).nunique()) if COUNTY in clean else None
    return {
        "table": name,
        "file": str(path),
        "rows_read": check.n,
        "rows_used": used,
        "rows_rejected": check.n - used,
        "date_min": dmin,
        "date_max": dmax,
        "counties": counties,
    }


def _climate_gaps(
    climate: pd.DataFrame, counties: pd.DataFrame, path: Path, project: Project
) -> list[str]:
    """Warnings for counties with no climate rows or a record shorter than min_years."""
    out = []
    codes, ids = pd.factorize(climate[COUNTY])
    years = climate["date"].dt.year.to_numpy().astype(np.int64)
    pairs = np.unique(codes.astype(np.int64) * 10_000 + years)  # years are below 10000
    have = pd.Series(np.bincount(pairs // 10_000, minlength=len(ids)), index=ids)
    absent = sorted(set(counties[COUNTY]) - set(have.index))
    if absent:
        out.append(
            f"{path}: {len(absent)} of {len(counties)} counties have no climate rows "
            f"(e.g. {absent[:5]}); they get no index values"
        )
    short = have[have < project.calibration.min_years]
    if len(short):
        out.append(
            f"{path}: {len(short)} counties have fewer than {project.calibration.min_years} "
            f"years of climate rows (e.g. {dict(list(short.items())[:3])} years); their "
            f"index values rest on a short record"
        )
    return out


def _check_record_length(climate: pd.DataFrame, path: Path, project: Project) -> None:
    need = project.calibration.min_years
    years = climate["date"].dt.year
    n = int(years.nunique())
    if n < need:
        span = f" ({years.min()}-{years.max()})" if n else ""
        where = project.path or "the project file"
        raise InputError(
            f"{path}: the climate record covers {n} year(s){span}, fewer than the {need} the "
            f"calibration needs; supply a longer record, or lower min_years under "
            f"[calibration] in {where} (shorter records give less reliable index values)"
        )
