"""Read, coerce and validate every table of the input contract.

:func:`read_inputs` is the stage's entry point: it finds each table's file, reads it,
converts every column to its contract kind, rejects the rows that break a rule (with the
file, row number, column, value and reason), stops with an :class:`InputError` on problems
that make the whole table unusable, and returns clean frames with row counts that reconcile
(rows read = rows used + rows rejected, for every table).
"""

import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from impactlink.inputs._errors import InputError, InputWarning
from impactlink.inputs._files import checksums_for
from impactlink.inputs._rules import REJECTED_COLUMNS
from impactlink.inputs.bundle import (
    InputBundle,
    _check_record_length,
    _climate_gaps,
    _count_row,
    _index_gaps,
    summary_frame,
)
from impactlink.inputs.counties import counties_without_polygon
from impactlink.inputs.discover import _candidates, _unsupported
from impactlink.inputs.loss import degree_extent, raise_losses, table_loss
from impactlink.inputs.publisher import read_published
from impactlink.inputs.table_rules import (
    DEFAULT_LADDER,
    DEFAULT_REGION,
    DEFAULT_SEVERITY_RANGE,
    TEMPERATURE_RANGE_C,
    YEAR_RANGE,
)
from impactlink.inputs.tables import _Context, _read_table
from impactlink.project import Project
from impactlink.schema import COUNTY, REQUIRED_TABLES, TABLES

__all__ = ["InputBundle", "read_inputs", "resolve_files", "summary_frame", "YEAR_RANGE",
           "TEMPERATURE_RANGE_C", "DEFAULT_LADDER", "DEFAULT_REGION", "DEFAULT_SEVERITY_RANGE"]


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
        years than ``[calibration] min_years``; a unit mistake in a column (Fahrenheit or
        kelvin under a Celsius name, inches under a millimetre name, a county's yields scaled
        by 1,000 for a crop and practice, two units in one unit column), found on the values
        as read, before the row rules.

    Notes
    -----
    Row-level problems reject the row and are listed in ``rejected`` with a reason from
    :data:`impactlink.inputs.REASONS`: missing required value, unparseable date or number,
    date out of range (outside 1677-09-22 .. 2262-04-11, what a nanosecond timestamp holds),
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
    published: dict[str, Any] = {}
    if _declares_formats(project):
        say("reading tables in publisher formats")
    if project.formats.counties == "topojson":  # the counties come from the publisher file
        published, checksums = read_published(project, files)
    losses: list[str] = []  # one line per table that lost too many rows (stops the run)
    where = str(project.path or "the project file")
    for name, path in files.items():
        say(f"reading {name} from {path.name}")
        raw = None
        if name in published:
            pub = published[name]
            clean = pub.clean
            rejected.append(pub.rejected)
            counts.append(pub.counts)
            notes += pub.warnings
        else:
            clean, check = _read_table(name, path, ctx, notes)
            rejected.append(check.rejected())
            counts.append(_count_row(name, path, check, clean))
            checksums.update(checksums_for(path))
            # of the raw table only the coordinates are read again (the swapped lon/lat
            # hint); the rest is let go before the plausibility checks (a national climate
            # table is several GB)
            raw = check.frame[[c for c in ("lon", "lat") if c in check.frame.columns]]
            del check
        prov = published[name].details.get("provenance") if name in published else None
        clean, implausible = _plausible(name, path, clean, counts[-1], published=raw is None,
                                        zones=prov)
        rejected.append(implausible)
        extent = (degree_extent(tables.get("counties"))
                  if raw is not None and "lon" in raw and "lat" in raw else None)
        line = table_loss(name, path, counts[-1], pd.concat(rejected[-2:], ignore_index=True),
                          limit=project.max_rejected_share, frame=raw, extent=extent,
                          where=where)
        losses += [line] if line else []
        if name == "counties":
            ctx.set_counties(clean)
            if not published:  # publisher tables are read against the counties' ids
                published, sums = read_published(project, files,
                                                 county_ids=_ids(ctx))
                checksums.update(sums)
            if "zones" in published:  # counted for the manifest; not a contract table
                rejected.append(published["zones"].rejected)
                counts.append(published["zones"].counts)
                notes += published["zones"].warnings
        tables[name] = clean
    raise_losses(losses)  # before the record-length check and before any index is computed
    _check_record_length(tables["climate"], files["climate"], project)
    notes += _climate_gaps(tables["climate"], tables["counties"], files["climate"], project)
    if "price_index" in tables:
        notes += _index_gaps(tables["price_index"], files["price_index"])
    rej = pd.concat(rejected, ignore_index=True)[REJECTED_COLUMNS]
    notes += counties_without_polygon(rej, files["counties"])
    for message in notes:
        warnings.warn(message, InputWarning, stacklevel=2)
    rej = rej.sort_values(["table", "row"], kind="stable").reset_index(drop=True)
    return InputBundle(
        tables=tables,
        rejected=rej,
        counts=pd.DataFrame(counts).astype({"counties": "Int64"}),
        checksums=checksums,
        files=dict(files),
        warnings=notes,
        notes=[n for p in published.values() for n in p.notes],
        provenance={f"{k}_{d}": v for k, p in published.items() for d, v in p.details.items()},
    )


def _plausible(name: str, path: Path, clean: pd.DataFrame, count: dict[str, Any], *,
               published: bool, zones: pd.DataFrame | None = None
               ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Plausibility checks after the row rules and before any index is computed.

    A unit mistake (Fahrenheit under a Celsius name, inches under a millimetre name, a county
    scaled by a power of ten, mixed cadences) stops the run with the fix spelled out (contract
    tables were checked for these as read, before their row rules; a table from a publisher
    format is checked here, after its units were converted); a value
    beyond a physical limit rejects its row with the reason (``count`` is updated so the
    manifest still reconciles). A county of a per-zone file is named with its zone(s)
    (``zones``: the reader's county -> zone provenance), the rows the user must fix.
    See :mod:`impactlink.inputs.plausibility`.
    """
    from dataclasses import replace

    from impactlink.inputs.plausibility import check_plausibility, fatal_line

    res = check_plausibility(clean, name, file=str(path), units=published)
    if res.fatal:
        zone = ({} if zones is None or "zones" not in zones else
                dict(zip(zones[COUNTY].astype(str), zones["zones"].astype(str), strict=True)))
        raise InputError(fatal_line([replace(f, county=f"{f.county} (zone {zone[f.county]})")
                                     if f.county in zone else f for f in res.fatal]))
    if not len(res.rejected):
        return clean, pd.DataFrame(columns=REJECTED_COLUMNS)
    source = clean.attrs.get("source_rows")
    pos = clean.index.get_indexer(res.rejected["row"])
    rows = np.asarray(source)[pos] if source is not None else res.rejected["row"].to_numpy()
    bad = pd.DataFrame({"table": name, "file": str(path), "row": rows,
                        "column": res.rejected["column"].to_numpy(),
                        "value": res.rejected["value"].astype(str).to_numpy(),
                        "reason": res.rejected["reason"].to_numpy()})
    keep = np.ones(len(clean), dtype=bool)
    keep[np.unique(pos)] = False
    n_bad = int((~keep).sum())
    out = clean.loc[keep].copy()
    if source is not None:
        out.attrs["source_rows"] = type(source)(np.asarray(source)[keep])
    count["rows_used"] = int(count["rows_used"]) - n_bad
    count["rows_rejected"] = int(count["rows_rejected"]) + n_bad
    return out, bad


def _ids(ctx: _Context) -> list[str] | None:
    return None if ctx.county_ids is None else [str(c) for c in ctx.county_ids]


def _declares_formats(project: Project) -> bool:
    """Whether any table is declared in a publisher format under ``[formats]``."""
    fm = project.formats
    return any(v != "table" for v in (fm.climate, fm.indicators, fm.yields, fm.counties))



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

