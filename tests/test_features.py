"""Tests for cyanorisk.features: degree-days, wind, calm spells, rain, coverage, issue windows.

Published check values come from shared/REFERENCES.md; each carries its source beside it. The
weather frames are built by hand, shaped like the output of ``read_weather``: a regular UTC
index of interval starts, canonical value columns and categorical ``<var>_flag`` columns.
"""

from __future__ import annotations

import functools

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cyanorisk.features import (
    FeatureBuilder,
    FeatureSettings,
    degree_days_single_sine,
    issue_instants,
    solar_energy_mj_m2,
    wind_at_2m,
    wind_run_km,
)
from cyanorisk.ingest.quality import FLAG_NAMES

MELBOURNE = "Australia/Melbourne"
HALF_HOUR = pd.Timedelta("30min")


def weather_frame(index: pd.DatetimeIndex, flags: dict[str, list[str]] | None = None,
                  **columns) -> pd.DataFrame:
    """A clean weather frame: values and categorical flags ('ok', or 'missing' where NaN)."""
    frame = pd.DataFrame({k: np.asarray(v, dtype=float) * np.ones(len(index))
                          for k, v in columns.items()}, index=index)
    flags = flags or {}
    for name in columns:
        codes = flags.get(name)
        if codes is None:
            codes = np.where(frame[name].isna(), "missing", "ok")
        frame[f"{name}_flag"] = pd.Categorical(codes, categories=FLAG_NAMES)
    return frame


def half_hourly(start: str, days: int) -> pd.DatetimeIndex:
    return pd.date_range(start, periods=48 * days, freq="30min", tz="UTC")


def row(table: pd.DataFrame, day: str) -> pd.Series:
    return table.loc[pd.Timestamp(day).date()]


# ---------------------------------------------------------------------------------------------
# Degree-days: single-sine method
# ---------------------------------------------------------------------------------------------

def test_single_sine_worked_example():
    # Tmin 7, Tmax 14, base 12 degC -> 0.468 degC-day: Baskerville & Emin 1969, Ecology 50:514-517
    # (REFERENCES.md degree-days, worked example, V)
    got = degree_days_single_sine(7.0, 14.0, 12.0)
    assert float(got) == pytest.approx(0.468, abs=5e-4)


def test_single_sine_formula_step_by_step():
    # The formula as REFERENCES.md gives it (Baskerville & Emin 1969, V), evaluated by hand:
    # M = 10.5, a = 3.5, t1 = asin(1.5/3.5), DD = ((M - TL)(pi/2 - t1) + a cos t1) / pi
    t1 = np.arcsin((12.0 - 10.5) / 3.5)
    expected = ((10.5 - 12.0) * (np.pi / 2 - t1) + 3.5 * np.cos(t1)) / np.pi
    assert float(degree_days_single_sine(7.0, 14.0, 12.0)) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(("tmin", "tmax", "base", "expected"), [
    # Tmin >= base: the whole day is above the base, DD = M - base (Baskerville & Emin 1969, V)
    (16.0, 24.0, 12.0, 8.0),
    (12.0, 20.0, 12.0, 4.0),  # Tmin exactly at the base
    (15.0, 15.0, 12.0, 3.0),  # constant day
    # Tmax <= base: DD = 0 (Baskerville & Emin 1969, V)
    (2.0, 10.0, 12.0, 0.0),
    (4.0, 12.0, 12.0, 0.0),  # Tmax exactly at the base
    (12.0, 12.0, 12.0, 0.0),
    (-5.0, -1.0, 0.0, 0.0),
])
def test_single_sine_cases_outside_the_day_range(tmin, tmax, base, expected):
    assert float(degree_days_single_sine(tmin, tmax, base)) == pytest.approx(expected, abs=1e-12)


def test_single_sine_simple_average_arithmetic():
    # Mean 64 degF, threshold 53 degF -> 11 degF-days: University of California IPM degree-day
    # examples (REFERENCES.md, simple average, V). With Tmin >= threshold the single-sine value is
    # the simple average minus the threshold; the arithmetic holds in any degree unit.
    assert float(degree_days_single_sine(58.0, 70.0, 53.0)) == pytest.approx(11.0, abs=1e-12)
    assert float(degree_days_single_sine(53.0, 75.0, 53.0)) == pytest.approx(11.0, abs=1e-12)


def test_single_sine_is_continuous_at_the_case_boundaries():
    # follows from the method: the partial-day formula tends to M - base and to 0 at the edges
    eps = 1e-9
    assert float(degree_days_single_sine(12.0 - eps, 20.0, 12.0)) == pytest.approx(4.0, abs=1e-6)
    assert float(degree_days_single_sine(4.0, 12.0 + eps, 12.0)) == pytest.approx(0.0, abs=1e-6)


def test_single_sine_vectorised():
    tmin = np.array([7.0, 16.0, 2.0, np.nan])
    tmax = np.array([14.0, 24.0, 10.0, 20.0])
    got = degree_days_single_sine(tmin, tmax, 12.0)
    # Baskerville & Emin 1969 worked example (0.468, V) and the two whole-day cases
    np.testing.assert_allclose(got[:3], [0.468, 8.0, 0.0], atol=5e-4)
    assert np.isnan(got[3])


def sine_day_frame(tmin: float, tmax: float, days: int) -> pd.DataFrame:
    """Half-hourly air temperature following a 24-h sine between tmin and tmax (interval
    midpoints)."""
    index = half_hourly("2024-01-01", days)
    hours = (np.arange(len(index)) + 0.5) * 0.5
    temp = (tmax + tmin) / 2 + (tmax - tmin) / 2 * np.sin(2 * np.pi * hours / 24.0)
    return weather_frame(index, air_temp_c=temp)


@pytest.mark.parametrize(("base", "expected"), [
    (12.0, 0.468),  # Baskerville & Emin 1969 worked example (REFERENCES.md, V)
    (10.5, None),  # base at the mean: partial day, value from the function
    (5.0, 5.5),  # Tmin >= base: M - base
    (15.0, 0.0),  # Tmax <= base
])
def test_sub_daily_integration_matches_single_sine(base, expected):
    # REFERENCES.md integration check (C, follows from the method): a half-hourly series that
    # follows a sine between Tmin and Tmax integrates to the single-sine value within 1 %.
    weather = sine_day_frame(7.0, 14.0, days=4)
    fs = FeatureSettings(base_temps_c=(base,), degree_day_windows=(1,))
    table = FeatureBuilder(fs, "UTC").transform(weather)
    single_sine = float(degree_days_single_sine(7.0, 14.0, base))
    if expected is not None:
        assert single_sine == pytest.approx(expected, abs=5e-4)
    got = table[f"degree_days_{base:g}c_1d"].to_numpy()
    assert len(got) == 3
    np.testing.assert_allclose(got, single_sine, rtol=0.01, atol=1e-12)


def test_sub_daily_degree_days_over_several_days_add_up():
    weather = sine_day_frame(7.0, 14.0, days=5)
    fs = FeatureSettings(base_temps_c=(12.0,), degree_day_windows=(1, 3))
    table = FeatureBuilder(fs, "UTC").transform(weather)
    one_day = table["degree_days_12c_1d"].to_numpy()
    three_days = table["degree_days_12c_3d"].to_numpy()
    assert np.isnan(three_days[:2]).all()  # the window runs past the series start
    # the periodic series gives the same value every day, three days give three times it
    np.testing.assert_allclose(three_days[2:], 3 * one_day[2:], rtol=1e-12)
    np.testing.assert_allclose(three_days[2:], 3 * 0.468, rtol=0.01)  # Baskerville & Emin 1969


def daily_min_max_frame(tmin: list[float], tmax: list[float]) -> pd.DataFrame:
    index = pd.date_range("2024-01-01", periods=len(tmin), freq="D", tz="UTC")
    return weather_frame(index, air_temp_min_c=tmin, air_temp_max_c=tmax)


def test_daily_min_max_path_uses_single_sine():
    # each issue day (06:00 UTC) takes the day before it, by the single-sine method
    # (Baskerville & Emin 1969, V): Tmin 7 / Tmax 14 / base 12 -> 0.468 (worked example)
    tmin = [7.0, 16.0, 2.0, 7.0, 10.0]
    tmax = [14.0, 24.0, 10.0, 14.0, 30.0]
    fs = FeatureSettings(base_temps_c=(12.0, 20.0), degree_day_windows=(1, 3), air_temp_windows=(1,))
    table = FeatureBuilder(fs, "UTC").transform(daily_min_max_frame(tmin, tmax))
    assert [str(d) for d in table.index] == ["2024-01-02", "2024-01-03", "2024-01-04", "2024-01-05"]
    for base in (12.0, 20.0):
        per_day = degree_days_single_sine(np.array(tmin), np.array(tmax), base)
        np.testing.assert_allclose(table[f"degree_days_{base:g}c_1d"], per_day[:4], rtol=1e-12, atol=0)
        np.testing.assert_allclose(table[f"degree_days_{base:g}c_3d"].to_numpy()[2:],
                                   [per_day[0:3].sum(), per_day[1:4].sum()], rtol=1e-12, atol=0)
    assert table["degree_days_12c_1d"].iloc[0] == pytest.approx(0.468, abs=5e-4)
    assert table["degree_days_12c_1d"].iloc[1] == pytest.approx(8.0, abs=1e-12)  # M - base
    assert table["degree_days_12c_1d"].iloc[2] == pytest.approx(0.0, abs=1e-12)  # Tmax <= base
    np.testing.assert_allclose(table["air_temp_mean_c_1d"], [10.5, 20.0, 6.0, 10.5], rtol=1e-12)
    np.testing.assert_allclose(table["air_temp_min_max_c_good_share_1d"], 1.0, rtol=0, atol=0)


def test_daily_min_max_path_needs_daily_interval():
    index = half_hourly("2024-01-01", 3)
    weather = weather_frame(index, air_temp_min_c=7.0, air_temp_max_c=14.0)
    with pytest.raises(ValueError, match="interval must be 1 day"):
        FeatureBuilder(FeatureSettings(), "UTC").transform(weather)


# ---------------------------------------------------------------------------------------------
# Wind
# ---------------------------------------------------------------------------------------------

def test_wind_run_definition():
    # wind run = integral of speed over time; 1 m/s for a day is 86.4 km (definition, C)
    assert float(wind_run_km(1.0, 24.0)) == pytest.approx(86.4, rel=1e-12)
    assert float(wind_run_km(2.0, 24.0)) == pytest.approx(172.8, rel=1e-12)
    np.testing.assert_allclose(wind_run_km(np.array([0.0, 2.0]), 72.0), [0.0, 518.4], rtol=1e-12)


def test_wind_run_through_builder():
    # steady 2 m/s for a day -> 172.8 km (definition of wind run, C)
    weather = weather_frame(half_hourly("2024-01-01", 5), wind_speed_ms=2.0)
    table = FeatureBuilder(FeatureSettings(), "UTC").transform(weather)
    np.testing.assert_allclose(table["wind_run_km_1d"], 172.8, rtol=1e-12)
    np.testing.assert_allclose(table["wind_run_km_3d"].to_numpy()[2:], 3 * 172.8, rtol=1e-12)


@pytest.mark.parametrize(("speed", "expected"), [
    (3.2, 2.39),  # FAO-56 (Allen et al. 1998) eq. 47, ch. 3 example 14 (REFERENCES.md, V)
    (5.0, 3.74),  # same source (REFERENCES.md, V)
])
def test_wind_at_2m_fao56(speed, expected):
    assert float(wind_at_2m(speed, 10.0)) == pytest.approx(expected, abs=0.005)


def test_wind_at_2m_formula():
    # FAO-56 eq. 47: u2 = uz * 4.87 / ln(67.8 z - 5.42) (REFERENCES.md, V)
    z = np.array([3.0, 6.0, 10.0])
    np.testing.assert_allclose(wind_at_2m(np.ones(3), z), 4.87 / np.log(67.8 * z - 5.42), rtol=1e-12)
    # at 2 m the profile is nearly the identity (4.87 / ln(130.18) = 1.0002)
    assert float(wind_at_2m(1.0, 2.0)) == pytest.approx(1.0, abs=1e-3)


def test_anemometer_height_adjusts_wind_run():
    # 5 m/s at 10 m -> 3.74 m/s at 2 m (FAO-56 example 14, V); a day of it is 3.74 x 86.4 km
    weather = weather_frame(half_hourly("2024-01-01", 3), wind_speed_ms=5.0)
    fs = FeatureSettings(anemometer_height_m=10.0)
    table = FeatureBuilder(fs, "UTC").transform(weather)
    np.testing.assert_allclose(table["wind_run_km_1d"], 3.74 * 86.4, atol=0.005 * 86.4)


def test_solar_energy():
    # 1 W = 1 J s-1 (SI): 1000 W m-2 for an hour is 3.6 MJ m-2
    assert float(solar_energy_mj_m2(1000.0, 1.0)) == pytest.approx(3.6, rel=1e-12)
    weather = weather_frame(half_hourly("2024-01-01", 9), solar_wm2=250.0)
    table = FeatureBuilder(FeatureSettings(), "UTC").transform(weather)
    # 250 W m-2 for 7 days = 250 x 7 x 86400 J m-2 = 151.2 MJ m-2
    got = table["solar_mj_m2_7d"].to_numpy()
    assert np.isnan(got[:6]).all()
    np.testing.assert_allclose(got[6:], 151.2, rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# Calm hours and the longest calm spell
# ---------------------------------------------------------------------------------------------

def calm_series():
    """Nine days of half-hourly wind at 5 m/s with calm spells in the last seven before the
    issue instant 2024-01-10 06:00 UTC (index 432 of the grid)."""
    index = half_hourly("2024-01-01 06:00", 10)
    u = np.full(len(index), 5.0)
    issue = 9 * 48  # 2024-01-10 06:00
    start = issue - 7 * 48  # start of the 7-day window
    u[start - 20:start + 14] = 0.5  # 10 h before the window, 7 h (14 intervals) inside it
    u[start + 100:start + 106] = 1.0  # 3 h
    u[start + 200:start + 211] = 1.9  # 5.5 h
    u[start + 211] = 2.0  # exactly at the threshold: not calm (calm is below 2 m/s)
    u[start + 212:start + 218] = 0.0  # 3 h
    u[issue - 30:issue - 26] = 0.2  # 2 h, then a gap
    u[issue - 26] = np.nan
    u[issue - 25:issue - 21] = 0.2  # 2 h after the gap: the gap breaks the run
    u[issue - 4:issue] = 1.0  # 2 h running up to the issue instant
    u[issue:issue + 20] = 0.0  # after the issue instant: not counted
    return weather_frame(index, wind_speed_ms=u), issue, start


def test_calm_h_and_longest_calm_spell():
    weather, issue, start = calm_series()
    table = FeatureBuilder(FeatureSettings(), "UTC").transform(weather, days=["2024-01-10"])
    r = row(table, "2024-01-10")
    assert r["issue_time_utc"] == weather.index[issue]
    # the spell that began before the window counts only its 7 h inside it
    assert r["longest_calm_h_7d"] == pytest.approx(7.0, abs=1e-12)
    calm_7d = 14 + 6 + 11 + 6 + 4 + 4 + 4  # calm intervals in the 7 days
    usable_7d = 7 * 48 - 1  # one missing value
    assert r["calm_h_7d"] == pytest.approx(calm_7d / usable_7d * 7 * 24, rel=1e-12)
    # the last 3 days are indices >= issue - 144: the 5.5 h and later spells, not the 3 h at 100
    assert start + 200 >= issue - 144 > start + 106
    calm_3d = 11 + 6 + 4 + 4 + 4
    assert r["calm_h_3d"] == pytest.approx(calm_3d / (3 * 48 - 1) * 3 * 24, rel=1e-12)
    np.testing.assert_allclose(r["wind_speed_ms_missing_share_7d"], 1 / (7 * 48), rtol=1e-12)


def test_longest_calm_spell_inside_window():
    weather, issue, start = calm_series()
    u = weather["wind_speed_ms"].to_numpy().copy()
    u[start - 20:start + 14] = 5.0  # remove the long spell: 5.5 h is now the longest
    table = FeatureBuilder(FeatureSettings(), "UTC").transform(
        weather.assign(wind_speed_ms=u), days=["2024-01-10"])
    assert row(table, "2024-01-10")["longest_calm_h_7d"] == pytest.approx(5.5, abs=1e-12)
    u[start + 200:start + 211] = 5.0  # now 3 h spells are the longest
    table = FeatureBuilder(FeatureSettings(), "UTC").transform(
        weather.assign(wind_speed_ms=u), days=["2024-01-10"])
    assert row(table, "2024-01-10")["longest_calm_h_7d"] == pytest.approx(3.0, abs=1e-12)


def test_calm_threshold_after_height_adjustment():
    # 2.5 m/s at 10 m is 2.5 x 0.748 = 1.87 m/s at 2 m (FAO-56 eq. 47, V): calm below 2 m/s
    weather = weather_frame(half_hourly("2024-01-01", 4), wind_speed_ms=2.5)
    plain = FeatureBuilder(FeatureSettings(calm_windows=(3,)), "UTC").transform(weather)
    adjusted = FeatureBuilder(FeatureSettings(calm_windows=(3,), anemometer_height_m=10.0),
                              "UTC").transform(weather)
    np.testing.assert_allclose(plain["calm_h_3d"].to_numpy()[2:], 0.0, atol=0)
    np.testing.assert_allclose(adjusted["calm_h_3d"].to_numpy()[2:], 72.0, rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# Rain: plain sums, never guessed
# ---------------------------------------------------------------------------------------------

def test_rain_is_a_plain_sum_of_recorded_values():
    index = half_hourly("2024-01-01 06:00", 4)
    rng = np.random.default_rng(1)
    rain = rng.uniform(0.0, 2.0, len(index)).round(1)
    day = slice(48, 96)  # the day before the issue on 2024-01-03
    rain[48:53] = np.nan  # 5 of 48 missing: good share 43/48 = 0.896 >= 0.8
    weather = weather_frame(index, rain_mm=rain)
    table = FeatureBuilder(FeatureSettings(), "UTC").transform(weather)
    r = row(table, "2024-01-03")
    # the sum of what was recorded, not scaled up for the gap (an accumulation is not guessed)
    assert r["rain_mm_1d"] == pytest.approx(np.nansum(rain[day]), rel=1e-12)
    assert r["rain_mm_1d"] < np.nanmean(rain[day]) * 48
    assert row(table, "2024-01-02")["rain_mm_1d"] == pytest.approx(rain[:48].sum(), rel=1e-12)
    assert r["rain_mm_good_share_1d"] == pytest.approx(43 / 48, rel=1e-12)
    assert np.isnan(r["rain_mm_3d"])  # the 3-day window runs past the series start


@pytest.mark.parametrize(("n_missing", "min_share", "defined"), [
    (9, 0.8, True),  # 39/48 = 0.8125
    (10, 0.8, False),  # 38/48 = 0.79
    (12, 0.75, True),  # 36/48 = 0.75 exactly: enough
    (13, 0.75, False),  # 35/48
])
def test_window_with_too_little_good_data_is_nan(n_missing, min_share, defined):
    index = half_hourly("2024-01-01 06:00", 2)
    rain = np.full(len(index), 0.5)
    air = np.full(len(index), 20.0)
    rain[:n_missing] = np.nan  # the 48 intervals before the issue on 2024-01-02 are 0..47
    air[:n_missing] = np.nan
    weather = weather_frame(index, rain_mm=rain, air_temp_c=air)
    fs = FeatureSettings(min_good_share=min_share, base_temps_c=(15.0,), degree_day_windows=(1,))
    r = row(FeatureBuilder(fs, "UTC").transform(weather, days=["2024-01-02"]), "2024-01-02")
    if defined:
        assert r["rain_mm_1d"] == pytest.approx(0.5 * (48 - n_missing), rel=1e-12)
        # a mean-based sum is the window's mean over its usable values times its length
        assert r["degree_days_15c_1d"] == pytest.approx(5.0, rel=1e-12)
    else:
        assert np.isnan(r["rain_mm_1d"])
        assert np.isnan(r["degree_days_15c_1d"])


# ---------------------------------------------------------------------------------------------
# Coverage
# ---------------------------------------------------------------------------------------------

def test_coverage_shares_with_fills_and_gaps():
    index = half_hourly("2024-01-01 06:00", 2)
    temp = np.full(len(index), 18.0)
    flags = np.array(["ok"] * len(index), dtype=object)
    # the 48 intervals before the issue on 2024-01-02 06:00 are indices 0..47
    flags[0:4] = "filled"  # filled values are kept as values
    temp[0:4] = 30.0
    flags[10:16] = "missing"
    temp[10:16] = np.nan
    flags[20:22] = "out_of_range"
    temp[20:22] = np.nan
    flags[30] = "aggregated"  # read from the station: good
    flags[31] = "duplicate_conflict"  # read from the station: good
    weather = weather_frame(index, {"air_temp_c": list(flags)}, air_temp_c=temp)
    fs = FeatureSettings(min_good_share=0.7, air_temp_windows=(1,), degree_day_windows=(1,),
                         base_temps_c=(15.0,))
    r = row(FeatureBuilder(fs, "UTC").transform(weather, days=["2024-01-02"]), "2024-01-02")
    n_good, n_filled = 48 - 4 - 6 - 2, 4
    assert r["air_temp_c_good_share_1d"] == pytest.approx(n_good / 48, rel=1e-12)
    assert r["air_temp_c_filled_share_1d"] == pytest.approx(n_filled / 48, rel=1e-12)
    assert r["air_temp_c_missing_share_1d"] == pytest.approx(8 / 48, rel=1e-12)
    # the mean uses the good and the filled values (40 usable)
    expected_mean = (36 * 18.0 + 4 * 30.0) / 40
    assert r["air_temp_mean_c_1d"] == pytest.approx(expected_mean, rel=1e-12)
    assert r["degree_days_15c_1d"] == pytest.approx(expected_mean - 15.0, rel=1e-12)
    # good share 0.75 is below 0.8: the same window is refused with the default minimum
    r80 = row(FeatureBuilder(FeatureSettings(air_temp_windows=(1,), degree_day_windows=(1,)),
                             "UTC").transform(weather, days=["2024-01-02"]), "2024-01-02")
    assert np.isnan(r80["air_temp_mean_c_1d"])
    assert r80["air_temp_c_good_share_1d"] == pytest.approx(0.75, rel=1e-12)


def test_text_flag_columns_read_like_categorical():
    weather = sine_day_frame(7.0, 14.0, days=3)
    as_text = weather.assign(air_temp_c_flag=weather["air_temp_c_flag"].astype(str))
    fs = FeatureSettings(base_temps_c=(12.0,), degree_day_windows=(1,))
    expected = FeatureBuilder(fs, "UTC").transform(weather)
    got = FeatureBuilder(fs, "UTC").transform(as_text)
    pd.testing.assert_frame_equal(got, expected, check_exact=True)


# ---------------------------------------------------------------------------------------------
# Issue time: local, across daylight-saving changes; windows end at the issue instant
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize(("day", "utc"), [
    # Melbourne: AEST (+10) until 2024-10-06 02:00, AEDT (+11) after; back to AEST on 2024-04-07
    ("2024-10-05", "2024-10-04 20:00"),
    ("2024-10-06", "2024-10-05 19:00"),
    ("2024-10-07", "2024-10-06 19:00"),
    ("2024-04-06", "2024-04-05 19:00"),
    ("2024-04-07", "2024-04-06 20:00"),
])
def test_issue_instant_is_local(day, utc):
    got = issue_instants(pd.DatetimeIndex([day]), MELBOURNE, "06:00")
    assert got[0] == pd.Timestamp(utc, tz="UTC")


def test_windows_end_at_issue_instant_across_dst():
    index = half_hourly("2024-10-01", 10)
    days = ["2024-10-05", "2024-10-06", "2024-10-07"]
    issues = issue_instants(pd.DatetimeIndex(days), MELBOURNE, "06:00")
    for issue in issues:
        rain = np.zeros(len(index))
        at = index.get_loc(issue)
        rain[at - 1] = 1.0  # [issue - 30 min, issue): counted
        rain[at - 48] = 10.0  # [issue - 24 h, issue - 23.5 h): counted, a day is 24 h
        rain[at - 49] = 100.0  # before the 1-day window
        rain[at] = 1000.0  # starts at the issue instant: not counted
        weather = weather_frame(index, rain_mm=rain)
        table = FeatureBuilder(FeatureSettings(), MELBOURNE).transform(weather, days=days)
        assert list(table["issue_time_utc"]) == list(issues)
        r = table[table["issue_time_utc"] == issue].iloc[0]
        assert r["rain_mm_1d"] == pytest.approx(11.0, rel=1e-12)
        assert r["rain_mm_3d"] == pytest.approx(111.0, rel=1e-12)


def test_interval_straddling_issue_instant_is_not_counted():
    # issue at 06:15 on a 30-min grid: [06:00, 06:30) is not over at issue time
    index = half_hourly("2024-01-01 06:00", 3)
    rain = np.zeros(len(index))
    issue_at = index.get_loc(pd.Timestamp("2024-01-02 06:00", tz="UTC"))
    rain[issue_at - 1] = 1.0  # [05:30, 06:00)
    rain[issue_at] = 100.0  # [06:00, 06:30)
    weather = weather_frame(index, rain_mm=rain)
    table = FeatureBuilder(FeatureSettings(issue_time="06:15"), "UTC").transform(
        weather, days=["2024-01-02"])
    r = row(table, "2024-01-02")
    assert r["issue_time_utc"] == pd.Timestamp("2024-01-02 06:15", tz="UTC")
    assert r["rain_mm_1d"] == pytest.approx(1.0, rel=1e-12)


def test_weather_index_must_be_timezone_aware():
    weather = weather_frame(half_hourly("2024-01-01", 2), rain_mm=0.0)
    weather.index = weather.index.tz_localize(None)
    with pytest.raises(ValueError, match="time-zone-aware"):
        FeatureBuilder().transform(weather)


# ---------------------------------------------------------------------------------------------
# No look-ahead
# ---------------------------------------------------------------------------------------------

@functools.cache
def random_weather() -> pd.DataFrame:
    """40 days of half-hourly weather across Melbourne's 2024 daylight-saving start."""
    index = pd.date_range("2024-09-20", periods=48 * 40, freq="30min", tz="UTC")
    rng = np.random.default_rng(20240920)
    n = len(index)
    columns = {
        "air_temp_c": 15 + 8 * rng.standard_normal(n),
        "water_temp_c": 18 + rng.standard_normal(n),
        "water_temp_bottom_c": 14 + rng.standard_normal(n),
        "wind_speed_ms": rng.gamma(2.0, 1.5, n),
        "rain_mm": np.where(rng.uniform(size=n) < 0.1, rng.exponential(1.0, n), 0.0),
        "solar_wm2": np.clip(400 * rng.standard_normal(n), 0, None),
    }
    flags = {}
    for name, values in columns.items():
        f = rng.choice(["ok", "ok", "ok", "ok", "aggregated", "filled"], n)
        gap = rng.uniform(size=n) < 0.03
        values[gap] = np.nan
        f[gap] = "missing"
        flags[name] = list(f)
    return weather_frame(index, flags, **columns)


LOOKAHEAD_DAYS = pd.date_range("2024-09-22", "2024-10-28", freq="D")
LOOKAHEAD_SETTINGS = FeatureSettings(degree_day_windows=(1, 7, 14), air_temp_windows=(3, 7),
                                     min_good_share=0.6, bottom_sensor_depth_m=6.0,
                                     warm_day_c=12.0, calm_threshold_ms=3.5)
"""Every family of the glossary, the stratification drivers and the lagged rain included; a
low warm-day temperature and a high calm threshold so that warm calm days occur."""


@settings(max_examples=40, deadline=None)
@given(day=st.sampled_from(list(LOOKAHEAD_DAYS)), offset=st.integers(0, 200),
       seed=st.integers(0, 2**32 - 1), truncate=st.booleans())
def test_no_look_ahead(day, offset, seed, truncate):
    # DESIGN.md: features for an issue day use only data available at issue time. Changing (or
    # dropping) every value stamped at or after a cut point at or after the issue instant changes
    # nothing in that day's row.
    weather = random_weather()
    builder = FeatureBuilder(LOOKAHEAD_SETTINGS, MELBOURNE)
    issue = issue_instants(pd.DatetimeIndex([day]), MELBOURNE, "06:00")[0]
    cut = issue + offset * HALF_HOUR
    after = weather.index >= cut
    if truncate:
        changed = weather[~after]
    else:
        rng = np.random.default_rng(seed)
        changed = weather.copy()
        k = int(after.sum())
        for name in ("air_temp_c", "water_temp_c", "water_temp_bottom_c", "wind_speed_ms",
                     "rain_mm", "solar_wm2"):
            values = changed[name].to_numpy(copy=True)
            values[after] = np.where(rng.uniform(size=k) < 0.2, np.nan, rng.uniform(0.0, 40.0, k))
            changed[name] = values
            flags = changed[f"{name}_flag"].to_numpy(dtype=object, copy=True)
            flags[after] = rng.choice(["ok", "filled", "missing", "out_of_range"], k)
            changed[f"{name}_flag"] = pd.Categorical(flags, categories=FLAG_NAMES)
    before = builder.transform(weather, days=[day])
    got = builder.transform(changed, days=[day])
    assert before["issue_time_utc"].iloc[0] == issue
    assert int(before.notna().sum(axis=1).iloc[0]) > 20  # the row holds real values to compare
    new = ["rain_mm_7d_lag_7d", "warm_calm_days_30d", "surface_bottom_diff_c_7d",
           "schmidt_stability_j_m2_7d"]
    assert set(new) <= set(before.columns)  # the new drivers are among those compared
    pd.testing.assert_frame_equal(got, before, check_exact=True)
