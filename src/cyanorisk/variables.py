"""The glossary of canonical variables, as code.

Every column cyanorisk produces carries its unit in its name. This module is the one place that
says, for each canonical weather variable, its unit, the physically plausible range used by the
range check, how readings are combined into one interval (the resample rule) and how long a gap
may be filled. The rules are data, not if-chains, so the cleaners look them up.

The plausible ranges are wide on purpose: they catch sensor faults and typing slips (a
temperature of 999, a negative rainfall), not rare weather. They are common practice, no source.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum

import pandas as pd


class Resample(StrEnum):
    """How several readings that fall into one interval are combined."""

    MEAN = "mean"
    """Arithmetic mean (state variables: temperature, speed, humidity)."""
    SUM = "sum"
    """Sum (accumulations over the interval: rainfall)."""
    CIRCULAR_MEAN = "circular_mean"
    """Mean of unit vectors, then back to an angle (directions)."""
    MAX = "max"
    """Maximum (extremes: gusts, daily maximum temperature)."""
    MIN = "min"
    """Minimum (daily minimum temperature)."""


class Fill(StrEnum):
    """How a short gap may be filled."""

    LINEAR = "linear"
    """Linear in time."""
    CIRCULAR = "circular"
    """Linear in time through the sine and cosine components, then back to an angle."""
    NEVER = "never"
    """Never filled: a gap stays unknown (accumulations)."""


@dataclass(frozen=True)
class Variable:
    """One canonical variable of the glossary."""

    name: str
    """Canonical column name, unit included (``air_temp_c``)."""
    unit: str
    """Unit in the docstring notation (``degC``, ``m s-1``)."""
    description: str
    """What the value means, in one line."""
    valid_min: float
    """Smallest plausible value [unit]; smaller values are set to NaN and flagged."""
    valid_max: float
    """Largest plausible value [unit]; larger values are set to NaN and flagged."""
    resample: Resample
    """How readings in one interval are combined."""
    fill: Fill
    """How short gaps are filled."""
    max_fill_gap: pd.Timedelta
    """Longest gap that may be filled; zero where gaps are never filled."""


def _hours(h: float) -> pd.Timedelta:
    return pd.Timedelta(hours=h)


WEATHER_VARIABLES: dict[str, Variable] = {
    v.name: v
    for v in (
        Variable("air_temp_c", "degC", "air temperature", -60.0, 60.0,
                 Resample.MEAN, Fill.LINEAR, _hours(2)),
        Variable("air_temp_min_c", "degC", "lowest air temperature in the interval (daily logs)",
                 -60.0, 60.0, Resample.MIN, Fill.NEVER, pd.Timedelta(0)),
        Variable("air_temp_max_c", "degC", "highest air temperature in the interval (daily logs)",
                 -60.0, 60.0, Resample.MAX, Fill.NEVER, pd.Timedelta(0)),
        Variable("water_temp_c", "degC", "surface water temperature", -2.0, 45.0,
                 Resample.MEAN, Fill.LINEAR, _hours(6)),
        Variable("water_temp_bottom_c", "degC",
                 "water temperature at the deeper sensor (the depth is set per site)", -2.0, 45.0,
                 Resample.MEAN, Fill.LINEAR, _hours(6)),
        Variable("wind_speed_ms", "m s-1", "mean wind speed", 0.0, 75.0,
                 Resample.MEAN, Fill.LINEAR, _hours(1)),
        Variable("wind_gust_ms", "m s-1", "highest gust in the interval", 0.0, 120.0,
                 Resample.MAX, Fill.LINEAR, _hours(1)),
        Variable("wind_dir_deg", "deg", "direction the wind blows from, clockwise from true north",
                 0.0, 360.0, Resample.CIRCULAR_MEAN, Fill.CIRCULAR, _hours(1)),
        Variable("rain_mm", "mm", "rainfall accumulated over the interval", 0.0, 300.0,
                 Resample.SUM, Fill.NEVER, pd.Timedelta(0)),
        Variable("rel_humidity_pct", "%", "relative humidity", 0.0, 100.0,
                 Resample.MEAN, Fill.LINEAR, _hours(2)),
        Variable("solar_wm2", "W m-2", "global horizontal irradiance", 0.0, 1500.0,
                 Resample.MEAN, Fill.LINEAR, _hours(1)),
        Variable("pressure_hpa", "hPa", "station air pressure", 500.0, 1100.0,
                 Resample.MEAN, Fill.LINEAR, _hours(3)),
    )
}
"""Canonical weather variables, by name."""


def weather_variable(name: str) -> Variable:
    """Look up a canonical weather variable.

    Raises
    ------
    KeyError
        With the list of valid names when ``name`` is not one of them.
    """
    try:
        return WEATHER_VARIABLES[name]
    except KeyError:
        valid = ", ".join(WEATHER_VARIABLES)
        raise KeyError(f"'{name}' is not a canonical weather variable; valid names: {valid}") from None
