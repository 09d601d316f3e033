"""Unit tests of the scenario generator's building blocks."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from impactlink.scenario._geography import build_geography
from impactlink.scenario._hydrology import (
    Hydrology,
    _rolling_sum,
    _standardize,
    draw_traits,
    extraterrestrial_radiation,
    hargreaves_pet,
)
from impactlink.scenario._impacts import _field_reports, _notice_levels
from impactlink.scenario._names import REGION_NAMES, STATE_NAME, invent_names
from impactlink.scenario._weather import _ar1, _gaussian_chol
from impactlink.scenario._writers import fmt_date, fmt_float, write_csv


# ------------------------------------------------------------------ reference values
def test_extraterrestrial_radiation_fao56_example_8():
    # FAO-56 (Allen et al. 1998), Chapter 3, Example 8: 3 September (day 246) at 20 deg S,
    # Ra = 32.2 MJ m-2 day-1 (from memory; the example rounds to 0.1).
    ra = extraterrestrial_radiation(np.array([246]), np.array([-20.0]))
    assert ra[0, 0] == pytest.approx(32.2, abs=0.05)


def test_hargreaves_matches_climate_indices():
    # Cross-implementation check: climate-indices 3.1.0 eto.eto_hargreaves (FAO-56 eq. 52),
    # one leap year of daily temperatures at 35 N, stored by
    # tests/reference/indices_make_reference.py. Same equations; rtol 1e-6 covers the
    # rounding of the stored values.
    ref = pd.read_csv(Path(__file__).parents[1] / "reference" / "indices_hargreaves_reference.csv",
                      parse_dates=["date"])
    ours = hargreaves_pet(ref["tmin_c"].to_numpy()[:, None], ref["tmax_c"].to_numpy()[:, None],
                          ref["date"].dt.day_of_year.to_numpy(), np.array([35.0]))[:, 0]
    np.testing.assert_allclose(ours, ref["et0_mm"].to_numpy(), rtol=1e-6, atol=1e-6)


# ------------------------------------------------------------------ hand-computed cases
def test_rolling_sum_small_case():
    x = np.array([[1.0], [2.0], [3.0], [4.0]])
    out = _rolling_sum(x, 3)
    assert np.isnan(out[:2, 0]).all()
    assert out[2:, 0].tolist() == [6.0, 9.0]


def test_standardize_uses_calibration_years_only():
    woy = np.array([1, 1, 1, 1])
    calib = np.array([True, True, True, False])
    x = np.array([[1.0], [2.0], [3.0], [100.0]])
    z = _standardize(x, woy, calib)  # mean 2, SD 1 over the first three
    assert z[:, 0].tolist() == pytest.approx([-1.0, 0.0, 1.0, 98.0])


def test_writers_format_fixed_and_empty():
    assert fmt_float(np.array([1.0, np.nan, -0.0001]), 2).tolist() == ["1.00", "", "0.00"]
    assert fmt_date(np.array(["2020-01-05", "NaT"], dtype="datetime64[D]")).tolist() == [
        "2020-01-05", ""]


def test_write_csv_rejects_commas(tmp_path):
    with pytest.raises(ValueError, match="column 'name' holds a comma"):
        write_csv(tmp_path / "x.csv", {"name": np.array(["a,b"])})


# ------------------------------------------------------------------ properties
def test_ar1_has_unit_variance_and_lag_one_correlation():
    e = np.random.default_rng(1).standard_normal((200_000, 1))
    x = _ar1(e, 0.8)[1000:, 0]
    assert x.var() == pytest.approx(1.0, abs=0.03)
    assert np.corrcoef(x[1:], x[:-1])[0, 1] == pytest.approx(0.8, abs=0.01)


def test_gaussian_correlation_factor_is_a_correlation_matrix():
    pts = np.random.default_rng(2).uniform(0, 600, (30, 2))
    chol = _gaussian_chol(pts, 250.0)
    c = chol @ chol.T
    np.testing.assert_allclose(np.diag(c), 1.0)
    assert np.all(np.linalg.eigvalsh(c) > 0)


def test_invented_names_unique_and_never_blocked():
    names = invent_names(80, np.random.default_rng(3))
    assert len(set(names)) == 80
    assert STATE_NAME not in names and not set(REGION_NAMES) & set(names)
    with pytest.raises(ValueError, match="asked for n=10000 names"):
        invent_names(10_000, np.random.default_rng(3))


def test_geography_is_deterministic_and_has_sixty_counties():
    a = build_geography(np.random.default_rng(5))
    b = build_geography(np.random.default_rng(5))
    assert len(a.county_ids) == 60
    assert a.county_names == b.county_names
    np.testing.assert_array_equal(a.centroids_km, b.centroids_km)
    assert 0.0 <= a.west_east.min() and a.west_east.max() <= 1.0


# ------------------------------------------------------------------ planted behaviour
def test_notice_episodes_follow_stress_and_persist():
    # Constant stress per system: no stress gives rare, short episodes; strong stress gives
    # long episodes at higher levels (recovery of the planted hazard rule).
    n_w = 3000
    stress = np.tile(np.array([0.0, 1.0, 2.0]), (n_w, 1))
    level = _notice_levels(stress, np.random.default_rng(4))
    share_on = (level > 0).mean(axis=0)
    assert share_on[0] < 0.05 < share_on[1] < share_on[2]
    assert level[:, 2].max() == 3
    runs = np.diff(np.concatenate([[0], (level[:, 1] > 0).astype(int), [0]]))
    lengths = np.flatnonzero(runs == -1) - np.flatnonzero(runs == 1)
    if level[-1, 1] > 0:
        lengths = lengths[:-1]  # the last episode may be cut by the end of the series
    assert lengths.min() >= 4  # minimum episode length (README)


def test_field_report_effort_rises_under_constant_stress():
    geo = build_geography(np.random.default_rng(6))
    traits = draw_traits(geo, np.random.default_rng(6))
    weeks = pd.date_range("2008-01-07", "2025-12-22", freq="7D")
    shape = (weeks.size, len(geo.county_ids))
    wbz = {k: np.full(shape, -1.5) for k in (4, 8, 13, 26)}
    hyd = Hydrology(np.empty(0), np.empty(0), np.empty(0), weeks, wbz, np.zeros(shape))
    reports, _ = _field_reports(geo, traits, hyd, np.random.default_rng(6))
    per_year = reports.groupby(pd.to_datetime(reports["date"]).dt.year).size()
    early = per_year.loc[2012:2014].mean()  # after the late region joined in mid-2011
    late = per_year.loc[2023:2025].mean()
    assert late > 1.6 * early
