"""Bloom drivers: one row per site and issue day, from the clean weather series.

Every driver for an issue day uses only values stamped before the issue time (the site's local
issue hour on that day): a window of N days is the N days that end at the issue time. Windows
are computed with cumulative sums over the regular grid, so a 20-year half-hourly series takes
well under a second.

Which drivers exist, their names, units and reductions are the glossary's
(:mod:`cyanorisk.drivers`). Sums over a window (degree-days, wind run, solar energy, calm
hours) are the window's mean over its usable values times its length; rain, an accumulation,
is the plain sum of the values recorded (a gap is never guessed as rain or as dry). Each
window's coverage is reported as the share of good, filled and missing values; a window whose
good share is below the configured minimum gives NaN, never a guess.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from cyanorisk.drivers import GLOSSARY, Driver, Reducer
from cyanorisk.stratification import two_sensor_stability_j_m2
from cyanorisk.timeofday import parse_hhmm

SECONDS_PER_DAY = 86_400.0
ESTIMATED_WATER = "water_temp_est_c"
BOTTOM_WATER = "water_temp_bottom_c"
DERIVED = (ESTIMATED_WATER, "surface_bottom_diff_c", "schmidt_stability_j_m2")
"""Series computed from others, not read from the station."""
"""Water temperature estimated from air temperature (not a station variable)."""


# ---------------------------------------------------------------------------------------------
# Pure functions of the domain
# ---------------------------------------------------------------------------------------------

def degree_days_single_sine(tmin_c: np.ndarray, tmax_c: np.ndarray,
                            base_c: float) -> np.ndarray:
    """Degree-days above a base temperature for a day, from its minimum and maximum [degC-day].

    The day's temperature is taken as a sine wave between ``tmin_c`` and ``tmax_c``.

    Notes
    -----
    With M = (Tmax + Tmin)/2, a = (Tmax - Tmin)/2 and t1 = asin((TL - M)/a) [rad]:

    - Tmin >= TL: DD = M - TL;
    - Tmax <= TL: DD = 0;
    - otherwise DD = ((M - TL)(pi/2 - t1) + a cos t1) / pi.

    References
    ----------
    .. [1] Baskerville, G. L. and Emin, P. (1969). Rapid estimation of heat accumulation from
       maximum and minimum temperatures. Ecology 50(3): 514-517. doi:10.2307/1933912

    Examples
    --------
    >>> float(degree_days_single_sine(7.0, 14.0, 12.0).round(3))
    0.468
    """
    tmin = np.asarray(tmin_c, dtype=float)
    tmax = np.asarray(tmax_c, dtype=float)
    mean = (tmax + tmin) / 2.0
    amp = (tmax - tmin) / 2.0
    with np.errstate(invalid="ignore", divide="ignore"):
        t1 = np.arcsin(np.clip((base_c - mean) / np.where(amp > 0, amp, np.nan), -1.0, 1.0))
        partial = ((mean - base_c) * (np.pi / 2 - t1) + amp * np.cos(t1)) / np.pi
    return np.where(tmin >= base_c, mean - base_c, np.where(tmax <= base_c, 0.0, partial))


def water_temp_from_air_c(air_c: np.ndarray, step_h: float, tau_days: float) -> np.ndarray:
    """Surface water temperature estimated from air temperature [degC], on the air series' grid.

    Notes
    -----
    air2water [1]_ writes the rate of change of the surface temperature as
    dTw/dt = (a1 + a2 Ta - a3 Tw + a5 cos(2 pi (t/ty - a6))) / delta, with up to eight
    parameters fitted per lake against measured water temperature. A station without water
    temperature has nothing to fit them to, so its simplest form is used: a1 = a5 = 0,
    delta = 1 and a2 = a3 = 1/tau, i.e. the water relaxes towards the air temperature with a
    time constant tau:

        dTw/dt = (Ta - Tw) / tau.

    Over one step dt with Ta held, Tw(t + dt) = Tw(t) + (1 - exp(-dt/tau)) (Ta - Tw(t)), an
    exponentially weighted mean of past air temperatures. A gap in the air temperature holds
    the last reading; the series starts at the first reading. The level is biased (no a1, a2
    fitted), but the model uses the estimate only through its fitted coefficient, where the lag
    and the ranking of warm spells matter, not the offset.

    References
    ----------
    .. [1] Piccolroaz, S., Toffolon, M. and Majone, B. (2013). A simple lumped model to convert
       air temperature into surface water temperature in lakes. Hydrol. Earth Syst. Sci. 17:
       3323-3338.

    Examples
    --------
    After one time constant of steady 20 degC air, water that started at 10 degC is at
    20 - 10/e:

    >>> air = np.r_[10.0, np.full(24 * 15, 20.0)]
    >>> float(np.round(water_temp_from_air_c(air, 1.0, 15.0)[-1], 3))
    16.321
    """
    air = pd.Series(np.asarray(air_c, dtype=float)).ffill().bfill()
    if not len(air) or np.isnan(air.iloc[0]):
        return np.full(len(air), np.nan)
    alpha = 1.0 - np.exp(-step_h / (24.0 * tau_days))
    # Tw[0] = Ta[0]; Tw[i] = (1 - alpha) Tw[i-1] + alpha Ta[i]: an unadjusted exponential mean
    return air.ewm(alpha=alpha, adjust=False).mean().to_numpy()


def wind_at_2m(speed_ms: np.ndarray, height_m: float) -> np.ndarray:
    """Wind speed at 2 m above ground from a reading at ``height_m`` [m s-1].

    Notes
    -----
    u2 = uz * 4.87 / ln(67.8 z - 5.42), the logarithmic profile for short grass.

    References
    ----------
    .. [1] Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration.
       FAO Irrigation and Drainage Paper 56, equation 47 and example 14.

    Examples
    --------
    >>> float(np.round(wind_at_2m(3.2, 10.0), 2))
    2.39
    """
    return np.asarray(speed_ms, dtype=float) * 4.87 / np.log(67.8 * height_m - 5.42)


def wind_run_km(mean_speed_ms: np.ndarray, hours: float) -> np.ndarray:
    """Wind run: the distance the air travels past the station [km] = speed x time.

    A steady 1 m/s for a day is 86.4 km (definition of wind run; 86 400 s x 1 m/s).
    """
    return np.asarray(mean_speed_ms, dtype=float) * hours * 3600.0 / 1000.0


def solar_energy_mj_m2(mean_irradiance_wm2: np.ndarray, hours: float) -> np.ndarray:
    """Radiant energy over a window [MJ m-2] from the mean irradiance [W m-2]: 1 W = 1 J s-1."""
    return np.asarray(mean_irradiance_wm2, dtype=float) * hours * 3600.0 / 1e6


# ---------------------------------------------------------------------------------------------
# Windows over a regular grid
# ---------------------------------------------------------------------------------------------

GOOD_FLAGS = {"ok", "aggregated", "duplicate_conflict"}
"""Flags of values read from the station (not filled, not missing)."""


@dataclass(frozen=True)
class FeatureSettings:
    """What the driver table holds. Defaults are common practice, no source, except where said."""

    issue_time: str = "06:00"
    """Local time of day (HH:MM) at which the daily forecast is issued."""
    base_temps_c: tuple[float, ...] = (15.0, 20.0)
    """Degree-day bases [degC]; Microcystis is severely limited below about 15 degC
    (Robarts & Zohary 1987)."""
    degree_day_windows: tuple[int, ...] = (1, 7, 14, 30)
    """Windows [d] of the degree-day drivers."""
    wind_run_windows: tuple[int, ...] = (1, 3, 7)
    """Windows [d] of the wind-run drivers."""
    calm_windows: tuple[int, ...] = (3, 7)
    """Windows [d] of the hours-of-calm drivers."""
    calm_threshold_ms: float = 2.0
    """Below this speed [m s-1] the surface is calm enough for scums to gather: about 2-3 m/s
    (Webster & Hutchinson 1994, from memory)."""
    longest_calm_window: int = 7
    """Window [d] of the longest calm spell."""
    rain_windows: tuple[int, ...] = (1, 3, 7, 14)
    """Windows [d] of the rain drivers."""
    air_temp_windows: tuple[int, ...] = (3, 7, 30)
    """Windows [d] of the mean air temperature drivers."""
    rain_pulse_windows: tuple[int, ...] = (7,)
    """Windows [d] of the lagged-rain (nutrient pulse) drivers."""
    rain_pulse_lags_days: tuple[float, ...] = (7.0,)
    """How long before the issue time [d] the lagged-rain windows end: runoff nutrients feed
    growth days to weeks after the rain (Reichwaldt & Ghadouani 2012, from memory)."""
    warm_day_c: float = 20.0
    """A day is warm when its mean air temperature is at least this [degC] (the base of the
    warmer degree-days; common practice, no source)."""
    warm_calm_window: int = 30
    """Longest run of warm, calm days counted [d]."""
    stratification_windows: tuple[int, ...] = (1, 7)
    """Windows [d] of the stratification drivers (where the site records two depths)."""
    surface_sensor_depth_m: float = 0.5
    """Depth of the surface water-temperature sensor [m]."""
    bottom_sensor_depth_m: float | None = None
    """Depth of the deeper water-temperature sensor [m]; needed for the Schmidt stability."""
    hypsography_depths_m: tuple[float, ...] = ()
    """Depths [m] of the reservoir's hypsography (area at each depth), shallowest first; with
    none, a cone reaching zero area just below the deeper sensor is assumed."""
    hypsography_areas_m2: tuple[float, ...] = ()
    """Horizontal areas [m2] at ``hypsography_depths_m``."""
    solar_windows: tuple[int, ...] = (7,)
    """Windows [d] of the sunshine energy drivers."""
    water_temp_windows: tuple[int, ...] = (1, 7)
    """Windows [d] of the mean water temperature drivers (measured or estimated)."""
    water_temp_tau_days: float = 15.0
    """Time constant [d] of water temperature estimated from air temperature where the station
    records none (:func:`water_temp_from_air_c`): a value for a shallow reservoir of a few
    metres; common practice, no source (deeper lakes follow the air more slowly)."""
    anemometer_height_m: float | None = None
    """When given, wind is adjusted to 2 m (FAO-56 eq. 47) before wind run and calm spells."""
    min_good_share: float = 0.8
    """A window with a smaller share of good values gives NaN."""

    def __post_init__(self) -> None:
        hour, _ = parse_hhmm(self.issue_time)
        if hour == 2:
            raise ValueError("issue_time must be outside 02:00-03:00, where daylight-saving "
                             "changes skip or repeat the hour")
        if not 0 < self.min_good_share <= 1:
            raise ValueError("min_good_share must be in (0, 1]")
        if not self.water_temp_tau_days > 0:
            raise ValueError("water_temp_tau_days must be a positive number of days")
        if len(self.hypsography_depths_m) != len(self.hypsography_areas_m2):
            raise ValueError("hypsography_depths_m and hypsography_areas_m2 must have the same "
                             "number of values")
        if self.bottom_sensor_depth_m is not None and \
                not self.bottom_sensor_depth_m > self.surface_sensor_depth_m:
            raise ValueError("bottom_sensor_depth_m must be deeper than surface_sensor_depth_m")

    def hypsography(self) -> tuple[np.ndarray, np.ndarray]:
        """Depths [m] and areas [m2] of the hypsography (a cone where none is given)."""
        if self.hypsography_depths_m:
            return (np.asarray(self.hypsography_depths_m, float),
                    np.asarray(self.hypsography_areas_m2, float))
        deepest = float(self.bottom_sensor_depth_m or 1.0) + 0.5
        return np.array([0.0, deepest]), np.array([1.0, 0.0])

    def windows(self, family: Driver) -> tuple[int, ...]:
        """The windows [d] a driver family is computed over."""
        value = getattr(self, family.windows) if family.windows else ()
        return (value,) if isinstance(value, int) else tuple(value)

    def params(self, family: Driver) -> tuple[float | None, ...]:
        return tuple(getattr(self, family.param)) if family.param else (None,)


class _Windowed:
    """Cumulative sums that answer window questions for a set of issue instants.

    ``end`` is, for each issue instant, the grid index one past the last interval that ends at
    or before it. Cumulative sums are computed once per array and reused across windows.
    """

    def __init__(self, step_h: float, end: np.ndarray, n_grid: int) -> None:
        self.step_h, self.end, self.n_grid = step_h, end, n_grid
        self._cums: dict[int, tuple[np.ndarray, np.ndarray]] = {}

    def _bounds(self, n: int) -> tuple[np.ndarray, np.ndarray]:
        """Window [start, end) of n intervals before each issue instant, clipped to the record
        (a window running past either end of the record holds fewer values, not other ones)."""
        return np.clip(self.end - n, 0, self.n_grid), np.clip(self.end, 0, self.n_grid)

    def _cum(self, values: np.ndarray) -> np.ndarray:
        hit = self._cums.get(id(values))
        if hit is None or hit[0] is not values:
            dtype = np.int64 if values.dtype == bool else np.float64
            hit = (values, np.concatenate(([0], np.cumsum(values, dtype=dtype))))
            self._cums[id(values)] = hit
        return hit[1]

    def shifted(self, intervals: int) -> _Windowed:
        """The same questions for windows ending ``intervals`` earlier."""
        other = _Windowed(self.step_h, self.end - intervals, self.n_grid)
        other._cums = self._cums  # the cumulative sums do not depend on the window's end
        return other

    def size(self, days: float) -> int:
        return int(round(days * 24 / self.step_h))

    def counts(self, mask: np.ndarray, days: int) -> tuple[np.ndarray, np.ndarray]:
        """How many of ``mask`` in each window, and which windows run past the series start."""
        n = self.size(days)
        c = self._cum(mask)
        start, end = self._bounds(n)
        return (c[end] - c[start]).astype(float), self.end < n

    def total(self, values: np.ndarray, days: int) -> np.ndarray:
        n = self.size(days)
        c = self._cum(values)
        start, end = self._bounds(n)
        return c[end] - c[start]


def issue_instants(days: pd.DatetimeIndex | Sequence, timezone: str, issue_time: str) -> pd.DatetimeIndex:
    """The UTC instant of the issue time (``HH:MM``, local) on each local day."""
    hour, minute = parse_hhmm(issue_time)
    local_days = pd.DatetimeIndex(days).tz_localize(None).normalize()
    stamps = local_days + pd.Timedelta(hours=hour, minutes=minute)
    return stamps.tz_localize(timezone, nonexistent="shift_forward", ambiguous=False).tz_convert("UTC")


@dataclass
class _Series:
    """One weather variable ready for windows: values and masks of its quality."""

    values: np.ndarray
    usable: np.ndarray
    """Not NaN."""
    good: np.ndarray
    """Read from the station (not filled)."""
    filled: np.ndarray


class FeatureBuilder:
    """Builds the daily driver table of one site from its clean weather series, computing every
    family of the driver glossary (:mod:`cyanorisk.drivers`) whose variable the site records.

    Parameters
    ----------
    settings : FeatureSettings
    timezone : str
        The site's IANA zone (issue times are local).
    """

    def __init__(self, settings: FeatureSettings | None = None, timezone: str = "UTC") -> None:
        self.settings = settings or FeatureSettings()
        self.timezone = timezone

    def transform(self, weather: pd.DataFrame,
                  days: pd.DatetimeIndex | Sequence | None = None) -> pd.DataFrame:
        """The driver table: one row per issue day (local date), named columns with units.

        Parameters
        ----------
        weather : pandas.DataFrame
            Output of :func:`cyanorisk.ingest.read_weather` (UTC grid of interval starts, flags).
        days : sequence of dates, optional
            Local dates to issue for; default every day of the series after its first day.
        """
        s = self.settings
        if not isinstance(weather.index, pd.DatetimeIndex) or weather.index.tz is None:
            raise ValueError("weather must have a time-zone-aware DatetimeIndex (UTC)")
        step = weather.index[1] - weather.index[0] if len(weather) > 1 else pd.Timedelta("30min")
        if days is None:
            local = weather.index.tz_convert(self.timezone)
            days = pd.date_range(local[0].normalize().tz_localize(None) + pd.Timedelta(days=1),
                                 local[-1].normalize().tz_localize(None), freq="D")
        days = pd.DatetimeIndex(days)
        issue = issue_instants(days, self.timezone, s.issue_time)
        # intervals [t, t + step) entirely before the issue instant
        end = np.floor(np.asarray((issue - weather.index[0]) / step)).astype(np.int64)
        win = _Windowed(step / pd.Timedelta(hours=1), end, len(weather))
        series = {v: self._series(weather, v) for v in (*_variables(), BOTTOM_WATER)
                  if v in weather}
        if "air_temp_c" in series:
            series[ESTIMATED_WATER] = self._estimated_water(series["air_temp_c"], win)
        if {"water_temp_c", "water_temp_bottom_c"} <= set(series):
            series.update(self._stratification(series["water_temp_c"],
                                               series["water_temp_bottom_c"]))
        cols: dict[str, np.ndarray] = {}
        windows_of: dict[str, set[int]] = {}
        for family in GLOSSARY:
            if family.variable not in series:
                continue
            if family.reducer is Reducer.DAYS_RUN:
                if "air_temp_c" in series:
                    for w in s.windows(family):
                        cols[family.name(w)] = self._warm_calm_days(
                            series["air_temp_c"], series["wind_speed_ms"], win, w)
                continue
            for param in s.params(family):
                values = self._per_interval(family, series[family.variable], param)
                for w in s.windows(family):
                    cols[family.name(w, param)] = self._reduce(family, series[family.variable],
                                                               values, w, win, param)
            windows_of.setdefault(family.variable, set()).update(s.windows(family))
        if "air_temp_c" not in weather and {"air_temp_min_c", "air_temp_max_c"} <= set(weather):
            self._daily_min_max(weather, win, cols)
        for var, windows in windows_of.items():
            self._coverage(cols, win, var, series[var], sorted(windows))
        out = pd.DataFrame(cols, index=pd.Index(days.date, name="issue_date"))
        out.insert(0, "issue_time_utc", issue)
        return out

    def _series(self, weather: pd.DataFrame, var: str) -> _Series:
        usable, good, filled = self._quality(weather, var)
        values = weather[var].to_numpy(dtype=float)
        if var == "wind_speed_ms" and self.settings.anemometer_height_m:
            values = wind_at_2m(values, self.settings.anemometer_height_m)
        return _Series(values, usable, good, filled)

    def _estimated_water(self, air: _Series, win: _Windowed) -> _Series:
        """Water temperature estimated from air temperature, usable once two time constants of
        air have been seen (the start value is forgotten to 1/e^2), with the air's quality."""
        values = water_temp_from_air_c(np.where(air.usable, air.values, np.nan), win.step_h,
                                       self.settings.water_temp_tau_days)
        first = np.flatnonzero(air.usable)
        warm = np.zeros(len(values), dtype=bool)
        if len(first):
            warm[first[0] + win.size(2 * self.settings.water_temp_tau_days):] = True
        usable = warm & ~np.isnan(values)
        return _Series(values, usable, air.good & usable, air.filled & usable)

    def _per_interval(self, family: Driver, x: _Series, param: float | None) -> np.ndarray:
        """The value each interval contributes to a family's windows (0 where unusable): the
        amount above the base, the calm indicator, or the value itself."""
        if family.condition == "excess":
            return np.where(x.usable, np.maximum(x.values - param, 0.0), 0.0)
        if family.condition == "calm":
            return (x.usable & (x.values < self.settings.calm_threshold_ms)).astype(float)
        return np.where(x.usable, x.values, 0.0)

    def _reduce(self, family: Driver, x: _Series, values: np.ndarray, days: int,
                win: _Windowed, param: float | None = None) -> np.ndarray:
        """One driver of a family over windows of ``days`` before each issue instant."""
        if family.reducer is Reducer.LONGEST_RUN:
            return self._longest_run(values > 0, win, days, x.good)
        if family.reducer is Reducer.TOTAL:
            return self._gate(win.total(values, days), win, x.good, days)
        if family.reducer is Reducer.LAGGED_TOTAL:
            lagged = win.shifted(win.size(param))
            return self._gate(lagged.total(values, days), lagged, x.good, days)
        mean = self._mean(win, values, x.usable, x.good, days)
        if family.reducer is Reducer.INTEGRAL:
            return mean * (24.0 * days) * family.scale
        return mean

    def _stratification(self, surface: _Series, bottom: _Series) -> dict[str, _Series]:
        """Surface minus bottom temperature [degC] and, where the deeper sensor's depth is set,
        the Schmidt stability of the two-sensor profile [J m-2] (Idso 1973), per interval."""
        s = self.settings
        usable = surface.usable & bottom.usable
        good, filled = surface.good & bottom.good, (surface.filled | bottom.filled) & usable
        diff = np.where(usable, surface.values - bottom.values, np.nan)
        out = {"surface_bottom_diff_c": _Series(diff, usable, good, filled)}
        if s.bottom_sensor_depth_m is not None:
            depths, areas = s.hypsography()
            stability = two_sensor_stability_j_m2(
                np.where(usable, surface.values, 4.0), np.where(usable, bottom.values, 4.0),
                s.surface_sensor_depth_m, s.bottom_sensor_depth_m, depths, areas)
            out["schmidt_stability_j_m2"] = _Series(np.where(usable, stability, np.nan), usable,
                                                    good, filled)
        return out

    def _warm_calm_days(self, air: _Series, wind: _Series, win: _Windowed, most: int) -> np.ndarray:
        """Consecutive warm, calm days up to each issue time [d] (:attr:`Reducer.DAYS_RUN`):
        the 24-hour windows ending 0, 1, 2 ... days before it, counted while each is warm
        (mean air temperature >= ``warm_day_c``) and calm (mean wind < ``calm_threshold_ms``);
        NaN when the day just before the issue time lacks good readings."""
        s = self.settings
        run = np.zeros(len(win.end))
        going = np.ones(len(win.end), dtype=bool)
        first = None
        air_values = np.where(air.usable, air.values, 0.0)  # one array each: cumulative sums
        wind_values = np.where(wind.usable, wind.values, 0.0)  # are cached by array
        for k in range(most):
            day = win.shifted(win.size(k))
            air_c = self._mean(day, air_values, air.usable, air.good, 1)
            wind_ms = self._mean(day, wind_values, wind.usable, wind.good, 1)
            warm_calm = (air_c >= s.warm_day_c) & (wind_ms < s.calm_threshold_ms)
            if first is None:
                first = np.isnan(air_c) | np.isnan(wind_ms)
            going &= warm_calm
            run += going
            if not going.any():
                break
        return np.where(first, np.nan, run)

    def _daily_min_max(self, weather: pd.DataFrame, win: _Windowed, cols: dict) -> None:
        """Degree-days from daily minimum and maximum only: the single-sine method per day."""
        s = self.settings
        if abs(win.step_h - 24.0) > 1e-9:
            raise ValueError("air_temp_min_c / air_temp_max_c are daily values: the site's "
                             "interval must be 1 day when air_temp_c is not recorded")
        lo, hi = self._series(weather, "air_temp_min_c"), self._series(weather, "air_temp_max_c")
        usable, good = lo.usable & hi.usable, lo.good & hi.good
        tmin, tmax = np.where(usable, lo.values, 0.0), np.where(usable, hi.values, 0.0)
        degree_days, air_mean = (next(d for d in GLOSSARY if d.pattern.startswith(p))
                                 for p in ("degree_days_", "air_temp_mean_"))
        for base in s.base_temps_c:
            dd = np.where(usable, degree_days_single_sine(tmin, tmax, base), 0.0)
            for w in s.windows(degree_days):
                cols[degree_days.name(w, base)] = self._mean(win, dd, usable, good, w) * w
        for w in s.windows(air_mean):
            cols[air_mean.name(w)] = self._mean(win, (tmin + tmax) / 2.0, usable, good, w)
        both = _Series(tmin, usable, good, lo.filled | hi.filled)
        self._coverage(cols, win, "air_temp_min_max_c", both,
                       sorted(set(s.windows(degree_days)) | set(s.windows(air_mean))))

    # helpers ---------------------------------------------------------------------------------

    @staticmethod
    def _quality(weather: pd.DataFrame, var: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Usable (not NaN), good (read from the station) and filled masks of a variable."""
        values = weather[var].to_numpy(dtype=float)
        usable = ~np.isnan(values)
        flags = weather.get(f"{var}_flag")
        if flags is None:
            return usable, usable, np.zeros(len(values), dtype=bool)
        flags = flags.astype("category")  # categorical as written by ingest, or text
        names = list(flags.cat.categories)
        codes = flags.cat.codes.to_numpy()
        good = np.isin(codes, [names.index(n) for n in GOOD_FLAGS if n in names]) & usable
        filled = codes == names.index("filled") if "filled" in names else np.zeros(len(values), bool)
        return usable, good, filled

    def _gate(self, value: np.ndarray, win: _Windowed, good: np.ndarray, days: int) -> np.ndarray:
        n_good, short = win.counts(good, days)
        n = days * 24 / win.step_h
        ok = (n_good / n >= self.settings.min_good_share) & ~short
        return np.where(ok, value, np.nan)

    def _mean(self, win: _Windowed, values: np.ndarray, usable: np.ndarray, good: np.ndarray,
              days: int) -> np.ndarray:
        n_usable, _ = win.counts(usable, days)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = win.total(values, days) / n_usable
        return self._gate(mean, win, good, days)

    def _coverage(self, cols: dict, win: _Windowed, var: str, x: _Series,
                  windows: list[int]) -> None:
        for w in windows:
            n = w * 24 / win.step_h
            n_good, _ = win.counts(x.good, w)
            n_filled, _ = win.counts(x.filled, w)
            cols[f"{var}_good_share_{w}d"] = n_good / n
            cols[f"{var}_filled_share_{w}d"] = n_filled / n
            cols[f"{var}_missing_share_{w}d"] = 1.0 - (n_good + n_filled) / n

    def _longest_run(self, calm: np.ndarray, win: _Windowed, days: int, good: np.ndarray) -> np.ndarray:
        """Longest run of calm intervals [h] inside each window (a gap breaks a run)."""
        n = win.size(days)
        idx = np.arange(len(calm))
        last_break = np.maximum.accumulate(np.where(~calm, idx, -1))
        run = np.where(calm, idx - last_break, 0)
        padded = np.concatenate((np.zeros(n, dtype=np.int64), run))
        windows = np.lib.stride_tricks.sliding_window_view(padded, n)  # windows[k] ends at k-1
        rows = windows[np.clip(win.end, 0, win.n_grid)]  # n intervals before each issue instant
        longest = np.minimum(rows, np.arange(1, n + 1)).max(axis=1)  # clip runs at window start
        return self._gate(longest * win.step_h, win, good, days)


def _variables() -> list[str]:
    """Weather variables some driver family is computed from, in glossary order."""
    return list(dict.fromkeys(d.variable for d in GLOSSARY
                              if d.variable is not None and d.variable not in DERIVED))
