"""PET: FAO-56 worked examples and cross-implementation references."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from impactlink.indices import IndicesError, compute_pet
from impactlink.indices.pet import (
    _solar_geometry,
    daylight_hours,
    extraterrestrial_radiation,
    hargreaves_samani,
    thornthwaite,
    thornthwaite_heat_index,
)

REFDIR = Path(__file__).parents[1] / "reference"


def test_fao56_example_8_extraterrestrial_radiation():
    # FAO-56 (Allen et al. 1998), Example 8: 20 deg S, 3 September (J = 246):
    # dr = 0.985, delta = 0.120 rad, ws = 1.527 rad, Ra = 32.2 MJ m-2 day-1
    # (printed to the digits shown, hence tolerances of half a unit in the last digit).
    _, dr, delta, ws = _solar_geometry(246, -20.0)
    assert dr == pytest.approx(0.985, abs=5e-4)
    assert delta == pytest.approx(0.120, abs=5e-4)
    assert ws == pytest.approx(1.527, abs=5e-4)
    assert extraterrestrial_radiation(246, -20.0) == pytest.approx(32.2, abs=0.05)


def test_fao56_example_9_daylight_hours():
    # FAO-56, Example 9: same place and day, N = 11.7 hours.
    assert daylight_hours(246, -20.0) == pytest.approx(11.7, abs=0.05)


def test_fao56_example_18_ra_brussels():
    # FAO-56, Example 18 (daily ET0 at 50 deg 48' N on 6 July, J = 187): Ra = 41.09
    # MJ m-2 day-1 (from memory of the printed example).
    assert extraterrestrial_radiation(187, 50.8) == pytest.approx(41.09, abs=0.01)


def test_polar_night_and_day_are_defined():
    # Beyond the polar circle the sunset angle is clipped: 0 h in polar night, 24 h in
    # polar day (common practice; FAO-56 eq. 25 is undefined there).
    assert daylight_hours(355, 80.0) == pytest.approx(0.0, abs=1e-9)
    assert daylight_hours(172, 80.0) == pytest.approx(24.0, abs=1e-9)
    assert extraterrestrial_radiation(355, 80.0) == pytest.approx(0.0, abs=1e-9)


def test_hargreaves_matches_climate_indices_daily():
    # Reference: climate-indices 3.1.0 eto.eto_hargreaves (FAO-56 eq. 52, Ra by eqs 21-25)
    # on one leap year of daily temperatures at 35 N (tests/reference/indices_make_reference.py).
    # Same equations -> tolerance 1e-6 mm/day (rounding of the stored CSV values).
    h = pd.read_csv(REFDIR / "indices_hargreaves_reference.csv", parse_dates=["date"])
    ra = extraterrestrial_radiation(h["date"].dt.day_of_year.to_numpy(), 35.0)
    ours = hargreaves_samani(h["tmin_c"], h["tmax_c"], ra, tmean_c=h["tmean_c"])
    np.testing.assert_allclose(ours, h["et0_mm"], atol=1e-6)


def test_hargreaves_hand_value():
    # Hand computation of FAO-56 eq. 52: Tmin 12.3, Tmax 21.5 (Example 18's temperatures),
    # Ra 41.09 -> 0.0023 * (16.9 + 17.8) * sqrt(9.2) * 0.408 * 41.09 = 4.0583 mm/day.
    assert hargreaves_samani(12.3, 21.5, 41.09) == pytest.approx(4.0583, abs=1e-4)
    assert np.isnan(hargreaves_samani(20.0, 10.0, 30.0))  # tmax < tmin


def test_thornthwaite_matches_climate_indices_monthly():
    # Reference: climate-indices 3.1.0 eto.eto_thornthwaite(monthly tmean, latitude_degrees)
    # (tests/reference/indices_make_reference.py). Same heat index (full-record monthly
    # means), mean day length over the days of each month and days-in-month factor, so the
    # difference is rounding only: tolerance 1e-6 mm.
    m = pd.read_csv(REFDIR / "indices_monthly_reference.csv", parse_dates=["date"])
    lat = m.groupby("county_id")["latitude_deg"].first()
    ours = compute_pet(m[["county_id", "date", "precip_mm", "tmean_c"]], latitude_deg=lat,
                       pet_method="thornthwaite")
    ours = ours.rename(columns={"pet_mm": "pet_ours_mm"})
    both = m.merge(ours, left_on=["county_id", "date"], right_on=["county_id", "week"])
    assert len(both) == len(m)
    np.testing.assert_allclose(both["pet_ours_mm"], both["pet_thornthwaite_mm"], atol=1e-6)


def test_thornthwaite_hand_value():
    # Thornthwaite (1948) by hand: every month at 20 C -> I = 12 * 4**1.514 = 97.8 and
    # a = 6.75e-7 I^3 - 7.71e-5 I^2 + 1.792e-2 I + 0.49239; with N = 12 h and 30 days
    # PET = 16 (10 * 20 / I)**a; at or below 0 C PET is 0.
    heat, a = thornthwaite_heat_index(np.full(12, 20.0))
    assert heat == pytest.approx(12 * 4**1.514, rel=1e-12)
    assert a == pytest.approx(6.75e-7 * heat**3 - 7.71e-5 * heat**2 + 1.792e-2 * heat + 0.49239)
    pet = thornthwaite(20.0, heat, a, 12.0, 30)
    assert pet == pytest.approx(16 * (200 / heat) ** a, rel=1e-12)
    assert thornthwaite(-3.0, heat, a, 12.0, 30) == 0.0


def test_compute_pet_needs_temperature():
    clim = pd.DataFrame({"county_id": "A", "date": pd.date_range("2000-01-03", periods=10,
                                                                  freq="7D"), "precip_mm": 1.0})
    with pytest.raises(IndicesError, match="temperature"):
        compute_pet(clim, latitude_deg=pd.Series({"A": 40.0}))


def test_compute_pet_names_missing_latitude():
    clim = pd.DataFrame({"county_id": "A", "date": pd.date_range("2000-01-03", periods=10,
                                                                  freq="7D"),
                         "precip_mm": 1.0, "tmin_c": 5.0, "tmax_c": 15.0})
    with pytest.raises(IndicesError, match="no latitude"):
        compute_pet(clim, latitude_deg=pd.Series({"B": 40.0}))


def test_daily_pet_in_blocks_equals_the_per_row_formula(monkeypatch):
    """Blocks of rows (and the day-of-year table of Ra) give FAO-56 eq. 52 with eq. 21 on
    every row exactly."""
    from impactlink.indices import _pet_grid

    rng = np.random.default_rng(4)
    days = pd.date_range("2001-01-01", periods=40, freq="D")
    clim = pd.DataFrame({"county_id": np.repeat(["A", "B"], 40), "date": np.tile(days, 2),
                         "tmin_c": rng.normal(5, 3, 80)})
    clim["tmax_c"] = clim["tmin_c"] + rng.uniform(2, 12, 80)
    lat = np.array([41.5, -33.0])
    cpos = np.repeat([0, 1], 40)
    monkeypatch.setattr(_pet_grid, "_DAILY_BLOCK", 7)
    got = _pet_grid._daily_hargreaves(clim, cpos, lat)
    ra = extraterrestrial_radiation(clim["date"].dt.day_of_year.to_numpy(), lat[cpos])
    want = hargreaves_samani(clim["tmin_c"].to_numpy(), clim["tmax_c"].to_numpy(), ra)
    np.testing.assert_array_equal(got, want)
