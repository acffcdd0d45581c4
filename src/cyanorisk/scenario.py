"""An evaluation scenario independent of the risk model: Vessany Reservoir, a fictitious
water-supply reservoir above the fictitious town of Orrindale, in a temperate northern-hemisphere
climate (warm in July; site zone ``America/New_York``).

The demo scenario (:mod:`cyanorisk.demo`) makes its blooms from the forecasting model's own
drivers. This one does not. It has three parts, each a set of pure functions:

1. **Weather** from a real record: the typical meteorological year of Miami, Florida (TMY2 file
   ``12839.tm2``, shipped in the data folder of the ``pvlib`` package), repeated over a number
   of consecutive years with year-to-year anomalies, transformed to a temperate site (see
   :func:`scenario_weather` for every transformation) and exported as the reservoir's
   station would write it (see :func:`station_export`). Miami rather than Sand Point, Alaska
   (``703165TY.csv``): its file carries a real station pressure (Sand Point's is a constant
   1012 hPa), hourly present-weather codes from which rain can be derived (Sand Point's rain
   depths are mostly missing), and moderate winds (Sand Point's, about 5 m/s on average, would
   mix any bloom away). Its seasonal temperature range is too small for a temperate lake, so the
   air temperature is rescaled around a temperate annual cycle. The station has **no water
   temperature**.
2. **Bloom dynamics** from a small process model (:func:`simulate_bloom`): a lake surface
   temperature computed from the air temperature by a first-order heat-exchange model
   (:func:`lake_surface_temperature`), growth on a cardinal-temperature curve (:func:`ctmi`)
   limited by light and by a nutrient pool that rises some days after storm runoff, losses to
   grazing, wind mixing above a stress threshold and flushing after heavy rain, a carrying
   capacity and multiplicative noise. None of these is a degree-day sum, a wind run, a count of
   calm hours or a rain or solar sum over a fixed window.
3. **Sampling** as a utility does it (:func:`sampling_schedule`): weekly from May to October,
   monthly otherwise, follow-ups after high results, counts with a measurement error split over
   taxa and typed by hand into a long-layout laboratory export in cells per litre
   (:func:`lab_sheet`).

:func:`write_scenario` writes the exports and a configuration that reads them. Everything is
deterministic by seed. Parameters marked *invented* are chosen for the scenario, not taken from
a source.

References
----------
.. [1] Rosso, L., Lobry, J. R. & Flandrois, J. P. (1993). An unexpected correlation between
   cardinal temperatures of microbial growth highlighted by a new model. J. Theor. Biol. 162,
   447-463.
.. [2] J. Plankton Res. 40(1) (2018): a cardinal-temperature model of Microcystis growth with an
   optimum of 27.5 degC.
.. [3] Piccolroaz, S., Toffolon, M. & Majone, B. (2013). A simple lumped model to convert air
   temperature into surface water temperature in lakes. Hydrol. Earth Syst. Sci. 17, 3323-3338.
.. [4] Webster, I. T. & Hutchinson, P. A. (1994). Effect of wind on the distribution of
   phytoplankton cells in lakes revisited. Limnol. Oceanogr. 39, 365-373.
.. [5] Allen, R. G., Pereira, L. S., Raes, D. & Smith, M. (1998). Crop evapotranspiration.
   FAO Irrigation and Drainage Paper 56, ch. 3, eqs. 21-25.
.. [6] Marion, W. & Urban, K. (1995). User's manual for TMY2s. NREL. doi:10.2172/87130.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd

from cyanorisk.units import CONVERSIONS, KNOT_MS

SITE_ID = "vessany"
SITE_NAME = "Vessany Reservoir"
TIMEZONE = "America/New_York"
"""The site's zone. Its standard time (UTC-05:00) is the zone of the typical-year file (Miami
keeps Eastern time too), so the record needs no relabelling of hours."""
STATION_OFFSET = "-05:00"
"""The station logs local standard time all year (no daylight saving), as many loggers do."""
STANDARD_TIME = pd.Timedelta(hours=-5)
"""Local standard time minus UTC (the typical-year file's zone and the station's)."""
FIRST_YEAR = 2013
DEFAULT_SEED = 23
"""The seed of the scenario as shipped: its twelve seasons hold one quiet season (no Alert
Level 1), one with a short Alert Level 1 only, three above Alert Level 2, and Alert Level 1
only in the others."""
TYPICAL_YEAR_FILE = "12839.tm2"
SOURCE_LATITUDE_DEG = 25.8
"""Latitude of the typical-year station (Miami, from the file's header) [deg]."""
SITE_LATITUDE_DEG = 42.3
"""Latitude of the fictitious reservoir [deg] (invented)."""
SITE_ELEVATION_M = 310.0
"""Elevation of the reservoir's station [m] (invented); the source station is at 2 m."""
WARM_MONTHS = (5, 6, 7, 8, 9, 10)
"""Months of weekly sampling; monthly otherwise (the utility's programme, invented)."""
FOLLOW_UP_CELLS_PER_ML = 2_000.0
"""A result above this calls a follow-up sample: the utility's trigger, set at the WHO 1999
drinking-water Alert Level 1 (Chorus & Bartram 1999, ch. 6; ``levels.SCHEMES``)."""
DETECTION_LIMIT_CELLS_PER_ML = 100.0
"""The laboratory's detection limit per taxon [cells mL-1] (invented)."""

# ---------------------------------------------------------------------------------------------
# Weather
# ---------------------------------------------------------------------------------------------

RAIN_RATES_MM_H = {
    # present-weather position 2: rain, rain showers, freezing rain
    (2, "0"): 1.0, (2, "1"): 3.0, (2, "2"): 8.0,            # light, moderate, heavy rain
    (2, "3"): 1.5, (2, "4"): 4.5, (2, "5"): 12.0,           # light, moderate, heavy showers
    (2, "6"): 1.0, (2, "7"): 3.0, (2, "8"): 8.0,            # freezing rain
    # position 3: rain squalls, drizzle, freezing drizzle
    (3, "0"): 2.0, (3, "1"): 6.0, (3, "2"): 15.0,           # rain squalls
    (3, "3"): 0.2, (3, "4"): 0.5, (3, "5"): 1.0,            # drizzle
    (3, "6"): 0.2, (3, "7"): 0.5, (3, "8"): 1.0,            # freezing drizzle
}
"""Mean hourly rain [mm h-1] by present-weather position and digit.

The meaning of the digits follows the TMY2 user's manual [6] (appendix B, from memory). pvlib
reads the 10-character field as a number; zero-padded back to 10 characters it starts with the
observation indicator, so position 1 is thunder, 2 rain, 3 drizzle and squalls. The rates are
invented, of the order of the intensity classes of weather observers (light, moderate, heavy)."""
THUNDER_FACTOR = 1.8
"""Rain in a thunderstorm hour is this many times the coded rate (invented)."""
THUNDER_ONLY_MM_H = 2.0
"""Mean rain [mm h-1] of a thunderstorm hour with no rain coded (invented)."""


def read_typical_year() -> tuple[pd.DataFrame, dict]:
    """The Miami typical meteorological year shipped with pvlib, in canonical units.

    Returns
    -------
    data : pandas.DataFrame
        8760 rows in file order (1 January, hour ending 01:00 local standard time, first):
        ``air_temp_c`` [degC], ``rel_humidity_pct`` [%], ``pressure_hpa`` [hPa],
        ``wind_dir_deg`` [deg], ``wind_speed_ms`` [m s-1], ``solar_wm2`` [W m-2] (global
        horizontal, the hour's mean), ``opaque_cloud_tenths``, ``present_weather`` (the
        10-character code, zero-padded).
    meta : dict
        The file's header, as pvlib reads it.

    Notes
    -----
    TMY2 stores temperatures and wind speeds in tenths of their unit [6]; pvlib leaves them so.
    """
    data, meta = _typical_year()
    return data.copy(), dict(meta)


@functools.cache
def _typical_year() -> tuple[pd.DataFrame, dict]:
    from pvlib.iotools import read_tmy2

    source = resources.files("pvlib") / "data" / TYPICAL_YEAR_FILE
    with resources.as_file(source) as path:
        raw, meta = read_tmy2(str(path))
    data = pd.DataFrame({
        "air_temp_c": raw["DryBulb"].to_numpy(float) / 10.0,
        "rel_humidity_pct": raw["RHum"].to_numpy(float),
        "pressure_hpa": raw["Pressure"].to_numpy(float),
        "wind_dir_deg": raw["Wdir"].to_numpy(float),
        "wind_speed_ms": raw["Wspd"].to_numpy(float) / 10.0,
        "solar_wm2": raw["GHI"].to_numpy(float),
        "opaque_cloud_tenths": raw["OpqCld"].to_numpy(float),
        "present_weather": [f"{int(v):010d}" for v in raw["PresentWeather"]],
    })
    return data, meta


def rain_from_present_weather(present_weather: np.ndarray, opaque_cloud_tenths: np.ndarray,
                              rng: np.random.Generator) -> np.ndarray:
    """Hourly rain [mm] from the present-weather codes of a file without rain depths.

    Parameters
    ----------
    present_weather : array of str
        10-character TMY2 present-weather codes.
    opaque_cloud_tenths : array
        Opaque sky cover [tenths].
    rng : numpy.random.Generator

    Notes
    -----
    A documented stochastic generator, not a measurement: an hour with rain or drizzle coded
    gets ``rate * g * (0.4 + 0.06 * cloud)`` with ``rate`` from :data:`RAIN_RATES_MM_H` (the
    larger of the two positions, times :data:`THUNDER_FACTOR` in a thunderstorm),
    ``g`` a gamma variate of mean 1 and shape 1.2 (invented) and cloud the opaque cover in
    tenths; an hour with only thunder coded gets :data:`THUNDER_ONLY_MM_H` instead of ``rate``.
    Hours without a code are dry.
    """
    codes = np.asarray(present_weather, dtype=str)
    n = len(codes)
    digits = np.frombuffer("".join(codes).encode("ascii"), dtype="S1").reshape(n, 10)
    rate = np.zeros(n)
    for (pos, digit), mm in RAIN_RATES_MM_H.items():
        rate = np.where(digits[:, pos] == digit.encode(), np.maximum(rate, mm), rate)
    thunder = digits[:, 1] != b"9"
    rate = np.where(thunder, np.where(rate > 0, rate * THUNDER_FACTOR, THUNDER_ONLY_MM_H), rate)
    gamma = rng.gamma(1.2, 1 / 1.2, n)
    return rate * gamma * (0.4 + 0.06 * np.asarray(opaque_cloud_tenths, float))


def extraterrestrial_radiation(day_of_year: np.ndarray, latitude_deg: float) -> np.ndarray:
    """Daily extraterrestrial radiation on a horizontal surface [MJ m-2 d-1].

    Notes
    -----
    FAO-56 [5] eq. 21, with the inverse relative Earth-Sun distance (eq. 23), the solar
    declination (eq. 24) and the sunset hour angle (eq. 25):
    ``Ra = 24 * 60 / pi * Gsc * dr * (ws sin(phi) sin(delta) + cos(phi) cos(delta) sin(ws))``,
    ``Gsc = 0.0820 MJ m-2 min-1``, ``dr = 1 + 0.033 cos(2 pi J / 365)``,
    ``delta = 0.409 sin(2 pi J / 365 - 1.39)``, ``ws = arccos(-tan(phi) tan(delta))``.

    Examples
    --------
    FAO-56 ch. 3, example 8 (from memory): 3 September (day 246) at 20 degS gives
    32.2 MJ m-2 d-1.

    >>> round(float(extraterrestrial_radiation(np.array([246]), -20.0)[0]), 1)
    32.2
    """
    j = np.asarray(day_of_year, dtype=float)
    phi = np.deg2rad(latitude_deg)
    dr = 1 + 0.033 * np.cos(2 * np.pi * j / 365)
    delta = 0.409 * np.sin(2 * np.pi * j / 365 - 1.39)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1.0, 1.0))
    return 24 * 60 / np.pi * 0.0820 * dr * (ws * np.sin(phi) * np.sin(delta)
                                             + np.cos(phi) * np.cos(delta) * np.sin(ws))


def annual_cycle(day_of_year: np.ndarray, mean: float, amplitude: float, warmest_day: float) -> np.ndarray:
    """A first-harmonic annual cycle ``mean + amplitude * cos(2 pi (J - warmest_day) / 365.25)``."""
    return mean + amplitude * np.cos(2 * np.pi * (np.asarray(day_of_year, float) - warmest_day) / 365.25)


TARGET_AIR_CYCLE = {"mean": 9.0, "amplitude": 12.5, "warmest_day": 203.0}
"""The site's annual cycle of daily mean air temperature [degC] (invented, a humid continental
climate: about -3.5 degC in late January, 21.5 degC in late July)."""
ANOMALY_SCALE = 1.5
"""Hourly departures from the file's own annual cycle (diurnal cycle and weather systems) are
stretched by this factor, a continental site being more variable than Miami (invented)."""
WIND_SCALE = 0.8
"""The reservoir's anemometer (10 m) reads this share of the airport's wind (invented)."""
PRESSURE_SCALE_HEIGHT_M = 8400.0
"""Scale height of the hypsometric reduction of pressure to the site's elevation [m]
(about R T / g near 15 degC; from memory)."""


def _file_cycle(typical: pd.DataFrame) -> np.ndarray:
    """The file's own annual cycle of air temperature [degC] by row: the mean and first two
    harmonics fitted by least squares to its daily means."""
    daily = typical["air_temp_c"].to_numpy().reshape(365, 24).mean(axis=1)
    j = np.arange(365) + 0.5
    w = 2 * np.pi * j / 365
    basis = np.column_stack([np.ones(365), np.cos(w), np.sin(w), np.cos(2 * w), np.sin(2 * w)])
    coef, *_ = np.linalg.lstsq(basis, daily, rcond=None)
    return np.repeat(basis @ coef, 24)


def _ar1(n: int, phi: float, sd: float, rng: np.random.Generator) -> np.ndarray:
    """An AR(1) series of stationary standard deviation ``sd``."""
    out = np.empty(n)
    e = rng.normal(0.0, sd * np.sqrt(1 - phi**2), n)
    out[0] = rng.normal(0.0, sd)
    for i in range(1, n):
        out[i] = phi * out[i - 1] + e[i]
    return out


def scenario_weather(typical: pd.DataFrame, years: int, rng: np.random.Generator,
                     first_year: int = FIRST_YEAR) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The reservoir's hourly weather over ``years`` calendar years, from the typical year.

    Transformations, in order (all parameters invented unless said):

    - **repetition with a shift**: year ``y`` reads the typical year from a random day offset
      of -20 to +20 days (circularly), so its weather systems fall on other dates each year;
      29 February repeats 28 February;
    - **air temperature**: ``T = C_site(J) + s * (T_file - C_file(J_file)) + a_y + b(t)``, with
      ``C_site`` :data:`TARGET_AIR_CYCLE`, ``C_file`` the file's own annual cycle (mean and two
      harmonics), ``s`` :data:`ANOMALY_SCALE`, ``a_y`` an AR(1) offset per year (lag-one
      correlation 0.35, standard deviation 1.1 degC) and ``b`` a slow daily AR(1) anomaly
      (0.96 per day, 1.3 degC), drawn anew each year;
    - **wind speed**: times :data:`WIND_SCALE`, a factor per year (lognormal, sd 0.12) and a
      slow daily factor (AR(1) of the log, 0.9 per day, sd 0.15); direction as in the file;
    - **rain**: from the present-weather codes (:func:`rain_from_present_weather`), drawn anew
      each year, times a factor per year (lognormal, sd 0.35);
    - **solar**: global horizontal irradiance times the ratio of the extraterrestrial radiation
      at the site's latitude on the output day to that at Miami on the source day (FAO-56 [5]),
      so winter days are darker; the hourly shape of each day stays Miami's;
    - **pressure**: reduced to the site's elevation, ``p * exp(-z / H)`` with ``H``
      :data:`PRESSURE_SCALE_HEIGHT_M`; relative humidity as in the file.

    Returns
    -------
    weather : pandas.DataFrame
        Hourly, indexed by the UTC start of each hour; canonical columns ``air_temp_c``,
        ``rel_humidity_pct``, ``pressure_hpa``, ``wind_dir_deg``, ``wind_speed_ms``,
        ``rain_mm``, ``solar_wm2``.
    anomalies : pandas.DataFrame
        One row per year: ``shift_days``, ``temp_offset_c``, ``wind_factor``, ``rain_factor``.
    """
    file_cycle = _file_cycle(typical)
    cols = {k: typical[k].to_numpy() for k in ("air_temp_c", "rel_humidity_pct", "pressure_hpa",
                                               "wind_dir_deg", "wind_speed_ms", "solar_wm2",
                                               "opaque_cloud_tenths")}
    codes = typical["present_weather"].to_numpy()
    ra_source = extraterrestrial_radiation(np.arange(1, 366), SOURCE_LATITUDE_DEG)
    offsets = _ar1(years, 0.35, 1.1, rng)
    parts, rows = [], []
    for k in range(years):
        year = first_year + k
        days = pd.date_range(f"{year}-01-01", f"{year}-12-31", freq="D")
        doy = days.day_of_year.to_numpy()
        leap = days.is_leap_year[0]
        doy365 = np.where(leap & (doy >= 60), doy - 1, doy)  # 29 Feb repeats 28 Feb
        shift = int(rng.integers(-20, 21))
        src_day = (doy365 - 1 + shift) % 365
        pos = (src_day[:, None] * 24 + np.arange(24)[None, :]).ravel()
        n_days = len(days)
        slow_t = np.repeat(_ar1(n_days, 0.96, 1.3, rng), 24)
        wind_year = float(rng.lognormal(0.0, 0.12))
        slow_w = np.repeat(np.exp(_ar1(n_days, 0.9, 0.15, rng)), 24)
        rain_year = float(rng.lognormal(0.0, 0.35))
        hour_doy = np.repeat(doy, 24) + (np.tile(np.arange(24), n_days) + 0.5) / 24
        air = (annual_cycle(hour_doy, **TARGET_AIR_CYCLE)
               + ANOMALY_SCALE * (cols["air_temp_c"][pos] - file_cycle[pos]) + offsets[k] + slow_t)
        ratio = np.repeat(extraterrestrial_radiation(doy, SITE_LATITUDE_DEG) / ra_source[src_day], 24)
        start_lst = pd.Timestamp(f"{year}-01-01") + pd.to_timedelta(np.arange(n_days * 24), unit="h")
        index = (start_lst - STANDARD_TIME).tz_localize("UTC")
        parts.append(pd.DataFrame({
            "air_temp_c": air,
            "rel_humidity_pct": cols["rel_humidity_pct"][pos],
            "pressure_hpa": cols["pressure_hpa"][pos] * np.exp(-SITE_ELEVATION_M / PRESSURE_SCALE_HEIGHT_M),
            "wind_dir_deg": cols["wind_dir_deg"][pos],
            "wind_speed_ms": cols["wind_speed_ms"][pos] * WIND_SCALE * wind_year * slow_w,
            "rain_mm": rain_from_present_weather(codes[pos], cols["opaque_cloud_tenths"][pos], rng)
            * rain_year,
            "solar_wm2": cols["solar_wm2"][pos] * ratio,
        }, index=index))
        rows.append({"year": year, "shift_days": shift, "temp_offset_c": float(offsets[k]),
                     "wind_factor": wind_year, "rain_factor": rain_year})
    return pd.concat(parts), pd.DataFrame(rows).set_index("year")


def daily_weather(weather: pd.DataFrame) -> pd.DataFrame:
    """Daily means and sums of the hourly weather, by local standard-time day.

    Returns ``air_temp_c`` and ``solar_wm2`` (means), ``wind_stress_pa`` (mean of the hourly
    stress, :func:`wind_stress`) and ``rain_mm`` (sum), indexed by date.
    """
    lst = weather.index.tz_convert(None) + STANDARD_TIME
    frame = weather.assign(wind_stress_pa=wind_stress(weather["wind_speed_ms"].to_numpy()))
    frame.index = lst
    return frame.resample("D").agg({"air_temp_c": "mean", "solar_wm2": "mean",
                                    "wind_stress_pa": "mean", "rain_mm": "sum"})


# ---------------------------------------------------------------------------------------------
# Bloom dynamics
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class BloomParameters:
    """Parameters of :func:`simulate_bloom`. Invented for the scenario unless a source is named."""

    equilibrium_intercept_c: float = 2.0
    """Lake temperature in equilibrium with an air temperature of 0 degC [degC]."""
    equilibrium_slope: float = 0.95
    """Rise of the equilibrium lake temperature per degC of air temperature [-]."""
    tau_mixed_days: float = 22.0
    """Relaxation time of a fully mixed lake [d]."""
    tau_stratified_days: float = 7.0
    """Relaxation time of a thin summer surface layer [d]."""
    stratification_c: float = 14.0
    """Lake temperature half-way between mixed and stratified response [degC]."""
    stratification_width_c: float = 2.5
    """Width of that transition [degC]."""
    t_min_c: float = 10.0
    """CTMI minimum temperature [degC] (invented, below the 15 degC under which Microcystis is
    severely limited, Robarts & Zohary 1987, NZ J. Mar. Freshw. Res. 21:391-399)."""
    t_opt_c: float = 27.5
    """CTMI optimum [degC]: the Microcystis optimum of J. Plankton Res. 40(1) 2018 [2]."""
    t_max_c: float = 37.0
    """CTMI maximum temperature [degC]."""
    mu_opt_per_day: float = 1.1
    """Gross growth rate at the optimum temperature and saturating resources [d-1]."""
    light_half_saturation_wm2: float = 60.0
    """Daily mean global irradiance that gives half the light-saturated growth [W m-2]."""
    nutrient_base: float = 0.6
    """Nutrient index without recent runoff [mm d-1 equivalent]."""
    nutrient_half_saturation: float = 0.5
    """Nutrient index that gives half the nutrient-saturated growth [mm d-1 equivalent]."""
    nutrient_lag_shape: float = 3.0
    """Shape of the gamma kernel that delays runoff into available nutrient [-]."""
    nutrient_lag_scale_days: float = 2.5
    """Scale of that kernel [d]: the pulse peaks about 5 days after runoff."""
    carrying_capacity_cells_per_ml: float = 1.0e7
    """Density at which gross growth stops [cells mL-1] (a scum; growth slows on the log scale
    long before, see :func:`bloom_step`)."""
    basal_loss_per_day: float = 0.11
    """Grazing, sedimentation and lysis [d-1]."""
    wind_threshold_ms: float = 2.5
    """Wind speed above which mixing disperses the surface population [m s-1]: about 2-3 m/s
    (Webster & Hutchinson 1994 [4], from memory)."""
    wind_loss_per_day: float = 0.06
    """Loss per unit of relative excess wind stress [d-1]."""
    runoff_coefficient: float = 0.35
    """Share of rain that reaches the reservoir as runoff [-]."""
    recession_days: float = 4.0
    """Time constant of the catchment's linear store [d]."""
    flushing_per_mm: float = 0.03
    """Flushing loss per mm d-1 of runoff above the base [d-1 (mm d-1)-1]."""
    flushing_base_mm: float = 1.5
    """Runoff the outflow passes without flushing the surface layer [mm d-1]."""
    process_noise: float = 0.16
    """Standard deviation of the daily log-growth noise [-]."""
    noise_memory: float = 0.5
    """Lag-one autocorrelation of that noise [-]."""
    seed_cells_per_ml: float = 3.0
    """Floor of the population, kept by recruitment from the sediment [cells mL-1]."""


def lake_surface_temperature(air_temp_c: np.ndarray, params: BloomParameters = BloomParameters(),
                             initial_c: float | None = None) -> np.ndarray:
    """Daily lake surface temperature [degC] from daily mean air temperature [degC].

    Parameters
    ----------
    air_temp_c : array
        Daily mean air temperature [degC].
    params : BloomParameters
        ``equilibrium_*``, ``tau_*`` and ``stratification_*``.
    initial_c : float, optional
        Lake temperature on the first day [degC]; default: the mean equilibrium temperature of
        the first 30 days (not below 0 degC).

    Notes
    -----
    A simplified form of air2water [3]: the surface layer relaxes towards an equilibrium
    temperature ``Te = a + b * Ta`` with a time constant ``tau`` that shortens as the lake
    stratifies (in air2water the depth of the layer that exchanges heat shrinks as the surface
    warms), ``tau = tau_s + (tau_m - tau_s) / (1 + exp((Tw - Ts) / w))``. One step of a day,
    exact for forcing held over the day: ``Tw' = Te + (Tw - Te) exp(-1 / tau)``. The surface
    does not go below 0 degC (ice). With a constant ``tau`` it is a first-order linear system:
    it damps an annual cycle by ``1 / sqrt(1 + (omega tau)^2)`` and delays it by
    ``arctan(omega tau) / omega``.
    """
    p = params
    air = np.asarray(air_temp_c, dtype=float)
    target = p.equilibrium_intercept_c + p.equilibrium_slope * air
    out = np.empty(len(air))
    tw = max(float(target[:30].mean()) if initial_c is None else float(initial_c), 0.0)
    for i in range(len(air)):
        out[i] = tw
        z = np.clip((tw - p.stratification_c) / p.stratification_width_c, -50, 50)
        tau = p.tau_stratified_days + (p.tau_mixed_days - p.tau_stratified_days) / (1 + np.exp(z))
        tw = max(target[i] + (tw - target[i]) * np.exp(-1.0 / tau), 0.0)
    return out


def ctmi(temp_c: np.ndarray, t_min_c: float, t_opt_c: float, t_max_c: float,
         mu_opt: float) -> np.ndarray:
    """Cardinal temperature model with inflection (CTMI) [d-1], Rosso et al. 1993 [1].

    Notes
    -----
    For ``t_min < T < t_max``::

        mu = mu_opt (T - t_max)(T - t_min)^2 /
             ((t_opt - t_min) [(t_opt - t_min)(T - t_opt) - (t_opt - t_max)(t_opt + t_min - 2 T)])

    and 0 outside; ``mu`` is 0 at both ends and ``mu_opt`` at ``t_opt``.
    """
    t = np.asarray(temp_c, dtype=float)
    num = (t - t_max_c) * (t - t_min_c) ** 2
    den = (t_opt_c - t_min_c) * ((t_opt_c - t_min_c) * (t - t_opt_c)
                                 - (t_opt_c - t_max_c) * (t_opt_c + t_min_c - 2 * t))
    inside = (t > t_min_c) & (t < t_max_c)
    with np.errstate(divide="ignore", invalid="ignore"):
        mu = np.where(inside, mu_opt * num / np.where(den == 0, np.nan, den), 0.0)
    return np.nan_to_num(mu, nan=0.0)


def light_limitation(solar_wm2: np.ndarray, half_saturation_wm2: float) -> np.ndarray:
    """Saturating (Monod) light limitation ``I / (K + I)`` [-] of daily mean irradiance [W m-2]."""
    i = np.clip(np.asarray(solar_wm2, dtype=float), 0.0, None)
    return i / (half_saturation_wm2 + i)


def wind_stress(wind_speed_ms: np.ndarray) -> np.ndarray:
    """Wind stress on the water surface [Pa]: the quadratic bulk formula
    ``rho_air * C_D * U^2`` with ``rho_air = 1.2 kg m-3`` and ``C_D = 1.3e-3`` at 10 m
    (common practice, from memory)."""
    u = np.asarray(wind_speed_ms, dtype=float)
    return 1.2 * 1.3e-3 * u**2


def catchment_runoff(rain_mm: np.ndarray, coefficient: float, recession_days: float) -> np.ndarray:
    """Daily runoff into the reservoir [mm d-1] from daily rain [mm]: a single linear store that
    receives ``c R`` a day and releases the share ``1 - exp(-1 / k)`` of its content, ``k`` the
    ``recession_days`` (the simplest lumped rainfall-runoff model, common practice, no source)."""
    keep = np.exp(-1.0 / recession_days)
    store, out = 0.0, np.empty(len(rain_mm))
    for i, r in enumerate(np.asarray(rain_mm, dtype=float)):
        store = store + coefficient * r
        out[i] = store * (1 - keep)
        store *= keep
    return out


def nutrient_pulse(runoff_mm: np.ndarray, shape: float, scale_days: float) -> np.ndarray:
    """Runoff delayed into available nutrient [mm d-1 equivalent]: a causal convolution with a
    gamma kernel (shape ``shape``, scale ``scale_days``) that is zero on the day of the runoff
    (invented; uptake follows the load by days)."""
    lag = np.arange(1, int(np.ceil(8 * shape * scale_days)) + 1, dtype=float)
    kernel = lag ** (shape - 1) * np.exp(-lag / scale_days)
    kernel /= kernel.sum()
    full = np.convolve(np.asarray(runoff_mm, dtype=float), np.concatenate([[0.0], kernel]))
    return full[:len(runoff_mm)]


def bloom_step(cells_per_ml: float, growth_per_day: float, loss_per_day: float, noise: float,
               params: BloomParameters = BloomParameters()) -> float:
    """One day of the population [cells mL-1].

    Parameters
    ----------
    cells_per_ml : float
        Population today [cells mL-1].
    growth_per_day : float
        Gross growth rate ``mu`` of the day at low density [d-1].
    loss_per_day : float
        Losses ``m`` of the day [d-1].
    noise : float
        Log-scale noise ``e`` of the day [-].
    params : BloomParameters
        ``carrying_capacity_cells_per_ml`` (``K``) and ``seed_cells_per_ml`` (the floor).

    Notes
    -----
    ``ln N' = ln N + mu (1 - ln N / ln K) - m + e``, floored at the seed population: Gompertz
    growth (Gompertz 1825, Phil. Trans. R. Soc. 115:513-583, from memory) towards the carrying
    capacity ``K``, losses ``m`` and multiplicative noise ``e``. Growth slows as the population
    grows on the log scale, so a season's peak follows its weather rather than a run-away.
    """
    n = max(float(cells_per_ml), params.seed_cells_per_ml)
    k = params.carrying_capacity_cells_per_ml
    step = growth_per_day * (1 - np.log(n) / np.log(k)) - loss_per_day + noise
    return max(n * float(np.exp(step)), params.seed_cells_per_ml)


def simulate_bloom(daily: pd.DataFrame, rng: np.random.Generator,
                   params: BloomParameters = BloomParameters()) -> pd.DataFrame:
    """Daily cyanobacteria of the reservoir from its daily weather (:func:`daily_weather`).

    The population of day ``d`` is what a morning sample would show; it follows from day
    ``d - 1`` and that day's weather (:func:`bloom_step`), with

    - growth ``mu = ctmi(Tw) * f_I * f_N``: :func:`ctmi` of the lake surface temperature
      (:func:`lake_surface_temperature`), light limitation (:func:`light_limitation`), and a
      Monod nutrient limitation ``f_N = P / (K_P + P)`` of the index ``P = P0 +``
      :func:`nutrient_pulse` of the :func:`catchment_runoff`;
    - losses ``m = m0 + m_w max(tau / tau_c - 1, 0) + m_f max(q - q0, 0)``: basal losses, wind
      mixing above the stress ``tau_c`` of the threshold speed (:func:`wind_stress`), and
      flushing by runoff ``q`` above a base ``q0``;
    - noise ``e``: an AR(1) series of normal variates (multiplicative on the population).

    Returns columns ``air_temp_c``, ``lake_temp_c``, ``growth_per_day``, ``loss_per_day``,
    ``runoff_mm``, ``nutrient_index``, ``cyano_cells_per_ml``.
    """
    p = params
    lake = lake_surface_temperature(daily["air_temp_c"].to_numpy(), p)
    runoff = catchment_runoff(daily["rain_mm"].to_numpy(), p.runoff_coefficient, p.recession_days)
    nutrient = p.nutrient_base + nutrient_pulse(runoff, p.nutrient_lag_shape, p.nutrient_lag_scale_days)
    growth = (ctmi(lake, p.t_min_c, p.t_opt_c, p.t_max_c, p.mu_opt_per_day)
              * light_limitation(daily["solar_wm2"].to_numpy(), p.light_half_saturation_wm2)
              * nutrient / (p.nutrient_half_saturation + nutrient))
    tau_c = float(wind_stress(np.array([p.wind_threshold_ms]))[0])
    loss = (p.basal_loss_per_day
            + p.wind_loss_per_day * np.clip(daily["wind_stress_pa"].to_numpy() / tau_c - 1, 0, None)
            + p.flushing_per_mm * np.clip(runoff - p.flushing_base_mm, 0, None))
    noise = _ar1(len(daily), p.noise_memory, p.process_noise, rng)
    cells = np.empty(len(daily))
    cells[0] = p.seed_cells_per_ml
    for d in range(1, len(daily)):
        cells[d] = bloom_step(cells[d - 1], growth[d - 1], loss[d - 1], noise[d - 1], p)
    return pd.DataFrame({"air_temp_c": daily["air_temp_c"].to_numpy(), "lake_temp_c": lake,
                         "growth_per_day": growth, "loss_per_day": loss, "runoff_mm": runoff,
                         "nutrient_index": nutrient, "cyano_cells_per_ml": cells},
                        index=daily.index.rename("date"))


# ---------------------------------------------------------------------------------------------
# Sampling and the laboratory
# ---------------------------------------------------------------------------------------------


def routine_sampling_days(start: str | pd.Timestamp, end: str | pd.Timestamp,
                          warm_months: tuple[int, ...] = WARM_MONTHS, weekday: int = 1) -> pd.DatetimeIndex:
    """The utility's routine sampling days in [start, end]: every ``weekday`` (0 is Monday,
    1 Tuesday) of the ``warm_months``, and the first such weekday of every other month."""
    days = pd.date_range(pd.Timestamp(start).normalize(), pd.Timestamp(end).normalize(), freq="D")
    on = days.day_of_week == weekday
    return days[on & (days.month.isin(warm_months) | (days.day <= 7))]


def sampling_schedule(truth_cells_per_ml: pd.Series, rng: np.random.Generator, *,
                      warm_months: tuple[int, ...] = WARM_MONTHS, weekday: int = 1,
                      follow_up_above: float = FOLLOW_UP_CELLS_PER_ML,
                      error_sigma: float = 0.35) -> pd.DataFrame:
    """The samples a utility takes from a daily series of true totals, and what it measures.

    Parameters
    ----------
    truth_cells_per_ml : pandas.Series
        True cyanobacterial total by day [cells mL-1], indexed by date.
    rng : numpy.random.Generator
    warm_months, weekday
        See :func:`routine_sampling_days`.
    follow_up_above : float
        A measured total above this [cells mL-1] calls a follow-up sample (WHO 1999 Alert Level 1
        asks for more frequent sampling; Chorus & Bartram 1999, ch. 6, from memory).
    error_sigma : float
        Standard deviation of the log of the multiplicative counting error [-] (invented).

    Returns
    -------
    pandas.DataFrame
        One row per sample: ``sampled`` (date), ``kind`` ('routine' or 'follow-up'),
        ``true_cells_per_ml``, ``measured_cells_per_ml`` (true times a lognormal error).

    Notes
    -----
    The laboratory telephones a result above ``follow_up_above`` the day after sampling
    (common practice, no source) and a follow-up is taken two or three days after the high
    sample; one that falls on a weekend moves to the Monday; none is taken within a day of a
    routine sample. Follow-ups chain while results stay high.
    """
    days = truth_cells_per_ml.index
    routine = set(routine_sampling_days(days[0], days[-1], warm_months, weekday))
    pending: set[pd.Timestamp] = set()
    one = pd.Timedelta(days=1)
    rows = []
    for day, true in truth_cells_per_ml.items():
        kind = "routine" if day in routine else ("follow-up" if day in pending else None)
        if kind is None:
            continue
        measured = float(true) * float(rng.lognormal(0.0, error_sigma))
        rows.append({"sampled": day, "kind": kind, "true_cells_per_ml": float(true),
                     "measured_cells_per_ml": measured})
        if measured > follow_up_above:
            nxt = day + pd.Timedelta(days=int(rng.integers(2, 4)))
            if nxt.day_of_week >= 5:
                nxt += pd.Timedelta(days=7 - nxt.day_of_week)
            if not {nxt - one, nxt, nxt + one} & routine:
                pending.add(nxt)
    return pd.DataFrame(rows, columns=["sampled", "kind", "true_cells_per_ml", "measured_cells_per_ml"])


CYANOBACTERIA = {
    "Microcystis aeruginosa": True,
    "Dolichospermum flos-aquae": True,
    "Woronichinia naegeliana": False,
}
"""Cyanobacteria the laboratory reports, and whether the configuration marks them as known
toxin producers (Microcystis and Dolichospermum are; common practice, no source)."""
OTHER_TAXA = ("Asterionella formosa", "Ceratium hirundinella")
"""Other phytoplankton the laboratory reports (a diatom and a dinoflagellate)."""
CELL_QUOTA_UG_PER_L = 1.0e-4
"""Microcystin per toxin-producing cell per mL [ug L-1 (cells mL-1)-1], i.e. 100 fg per cell
(invented, of the order reported for Microcystis)."""
MICROCYSTIN_LIMIT_UG_PER_L = 0.3
"""The ELISA reporting limit [ug L-1] (invented)."""


def type_count(cells_per_ml: float, rng: np.random.Generator, unit: str = "cells/L",
               detection_limit_cells_per_ml: float = DETECTION_LIMIT_CELLS_PER_ML) -> str:
    """A count as a person types it into the laboratory's sheet.

    Parameters
    ----------
    cells_per_ml : float
        The count [cells mL-1].
    rng : numpy.random.Generator
    unit : {'cells/L', 'cells/mL'}
        The unit the sheet is kept in.
    detection_limit_cells_per_ml : float
        Below this the count is reported as not detected [cells mL-1].

    Returns
    -------
    str
        Below the limit: '<100000', '<100,000', '<1.0E5', 'ND' or 'n.d.' (in cells/L). Above:
        three significant digits as a plain number, with thousands separators (comma or
        space), in scientific notation, or, now and then, with a letter O typed for a zero.
        Every form is one :func:`cyanorisk.ingest.counts.parse_count` reads.
    """
    factor = 1000.0 if unit == "cells/L" else 1.0
    limit = detection_limit_cells_per_ml * factor
    if cells_per_ml < detection_limit_cells_per_ml:
        forms = [f"<{limit:.0f}", f"<{limit:,.0f}", f"<{limit:.1E}".replace("E+0", "E"), "ND", "n.d."]
        return str(forms[int(rng.choice(len(forms), p=[0.35, 0.25, 0.05, 0.3, 0.05]))])
    value = float(f"{cells_per_ml * factor:.3g}")
    style = rng.random()
    if style < 0.46:
        return f"{value:.0f}"
    if style < 0.77:
        return f"{value:,.0f}"
    if style < 0.95:
        return f"{value:.2E}".replace("E+0", "E").replace("E+", "E")
    if style < 0.985:
        return f"{value:,.0f}".replace(",", " ")
    plain = f"{value:,.0f}"
    zeros = [i for i, ch in enumerate(plain) if ch == "0" and i > 0]
    if not zeros:
        return plain
    i = zeros[int(rng.integers(len(zeros)))]
    return plain[:i] + "O" + plain[i + 1:]


BAD_COUNT_FORMS = ("grouped in twos", "exponent without digits", "stray space")
"""Typing slips the sheet carries, each of which the ingest must reject (see :func:`typing_slip`)."""


def typing_slip(cells_per_l: float, form: str) -> str:
    """A count of at least 100,000 [cells L-1] mistyped in one of :data:`BAD_COUNT_FORMS`:
    thousands grouped in twos ('23,40,000'), an exponent without digits ('2.3E') or a stray
    space ('23400 00')."""
    digits = f"{float(f'{cells_per_l:.3g}'):.0f}"
    if form == "grouped in twos":
        return f"{digits[:-5]},{digits[-5:-3]},{digits[-3:]}"
    if form == "exponent without digits":
        return f"{cells_per_l:.1E}".split("E")[0] + "E"
    if form == "stray space":
        return f"{digits[:-2]} {digits[-2:]}"
    raise ValueError(f"unknown slip {form!r}; valid: {', '.join(BAD_COUNT_FORMS)}")


LAB_COLUMNS = ["Sample ID", "Station", "Collected", "Time", "Reported", "Depth_m", "Taxon", "Count",
               "Units", "Microcystin (ug/L)", "Remarks"]
"""Columns of the laboratory's export; see the layout in :func:`scenario_config`."""


def lab_sheet(schedule: pd.DataFrame, lake_temp_c: pd.Series,
              rng: np.random.Generator) -> tuple[pd.DataFrame, dict[str, int]]:
    """The laboratory's export, long layout: one row per sample and taxon, counts in cells/L.

    Parameters
    ----------
    schedule : pandas.DataFrame
        From :func:`sampling_schedule`.
    lake_temp_c : pandas.Series
        Daily lake surface temperature [degC] (sets which cyanobacterium dominates).
    rng : numpy.random.Generator

    Returns
    -------
    sheet : pandas.DataFrame
        Text columns :data:`LAB_COLUMNS`: 'Sample ID', 'Station', 'Collected' (MM/DD/YYYY),
        'Time' (local, H:MM, sometimes blank), 'Reported' (2 to 5 days later, sometimes blank),
        'Depth_m', 'Taxon', 'Count', 'Units' ('cells/L' as typed, sometimes blank),
        'Microcystin (ug/L)' (samples above Alert Level 1 only), 'Remarks'; and '_year' for
        the export it belongs to.
    intended : dict
        What the sheet holds on purpose: ``bad_count`` (typing slips, :data:`BAD_COUNT_FORMS`)
        and ``identical_duplicates`` (a row entered twice).

    Notes
    -----
    The measured total is split among :data:`CYANOBACTERIA` by Dirichlet shares whose mean
    moves from Dolichospermum in cool water to Microcystis above about 21 degC (invented), each
    part with its own counting error (lognormal, sd 0.15, invented). Diatoms peak in spring and
    autumn, the dinoflagellate in summer (invented seasonal means).
    """
    rows = []
    seq: dict[int, int] = {}
    for s in schedule.itertuples(index=False):
        day: pd.Timestamp = s.sampled
        seq[day.year] = seq.get(day.year, 0) + 1
        temp = float(lake_temp_c.get(day, 15.0))
        micro = 0.1 + 0.75 / (1 + np.exp(-(temp - 21.0) / 2.0))
        mean = np.array([micro, 0.88 - micro, 0.12])
        shares = rng.dirichlet(20 * mean)
        cyano = s.measured_cells_per_ml * shares * rng.lognormal(0, 0.15, 3)
        spring_autumn = 900 * (np.exp(-((day.month - 4.5) / 1.2) ** 2)
                               + 0.6 * np.exp(-((day.month - 10) / 1.2) ** 2))
        others = [(30 + spring_autumn) * rng.lognormal(0, 0.5),
                  (5 + 250 * np.exp(-((day.month - 7.5) / 1.5) ** 2)) * rng.lognormal(0, 0.6)]
        toxic = sum(c for c, (_, t) in zip(cyano, CYANOBACTERIA.items(), strict=True) if t)
        mc = ""
        if s.measured_cells_per_ml >= FOLLOW_UP_CELLS_PER_ML:
            v = toxic * CELL_QUOTA_UG_PER_L * rng.lognormal(0, 0.6)
            mc = f"<{MICROCYSTIN_LIMIT_UG_PER_L:.2f}" if v < MICROCYSTIN_LIMIT_UG_PER_L else f"{v:.2f}"
        hour = int(rng.integers(8, 12))
        minute = int(rng.choice([0, 10, 15, 20, 30, 40, 45, 50]))
        remark = "follow-up" if s.kind == "follow-up" else ""
        if s.measured_cells_per_ml > 100_000 and rng.random() < 0.4:
            remark = (remark + "; " if remark else "") + "scum at intake"
        common = {
            "Sample ID": f"OWB-{day.year}-{seq[day.year]:04d}", "Station": "VSY-01",
            "Collected": f"{day:%m/%d/%Y}", "Time": f"{hour}:{minute:02d}" if rng.random() > 0.06 else "",
            "Reported": (f"{day + pd.Timedelta(days=int(rng.integers(2, 6))):%m/%d/%Y}"
                         if rng.random() > 0.07 else ""),
            "Depth_m": "0.5", "Microcystin (ug/L)": mc, "Remarks": remark, "_year": day.year}
        for taxon, cells in [*zip(CYANOBACTERIA, cyano, strict=True), *zip(OTHER_TAXA, others, strict=True)]:
            unit = str(rng.choice(["cells/L", "Cells/L", "cells per L", ""], p=[0.85, 0.06, 0.04, 0.05]))
            rows.append({**common, "Taxon": taxon, "Count": type_count(float(cells), rng),
                         "Units": unit, "_cells": float(cells)})
    sheet = pd.DataFrame(rows)
    # typing slips on counts well above the detection limit, and one row entered twice
    cells = sheet["_cells"].to_numpy()
    high = np.flatnonzero(cells > 20 * DETECTION_LIMIT_CELLS_PER_ML)
    if len(high) <= len(BAD_COUNT_FORMS):
        high = np.flatnonzero(cells >= DETECTION_LIMIT_CELLS_PER_ML)
    picks = rng.choice(high, size=len(BAD_COUNT_FORMS) + 1, replace=False)
    col = sheet.columns.get_loc("Count")
    for i, form in zip(picks[:-1], BAD_COUNT_FORMS, strict=True):
        sheet.iloc[i, col] = typing_slip(sheet["_cells"].iloc[i] * 1000, form)
    dup = int(picks[-1])
    sheet = pd.concat([sheet.iloc[:dup + 1], sheet.iloc[[dup]], sheet.iloc[dup + 1:]], ignore_index=True)
    return sheet[LAB_COLUMNS + ["_year"]], {"bad_count": len(BAD_COUNT_FORMS), "identical_duplicates": 1}


# ---------------------------------------------------------------------------------------------
# The station's export
# ---------------------------------------------------------------------------------------------

EXPORT_COLUMNS = ["TIMESTAMP", "RECORD", "AirTemp_F", "RH_pct", "WindSpd_kt", "WindDir_deg",
                  "Precip_in", "SolarRad_Wm2", "BaroPress_inHg", "BattV"]
"""Columns of the station's hourly table; see the dialect in :func:`scenario_config`."""
BUCKET_MM = 0.254
"""The rain gauge's tipping bucket: 0.01 in (25.4 mm per inch exactly)."""


def station_export(weather: pd.DataFrame, rng: np.random.Generator) -> tuple[pd.DataFrame, dict[str, int]]:
    """The hourly weather as the reservoir's station exports it: text, quirks and all.

    The dialect: comma-separated; two title lines above the header; one timestamp column
    'MM/DD/YYYY HH:MM' in local standard time (UTC-05:00, no daylight saving) marking the end
    of the hour, midnight written 24:00 of the day that ends; air temperature in degF, wind in
    knots, rain in inches (0.01 in bucket tips, so hourly amounts are whole tips and the
    totals are kept), pressure in inHg; 'M' for missing and -9999 for a sensor fault.

    Quirks: anemometer faults (runs of -9999 in speed and direction, two a year), humidity
    drop-outs ('M', one run a year), scattered 'M' in air temperature and solar; a logger
    outage a year (rows absent); a block of rows re-sent after a communications failure (rows
    repeated identically, one block a year); and two rows spoiled by hand in the middle year,
    a date that does not exist (June 31) and an 'O' typed for a zero in the air temperature.

    Returns
    -------
    export : pandas.DataFrame
        :data:`EXPORT_COLUMNS` as text, and '_year' for the file each row belongs to.
    intended : dict
        ``bad_timestamp``, ``bad_number`` (rows that must be rejected) and
        ``identical_duplicates`` (rows repeated).
    """
    end_lst = weather.index.tz_convert(None) + pd.Timedelta(hours=1) + STANDARD_TIME
    midnight = np.asarray(end_lst.hour == 0)
    day = end_lst - pd.to_timedelta(midnight.astype(int), unit="D")
    stamp = np.where(midnight, day.strftime("%m/%d/%Y 24:00"), end_lst.strftime("%m/%d/%Y %H:%M"))
    tips = np.floor(np.cumsum(weather["rain_mm"].to_numpy()) / BUCKET_MM)
    hourly_tips = np.diff(np.concatenate([[0.0], tips]))
    n = len(weather)
    w = weather

    def fmt(values: np.ndarray, spec: str) -> np.ndarray:
        return np.array([format(v, spec) for v in values], dtype=object)

    out = pd.DataFrame({
        "TIMESTAMP": stamp, "RECORD": np.arange(n).astype(str),
        "AirTemp_F": fmt(w["air_temp_c"].to_numpy() * 9 / 5 + 32, ".1f"),
        "RH_pct": fmt(w["rel_humidity_pct"].to_numpy(), ".0f"),
        "WindSpd_kt": fmt(w["wind_speed_ms"].to_numpy() / KNOT_MS, ".1f"),
        "WindDir_deg": fmt(w["wind_dir_deg"].to_numpy(), ".0f"),
        "Precip_in": fmt(hourly_tips * 0.01, ".2f"),
        "SolarRad_Wm2": fmt(w["solar_wm2"].to_numpy(), ".0f"),
        "BaroPress_inHg": fmt(w["pressure_hpa"].to_numpy() / CONVERSIONS["inHg"].scale, ".2f"),
        "BattV": fmt(rng.uniform(12.6, 13.4, n), ".2f"),
        "_year": day.year.to_numpy(),
    })
    years = np.unique(out["_year"])
    keep = np.ones(n, dtype=bool)
    repeat = np.zeros(n, dtype=int)
    protected = np.zeros(n, dtype=bool)
    for y in years:
        rows = np.flatnonzero(out["_year"].to_numpy() == y)
        lo, hi = rows[0] + 48, rows[-1] - 48
        for _ in range(2):
            s = int(rng.integers(lo, hi))
            out.iloc[s:s + int(rng.integers(6, 41)), [4, 5]] = "-9999"
        s = int(rng.integers(lo, hi))
        out.iloc[s:s + int(rng.integers(3, 13)), 3] = "M"
        for c in (2, 7):
            hit = rows[rng.random(len(rows)) < 0.0005]
            out.iloc[hit, c] = "M"
        s = int(rng.integers(lo, hi))
        keep[s:s + int(rng.integers(2, 9))] = False
        protected[s - 1:s + 10] = True
        s = int(rng.integers(lo, hi))
        while protected[s - 6:s + 1].any():
            s = int(rng.integers(lo, hi))
        repeat[s] = int(rng.integers(2, 6))  # the block ending at row s is sent again
        protected[s - repeat[s]:s + 1] = True
    middle = years[len(years) // 2]
    candidates = np.flatnonzero((out["_year"].to_numpy() == middle) & ~protected & keep
                                & (out["AirTemp_F"].str.contains("0", regex=False).to_numpy()))
    bad_stamp, bad_value = rng.choice(candidates, size=2, replace=False)
    out.iloc[bad_stamp, 0] = f"06/31/{middle} 14:00"
    text = out.iloc[bad_value, 2]
    out.iloc[bad_value, 2] = text.replace("0", "O", 1)
    order = []
    for i in np.flatnonzero(keep):
        order.append(i)
        if repeat[i]:
            order.extend(range(i - repeat[i] + 1, i + 1))
    export = out.iloc[order].reset_index(drop=True)
    return export, {"bad_timestamp": 1, "bad_number": 1, "identical_duplicates": int(repeat.sum())}


# ---------------------------------------------------------------------------------------------
# Configuration and files
# ---------------------------------------------------------------------------------------------

WEATHER_PATTERN = f"{SITE_ID}/met/{SITE_ID}_met_*.csv"
LAB_PATTERN = f"{SITE_ID}/lab/{SITE_ID}_phyto_*.csv"
WEATHER_TITLE = ("Vessany Reservoir met station VSY-MET1 (Orrindale Water Board) - hourly table\n"
                 "Times are local standard time (UTC-05:00) at the end of each hour; "
                 "M = missing; -9999 = sensor fault\n")
LAB_TITLE = ("Orrindale Water Board - Water Quality Laboratory\n"
             "Phytoplankton enumeration (Utermoehl) - LIMS export\n")


def scenario_config(seed: int) -> str:
    """The TOML configuration that reads the scenario's exports (paths relative to its folder)."""
    taxa = "\n".join(f'"{name.split()[0]}" = {{ cyanobacterium = true, toxin_producer = '
                     f'{str(toxic).lower()} }}' for name, toxic in CYANOBACTERIA.items())
    others = "\n".join(f'"{name.split()[0]}" = {{ cyanobacterium = false }}' for name in OTHER_TAXA)
    return f'''# cyanorisk configuration of the evaluation scenario: Vessany Reservoir, a fictitious
# water-supply reservoir above the fictitious town of Orrindale (cyanorisk.scenario, seed {seed}).
# The weather is the Miami typical meteorological year (TMY2, shipped with pvlib) repeated and
# transformed to a temperate site; the blooms come from a process model, not from the risk model.
root = "."
data_dir = "work"
reports_dir = "reports"
models_dir = "models"

[ingest]
bad_rows = "reject"
off_grid = "aggregate"
duplicates = "last"

# The reservoir station's hourly table: comma-separated, two title lines, one timestamp column
# month-first in local standard time (no daylight saving) at the end of each hour, US units.
[dialects.vessany_met]
separator = ","
skip_lines = 2
timestamp_column = "TIMESTAMP"
date_order = "mdy"
stamp_zone = "{STATION_OFFSET}"
stamp_marks = "end"
missing = ["M", "-9999"]

[dialects.vessany_met.columns]
RECORD = "ignore"            # the logger's record number
AirTemp_F = {{ variable = "air_temp_c", unit = "degF" }}
RH_pct = {{ variable = "rel_humidity_pct", unit = "%" }}
WindSpd_kt = {{ variable = "wind_speed_ms", unit = "knots" }}
WindDir_deg = {{ variable = "wind_dir_deg", unit = "deg" }}
Precip_in = {{ variable = "rain_mm", unit = "in" }}
SolarRad_Wm2 = {{ variable = "solar_wm2", unit = "W/m2" }}
BaroPress_inHg = {{ variable = "pressure_hpa", unit = "inHg" }}
BattV = "ignore"             # logger battery voltage

# The laboratory's LIMS export: one row per sample and taxon, counts in cells per litre.
[sample_layouts.orrindale_lims]
shape = "long"
separator = ","
skip_lines = 2
date_order = "mdy"
sample_id_column = "Sample ID"
sampled_date_column = "Collected"
sampled_time_column = "Time"
default_sample_time = "09:30"     # assumed (and flagged) when the time is blank
reported_date_column = "Reported"
depth_column = "Depth_m"
taxon_column = "Taxon"
count_column = "Count"
unit_column = "Units"
count_unit = "cells/L"            # when the unit cell is blank
microcystin_column = "Microcystin (ug/L)"
comment_column = "Remarks"
detection_limit_cells_per_ml = {DETECTION_LIMIT_CELLS_PER_ML:.0f}   # what "ND" means
duplicates = "last"

[taxa]
{taxa}
{others}

[[sites]]
id = "{SITE_ID}"
name = "{SITE_NAME}"
timezone = "{TIMEZONE}"
use = "drinking"
interval = "1h"
authority = "the Orrindale Water Board and the county health department"

[sites.weather]
files = ["{WEATHER_PATTERN}"]
dialect = "vessany_met"

[sites.samples]
files = ["{LAB_PATTERN}"]
layout = "orrindale_lims"
lab_delay_days = 4          # used when a result has no reported date

[sites.drivers]
issue_time = "07:00"
anemometer_height_m = 10.0  # wind is adjusted to 2 m (FAO-56)

[sites.alerts]
scheme = "who1999_drinking"
measures = ["cyano_cells_per_ml"]

[sites.model]
horizon_days = 7
season_start_month = 1      # northern hemisphere: seasons run January to December
'''


@dataclass(frozen=True)
class ScenarioFiles:
    """What :func:`write_scenario` wrote, and the simulated truth behind it."""

    weather: list[Path]
    """The station's exports, one per calendar year, in time order."""
    samples: list[Path]
    """The laboratory's exports, one per calendar year, in time order."""
    config: Path
    """The configuration that reads them (``scenario.toml``)."""
    hourly_weather: pd.DataFrame
    """The simulated hourly weather before export (:func:`scenario_weather`): canonical units,
    indexed by the UTC start of each hour."""
    truth: pd.DataFrame
    """Daily simulation (:func:`simulate_bloom`), indexed by local standard-time date:
    ``cyano_cells_per_ml`` [cells mL-1] is the true total a morning sample would show;
    ``lake_temp_c`` [degC] the internal lake surface temperature (not exported)."""
    schedule: pd.DataFrame
    """The samples taken (:func:`sampling_schedule`): date, kind, true and measured totals."""
    anomalies: pd.DataFrame
    """Per-year weather anomalies (:func:`scenario_weather`)."""
    intended: dict[str, dict[str, int]]
    """Deliberate flaws by export ('weather', 'samples'): rows that must be rejected, by reason,
    and rows repeated identically (``identical_duplicates``)."""


def _write(path: Path, title: str, frame: pd.DataFrame) -> None:
    """Write a CSV with a title above it, whole, and move it into place."""
    tmp = path.with_suffix(".tmp")
    with tmp.open("w", encoding="utf-8", newline="\n") as fh:
        fh.write(title)
        frame.to_csv(fh, index=False, lineterminator="\n")
    tmp.replace(path)


def write_scenario(out_dir: Path, seasons: int = 12, seed: int = DEFAULT_SEED) -> ScenarioFiles:
    """Simulate Vessany Reservoir over ``seasons`` years and write its exports and configuration.

    Parameters
    ----------
    out_dir : path
        Folder for ``scenario.toml`` and, below ``vessany/``, the station's and the
        laboratory's exports (one file per calendar year each).
    seasons : int
        Bloom seasons (calendar years from :data:`FIRST_YEAR`); at least ten is the intent.
    seed : int
        Seed of every random stream (weather, bloom, sampling, laboratory, export).

    Returns
    -------
    ScenarioFiles
    """
    if seasons < 1:
        raise ValueError("seasons must be at least 1")
    out_dir = Path(out_dir)
    weather_rng, bloom_rng, sampling_rng, lab_rng, export_rng = (
        np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(5))
    typical, _ = read_typical_year()
    weather, anomalies = scenario_weather(typical, seasons, weather_rng)
    truth = simulate_bloom(daily_weather(weather), bloom_rng)
    schedule = sampling_schedule(truth["cyano_cells_per_ml"], sampling_rng)
    sheet, lab_intended = lab_sheet(schedule, truth["lake_temp_c"], lab_rng)
    export, met_intended = station_export(weather, export_rng)
    met_dir, lab_dir = out_dir / SITE_ID / "met", out_dir / SITE_ID / "lab"
    met_dir.mkdir(parents=True, exist_ok=True)
    lab_dir.mkdir(parents=True, exist_ok=True)
    weather_files, lab_files = [], []
    for year, part in export.groupby("_year", sort=True):
        path = met_dir / f"{SITE_ID}_met_{year}.csv"
        _write(path, WEATHER_TITLE, part[EXPORT_COLUMNS])
        weather_files.append(path)
    for year, part in sheet.groupby("_year", sort=True):
        path = lab_dir / f"{SITE_ID}_phyto_{year}.csv"
        _write(path, LAB_TITLE, part[LAB_COLUMNS])
        lab_files.append(path)
    config = out_dir / "scenario.toml"
    tmp = config.with_suffix(".tmp")
    tmp.write_text(scenario_config(seed), encoding="utf-8")
    tmp.replace(config)
    return ScenarioFiles(weather_files, lab_files, config, weather, truth, schedule, anomalies,
                         {"weather": met_intended, "samples": lab_intended})
