"""The evaluation scenario (cyanorisk.scenario): its process model, its sampling and its exports.

The scenario is generated once per module (a few seconds) and its exports are read back with the
project's own readers and the configuration it writes.
"""

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk import scenario
from cyanorisk.config import load_config
from cyanorisk.ingest import read_weather
from cyanorisk.ingest.counts import parse_count
from cyanorisk.ingest.samples import read_samples, sample_totals
from cyanorisk.levels import scheme
from cyanorisk.scenario import BloomParameters


def _cells_threshold(level: str) -> float:
    """The WHO 1999 drinking-water threshold of a level [cells mL-1] (Chorus & Bartram 1999,
    ch. 6, as the preset in cyanorisk.levels carries it: 2,000 and 100,000; REFERENCES.md)."""
    found = next(lv for lv in scheme("who1999_drinking").levels if lv.name == level)
    return float(next(t.value for t in found.thresholds if t.measure == "cyano_cells_per_ml"))


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    return scenario.write_scenario(tmp_path_factory.mktemp("scenario"))


@pytest.fixture(scope="module")
def config(files):
    return load_config(files.config)


@pytest.fixture(scope="module")
def weather(files, config):
    site = config.sites[0]
    return read_weather(list(site.weather.files), config.dialects[site.weather.dialect], site.interval,
                        site.timezone, bad_rows="reject")


@pytest.fixture(scope="module")
def samples(files, config):
    site = config.sites[0]
    return read_samples(list(site.samples.files), config.layouts[site.samples.layout], site.timezone,
                        site_id=site.id, bad_rows="reject")


def _annual_fit(values: np.ndarray, t_days: np.ndarray) -> tuple[float, float]:
    """Amplitude and day of the maximum of the first annual harmonic fitted by least squares."""
    w = 2 * np.pi * t_days / 365.25
    basis = np.column_stack([np.ones_like(w), np.cos(w), np.sin(w)])
    _, c, s = np.linalg.lstsq(basis, values, rcond=None)[0]
    return float(np.hypot(c, s)), float(np.arctan2(s, c) / (2 * np.pi) * 365.25)


# --- pure functions: growth, lake temperature, radiation, hydrology ---------------------------


def test_ctmi_cardinal_values():
    # Rosso et al. 1993, J. Theor. Biol. 162:447-463: mu = 0 at Tmin and Tmax, mu_opt at Topt
    t_min, t_opt, t_max, mu_opt = 10.0, 27.5, 37.0, 1.1
    at = scenario.ctmi(np.array([t_min, t_opt, t_max]), t_min, t_opt, t_max, mu_opt)
    np.testing.assert_allclose(at, [0.0, mu_opt, 0.0], atol=1e-12)
    outside = scenario.ctmi(np.array([-5.0, 5.0, 40.0, 50.0]), t_min, t_opt, t_max, mu_opt)
    np.testing.assert_array_equal(outside, 0.0)


def test_ctmi_peaks_at_the_microcystis_optimum():
    # the default optimum: 27.5 degC for Microcystis, J. Plankton Res. 40(1) 2018 (REFERENCES.md)
    p = BloomParameters()
    grid = np.arange(0.0, 45.0, 0.01)
    mu = scenario.ctmi(grid, p.t_min_c, p.t_opt_c, p.t_max_c, p.mu_opt_per_day)
    assert grid[np.argmax(mu)] == pytest.approx(27.5, abs=0.011)
    assert mu.max() == pytest.approx(p.mu_opt_per_day, rel=1e-6)
    # growth of Microcystis is severely limited below about 15 degC (Robarts & Zohary 1987)
    assert scenario.ctmi(np.array([15.0]), p.t_min_c, p.t_opt_c, p.t_max_c, 1.0)[0] < 0.25


def test_lake_temperature_is_a_first_order_response():
    # A first-order linear system driven by a sinusoid of angular frequency w damps it by
    # 1/sqrt(1 + (w tau)^2) and delays it by arctan(w tau)/w (textbook result, e.g. any
    # control-engineering text, from memory). tau = 20 d: ratio 0.946, delay 19.3 d.
    tau = 20.0
    p = BloomParameters(equilibrium_intercept_c=0.0, equilibrium_slope=1.0, tau_mixed_days=tau,
                        tau_stratified_days=tau)
    t = np.arange(3650.0)
    air = 15.0 + 10.0 * np.cos(2 * np.pi * (t - 200.0) / 365.25)
    lake = scenario.lake_surface_temperature(air, p)
    late = t > 1000
    amp, peak = _annual_fit(lake[late], t[late])
    w = 2 * np.pi / 365.25
    assert amp == pytest.approx(10.0 / np.hypot(1.0, w * tau), rel=0.01)
    # the daily step adds at most a day of delay (forcing held over the day)
    assert (peak - 200.0) % 365.25 == pytest.approx(np.arctan(w * tau) / w, abs=1.0)


def test_lake_temperature_lags_and_damps_the_scenario_air(files):
    truth = files.truth
    t = (truth.index - truth.index[0]).days.to_numpy().astype(float)
    air_amp, air_peak = _annual_fit(truth["air_temp_c"].to_numpy(), t)
    lake_amp, lake_peak = _annual_fit(truth["lake_temp_c"].to_numpy(), t)
    assert lake_amp < 0.95 * air_amp
    assert 5.0 < (lake_peak - air_peak) % 365.25 < 40.0
    # day-to-day changes are damped too, and the surface never goes below freezing
    assert truth["lake_temp_c"].diff().std() < 0.3 * truth["air_temp_c"].diff().std()
    assert truth["lake_temp_c"].min() >= 0.0


def test_lake_temperature_of_a_warm_summer_reaches_bloom_temperatures(files):
    # bloom-forming cyanobacteria grow best at 25 degC or more (Robarts & Zohary 1987); the
    # scenario's lake passes 20 degC every summer and stays below the CTMI maximum
    yearly_max = files.truth["lake_temp_c"].groupby(files.truth.index.year).max()
    assert yearly_max.min() > 20.0
    assert yearly_max.max() < BloomParameters().t_max_c


def test_extraterrestrial_radiation_fao56_example():
    # FAO-56 (Allen et al. 1998) ch. 3 example 8: 3 September, 20 degS: 32.2 MJ m-2 d-1 (from memory)
    ra = scenario.extraterrestrial_radiation(np.array([246]), -20.0)[0]
    assert ra == pytest.approx(32.2, abs=0.05)


def test_wind_stress_bulk_formula():
    # tau = rho_air C_D U^2 = 1.2 * 1.3e-3 * 10^2 = 0.156 Pa (computed)
    np.testing.assert_allclose(scenario.wind_stress(np.array([0.0, 10.0])), [0.0, 0.156], rtol=1e-12)


def test_catchment_runoff_conserves_water():
    # a linear store releases, in the end, all it receives (mass balance)
    rain = np.zeros(400)
    rain[[10, 50, 51]] = [40.0, 20.0, 5.0]
    runoff = scenario.catchment_runoff(rain, coefficient=0.35, recession_days=4.0)
    assert runoff.sum() == pytest.approx(0.35 * rain.sum(), rel=1e-9)
    assert runoff[:10].sum() == 0.0
    assert np.argmax(runoff) == 10


def test_nutrient_pulse_comes_days_after_the_runoff():
    runoff = np.zeros(100)
    runoff[20] = 1.0
    pulse = scenario.nutrient_pulse(runoff, shape=3.0, scale_days=2.5)
    assert pulse[:21].sum() == 0.0  # nothing on the day of the runoff or before
    # the gamma kernel's mode is (shape - 1) * scale = 5 days
    assert np.argmax(pulse) - 20 == 5
    assert pulse.sum() == pytest.approx(1.0, rel=1e-9)


def test_bloom_step():
    p = BloomParameters()
    k = p.carrying_capacity_cells_per_ml
    assert scenario.bloom_step(1000.0, 0.0, 0.0, 0.0, p) == pytest.approx(1000.0)
    assert scenario.bloom_step(1000.0, 0.0, 0.2, 0.0, p) == pytest.approx(1000.0 * np.exp(-0.2))
    # Gompertz: no gross growth at the carrying capacity; growth at low density is faster
    assert scenario.bloom_step(k, 0.5, 0.0, 0.0, p) == pytest.approx(k)
    low = scenario.bloom_step(100.0, 0.5, 0.0, 0.0, p) / 100.0
    high = scenario.bloom_step(1e5, 0.5, 0.0, 0.0, p) / 1e5
    assert low > high > 1.0
    # the population never drops below its seed
    assert scenario.bloom_step(5.0, 0.0, 3.0, -1.0, p) == p.seed_cells_per_ml


def test_rain_from_present_weather():
    rng = np.random.default_rng(3)
    dry, light, heavy, thunder = "0999999999", "0909999999", "0959999999", "0099999999"
    codes = np.array([dry, light, heavy, thunder] * 2000)
    rain = scenario.rain_from_present_weather(codes, np.full(len(codes), 8.0), rng)
    by = {c: rain[codes == c].mean() for c in (dry, light, heavy, thunder)}
    assert by[dry] == 0.0
    assert 0.0 < by[light] < by[heavy]
    assert by[thunder] > 0.0


def test_typical_year_is_the_miami_file():
    data, meta = scenario.read_typical_year()
    assert len(data) == 8760
    assert meta["City"].strip() == "MIAMI"
    assert meta["latitude"] == pytest.approx(scenario.SOURCE_LATITUDE_DEG, abs=0.05)
    # Miami is warm: the typical year's daily mean air temperature stays above 5 degC
    assert data["air_temp_c"].to_numpy().reshape(365, 24).mean(axis=1).min() > 5.0


def test_pvlib_is_not_imported_with_the_module():
    code = "import sys, cyanorisk.scenario; print('pvlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


# --- sampling and typing ------------------------------------------------------------------------


def test_routine_sampling_weekly_in_the_warm_season_and_monthly_otherwise():
    days = scenario.routine_sampling_days("2021-01-01", "2021-12-31")
    assert (days.day_of_week == 1).all()  # Tuesdays
    per_month = pd.Series(1, index=days).groupby(days.month).sum()
    assert sorted(per_month.index) == list(range(1, 13))
    for month, n in per_month.items():
        whole = pd.date_range(f"2021-{month:02d}-01", periods=pd.Period(f"2021-{month:02d}").days_in_month)
        tuesdays = int((whole.day_of_week == 1).sum())
        assert n == (tuesdays if month in scenario.WARM_MONTHS else 1), month
    assert (days[~days.month.isin(scenario.WARM_MONTHS)].day <= 7).all()


def test_scenario_samples_weekly_in_the_warm_season(files):
    routine = files.schedule[files.schedule["kind"] == "routine"]
    when = pd.DatetimeIndex(routine["sampled"])
    counts = pd.Series(1, index=when).groupby([when.year, when.month]).sum()
    warm = counts[counts.index.get_level_values(1).isin(scenario.WARM_MONTHS)]
    cool = counts[~counts.index.get_level_values(1).isin(scenario.WARM_MONTHS)]
    assert set(warm) <= {4, 5}
    assert set(cool) == {1}
    gaps = pd.Series(when[when.month.isin([6, 7, 8])]).diff().dt.days
    assert set(gaps[gaps < 20]) == {7}


def test_follow_up_trigger_is_alert_level_1():
    assert scenario.FOLLOW_UP_CELLS_PER_ML == _cells_threshold("Alert Level 1")


def test_follow_ups_come_two_or_three_days_after_a_high_result(files):
    s = files.schedule.set_index("sampled")
    follow = s.index[s["kind"] == "follow-up"]
    assert len(follow) > 10
    assert (follow.day_of_week < 5).all()
    for day in follow:
        before = s.loc[(s.index >= day - pd.Timedelta(days=5)) & (s.index <= day - pd.Timedelta(days=2))]
        assert (before["measured_cells_per_ml"] > scenario.FOLLOW_UP_CELLS_PER_ML).any(), day


def test_measurement_error_is_lognormal_and_unbiased_on_the_log_scale(files):
    s = files.schedule
    ratio = np.log(s["measured_cells_per_ml"] / s["true_cells_per_ml"])
    assert ratio.mean() == pytest.approx(0.0, abs=0.05)
    assert ratio.std() == pytest.approx(0.35, rel=0.15)


@pytest.mark.parametrize("unit,factor", [("cells/L", 1000.0), ("cells/mL", 1.0)])
def test_typed_counts_read_back(unit, factor):
    rng = np.random.default_rng(11)
    values = np.exp(rng.uniform(np.log(10.0), np.log(5e6), 600))
    for v in values:
        text = scenario.type_count(float(v), rng, unit)
        c = parse_count(text, ".", 100.0 * factor)
        assert not c.reason, text
        if v < 100.0:
            assert (c.censor, c.value) == ("<", 100.0 * factor), text
        else:
            assert c.censor == "=", text
            assert c.value == pytest.approx(float(f"{v * factor:.3g}"), rel=1e-12), text


def test_typing_slips_are_refused_by_the_count_reader():
    for form in scenario.BAD_COUNT_FORMS:
        text = scenario.typing_slip(23_400_000.0, form)
        assert parse_count(text).reason, text
    with pytest.raises(ValueError, match="valid"):
        scenario.typing_slip(1e6, "smudge")


# --- the written configuration and exports -----------------------------------------------------


def test_configuration_loads(config):
    site = config.sites[0]
    assert (site.id, site.timezone, site.use) == ("vessany", "America/New_York", "drinking")
    assert site.scheme == "who1999_drinking"
    assert site.measures == ("cyano_cells_per_ml",)
    assert site.model.season_start_month == 1  # northern hemisphere
    assert site.model.drivers is None  # the default drivers
    assert len(site.weather.files) == 12 and len(site.samples.files) == 12
    dialect = config.dialects[site.weather.dialect]
    assert (dialect.stamp_zone, dialect.stamp_marks, dialect.date_order) == ("-05:00", "end", "mdy")
    layout = config.layouts[site.samples.layout]
    assert (layout.shape, layout.count_unit) == ("long", "cells/L")
    assert config.root == Path(config.path).parent.resolve()
    assert config.data_dir == config.root / "work"


def test_station_has_no_water_temperature(files, weather):
    header = files.weather[0].read_text("utf-8").splitlines()[2].split(",")
    assert header == scenario.EXPORT_COLUMNS
    data, _ = weather
    assert "water_temp_c" not in data.columns
    assert {"air_temp_c", "wind_speed_ms", "wind_dir_deg", "rain_mm", "rel_humidity_pct",
            "solar_wm2", "pressure_hpa"} <= set(data.columns)


def test_weather_ingest_rejects_only_the_spoiled_rows(files, weather):
    _, meta = weather
    a = meta.account
    assert a.read == a.kept + a.duplicates_identical + a.duplicates_conflicting + a.off_grid + a.rejected
    intended = files.intended["weather"]
    assert meta.rejects["reason"].value_counts().to_dict() == {"bad_timestamp": 1, "bad_number": 1}
    assert a.duplicates_identical == intended["identical_duplicates"] > 0
    assert (a.duplicates_conflicting, a.off_grid) == (0, 0)


def test_weather_round_trips_through_the_station_dialect(files, weather):
    data, _ = weather
    sim = files.hourly_weather
    assert data.index[0] == sim.index[0] and data.index[-1] == sim.index[-1]
    joined = data.join(sim.add_suffix("_sim"), how="inner")
    assert len(joined) == len(sim)
    # one decimal of degF, knots and two of inHg bound the differences
    for var, atol in [("air_temp_c", 0.03), ("wind_speed_ms", 0.026), ("pressure_hpa", 0.17),
                      ("rel_humidity_pct", 0.5), ("solar_wm2", 0.5)]:
        ok = joined[f"{var}_flag"] == "ok"
        assert ok.mean() > 0.98, var
        np.testing.assert_allclose(joined.loc[ok, var], joined.loc[ok, f"{var}_sim"], atol=atol,
                                   err_msg=var)
    # rain: whole 0.01 in bucket tips, the total kept but for the rows lost
    assert data["rain_mm"].sum() == pytest.approx(sim["rain_mm"].sum(), rel=0.02)


def test_sensor_fault_marker_reads_as_missing(weather):
    data, _ = weather
    for var in ("wind_speed_ms", "wind_dir_deg"):
        assert (data[f"{var}_flag"] == "out_of_range").sum() == 0, var


def test_lab_ingest_rejects_only_the_typing_slips(files, samples):
    records, meta = samples
    a = meta.account
    assert a.read == a.kept + a.duplicates_identical + a.duplicates_conflicting + a.rejected
    intended = files.intended["samples"]
    assert meta.rejects["reason"].value_counts().to_dict() == {"bad_count": intended["bad_count"]}
    assert set(meta.rejects["column"]) == {"Count"}
    assert a.duplicates_identical == intended["identical_duplicates"]
    assert a.duplicates_conflicting == 0
    flags = meta.flag_counts
    assert flags["converted_from_cells_per_l"] == len(records)
    assert flags["letter_o"] > 0 and flags["not_detected"] > 0 and flags["time_assumed"] > 0


def test_lab_results_match_the_samples_taken(files, config, samples):
    records, _ = samples
    totals = sample_totals(records, config.taxa)
    assert len(totals) == len(files.schedule)
    local_days = totals["sampled_at"].dt.tz_convert(scenario.TIMEZONE).dt.tz_localize(None).dt.normalize()
    assert sorted(local_days) == sorted(files.schedule["sampled"])
    measured = files.schedule.set_index("sampled")["measured_cells_per_ml"]
    exact = totals["cyano_censor"] == "="
    lab = np.log10(totals.loc[exact, "cyano_cells_per_ml"].to_numpy())
    sim = np.log10(measured.loc[local_days[exact]].to_numpy())
    assert np.corrcoef(lab, sim)[0, 1] > 0.95
    # cells per litre were converted: the totals are of the simulated order, not 1000 times it
    assert np.median(lab - sim) == pytest.approx(0.0, abs=0.15)
    assert (totals["reported_at"].isna().mean()) < 0.2


# --- the simulated truth -----------------------------------------------------------------------


def test_truth_has_varied_bloom_seasons(files):
    cells = files.truth["cyano_cells_per_ml"]
    yearly_max = cells.groupby(cells.index.year).max()
    assert len(yearly_max) >= 10
    alert_1, alert_2 = _cells_threshold("Alert Level 1"), _cells_threshold("Alert Level 2")
    assert (alert_1, alert_2) == (2_000.0, 100_000.0)
    above_alert_1 = (yearly_max >= alert_1).sum()
    above_alert_2 = (yearly_max >= alert_2).sum()
    assert above_alert_1 >= 0.75 * len(yearly_max)
    assert 1 <= above_alert_2 <= len(yearly_max) - 3
    assert above_alert_1 < len(yearly_max)  # a quiet season, too
    # winters are quiet
    assert cells[cells.index.month.isin([1, 2, 3])].max() < alert_1


def test_net_growth_stays_within_field_rates(files):
    # net in-situ growth of about 0.1-0.4 per day (field literature, from memory)
    log_cells = np.log(files.truth["cyano_cells_per_ml"])
    rising = log_cells.diff().rolling(14).mean()
    assert 0.1 < rising.max() < 0.45


def test_write_scenario_is_deterministic_by_seed(tmp_path):
    a = scenario.write_scenario(tmp_path / "a", seasons=2, seed=7)
    b = scenario.write_scenario(tmp_path / "b", seasons=2, seed=7)
    c = scenario.write_scenario(tmp_path / "c", seasons=2, seed=8)
    for fa, fb in zip(a.weather + a.samples + [a.config], b.weather + b.samples + [b.config],
                      strict=True):
        assert fa.read_bytes() == fb.read_bytes(), fa.name
    pd.testing.assert_frame_equal(a.truth, b.truth)
    assert a.weather[0].read_bytes() != c.weather[0].read_bytes()
    assert not a.truth["cyano_cells_per_ml"].equals(c.truth["cyano_cells_per_ml"])


def test_write_scenario_needs_a_season(tmp_path):
    with pytest.raises(ValueError, match="at least 1"):
        scenario.write_scenario(tmp_path, seasons=0)


# --- the point of the tool: skill on a record the model was not built from ------------------

def test_season_blocked_forecasts_beat_climatology_and_persistence(config):
    # The scenario's blooms come from its process model, not from the forecasting model. Each
    # block of seasons forecast by models fitted on the other blocks (train's own choice of
    # family and calibration, calibrated fold by fold), at the headline horizon of 7 days: the
    # Brier score must beat the climatology of the other blocks and persistence as a probability
    # learnt from them (verification practice: Wilks, Statistical Methods in the Atmospheric
    # Sciences, ch. 8, from memory).
    from cyanorisk.model import PersistenceModel, prepare
    from cyanorisk.pipeline import SitePipeline
    from cyanorisk.training import cross_validated, fit_models, outcomes, season_blocks
    from cyanorisk.verify import brier_score

    pipeline = SitePipeline.of(config, config.sites[0])
    spec, table = pipeline.spec, pipeline.training_table()
    fitted = fit_models(spec, table)
    cv = cross_validated(spec, table, fitted)
    assert cv["season"].nunique() == 12
    X = prepare(table)
    _, o = outcomes(X, spec)
    season = fitted.choice["season"]
    persistence = np.full(len(X), np.nan)
    k, j = spec.levels.index("Alert Level 1"), spec.horizons.index(7)
    for block in season_blocks(season):
        test = np.isin(season, block)
        model = PersistenceModel(spec.levels, spec.horizons).fit(X.loc[~test, "last_level"], o[~test])
        persistence[test] = model.predict(X.loc[test, "last_level"])[:, k, j]
    by_day = pd.Series(persistence, index=X["issue_date"].to_numpy())
    p, y = cv[f"model_{k + 1}"].to_numpy(), cv[f"outcome_{k + 1}"].to_numpy()
    clim = cv[f"climatology_{k + 1}"].to_numpy()
    pers = by_day.reindex(cv["issue_date"].to_numpy()).to_numpy()
    keep = ~np.isnan(p) & ~np.isnan(clim) & ~np.isnan(pers)
    assert keep.sum() > 2000 and y[keep].sum() > 300
    model, climatology, persist = (brier_score(q[keep], y[keep]) for q in (p, clim, pers))
    assert model < 0.6 * climatology  # Brier skill above 0.4 against climatology
    assert model < 0.85 * persist  # and above 0.15 against persistence
