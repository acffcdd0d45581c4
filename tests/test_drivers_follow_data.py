"""Drivers follow the data: a station without water temperature (or sunshine) gets an estimate
or leaves the driver out, the model card and the report say so, and nothing raises."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cyanorisk.features import FeatureBuilder, water_temp_from_air_c
from cyanorisk.forecast import assess
from cyanorisk.model import prepare
from cyanorisk.report.daily import render_html
from cyanorisk.report.document import report_document
from cyanorisk.training import available_drivers, fit_site, training_table


def test_estimate_lags_and_damps_a_daily_cycle_as_a_first_order_system():
    # dTw/dt = (Ta - Tw)/tau driven by Ta = A sin(w t) settles to amplitude
    # A / sqrt(1 + (w tau)^2) with a lag of atan(w tau)/w: the frequency response of a
    # first-order linear system (any control or heat-transfer textbook; common practice, no
    # source). Here an annual cycle (w = 2 pi / 365 d) and tau = 15 d, hourly steps.
    tau, step_h = 15.0, 1.0
    t_days = np.arange(0, 6 * 365 * 24) * step_h / 24
    w = 2 * np.pi / 365.0
    air = 10.0 * np.sin(w * t_days)
    water = water_temp_from_air_c(air, step_h, tau)
    last_year = t_days >= 5 * 365
    amplitude = (water[last_year].max() - water[last_year].min()) / 2
    assert amplitude == pytest.approx(10.0 / np.sqrt(1 + (w * tau) ** 2), rel=1e-3)
    lag_days = (t_days[last_year][np.argmax(water[last_year])]
                - t_days[last_year][np.argmax(air[last_year])])
    assert lag_days == pytest.approx(np.arctan(w * tau) / w, abs=0.1)


def test_estimate_holds_through_a_gap_and_never_returns_nan_inside_the_record():
    air = np.r_[np.full(48, 20.0), np.full(24, np.nan), np.full(48, 10.0)]
    water = water_temp_from_air_c(air, 1.0, 15.0)
    assert not np.isnan(water).any()
    assert np.allclose(water[:72], 20.0)  # held at 20 during the gap


@pytest.fixture(scope="module")
def bare_station(demo_site):
    """The demo's record as a station with neither water temperature nor a pyranometer."""
    drop = [c for c in demo_site.weather.columns if c.startswith(("water_temp_c", "solar_wm2"))]
    weather = demo_site.weather.drop(columns=drop)
    table = training_table(demo_site.spec, weather, demo_site.totals)
    return weather, table


def test_missing_water_temperature_is_estimated_and_missing_sunshine_left_out(bare_station,
                                                                              demo_site):
    _, table = bare_station
    choice = available_drivers(demo_site.spec.drivers, prepare(table))
    assert choice.substituted == {"water_temp_mean_c_7d": "water_temp_est_mean_c_7d"}
    assert choice.not_recorded == {"solar_mj_m2_7d": "solar_wm2"}
    assert "water_temp_est_mean_c_7d" in choice.used and "solar_mj_m2_7d" not in choice.used
    assert any("estimated from air temperature" in n for n in choice.notes)
    assert any("left out, the station records no" in n for n in choice.notes)


def test_a_bare_station_trains_and_reports_saying_what_it_lacks(bare_station, demo_site):
    weather, table = bare_station
    models = fit_site(demo_site.spec, table, cross_validation=False)
    card = models.card
    assert card["substituted"] == {"water_temp_mean_c_7d": "water_temp_est_mean_c_7d"}
    assert card["not_recorded"] == {"solar_mj_m2_7d": "solar_wm2"}
    assert "solar_mj_m2_7d" not in card["drivers"]
    day = pd.Timestamp(weather.index[-1].tz_convert(demo_site.spec.timezone).date())
    a = assess(demo_site.spec, models, weather, demo_site.totals, day,
               demo_site.pipeline.thresholds())
    doc = report_document(a)
    assert doc["model"]["driver_notes"] == card["driver_notes"]
    assert "What this station does not record" in render_html(a)


def test_a_sensor_lost_after_training_gives_no_value_not_a_crash(demo_site):
    # The model was fitted with water temperature; the station has since lost the sensor.
    weather = demo_site.weather.drop(columns=["water_temp_c", "water_temp_c_flag"])
    day = pd.Timestamp(weather.index[-1].tz_convert(demo_site.spec.timezone).date())
    a = assess(demo_site.spec, demo_site.models, weather, demo_site.totals, day,
               demo_site.pipeline.thresholds())
    assert "water_temp_mean_c_7d" in a.forecast.missing_drivers


def test_the_estimate_is_computed_only_from_air_temperature(demo_site):
    drivers = FeatureBuilder(demo_site.spec.features, demo_site.spec.timezone).transform(
        demo_site.weather)
    assert "water_temp_est_mean_c_7d" in drivers
    # it tracks the measured water temperature of the demo closely in its seasonal course
    both = drivers[["water_temp_est_mean_c_7d", "water_temp_mean_c_7d"]].dropna()
    assert both.corr().iloc[0, 1] > 0.9
