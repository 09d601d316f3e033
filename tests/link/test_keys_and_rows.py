"""Text keys matched by one normal form in every linker, rows no impact selects, file rows.

The normal form is NFKC (Unicode Standard Annex #15: U+FF2D FULLWIDTH LATIN CAPITAL LETTER M
is compatibility-equivalent to "M"; U+00A0 NO-BREAK SPACE to a space), whitespace collapsed,
and case folded (Unicode Standard section 3.13). Frames here are built in code, so inner and
surrounding whitespace reach the linking stage as written.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from link_fixtures import lonlat_of, mondays

from impactlink.link import LinkWarning, build_targets
from impactlink.link._keys import attach_sources, spelling
from impactlink.link.build import with_files
from impactlink.link.selection import (
    NO_IMPACT,
    key_normalisation,
    normalisation_lines,
    unselected_rows,
)
from impactlink.project import ImpactSpec
from tests.realdata_paths import realdata_dir

FULL_MAIZE = "\uff2d\uff41\uff49\uff5a\uff45"  # full-width "Maize"


def _yields(crops):
    n = len(crops)
    return pd.DataFrame({"county_id": "a", "year": np.arange(2000, 2000 + n), "crop": crops,
                         "yield": 5.0 + 0.1 * np.arange(n)})


def test_spelling_keeps_the_project_spelling_else_the_most_common_one():
    s, hit = spelling(pd.Series(["Maize", "maize", "maize", " MAIZE ", "Oats", None]))
    assert s.tolist()[:5] == ["maize"] * 4 + ["Oats"] and pd.isna(s.iloc[5])
    assert hit.all()
    s, hit = spelling(pd.Series(["maize", FULL_MAIZE, "oats"]), ["Maize"], key="crop")
    assert s.tolist() == ["Maize", "Maize", "oats"] and hit.tolist() == [True, True, False]


def test_yield_crops_without_a_selector_are_one_key(counties):
    crops = ["maize", "maize", "maize", "Maize", "maize  ", FULL_MAIZE] * 2
    res = build_targets(ImpactSpec("y", "yields", {"min_years": 5, "season_week": 31}),
                        {"yields": _yields(crops)}, counties=counties,
                        weeks=mondays("2000-01-03", 10))
    assert [t.name for t in res.targets] == ["y:maize", "y:maize:shortfall_20pct"]
    assert len(res.targets[0].frame) == 12


def test_key_normalisation_counts_each_step_and_maps_every_written_form():
    ys = _yields(["maize"] * 6 + ["Maize", "maize\u00a0", "ma  ize", FULL_MAIZE])
    spec = ImpactSpec("y", "yields", {"crop": "maize"})
    rep = key_normalisation({"yields": ys}, [spec])
    got = rep["yields"]["crop"]
    # "ma  ize" is another key ("ma ize"), written once: its own spelling, not respelt
    assert got["forms"] == {"Maize": "maize", "maize\u00a0": "maize", FULL_MAIZE: "maize"}
    assert got["values"] == 10 and got["more_forms"] == 0
    assert got["respelt"] == 3 and got["by_kind"] == {"unicode": 2, "whitespace": 1, "case": 2}
    (line,) = normalisation_lines(rep)
    assert line.startswith("keys in yields matched by normal form") and "3 of 10" in line


def test_prices_commodity_and_region_match_by_normal_form(counties):
    months = pd.date_range("2030-01-01", periods=72, freq="MS")
    pi = pd.DataFrame({"date": months, "price_index": 100.0})
    com = np.where(np.arange(72) % 3 == 0, " HAY", "hay")
    region = np.where(np.arange(72) % 4 == 0, "North ", "north")
    pr = pd.DataFrame({"region": region, "date": months, "commodity": com, "price": 100.0})
    res = build_targets(ImpactSpec("p", "prices", {"commodity": "hay"}),
                        {"prices": pr, "price_index": pi}, counties=counties,
                        weeks=mondays("2029-12-30", 10))
    assert [t.name for t in res.targets] == ["p:hay"]
    rec = res.reconciliation.iloc[0]
    assert (rec["records"], rec["not_selected"]) == (72, 0)
    assert set(res.rejected["reason"]) == {"fewer than 3 of the 5 earlier years have a price "
                                           "for this month (no seasonal baseline)"}


def test_field_report_sectors_and_coverage_sources_match_by_normal_form(counties):
    rep = pd.DataFrame({"county_id": ["a", "b", "c"],
                        "date": pd.to_datetime(["2030-01-08", "2030-01-15", "2030-01-15"]),
                        "sector": ["Crops", "crops ", "wildfire"]})
    cov = pd.DataFrame({"source": ["Field_Reports "], "region": ["NORTH"],
                        "start_date": pd.to_datetime(["2030-01-01"]),
                        "end_date": pd.to_datetime(["2030-01-10"])})
    res = build_targets(ImpactSpec("fr", "field_reports", {"sector": "crops"}),
                        {"field_reports": rep, "coverage": cov}, counties=counties,
                        weeks=mondays("2030-01-07", 4))
    rec = res.reconciliation.iloc[0]
    assert (rec["records"], rec["used"], rec["outside_coverage"], rec["not_selected"]) == \
        (2, 1, 1, 1)
    # the report of county b falls after its region's coverage: listed with its row
    assert res.rejected[["row", "column", "reason"]].values.tolist() == [
        [2, "date", "outside the source's coverage"]]


def test_notice_causes_and_issuers_match_by_normal_form(counties):
    lon, lat = lonlat_of(counties, "a")
    nt = pd.DataFrame({"notice_id": ["n1", "n2", "n3"], "issuer": ["Brambeth Water"] * 3,
                       "county_id": ["a", "a", "a"], "level": [1, 2, 1],
                       "start_date": pd.to_datetime(["2030-01-08", "2030-01-22", "2030-02-05"]),
                       "end_date": pd.to_datetime(["2030-01-14", "2030-01-28", "2030-02-10"]),
                       "cause": ["DROUGHT", "Low\u00a0 Flow", "main break"]})
    ws = pd.DataFrame({"system_id": ["WS1"], "system_name": ["Brambeth Water"],
                       "lon": [lon], "lat": [lat]})
    snaps = pd.DataFrame({"date": pd.to_datetime(["2030-01-08"]), "issuer": ["BRAMBETH  water"],
                          "stage": [1]})
    res = build_targets(ImpactSpec("r", "notices", {"drought_causes": ["drought", "low flow"],
                                                    "horizon_weeks": [2]}),
                        {"notices": nt, "notice_snapshots": snaps, "water_systems": ws},
                        counties=counties, weeks=mondays("2030-01-07", 6))
    assert res.rejected[["table", "row", "reason"]].values.tolist() == [
        ["notices", 3, "cause is not drought (see option drought_causes)"]]
    rec = res.reconciliation.set_index("table")
    assert rec.loc["notice_snapshots", "used"] == 1  # placed through the water system's name
    assert rec.loc["notices", "used"] == 2


def test_a_notice_after_the_record_is_listed_with_its_file_row_and_file(counties):
    nt = pd.DataFrame({"notice_id": ["n1", "n2"], "issuer": "x", "county_id": "a",
                       "level": [1, 1], "start_date": pd.to_datetime(["2030-01-08", "2031-05-01"]),
                       "end_date": pd.to_datetime(["2030-01-14", "2031-05-07"])})
    nt.attrs["source_rows"] = np.array([5, 9])  # rows 1-4 and 6-8 rejected by the inputs stage
    res = build_targets(ImpactSpec("r", "notices", {"horizon_weeks": [2]}), {"notices": nt},
                        counties=counties, weeks=mondays("2030-01-07", 6),
                        files={"notices": "data/notices.csv"})
    assert res.rejected[["file", "row", "column", "reason"]].values.tolist() == [
        ["data/notices.csv", 9, "start_date", "outside the source's coverage"]]
    rec = res.reconciliation.iloc[0]
    assert (rec["records"], rec["used"], rec["rejected"], rec["outside_coverage"]) == (2, 1, 0, 1)


def test_rows_after_a_selection_keep_their_file_rows(counties):
    """Regression: selecting a crop used to drop the file rows, naming the position in the
    clean frame instead (e.g. 1843 for 1859)."""
    ys = pd.concat([_yields(["oats"] * 3), _yields(["maize"] * 12)], ignore_index=True)
    ys.loc[14, "county_id"] = "zz"
    ys.attrs["source_rows"] = np.arange(len(ys)) * 2 + 10  # every other file row rejected
    tables = attach_sources({"yields": ys}, {"yields": "y.csv"})
    assert tables["yields"]["source_row"].tolist()[-1] == 38
    res = build_targets(ImpactSpec("y", "yields", {"crop": "maize", "min_years": 5}), tables,
                        counties=counties, weeks=mondays("2000-01-03", 10))
    assert res.rejected[["file", "row", "reason"]].values.tolist() == [
        ["y.csv", 38, "county_id not in the counties layer"]]


def test_rows_no_impact_selects_are_listed_once_with_the_first_key_that_fails():
    ys = pd.DataFrame({"county_id": "a", "year": 2000,
                       "crop": ["maize", "Maize", "oats", "maize", "sorghum"],
                       "practice": ["rainfed", "irrigated", "rainfed", "RAINFED", "rainfed"],
                       "yield": 1.0})
    ys.attrs["file"] = "y.csv"
    impacts = [ImpactSpec("a", "yields", {"crop": "maize", "practice": "rainfed"}),
               ImpactSpec("b", "yields", {"crop": ["oats"]}),
               ImpactSpec("n", "notices", {})]
    rej, rec = unselected_rows(impacts, attach_sources({"yields": ys}))
    assert rej[["file", "row", "column", "value", "reason"]].values.tolist() == [
        ["y.csv", 5, "crop", "sorghum",
         "unknown crop value: no impact of the project file selects it (selected: 'maize', "
         "'oats')"],
        ["y.csv", 2, "practice", "irrigated",
         "unknown practice value: no impact of the project file selects it (selected: "
         "'rainfed')"]]
    assert rec[["impact", "table", "records", "used", "rejected", "outside_coverage"]
               ].values.tolist() == [[NO_IMPACT, "yields", 2, 0, 2, 0]]
    # an impact taking every crop leaves no row unselected
    rej, rec = unselected_rows([*impacts, ImpactSpec("c", "yields", {})], {"yields": ys})
    assert rej.empty and rec.empty


def test_with_files_fills_only_empty_file_names():
    rej = pd.DataFrame({"table": ["yields", "prices", "traits"], "file": ["", "p.csv", ""],
                        "row": [1, 2, 3], "column": "", "value": "", "reason": "r"})
    out = with_files(rej, {"yields": "y.csv", "prices": "other.csv"})
    assert out["file"].tolist() == ["y.csv", "p.csv", ""]


def test_quick_stats_yields_rejected_while_linking_name_their_export_line():
    """On the agricultural statistics service's Iowa export: each yield rejected while linking
    names the export row holding that county and year (read back with the csv module)."""
    import csv

    from impactlink.inputs.formats.crop_survey import read_quickstats

    path = realdata_dir() / "iowa" / "nass_quickstats_corn_grain_yield_county_1926-2023.csv"
    fr = read_quickstats(path).frame
    ids = sorted(set(fr["county_id"]))
    counties = pd.DataFrame({"county_id": ids[1:], "region": "ia"})  # the first one missing
    cov = pd.DataFrame({"source": ["yields"], "region": ["IA "],
                        "start_date": pd.to_datetime(["1950-01-01"]),
                        "end_date": pd.to_datetime(["2023-12-31"])})
    # counties the publisher did not publish in some years (from 2015 on) are gaps, with no
    # row in the export: never counted as rejected rows
    with pytest.warns(LinkWarning, match=r"no usable yield \(0 rejected .*, \d+ with no row"):
        res = build_targets(ImpactSpec("corn", "yields", {"min_years": 30}),
                            {"yields": fr, "coverage": cov}, counties=counties,
                            weeks=mondays("1926-01-04", 10), files={"yields": str(path)})
    with open(path, newline="", encoding="utf-8-sig") as fh:
        rows = list(csv.DictReader(fh))
    rej = res.rejected
    assert set(rej["file"]) == {str(path)}
    county = pd.Series([rows[r - 1]["State ANSI"] + rows[r - 1]["County ANSI"]
                        for r in rej["row"]])
    year = pd.Series([int(rows[r - 1]["Year"]) for r in rej["row"]])
    missing = rej["reason"] == "county_id not in the counties layer"
    assert (county[missing.to_numpy()] == ids[0]).all() and missing.sum() > 50
    outside = (rej["reason"] == "outside the source's coverage").to_numpy()
    assert (year[outside] < 1950).all() and outside.sum() > 1000
    assert (county[~missing.to_numpy()] != ids[0]).all()


@pytest.mark.parametrize("table", ["yields", "prices", "notices", "notice_snapshots",
                                   "field_reports"])
def test_attach_sources_numbers_frames_built_in_code_from_one(table):
    f = pd.DataFrame({"x": [1, 2, 3]}, index=[7, 8, 9])
    out = attach_sources({table: f, "traits": f})
    assert out[table]["source_row"].tolist() == [1, 2, 3] and "source_row" not in out["traits"]
