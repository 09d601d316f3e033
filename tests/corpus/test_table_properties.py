"""Property tests of the input tables: no generated table makes the inputs stage raise
anything but the tool's own errors, and whenever it succeeds every row is accounted for.

Each example starts from the valid invented folder of :mod:`table_fixtures` and mutates one
table (any contract table, the counties GeoJSON, a Quick Stats-format export or the
zone-to-county table) with one to three edits: drop or rename a column, write a string, a
blank, NaN, infinity, a huge, negative or sentinel number or an odd date into a cell, shuffle
the dates, repeat a row, blank a row's keys. The stage either raises an
:class:`~impactlink.errors.ImpactlinkError` or returns tables whose counts reconcile: rows
read = the data rows written = rows used + rows rejected, and the rows rejected are exactly the
distinct rows listed in the rejected rows. Examples are derandomised (fixed), so a run is
reproducible.
"""

from __future__ import annotations

import atexit
import copy
import json
import random
import shutil
import tempfile
import warnings
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from table_cases import QUICKSTATS, ZONES, csv_text
from table_fixtures import (
    BUILDERS,
    QS_COLUMNS,
    counties_geojson,
    make_folder,
    quickstats_rows,
    zone_climate_rows,
    zone_rows,
)

from impactlink.errors import ImpactlinkError
from impactlink.inputs import read_inputs
from impactlink.project import load_project

FOLDER = Path(tempfile.mkdtemp(prefix="impactlink_tables_prop_"))  # rewritten per example
atexit.register(shutil.rmtree, FOLDER, True)

#: Every table a case can mutate: name -> (its rows, the contract table it feeds).
BASE = {name: (build(), name) for name, build in BUILDERS.items()}
BASE["quickstats"] = (quickstats_rows(), "yields")
BASE["zones"] = (zone_rows(), "zones")
CELLS = (st.text(max_size=8) | st.sampled_from([
    "", " ", "nan", "NaN", "NA", "inf", "-inf", "1e308", "-1e308", "1e400", "-5", "-999",
    "-9999", "0", "99999999999999999999", "1,234.5", "0x1F", "2400-01-01", "1200-06-30",
    "0000-00-00", "2001-02-30", "2001-13-01", "12/31/2001", "2001-01-01T25:00", "(D)", "true",
    "01001", "7.5e-320"]))
EDITS = st.one_of(
    st.tuples(st.just("drop"), st.integers(0, 30)),
    st.tuples(st.just("rename"), st.integers(0, 30), st.sampled_from(["x", "", "date", "ID"])),
    st.tuples(st.just("cell"), st.integers(0, 500), st.integers(0, 30), CELLS),
    st.tuples(st.just("column"), st.integers(0, 30), CELLS),
    st.tuples(st.just("shuffle"), st.integers(0, 2**16)),
    st.tuples(st.just("repeat"), st.integers(0, 500)),
    st.tuples(st.just("blank_keys"), st.integers(0, 500)),
)
KEYS = ("county_id", "date", "year", "region", "notice_id", "zone", "State ANSI", "County ANSI")


def mutate(rows: list[dict[str, str]], edits) -> tuple[list[dict[str, str]], list[str]]:
    """The rows and columns after ``edits`` (indices taken modulo the table's size)."""
    rows = copy.deepcopy(rows)
    cols = list(rows[0])
    for edit in edits:
        kind, *arg = edit
        if kind == "drop" and len(cols) > 1:
            gone = cols.pop(arg[0] % len(cols))
            rows = [{k: v for k, v in r.items() if k != gone} for r in rows]
        elif kind == "rename":
            old = cols[arg[0] % len(cols)]
            new = arg[1] if arg[1] not in cols else old  # a CSV header holds a name once
            cols = [new if c == old else c for c in cols]
            rows = [{(new if k == old else k): v for k, v in r.items()} for r in rows]
        elif kind == "cell":
            rows[arg[0] % len(rows)][cols[arg[1] % len(cols)]] = arg[2]
        elif kind == "column":
            col = cols[arg[0] % len(cols)]
            for r in rows:
                r[col] = arg[1]
        elif kind == "shuffle":
            col = next((c for c in cols if "date" in c.lower() or c in ("year", "Year")), None)
            if col:
                values = [r[col] for r in rows]
                random.Random(arg[0]).shuffle(values)
                for r, v in zip(rows, values, strict=True):
                    r[col] = v
        elif kind == "repeat":
            rows.insert(arg[0] % len(rows), dict(rows[arg[0] % len(rows)]))
        elif kind == "blank_keys":
            rows[arg[0] % len(rows)].update({k: "" for k in KEYS if k in cols})
    return rows, cols


def write_case(name: str, rows, cols) -> Path:
    shutil.rmtree(FOLDER, ignore_errors=True)
    if name == "quickstats":
        return make_folder(FOLDER, formats=QUICKSTATS,
                           files={"yields.csv": csv_text(rows, cols)})
    if name == "zones":
        return make_folder(FOLDER, formats=ZONES, files={
            "zone_table.csv": csv_text(rows, cols), "climate.csv": csv_text(zone_climate_rows())})
    path = make_folder(FOLDER, {name: rows} if rows else {})
    if not rows:  # a file with a header only
        (FOLDER / f"{name}.csv").write_text(",".join(cols) + "\n", encoding="utf-8")
    return path


def check_reconciles(path: Path, table: str, written: int) -> None:
    """Read the folder: an ImpactlinkError, or counts that reconcile (see module notes)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            bundle = read_inputs(load_project(path))
    except ImpactlinkError as exc:
        lines = str(exc).splitlines()  # one line per table that lost too many rows
        assert lines and all(line.strip() for line in lines) and "Traceback" not in str(exc)
        return
    counts = bundle.counts.set_index("table")
    for name, c in counts.iterrows():
        assert c["rows_read"] == c["rows_used"] + c["rows_rejected"], name
        listed = bundle.rejected.loc[bundle.rejected["table"] == name, "row"].nunique()
        assert c["rows_rejected"] == listed, name
    assert counts.loc[table, "rows_read"] == written
    if table != "zones":
        assert len(bundle.tables[table]) == counts.loc[table, "rows_used"]


@settings(max_examples=110, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(sorted(BASE)), st.lists(EDITS, min_size=1, max_size=3))
def test_no_generated_table_raises_anything_but_impactlink_errors(name, edits):
    base, table = BASE[name]
    qs = name == "quickstats"
    rows, cols = mutate(base, edits)
    path = write_case(name, rows, list(QS_COLUMNS) if qs and cols == list(QS_COLUMNS) else cols)
    check_reconciles(path, table, len(rows))


COUNTY_EDITS = st.lists(st.tuples(
    st.sampled_from(["blank_id", "same_id", "number_id", "no_geometry", "repeat", "point"]),
    st.integers(0, 4)), min_size=1, max_size=3)


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(COUNTY_EDITS)
def test_no_generated_counties_file_raises_anything_but_impactlink_errors(edits):
    g = counties_geojson()
    feats = g["features"]
    for kind, i in edits:
        f = feats[i % len(feats)]
        if kind == "blank_id":
            f["properties"]["county_id"] = ""
        elif kind == "same_id":
            f["properties"]["county_id"] = feats[0]["properties"]["county_id"]
        elif kind == "number_id":
            f["properties"]["county_id"] = int(f["properties"]["county_id"])
        elif kind == "no_geometry":
            f["geometry"] = None
        elif kind == "repeat":
            feats.append(copy.deepcopy(f))
        elif kind == "point":
            f["geometry"] = {"type": "Point", "coordinates": [-100.0, 39.2]}
    shutil.rmtree(FOLDER, ignore_errors=True)
    path = make_folder(FOLDER, counties="", files={"counties.geojson": json.dumps(g)})
    check_reconciles(path, "counties", len(feats))


def _typed(values, kind: str):
    """``values`` (text) stored as ``kind`` in a Parquet column."""
    import pandas as pd

    s = pd.Series(values, dtype=object)
    if kind == "float":
        return pd.to_numeric(s, errors="coerce")
    if kind == "int":
        return pd.to_numeric(s, errors="coerce").fillna(0).round().astype("int64")
    if kind == "nullable":
        return pd.array(pd.to_numeric(s, errors="coerce"), dtype="Float64")
    if kind == "bool":
        return s.astype(str).str.len() % 2 == 0
    if kind == "datetime":
        return pd.to_datetime(s.astype(str), format="ISO8601", errors="coerce")
    if kind == "categorical":
        return pd.Categorical(s)
    if kind == "timedelta":
        return pd.to_timedelta(range(len(s)), unit="D")
    return s.astype(str)


@settings(max_examples=30, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(["county_id", "date", "precip_mm", "tmin_c",
                                           "tmax_c"]),
                          st.sampled_from(["float", "int", "nullable", "bool", "datetime",
                                           "categorical", "timedelta", "text"])),
                min_size=1, max_size=3), st.lists(EDITS, max_size=2))
def test_no_typed_parquet_climate_raises_anything_but_impactlink_errors(types, edits):
    import pandas as pd

    rows, cols = mutate(BASE["climate"][0], edits)
    frame = pd.DataFrame(rows, columns=cols)
    for col, kind in types:
        if col in frame:
            frame[col] = _typed(frame[col].tolist(), kind)
    shutil.rmtree(FOLDER, ignore_errors=True)
    path = make_folder(FOLDER, {"climate": rows})
    (FOLDER / "climate.csv").unlink()
    frame.to_parquet(FOLDER / "climate.parquet", index=False)
    check_reconciles(path, "climate", len(frame))
