"""One-defect corpus over every input table (issue "Bad input never misleads").

Each case of :mod:`table_cases` is a small invented folder (:mod:`table_fixtures`: five
fictional counties, three years of monthly climate, one small file per table) with one
mistake, and its exact outcome:

- fatal: ``impactlink check`` and ``impactlink run`` both stop with exit code 2 and the same
  one line, no traceback, naming the file (and column or key); the run's indices stage is
  replaced by a failure, so the stop comes before any index is computed;
- rows: ``impactlink check --out`` lists exactly the expected rows in ``rejected_rows.csv``
  (table, file, row, column, value, reason), every table's counts in ``manifest.json``
  reconcile (rows read = used + rejected, rows rejected = the distinct rows listed, rows read
  = the data rows the case wrote) and the warnings are exactly the expected lines.
"""

from __future__ import annotations

import io
import json
import warnings
from pathlib import Path

import pandas as pd
import pytest
from corpus_common import fatal_line
from table_cases import CASE_IDS, Case, all_cases
from table_fixtures import make_folder

from impactlink.errors import InputWarning
from impactlink.pipeline import check_project

CASES = all_cases()
#: The table a file of the case folders holds (by file name).
FILE_TABLE = {"zone_table.csv": "zones", "boundaries.json": "counties"}




def _written(case: Case) -> dict[str, int]:
    """Data rows each table's file holds, as the case wrote them (header excluded)."""
    n = {name: len(rows) for name, rows in case.folder.get("tables", {}).items()}
    for name, text in case.folder.get("files", {}).items():
        if isinstance(text, bytes):  # a Parquet table
            n[name.removesuffix(".parquet")] = len(pd.read_parquet(io.BytesIO(text)))
        elif name.endswith(".csv"):
            n[FILE_TABLE.get(name, name.removesuffix(".csv"))] = text.count("\n") - 1
    return n


@pytest.mark.parametrize("case", [c for c in CASES if c.fatal], ids=CASE_IDS)
def test_fatal_case_stops_with_one_line_before_any_index(case, tmp_path, monkeypatch, capsys):
    path = make_folder(tmp_path / "case", **case.folder)
    line = fatal_line(path, monkeypatch, capsys)
    assert line == case.fatal.format(d=path.parent)
    assert line.startswith(str(path.parent / ""))  # names its file first
    assert not (path.parent / "out").exists()  # nothing published by the stopped run


@pytest.mark.parametrize("case", [c for c in CASES if not c.fatal], ids=CASE_IDS)
def test_row_case_lists_its_rows_and_reconciles(case, tmp_path):
    path = make_folder(tmp_path / "case", **case.folder)
    out = tmp_path / "out"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        check_project(path, out=out)
    rej = pd.read_csv(out / "rejected_rows.csv", dtype=str, keep_default_na=False)
    got = sorted((r.table, Path(r.file).name, int(r.row), r.column, r.value, r.reason)
                 for r in rej.itertuples())
    assert got == sorted(case.rejected)
    assert all(Path(f).parent == path.parent for f in rej["file"])
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    written = _written(case)
    for t in manifest["inputs"]:
        assert t["rows_read"] == t["rows_used"] + t["rows_rejected"], t["table"]
        listed = rej.loc[rej["table"] == t["table"], "row"].nunique()
        assert t["rows_rejected"] == listed, t["table"]
        if t["table"] in written:
            assert t["rows_read"] == written[t["table"]], t["table"]
    total = manifest["rows_total"]
    assert total["read"] == total["used"] + total["rejected"]
    assert total["rejected"] == sum(t["rows_rejected"] for t in manifest["inputs"])
    lines = [str(w.message) for w in caught if issubclass(w.category, InputWarning)]
    assert lines == [w.format(d=path.parent) for w in case.warnings]
    assert manifest["warnings"] == lines  # kept in the manifest as issued


def test_the_corpus_covers_every_table_and_the_named_defects():
    assert len(CASES) >= 30
    tables = {c.table for c in CASES}
    assert tables >= {"counties", "climate", "yields", "prices", "price_index", "notices",
                      "field_reports", "indicators", "zones"}
    # the unit and whole-table cases are fatal (so caught before any index is computed)
    assert all(c.fatal for c in CASES if c.before_indices)
    names = " ".join(c.name for c in CASES)
    for defect in ("Fahrenheit in a cool county", "kelvin", "scaled by 1,000", "kg_per_ha",
                   "whole table rejected", "year 2400", "without one month", "Quick Stats row",
                   "zone table county not", "without feature ids", "shown as 2001"):
        assert defect in names, defect
