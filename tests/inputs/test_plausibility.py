"""Plausibility checks on small invented frames; limits and conversions from outside sources.

Sources: WMO Weather and Climate Extremes Archive (https://wmo.asu.edu): 56.7 C Furnace Creek
1913, -89.2 C Vostok 1983, 1825 mm in 24 h Foc-Foc 1966, 9300 mm in one month Cherrapunji
1861. NIST SP 811 (2008): C = (F - 32) x 5/9; 1 in = 25.4 mm exactly. NIST: 1 bushel of
maize = 56 lb = 25.40 kg, 1 acre = 0.404686 ha, so 1 bu/acre = 62.77 kg/ha.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from impactlink.inputs.plausibility import (
    LIMITS,
    UnitFinding,
    beyond_physical_limits,
    check_plausibility,
    county_cadence,
    fatal_line,
    mixed_cadence,
    precipitation_units,
    scaled_counties,
    temperature_pairs,
    temperature_units,
)

DAYS = pd.date_range("2001-01-01", "2002-12-31", freq="D")


def climate(counties=("01001", "01003", "01005"), dates=DAYS) -> pd.DataFrame:
    """Invented daily climate: an annual temperature cycle (mean 15 C, amplitude 10 C) and
    rain of 8 mm every third day."""
    n = len(dates)
    doy = dates.day_of_year.to_numpy()
    tmax = 15 + 10 * np.sin(2 * np.pi * (doy - 110) / 365.25)
    rain = np.where(np.arange(n) % 3 == 0, 8.0, 0.0)
    return pd.concat([pd.DataFrame({"county_id": c, "date": dates, "precip_mm": rain,
                                    "tmax_c": tmax, "tmin_c": tmax - 10}) for c in counties],
                     ignore_index=True)


def test_fahrenheit_county_among_celsius_is_fatal_with_the_conversion():
    c = climate()
    f = c["county_id"] == "01003"
    c.loc[f, "tmax_c"] = c.loc[f, "tmax_c"] * 9 / 5 + 32  # NIST SP 811: F = C x 9/5 + 32
    found = temperature_units(c, file="climate.csv")
    assert [(x.column, x.county) for x in found] == [("tmax_c", "01003")]
    msg = found[0].message()
    assert msg.startswith("climate.csv: column tmax_c, county 01003: median 59.")
    assert msg.endswith("; convert the column to degrees Celsius, C = (F - 32) x 5/9")


def test_fahrenheit_of_a_cold_county_is_caught_by_its_spread():
    """A county with a Celsius median of -5 C: median 23 F passes the median rule; its spread
    (1.8 x a 50 C spread = 90) is wider than any climate's."""
    c = climate(counties=("02001",))
    doy = c["date"].dt.day_of_year.to_numpy()
    celsius = -5 + 25 * np.sin(2 * np.pi * (doy - 110) / 365.25)
    c["tmax_c"] = celsius * 9 / 5 + 32
    assert np.median(c["tmax_c"]) < 45
    assert [x.county for x in temperature_units(c, columns=("tmax_c",))] == ["02001"]
    c["tmax_c"] = celsius  # the same county in Celsius passes
    assert temperature_units(c, columns=("tmax_c",)) == []


def test_celsius_record_extremes_are_not_fahrenheit():
    """A hot desert county (median 40 C, within the 56.7 C record) is not flagged."""
    c = climate(counties=("04001",))
    c["tmax_c"] = c["tmax_c"] + 25
    assert temperature_units(c) == []


def test_inches_under_a_millimetre_name():
    c = climate()
    f = c["county_id"] == "01005"
    c.loc[f, "precip_mm"] = c.loc[f, "precip_mm"] / 25.4  # 8 mm = 0.315 in
    found = precipitation_units(c, file="climate.csv")
    assert [x.county for x in found] == ["01005"]
    assert found[0].message() == (
        "climate.csv: column precip_mm, county 01005: the median daily value above zero is "
        "0.31, below 1 mm (looks like inches); convert the column to millimetres, "
        "mm = inches x 25.4")


def test_inches_by_cadence_weekly_and_monthly():
    weeks = pd.date_range("2001-01-01", periods=104, freq="7D")
    w = pd.DataFrame({"county_id": "01001", "date": weeks, "precip_mm": 20.0})
    assert precipitation_units(w) == []
    w["precip_mm"] = 20.0 / 25.4  # 0.79 in a week: below the 2 mm weekly floor
    assert [x.county for x in precipitation_units(w)] == ["01001"]
    months = pd.date_range("2001-01-01", periods=24, freq="MS")
    m = pd.DataFrame({"county_id": "01001", "date": months, "precip_mm": 80 / 25.4})
    assert "monthly" in precipitation_units(m)[0].found


def test_kg_per_ha_county_among_t_per_ha():
    y = pd.DataFrame({"county_id": ["A", "B", "C", "D"] * 3, "year": np.repeat([2001, 2002, 2003], 4),
                      "crop": "maize", "yield": [9.0, 10.0, 8.0, 9500.0] * 3})
    found = scaled_counties(y, "yield", by=("crop",), file="yields.csv")
    assert [x.county for x in found] == ["D"]
    assert "crop maize: median 9500 is a factor of 1,000 above" in found[0].found
    assert "kg/ha among t/ha" in found[0].found


def test_kg_per_ha_county_among_bushels_per_acre():
    """150 bu/acre of maize = 150 x 62.77 = 9416 kg/ha (NIST bushel and acre)."""
    y = pd.DataFrame({"county_id": list("ABCDE"), "crop": "maize",
                      "yield": [150.0, 160.0, 140.0, 155.0, 150 * 62.77]})
    found = scaled_counties(y, "yield", by=("crop",))
    assert [x.county for x in found] == ["E"] and "bu/acre" in found[0].found


def test_county_scaled_by_1000_and_by_10_below():
    c = climate(counties=("a", "b", "c", "d"))
    c.loc[c["county_id"] == "b", "precip_mm"] *= 1000
    c.loc[c["county_id"] == "d", "precip_mm"] /= 10
    found = {x.county: x.found for x in scaled_counties(c, "precip_mm")}
    assert set(found) == {"b", "d"}
    assert "a factor of 1,000 above" in found["b"] and "a factor of 10 below" in found["d"]


def test_natural_spread_between_counties_is_not_a_unit_factor():
    """Dryland and irrigated counties 3x apart are not flagged (10 ** 0.48 is far from 10)."""
    y = pd.DataFrame({"county_id": list("ABCD"), "crop": "maize", "yield": [3.0, 9.0, 10.0, 4.0]})
    assert scaled_counties(y, "yield", by=("crop",)) == []


def test_two_counties_are_not_judged():
    y = pd.DataFrame({"county_id": list("AB"), "crop": "maize", "yield": [9.0, 9000.0]})
    assert scaled_counties(y, "yield", by=("crop",)) == []


def test_one_million_mm_day_is_rejected_by_row_with_the_record():
    c = climate()
    c.loc[5, "precip_mm"] = 1_000_000.0
    c.loc[7, "tmax_c"] = 60.0
    c.loc[9, "tmin_c"] = -95.0
    rej = beyond_physical_limits(c)
    assert rej.sort_values("row").values.tolist() == [
        [5, "precip_mm", 1_000_000.0, "24-hour rainfall record (1825 mm, WMO) exceeded"],
        [7, "tmax_c", 60.0, "above the highest air temperature recorded (56.7 C, WMO)"],
        [9, "tmin_c", -95.0, "below the lowest air temperature recorded (-89.2 C, WMO)"],
    ]


def test_record_values_themselves_are_kept():
    c = climate()
    c.loc[5, "precip_mm"] = 1825.0  # Foc-Foc, 7-8 January 1966
    c.loc[7, "tmax_c"] = 56.7  # Furnace Creek, 10 July 1913
    assert len(beyond_physical_limits(c)) == 0


@pytest.mark.parametrize(("freq", "cadence", "limit"),
                         [("7D", "weekly", 12775.0), ("MS", "monthly", 9300.0)])
def test_precipitation_limit_follows_the_cadence(freq, cadence, limit):
    dates = pd.date_range("2001-01-01", periods=30, freq=freq)
    c = pd.DataFrame({"county_id": "01001", "date": dates, "precip_mm": 50.0})
    c.loc[3, "precip_mm"] = limit + 1
    c.loc[4, "precip_mm"] = limit
    assert LIMITS["precip_mm"][cadence][1] == limit
    rej = beyond_physical_limits(c)
    assert rej["row"].tolist() == [3] and cadence != "daily"


def test_weekly_county_among_daily_counties():
    c = climate(counties=("01001", "01003"))
    weekly = climate(counties=("01005",), dates=pd.date_range("2001-01-01", "2002-12-31", freq="7D"))
    c = pd.concat([c, weekly], ignore_index=True)
    assert county_cadence(c).to_dict() == {"01001": "daily", "01003": "daily", "01005": "weekly"}
    (found,) = mixed_cadence(c, file="climate.csv")
    assert found.message() == ("climate.csv: column date, county 01005: weekly rows among daily "
                               "rows of the other counties; give every county daily rows (or "
                               "split the table)")


def test_check_plausibility_gathers_findings_and_rejections():
    c = climate()
    c.loc[c["county_id"] == "01003", "tmax_c"] = c["tmax_c"] * 9 / 5 + 32
    c.loc[2, "precip_mm"] = 5000.0
    res = check_plausibility(c, "climate", file="climate.csv")
    assert [(f.column, f.county) for f in res.fatal] == [("tmax_c", "01003")]
    assert isinstance(res.fatal[0], UnitFinding)
    rej = res.to_frame()
    assert rej.loc[rej["column"] == "precip_mm", "row"].tolist() == [2]
    clean = check_plausibility(climate(), "climate")
    assert clean.fatal == () and len(clean.rejected) == 0
    assert check_plausibility(c, "traits").fatal == ()


def test_kelvin_is_named_as_kelvin_not_fahrenheit():
    """Kelvin = Celsius + 273.15 (NIST SP 811, 4.2.1.1): a median near 288 is neither a
    Celsius nor a Fahrenheit climate (the hottest air recorded is 134 F)."""
    c = climate()
    c["tmax_c"] = c["tmax_c"] + 273.15
    found = temperature_units(c, columns=("tmax_c",), file="climate.csv")
    assert [x.county for x in found] == ["01001", "01003", "01005"]
    assert all("looks like kelvin" in x.found and x.fix.endswith("C = K - 273.15")
               for x in found)


def test_a_whole_column_in_another_unit_is_one_finding():
    c = climate(counties=("01001", "01003", "01005", "01007"))
    c["tmax_c"] = c["tmax_c"] * 9 / 5 + 32
    line = fatal_line(temperature_units(c, columns=("tmax_c",), file="climate.csv"))
    assert line.startswith("climate.csv: column tmax_c: 4 counties (01001, 01003, 01005 ...), "
                           "e.g. county 01001: median ")
    assert line.count(" | ") == 0 and line.endswith("C = (F - 32) x 5/9")
    # three or fewer are told one by one
    few = temperature_units(c[c["county_id"] != "01007"], columns=("tmax_c",), file="c.csv")
    assert fatal_line(few).count(" | ") == 2


def test_fahrenheit_tmin_of_a_cold_county_is_inverted_in_under_half_its_rows():
    """A cold county (tmax -30..-10 C, tmin 10 C lower) with tmin in Fahrenheit: tmin_F =
    1.8 tmin + 32 is above tmax_C when tmax > -17.5 C, in under half of the days, so a
    majority rule misses it; more than a quarter of a county's days is a unit mistake."""
    c = climate(counties=("03001",))
    c["tmax_c"] = c["tmax_c"] - 35
    c["tmin_c"] = (c["tmax_c"] - 10) * 9 / 5 + 32
    share = float((c["tmin_c"] > c["tmax_c"]).mean())
    assert 0.25 < share < 0.5 and c["tmin_c"].max() < 56.7
    assert [(x.column, x.county) for x in temperature_pairs(c)] == [("tmin_c", "03001")]
    c["tmin_c"] = np.where(c.index < 5, c["tmax_c"] + 1, c["tmax_c"] - 10)  # a few slips
    assert temperature_pairs(c) == []


def test_a_few_values_are_left_to_the_row_rules():
    """Eleven monthly values (under a year) are not a climate to judge a unit by."""
    c = climate(counties=("05001",), dates=pd.date_range("2001-01-01", periods=11, freq="MS"))
    c["tmax_c"] = 50.0
    c["precip_mm"] = 0.5
    assert temperature_units(c) == [] and precipitation_units(c) == []
    c = climate(counties=("05001",), dates=pd.date_range("2001-01-01", periods=12, freq="MS"))
    c["tmax_c"], c["precip_mm"] = 50.0, 0.5
    assert len(temperature_units(c, columns=("tmax_c",))) == 1 and len(precipitation_units(c)) == 1


def test_long_records_are_judged_on_a_systematic_sample_with_the_same_findings():
    """60 years of daily rows per county: the distribution checks read every k-th row of
    each county (deterministic), and still name the Fahrenheit tmax of one county and the
    inches of another (NIST SP 811 conversions, as above)."""
    from impactlink.inputs._cadence import SAMPLE_PER_COUNTY, county_sample
    from impactlink.inputs.plausibility import unit_findings

    days = pd.date_range("1961-01-01", "2020-12-31", freq="D")
    c = climate(counties=("01001", "01003", "01005", "01007"), dates=days)
    hot = c["county_id"] == "01003"
    c.loc[hot, "tmax_c"] = c.loc[hot, "tmax_c"] * 9 / 5 + 32
    wet = c["county_id"] == "01007"
    c.loc[wet, "precip_mm"] = c.loc[wet, "precip_mm"] / 25.4
    part = county_sample(c)
    per = part.groupby("county_id").size()
    assert (per >= SAMPLE_PER_COUNTY).all() and (per < 2 * SAMPLE_PER_COUNTY).all()
    assert part.equals(county_sample(c))  # the same rows every time
    found = {(f.column, f.county) for f in unit_findings(c, "climate", file="climate.csv")}
    assert found == {("tmax_c", "01003"), ("precip_mm", "01007")}
    small = climate()
    assert county_sample(small) is small  # two years: every row is read


@pytest.mark.parametrize("shuffle", [False, True])
def test_first_rows_and_cadence_on_codes_agree_with_pandas(shuffle):
    """The integer-code shortcuts give what pandas' own ``duplicated`` and a plain per-county
    diff of sorted dates give (pandas is the reference)."""
    from impactlink.inputs._cadence import cadence_table, first_rows, with_county_codes

    rng = np.random.default_rng(3)
    days = pd.date_range("2001-01-01", periods=60, freq="D")
    frame = pd.DataFrame({"county_id": np.repeat(["19001", "19003", "08005"], 60),
                          "date": np.tile(days, 3)})
    frame = pd.concat([frame, frame.iloc[[5, 70, 70, 150]]], ignore_index=True)  # repeats
    frame.loc[len(frame) - 1, "date"] = pd.Timestamp("2001-01-03")
    if shuffle:
        frame = frame.iloc[rng.permutation(len(frame))].reset_index(drop=True)
    coded = with_county_codes(frame)
    want = ~frame.duplicated(["county_id", "date"]).to_numpy()
    assert np.array_equal(first_rows(coded, ["county_id", "date"]), want)
    assert np.array_equal(first_rows(coded, ["date", "county_id"]), want)
    tab = cadence_table(coded)
    for county, g in frame.groupby("county_id"):
        assert tab.loc[county, "dates"] == g["date"].nunique()
        assert tab.loc[county, "cadence"] == "daily"
