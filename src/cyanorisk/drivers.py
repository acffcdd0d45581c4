"""The glossary of bloom drivers, as code: one row per family of drivers.

Each row says how a driver is named, which canonical variable it is computed from, over which
windows (the :class:`cyanorisk.features.FeatureSettings` field that lists them), how the values
of a window are reduced to one number, its unit, a label for people, the direction in which the
literature says it moves the risk of a bloom, and the source of that direction. The feature
builder computes every row whose variable a site records, the reports take their labels and
units from here, and :data:`DEFAULT_DRIVERS` is read from the rows' defaults: adding a driver is
one row (and, for a new kind of reduction, one method of the builder).

Names carry their unit and window: ``degree_days_20c_7d`` (degree-days above 20 degC over the 7
days before the issue time), ``calm_h_7d`` (hours of calm in 7 days), ``wind_run_km_3d``.
Earlier names are still read (:func:`canonical_driver`): ``calm_hours_7d`` is ``calm_h_7d``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from enum import IntEnum, StrEnum


class Reducer(StrEnum):
    """How the values of a window become one number."""

    MEAN = "mean"
    """Mean of the window's usable values (temperatures)."""
    INTEGRAL = "integral"
    """The window's mean times its length, times ``scale`` per hour (degree-days, wind run,
    radiant energy, hours of calm): a gap is neither zero nor guessed, the mean of what was
    recorded stands for it."""
    TOTAL = "total"
    """Plain sum of the values recorded (accumulations: rain); a gap is never guessed."""
    LAGGED_TOTAL = "lagged_total"
    """Plain sum over a window that ends ``param`` days before the issue time (rain as a
    nutrient pulse that feeds growth some days later)."""
    DAYS_RUN = "days_run"
    """Consecutive whole days, up to the issue time, that were warm and calm (24-hour mean air
    temperature at or above ``warm_day_c`` and mean wind below ``calm_threshold_ms``), counted
    back at most ``window`` days [d]; a day without good readings ends the run."""
    LONGEST_RUN = "longest_run"
    """Longest run of consecutive intervals meeting a condition [h]; a gap breaks a run."""
    NONE = "none"
    """Not a window of weather: a lab result or the calendar, computed from the table."""


class Effect(IntEnum):
    """The direction in which a driver moves the risk of a bloom, as the literature gives it."""

    LOWERS = -1
    NONE = 0
    """No set direction (a correction term, the calendar)."""
    RAISES = 1


@dataclass(frozen=True)
class Driver:
    """One family of drivers of the glossary."""

    pattern: str
    """Column name, with ``{window}`` [d] and, where the family has one, ``{param}``."""
    variable: str | None
    """Canonical weather variable it is computed from; None for lab and calendar drivers."""
    reducer: Reducer
    unit: str
    """Unit of the value, in the docstring notation (``degC d``, ``km``, ``h``)."""
    label: str
    """Words for people, with the same fields as ``pattern``."""
    effect: Effect
    source: str
    """Where the direction of the effect comes from (with its status, as in REFERENCES.md)."""
    windows: str | None = None
    """The FeatureSettings field that lists the windows [d] (a tuple, or one int)."""
    param: str | None = None
    """The FeatureSettings field that lists a second parameter (degree-day bases [degC])."""
    condition: str | None = None
    """For indicator drivers: ``calm`` (speed below ``calm_threshold_ms``), or ``excess`` (the
    amount above ``param``)."""
    scale: float = 1.0
    """For :attr:`Reducer.INTEGRAL`: unit of the result per (unit of the value x hour)."""
    defaults: tuple[tuple[float | None, int | None], ...] = ()
    """(param, window) of the members that are default drivers."""
    aliases: tuple[str, ...] = ()
    """Earlier patterns of the same names."""
    kind: str = "weather"
    """'weather', 'lab' or 'calendar'."""
    estimate: str | None = None
    """Pattern of the family that stands in for this one where its variable is not recorded
    (water temperature estimated from air temperature)."""

    def name(self, window: int | None = None, param: float | None = None) -> str:
        return self.pattern.format(window=window, param=_g(param))

    def matches(self, name: str) -> dict[str, str] | None:
        """The fields of ``name`` when it is a member of this family (or an alias of one)."""
        for pattern in (self.pattern, *self.aliases):
            m = _regex(pattern).fullmatch(name)
            if m:
                return m.groupdict()
        return None


def _g(value: float | None) -> str:
    return "" if value is None else f"{value:g}"


def _regex(pattern: str) -> re.Pattern:
    text = re.escape(pattern).replace(r"\{window\}", r"(?P<window>\d+)")
    return re.compile(text.replace(r"\{param\}", r"(?P<param>-?\d+(?:\.\d+)?)"))


_WARMTH = ("warmth speeds the growth of bloom-forming cyanobacteria: Robarts & Zohary 1987, NZ J. "
           "Mar. Freshw. Res. 21:391-399 (REFERENCES.md, V)")
_CALM = ("warm, calm weather starts blooms: Kanoshina et al. 2003, Harmful Algae 2:29-41; Joehnk "
         "et al. 2008, Global Change Biol. 14:495-512 (REFERENCES.md, V)")
_MIXING = ("wind mixing breaks up surface accumulations above about 2-3 m/s: Webster & "
           "Hutchinson 1994, Limnol. Oceanogr. 39:365-373 (REFERENCES.md, from memory)")
_FLUSHING = ("heavy rain flushes and mixes a water body, lowering the risk in the short term: "
             "Reichwaldt & Ghadouani 2012, Water Research 46:1372-1393 (from memory)")
_LIGHT = ("light fuels growth in warm, stratified water: Joehnk et al. 2008 (REFERENCES.md, V)")
_ESTIMATE = ("surface water follows air temperature with a lag of days to weeks: air2water, "
             "Piccolroaz, Toffolon & Majone 2013, Hydrol. Earth Syst. Sci. 17:3323-3338, in its "
             "simplest form (REFERENCES.md, V secondary); warmth as for water temperature")
_PERSISTENCE = ("a high count now makes a high count soon more likely (persistence of blooms): "
                "common practice, no source")

_PULSE = ("runoff after heavy rain brings nutrients that feed growth days to weeks later: "
          "Reichwaldt & Ghadouani 2012, Water Research 46:1372-1393 (from memory)")
_STRATIFIED = ("a stable, stratified column keeps buoyant cyanobacteria near the light and "
               "resists mixing: Paerl & Huisman 2008, Science 320:57-58 (from memory)")
_ANNUAL = ("the annual cycle: the slow seasonal course of light, heat storage and stratification "
           "that a few weeks of weather do not carry (common practice, no source)")
_GROWTH = ("a population growing now keeps growing while conditions hold; the net specific "
           "growth rate between two counts, ln(N2/N1)/dt: Reynolds 2006, The Ecology of "
           "Phytoplankton, ch. 5 (from memory)")
_ESTABLISHED = ("a bloom under way tends to build through the warm season before it collapses: "
                "common practice, no source")

GLOSSARY: tuple[Driver, ...] = (
    Driver("degree_days_{param}c_{window}d", "air_temp_c", Reducer.INTEGRAL, "degC d",
           "warmth: degree-days above {param} degC, last {window} days", Effect.RAISES, _WARMTH,
           windows="degree_day_windows", param="base_temps_c", condition="excess",
           scale=1 / 24),
    Driver("air_temp_mean_c_{window}d", "air_temp_c", Reducer.MEAN, "degC",
           "air temperature, mean of the last {window} days", Effect.RAISES, _WARMTH,
           windows="air_temp_windows"),
    Driver("water_temp_mean_c_{window}d", "water_temp_c", Reducer.MEAN, "degC",
           "water temperature, mean of the last {window} days", Effect.RAISES, _WARMTH,
           windows="water_temp_windows", defaults=((None, 7),),
           estimate="water_temp_est_mean_c_{window}d"),
    Driver("water_temp_est_mean_c_{window}d", "water_temp_est_c", Reducer.MEAN, "degC",
           "water temperature estimated from air temperature, mean of the last {window} days",
           Effect.RAISES, _ESTIMATE, windows="water_temp_windows"),
    Driver("wind_run_km_{window}d", "wind_speed_ms", Reducer.INTEGRAL, "km",
           "wind run, last {window} days", Effect.LOWERS, _MIXING, windows="wind_run_windows",
           scale=3.6, defaults=((None, 7),)),
    Driver("calm_h_{window}d", "wind_speed_ms", Reducer.INTEGRAL, "h",
           "hours of calm, last {window} days", Effect.RAISES, _CALM, windows="calm_windows",
           condition="calm", aliases=("calm_hours_{window}d",)),
    Driver("longest_calm_h_{window}d", "wind_speed_ms", Reducer.LONGEST_RUN, "h",
           "longest calm spell, last {window} days", Effect.RAISES, _CALM,
           windows="longest_calm_window", condition="calm"),
    Driver("rain_mm_{window}d", "rain_mm", Reducer.TOTAL, "mm", "rain, last {window} days",
           Effect.LOWERS, _FLUSHING, windows="rain_windows", defaults=((None, 7),)),
    Driver("rain_mm_{window}d_lag_{param}d", "rain_mm", Reducer.LAGGED_TOTAL, "mm",
           "rain over {window} days ending {param} days ago", Effect.RAISES, _PULSE,
           windows="rain_pulse_windows", param="rain_pulse_lags_days",
           defaults=((7.0, 7),)),
    Driver("warm_calm_days_{window}d", "wind_speed_ms", Reducer.DAYS_RUN, "d",
           "consecutive warm, calm days (counted up to {window})", Effect.RAISES, _CALM,
           windows="warm_calm_window"),
    Driver("surface_bottom_diff_c_{window}d", "surface_bottom_diff_c", Reducer.MEAN, "degC",
           "surface minus bottom water temperature, mean of the last {window} days",
           Effect.RAISES, _STRATIFIED, windows="stratification_windows"),
    Driver("schmidt_stability_j_m2_{window}d", "schmidt_stability_j_m2", Reducer.MEAN, "J m-2",
           "Schmidt stability of the water column, mean of the last {window} days",
           Effect.RAISES, _STRATIFIED + "; Schmidt stability after Idso 1973, Limnol. Oceanogr. "
           "18:681-683", windows="stratification_windows"),
    Driver("solar_mj_m2_{window}d", "solar_wm2", Reducer.INTEGRAL, "MJ m-2",
           "sunshine energy, last {window} days", Effect.RAISES, _LIGHT, windows="solar_windows",
           scale=3600 / 1e6, defaults=((None, 7),)),
    Driver("last_count_log10", None, Reducer.NONE, "log10 cells mL-1",
           "last count known at issue time", Effect.RAISES, _PERSISTENCE, defaults=((None, None),),
           kind="lab"),
    Driver("last_count_censored", None, Reducer.NONE, "1 = yes",
           "last count below the detection limit", Effect.NONE,
           "a correction for counts known only as below a limit: common practice, no source",
           defaults=((None, None),), kind="lab"),
    Driver("last_count_age_days", None, Reducer.NONE, "d", "age of the last count known",
           Effect.NONE, "how far the last count can be trusted: common practice, no source",
           defaults=((None, None),), kind="lab"),
    Driver("count_growth_per_d", None, Reducer.NONE, "d-1",
           "growth rate between the last two counts known", Effect.RAISES, _GROWTH, kind="lab"),
    Driver("growth_pair_age_days", None, Reducer.NONE, "d",
           "age of the older of those two counts", Effect.NONE,
           "how far the trend of the counts can be trusted: common practice, no source",
           kind="lab"),
    Driver("days_since_level_met_d", None, Reducer.NONE, "d",
           "days since a count this season first met the lowest level", Effect.RAISES,
           _ESTABLISHED, kind="lab"),
    Driver("season_sin", None, Reducer.NONE, "-", "time of year (sine term)", Effect.NONE,
           _ANNUAL, defaults=((None, None),), kind="calendar"),
    Driver("season_cos", None, Reducer.NONE, "-", "time of year (cosine term)", Effect.NONE,
           _ANNUAL, defaults=((None, None),), kind="calendar"),
)
"""The driver families, weather first."""

DEFAULT_DRIVERS: tuple[str, ...] = tuple(d.name(window, param) for d in GLOSSARY
                                         for param, window in d.defaults)
"""Drivers a site's model uses unless its configuration names others: one per mechanism
(warmth, wind mixing, light, flushing, the nutrient pulse, the last count, the annual cycle).
Overlapping proxies of one mechanism (degree-days beside water temperature, hours of calm
beside wind run) are in the glossary but not defaults: a handful of seasons cannot tell them
apart, and a model given both learns year-to-year accidents (on the evaluation scenario of
:mod:`cyanorisk.scenario` the earlier, larger default set scored a Brier skill about 0.1 lower
on seasons it had not seen)."""


@dataclass(frozen=True)
class DriverInfo:
    """What the glossary says of one driver name."""

    name: str
    family: Driver
    window_days: int | None = None
    param: float | None = None
    label: str = field(default="")

    @property
    def unit(self) -> str:
        return self.family.unit

    @property
    def effect(self) -> Effect:
        return self.family.effect


def lookup(name: str) -> DriverInfo | None:
    """The glossary entry of a driver name (or of an earlier spelling of it); None if unknown."""
    for family in GLOSSARY:
        fields = family.matches(name)
        if fields is not None:
            window = int(fields["window"]) if "window" in fields else None
            param = float(fields["param"]) if "param" in fields else None
            canonical = family.name(window, param)
            label = family.label.format(window=window, param=_g(param))
            label = label.replace("last 1 days", "last day")  # one day, in words
            return DriverInfo(canonical, family, window, param, label)
    return None


def stand_in(name: str) -> str | None:
    """The driver that stands in for ``name`` where its variable is not recorded, if any:
    ``water_temp_mean_c_7d`` -> ``water_temp_est_mean_c_7d``."""
    info = lookup(name)
    if info is None or info.family.estimate is None:
        return None
    return info.family.estimate.format(window=info.window_days, param=_g(info.param))


def canonical_driver(name: str) -> str:
    """The current name of a driver: ``calm_hours_7d`` -> ``calm_h_7d``; unknown names as given."""
    info = lookup(name)
    return info.name if info is not None else name


def driver_label(name: str) -> str:
    """Words for a driver (a missingness indicator says so); a tidied name when unknown."""
    if name.endswith("__missing"):
        return f"{driver_label(name[:-9])} missing"
    info = lookup(name)
    return info.label if info is not None else name.replace("_", " ")
