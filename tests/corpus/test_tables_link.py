"""One-defect corpus for the linking stage: text keys, coverage and file rows.

Each case is a small copy of the committed fictional scenario (scenario_data/: its 60 counties,
two years of its climate and the impact table the case needs) with one mistake, run through
``impactlink link`` (inputs, indices, link), and its exact outcome: the rows listed in
rejected_rows.csv with file, row and reason and the reconciled counts, the manifest's
``key_normalisation`` entry, or a one-line fatal message naming the file and key.

Expected rows and counts are computed here from the scenario files with the standard library's
csv module, not by the readers. The normal form of a key is NFKC, whitespace collapsed and case
folded (Unicode Standard Annex #15; Unicode Standard section 3.13); a UTF-8 byte-order mark is
U+FEFF encoded as EF BB BF (Unicode Standard section 23.8), which RFC 4180 text and RFC 8259
JSON readers may drop.
"""

from __future__ import annotations

import csv
import json
import shutil
import warnings
from pathlib import Path

import pandas as pd
import pytest

from impactlink.cli import main
from impactlink.pipeline import run_project

SCENARIO = Path(__file__).resolve().parents[2] / "scenario_data"
YEARS = ("2017-01-01", "2018-12-31")
OUTSIDE = "outside the source's coverage"
BOM = b"\xef\xbb\xbf"
_TOML = (SCENARIO / "impactlink.toml").read_text(encoding="utf-8")
NOTICES = _TOML[_TOML.index("[impacts.restrictions]"):_TOML.index("[impacts.crop_reports]")]
IMPACTS = {
    "yields": '[impacts.maize]\nsource = "yields"\ncrop = "maize"\npractice = "rainfed"\n'
              'trend = "linear"\nseason_week = 34\n',
    "prices": '[impacts.hay]\nsource = "prices"\ncommodity = "hay"\n',
    "field_reports": '[impacts.reports]\nsource = "field_reports"\nsector = "crops"\n',
    "notices": NOTICES,
}


def _rows(name: str) -> list[dict[str, str]]:
    with open(SCENARIO / name, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def scenario_rows(table: str) -> list[dict[str, str]]:
    """The scenario rows each case starts from (small, and every row belongs to the impact)."""
    rows = _rows(f"{table}.csv")
    if table == "yields":  # maize, rainfed, in six counties
        keep = sorted({r["county_id"] for r in rows})[:6]
        return [r for r in rows if r["crop"] == "maize" and r["practice"] == "rainfed"
                and r["county_id"] in keep and r["yield"] != ""]
    if table == "prices":
        return [r for r in rows if r["region"] == "Ambrel"]
    if table == "field_reports":
        return [r for r in rows if r["sector"] == "crops" and YEARS[0] <= r["date"] <= YEARS[1]]
    if table == "notices":
        return [r for r in rows if YEARS[0] <= r["start_date"] <= YEARS[1]
                and r["cause"] == "drought"]
    return rows


def write_rows(path: Path, rows: list[dict[str, str]], *, bom: bool = False) -> None:
    with open(path, "w", newline="", encoding="utf-8-sig" if bom else "utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)


@pytest.fixture(scope="module")
def climate() -> pd.DataFrame:
    c = pd.read_parquet(SCENARIO / "climate.parquet")
    return c[(c["date"].astype(str) >= YEARS[0]) & (c["date"].astype(str) <= YEARS[1])]


def make_case(folder: Path, climate: pd.DataFrame, tables: dict[str, list[dict[str, str]]], *,
              impacts: tuple[str, ...] = (), bom: tuple[str, ...] = (), extra: str = "") -> Path:
    """Counties, two years of climate, ``tables`` (CSV rows) and the impacts they feed."""
    folder.mkdir(exist_ok=True)
    geo = (SCENARIO / "counties.geojson").read_bytes()
    (folder / "counties.geojson").write_bytes(BOM + geo if "counties" in bom else geo)
    climate.to_parquet(folder / "climate.parquet", index=False)
    for name, rows in tables.items():
        write_rows(folder / f"{name}.csv", rows, bom=name in bom)
    if "notices" in tables or "notice_snapshots" in tables:
        shutil.copy(SCENARIO / "water_systems.csv", folder / "water_systems.csv")
    if "prices" in tables:
        shutil.copy(SCENARIO / "price_index.csv", folder / "price_index.csv")
    text = (f'[project]\nname = "link case"\ndata_dir = "."\noutput_dir = "out"\n{extra}'
            f'[calibration]\nstart_year = 2017\nend_year = 2018\nmin_years = 2\n'
            f'[indices]\nscales_weeks = [4]\nindices = ["spi"]\n'
            + "".join(IMPACTS[t] for t in (impacts or tables) if t in IMPACTS))
    path = folder / "impactlink.toml"
    path.write_bytes((BOM if "project" in bom else b"") + text.encode("utf-8"))
    return path


def run_link(path: Path):
    """(rejected_rows.csv, reconciliation.csv, manifest.json, RunResult) of ``impactlink link``."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = run_project(path, until="link", quiet=True)
    out = path.parent / "out"
    rejected = pd.read_csv(out / "rejected_rows.csv", dtype={"value": str}, keep_default_na=False)
    recon = pd.read_csv(out / "reconciliation.csv")
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    result.caught = [str(w.message) for w in caught]
    return rejected, recon, manifest, result


def listed(rejected: pd.DataFrame, table: str) -> list[tuple[str, int, str, str, str]]:
    r = rejected[rejected["table"] == table]
    return sorted(zip(r["file"], r["row"].astype(int), r["column"], r["value"], r["reason"]))


def recon_line(recon: pd.DataFrame, impact: str, table: str) -> tuple[int, int, int, int]:
    r = recon[(recon["impact"] == impact) & (recon["table"] == table)].iloc[0]
    return int(r["records"]), int(r["used"]), int(r["rejected"]), int(r["outside_coverage"])


# ------------------------------------------------------------------ keys kept and reported
# The inputs stage strips surrounding whitespace from text cells, so the linking stage sees
# (and reports) "Maize " as "Maize"; inner runs of whitespace are its own (tests/link).
@pytest.mark.parametrize("table,column,written,seen,kinds", [
    ("yields", "crop", "Maize ", "Maize", {"unicode": 0, "whitespace": 0, "case": 1}),
    ("yields", "crop", "MAIZE", "MAIZE", {"unicode": 0, "whitespace": 0, "case": 1}),
    ("yields", "practice", "\uff52\uff41\uff49\uff4e\uff46\uff45\uff44",  # full-width
     "\uff52\uff41\uff49\uff4e\uff46\uff45\uff44", {"unicode": 1, "whitespace": 0, "case": 0}),
    ("prices", "commodity", " Hay", "Hay", {"unicode": 0, "whitespace": 0, "case": 1}),
    ("field_reports", "sector", "CROPS", "CROPS", {"unicode": 0, "whitespace": 0, "case": 1}),
    ("notices", "cause", "\uff24\uff32\uff2f\uff35\uff27\uff28\uff34",  # full-width DROUGHT
     "\uff24\uff32\uff2f\uff35\uff27\uff28\uff34", {"unicode": 1, "whitespace": 0, "case": 1}),
])
def test_a_respelt_key_is_kept_and_reported(tmp_path, climate, table, column, written, seen,
                                            kinds):
    rows = scenario_rows(table)
    row = len(rows) // 2  # 0-based; data row row + 1
    rows[row][column] = written
    key = {"crop": "maize", "practice": "rainfed", "commodity": "hay", "sector": "crops",
           "cause": "drought"}[column]
    rejected, recon, manifest, _ = run_link(make_case(tmp_path, climate, {table: rows}))
    entry = manifest["key_normalisation"][table][column]
    assert entry == {"values": len(rows), "respelt": 1, "by_kind": kinds,
                     "forms": {seen: key}, "more_forms": 0}
    assert not any(r.startswith("unknown") or "not drought" in r for r in rejected["reason"])
    impact = {"yields": "maize", "prices": "hay", "field_reports": "reports",
              "notices": "restrictions"}[table]
    records = recon_line(recon, impact, table)[0]
    assert records == len(rows)  # the respelt row is a record of the impact


def test_a_respelt_issuer_is_placed_through_its_water_system(tmp_path, climate):
    systems = _rows("water_systems.csv")
    snaps = [{"date": "2017-03-06", "issuer": systems[0]["system_name"].upper() + "  ",
              "stage": "1"}]
    path = make_case(tmp_path, climate, {"notice_snapshots": snaps}, impacts=("notices",))
    rejected, recon, manifest, _ = run_link(path)
    assert listed(rejected, "notice_snapshots") == []  # placed in the system's county
    assert recon_line(recon, "restrictions", "notice_snapshots") == (1, 1, 0, 0)
    assert "notice_snapshots" not in manifest["key_normalisation"]  # one row: its own key


# ------------------------------------------------------------------ keys matching nothing
@pytest.mark.parametrize("table,column,written,selected", [
    ("yields", "crop", "maiz", "'maize'"),
    ("prices", "commodity", "haj", "'hay'"),
    ("field_reports", "sector", "crps", "'crops'"),
])
def test_an_unknown_key_is_rejected_with_its_reason_never_as_withheld(tmp_path, climate, table,
                                                                       column, written, selected):
    rows = scenario_rows(table)
    rows[-1][column] = written
    path = make_case(tmp_path, climate, {table: rows})
    rejected, recon, _, result = run_link(path)
    reason = f"unknown {column} value: no impact of the project file selects it (selected: " \
             f"{selected})"
    got = listed(rejected, table)
    assert [x for x in got if x[1] == len(rows)] == [
        (str(path.parent / f"{table}.csv"), len(rows), column, written, reason)]
    assert [x for x in got if x[4].startswith("unknown")] == [x for x in got if x[1] == len(rows)]
    assert recon_line(recon, "(selected by no impact)", table) == (1, 0, 1, 0)
    assert not any("withheld" in m for m in result.caught)


def test_a_selector_matching_no_row_is_one_fatal_line_naming_file_and_key(tmp_path, climate,
                                                                          capsys):
    path = make_case(tmp_path, climate, {"yields": scenario_rows("yields")})
    path.write_text(path.read_text().replace('crop = "maize"', 'crop = "rye"'))
    assert main(["link", str(path), "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "Traceback" not in err[0]
    assert err[0].startswith(f"impactlink: error: {tmp_path / 'yields.csv'}: no row has "
                             "[impacts.maize] crop = 'rye' and practice = 'rainfed'")


# ------------------------------------------------------------------ outside coverage, rows
def test_a_yield_in_1850_is_listed_outside_coverage_with_its_row(tmp_path, climate):
    rows = scenario_rows("yields")
    rows.insert(1, {**rows[0], "yield": ""})  # read and rejected by the inputs stage
    rows.append({**rows[0], "year": "1850"})  # the last data row
    cov = [r for r in _rows("coverage.csv") if r["source"] == "yields"]
    path = make_case(tmp_path, climate, {"yields": rows, "coverage": cov}, impacts=("yields",))
    rejected, recon, _, _ = run_link(path)
    file = str(tmp_path / "yields.csv")
    assert (file, len(rows), "year", "1850", OUTSIDE) in listed(rejected, "yields")
    assert (file, 2, "yield", "", "missing required value") in listed(rejected, "yields")
    assert recon_line(recon, "maize", "yields")[3] == 1


def test_a_notice_after_the_record_is_listed_outside_coverage(tmp_path, climate):
    rows = scenario_rows("notices")
    rows.append({**rows[0], "notice_id": "RN-LATE", "start_date": "2019-03-04",
                 "end_date": "2019-04-01"})
    path = make_case(tmp_path, climate, {"notices": rows})
    rejected, recon, _, _ = run_link(path)
    assert listed(rejected, "notices") == [(str(tmp_path / "notices.csv"), len(rows),
                                            "start_date", "2019-03-04", OUTSIDE)]
    assert recon_line(recon, "restrictions", "notices") == (len(rows), len(rows) - 1, 0, 1)


def test_prices_before_their_record_are_listed_with_reason_and_row(tmp_path, climate):
    rows = scenario_rows("prices")
    first = min(r["date"] for r in _rows("price_index.csv"))
    rows.insert(3, {**rows[0], "date": "1980-06-01"})  # before the price index and coverage
    cov = [r for r in _rows("coverage.csv") if r["source"] == "prices"]
    rows.insert(5, {**rows[0], "date": "1981-07-01"})  # indexed, before coverage (1982)
    assert first == "1981-01-01"
    path = make_case(tmp_path, climate, {"prices": rows, "coverage": cov})
    rejected, recon, _, _ = run_link(path)
    file = str(tmp_path / "prices.csv")
    got = listed(rejected, "prices")
    assert (file, 4, "date", "1980-06-01", "no price index for the month") in got
    assert (file, 6, "date", "1981-07-01", OUTSIDE) in got
    records, used, rej, out = recon_line(recon, "hay", "prices")
    assert (records, out) == (len(rows), 1) and rej == len(got) - 1


def test_rejected_rows_of_each_file_reconcile_with_the_counts(tmp_path, climate):
    """rejected_rows.csv, by file: the inputs stage's rows + the linking stage's rejected and
    outside-coverage counts of every reconciliation line of that table."""
    tables = {t: scenario_rows(t) for t in ("yields", "prices", "field_reports", "notices")}
    tables["yields"].insert(4, {**tables["yields"][0], "yield": "-999"})
    tables["yields"][7]["crop"] = "Maiz"
    tables["field_reports"].append({**tables["field_reports"][0], "date": "2020-01-08"})
    tables["notices"][2]["cause"] = "main_break"
    tables["coverage"] = [r for r in _rows("coverage.csv") if r["source"] == "prices"]
    rejected, recon, manifest, result = run_link(make_case(tmp_path, climate, tables))
    inputs = result.state.inputs.bundle.rejected
    for table in ("yields", "prices", "field_reports", "notices"):
        file = str(tmp_path / f"{table}.csv")
        lines = int((rejected["file"] == file).sum())
        by_inputs = int((inputs["file"] == file).sum())
        r = recon[recon["table"] == table]
        assert lines == by_inputs + int(r["rejected"].sum() + r["outside_coverage"].sum()), table
        count = next(c for c in manifest["inputs"] if c["table"] == table)
        assert count["rows_rejected"] == inputs.loc[inputs["file"] == file, "row"].nunique()
        for row in r.itertuples():
            assert row.records == row.used + row.rejected + row.outside_coverage
    assert recon_line(recon, "(selected by no impact)", "yields") == (1, 0, 1, 0)
    assert recon_line(recon, "reports", "field_reports")[3] == 1


def test_rejected_rows_csv_is_reported_written_once(tmp_path, climate, capsys):
    path = make_case(tmp_path, climate, {"notices": scenario_rows("notices")})
    assert main(["link", str(path), "--quiet"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert sum(line.endswith("rejected_rows.csv") for line in out) == 1


# ------------------------------------------------------------------ byte-order marks
@pytest.mark.parametrize("marked", [("yields",), ("project",), ("counties",),
                                    ("coverage", "yields")])
def test_a_byte_order_mark_is_accepted(tmp_path, climate, marked):
    rows = scenario_rows("yields")
    rows.append({**rows[0], "year": "1850"})
    cov = [r for r in _rows("coverage.csv") if r["source"] == "yields"]
    path = make_case(tmp_path, climate, {"yields": rows, "coverage": cov}, bom=marked)
    assert (path if "project" in marked else tmp_path / f"{marked[0]}.csv"
            if marked[0] != "counties" else tmp_path / "counties.geojson").read_bytes()[:3] == BOM
    rejected, recon, manifest, _ = run_link(path)
    # the first column is named as written (no BOM glued to it) and every row is read
    assert listed(rejected, "yields") == [(str(tmp_path / "yields.csv"), len(rows), "year",
                                           "1850", OUTSIDE)]
    assert recon_line(recon, "maize", "yields") == (len(rows), len(rows) - 1, 0, 1)
    counties = next(c for c in manifest["inputs"] if c["table"] == "counties")
    assert counties["rows_read"] == 60 and counties["rows_rejected"] == 0


def test_topojson_and_zone_table_and_trigger_plan_accept_a_byte_order_mark(tmp_path):
    from impactlink.inputs.formats.topojson import read_topojson_counties
    from impactlink.inputs.formats.zones import read_zone_table
    from impactlink.triggers import load_trigger_plan

    ring = [[-93.0, 41.0], [-92.0, 41.0], [-92.0, 42.0], [-93.0, 42.0], [-93.0, 41.0]]
    topo = json.dumps({"type": "Topology", "arcs": [ring], "objects": {"counties": {
        "type": "GeometryCollection", "geometries": [
            {"type": "Polygon", "id": "19001", "properties": {"name": "Alder"},
             "arcs": [[0]]}]}}}).encode("utf-8")
    plain, marked = tmp_path / "plain.json", tmp_path / "marked.json"
    plain.write_bytes(topo)
    marked.write_bytes(BOM + topo)
    a, b = read_topojson_counties(plain), read_topojson_counties(marked)
    assert b["county_id"].tolist() == ["19001"] and b.geometry.iloc[0].equals(a.geometry.iloc[0])
    zones = tmp_path / "zones.csv"
    zones.write_bytes(BOM + b"county,zone\n19001,1301\n19003,1302\n")
    z = read_zone_table(zones)
    assert z.frame["county_id"].tolist() == ["19001", "19003"] and z.rows_rejected == 0
    plan = tmp_path / "plan.toml"
    plan.write_bytes(BOM + (SCENARIO / "trigger_plan.toml").read_bytes())
    import dataclasses

    got, want = load_trigger_plan(plan), load_trigger_plan(SCENARIO / "trigger_plan.toml")
    assert got == dataclasses.replace(want, source=str(plan))
