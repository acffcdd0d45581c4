"""Tests for cyanorisk.variables: the glossary of canonical weather variables."""

from __future__ import annotations

import pandas as pd
import pytest

from cyanorisk.units import CONVERSIONS
from cyanorisk.variables import WEATHER_VARIABLES, Fill, Resample, Variable, weather_variable

# Unit suffix of a column name -> unit in the docstring notation (STYLE.md "Names and units":
# columns carry their unit in the name).
SUFFIX_UNITS = {"_c": "degC", "_ms": "m s-1", "_deg": "deg", "_mm": "mm", "_pct": "%",
                "_wm2": "W m-2", "_hpa": "hPa"}

# How each variable is combined over an interval and whether its gaps may be filled
# (common practice, no source: states are averaged, accumulations summed, extremes maxed,
# directions averaged as unit vectors; accumulations are never interpolated).
RULES = {
    "air_temp_c": (Resample.MEAN, Fill.LINEAR),
    # daily extremes: the lowest and highest of the readings; a missing day is not guessed
    "air_temp_min_c": (Resample.MIN, Fill.NEVER),
    "air_temp_max_c": (Resample.MAX, Fill.NEVER),
    "water_temp_c": (Resample.MEAN, Fill.LINEAR),
    "water_temp_bottom_c": (Resample.MEAN, Fill.LINEAR),
    "wind_speed_ms": (Resample.MEAN, Fill.LINEAR),
    "wind_gust_ms": (Resample.MAX, Fill.LINEAR),
    "wind_dir_deg": (Resample.CIRCULAR_MEAN, Fill.CIRCULAR),
    "rain_mm": (Resample.SUM, Fill.NEVER),
    "rel_humidity_pct": (Resample.MEAN, Fill.LINEAR),
    "solar_wm2": (Resample.MEAN, Fill.LINEAR),
    "pressure_hpa": (Resample.MEAN, Fill.LINEAR),
}


def test_glossary_names_the_expected_variables():
    assert set(WEATHER_VARIABLES) == set(RULES)
    assert all(isinstance(v, Variable) and key == v.name for key, v in WEATHER_VARIABLES.items())


@pytest.mark.parametrize("name", list(RULES))
def test_lookup_returns_the_table_entry(name):
    assert weather_variable(name) is WEATHER_VARIABLES[name]


@pytest.mark.parametrize("name", list(RULES))
def test_name_carries_the_unit(name):
    v = weather_variable(name)
    suffixes = [s for s in SUFFIX_UNITS if name.endswith(s)]
    assert len(suffixes) == 1
    assert v.unit == SUFFIX_UNITS[suffixes[0]]


@pytest.mark.parametrize("name", list(RULES))
def test_unit_is_a_canonical_unit_of_the_conversion_table(name):
    # every variable must be reachable from at least its own canonical unit
    assert weather_variable(name).unit in {c.canonical for c in CONVERSIONS.values()}


@pytest.mark.parametrize(("name", "rules"), RULES.items())
def test_resample_and_fill_rules(name, rules):
    v = weather_variable(name)
    assert (v.resample, v.fill) == rules


@pytest.mark.parametrize("name", list(RULES))
def test_fill_gap_is_zero_exactly_when_never_filled(name):
    v = weather_variable(name)
    assert isinstance(v.max_fill_gap, pd.Timedelta)
    if v.fill is Fill.NEVER:
        assert v.max_fill_gap == pd.Timedelta(0)
    else:
        assert pd.Timedelta(0) < v.max_fill_gap <= pd.Timedelta(hours=6)


@pytest.mark.parametrize("name", list(RULES))
def test_valid_range_is_ordered(name):
    v = weather_variable(name)
    assert v.valid_min < v.valid_max


@pytest.mark.parametrize(
    ("name", "low", "high"),
    [
        # relative humidity is 0-100 % by definition (common practice, no source)
        ("rel_humidity_pct", 0.0, 100.0),
        # direction 0-360 deg clockwise from true north (REFERENCES.md weather table, WMO-No. 8)
        ("wind_dir_deg", 0.0, 360.0),
        # speeds and rainfall cannot be negative (definition)
        ("wind_speed_ms", 0.0, None),
        ("wind_gust_ms", 0.0, None),
        ("rain_mm", 0.0, None),
        ("solar_wm2", 0.0, None),
    ],
)
def test_range_bounds_by_definition(name, low, high):
    v = weather_variable(name)
    assert v.valid_min == pytest.approx(low, abs=0.0)
    if high is not None:
        assert v.valid_max == pytest.approx(high, abs=0.0)


@pytest.mark.parametrize(
    ("name", "value"),
    [
        # the ranges must not reject real weather records:
        # highest air temperature 56.7 degC, Death Valley 1913 (WMO archive of extremes), from memory
        ("air_temp_c", 56.7),
        # lowest sea-level pressure 870 hPa, Typhoon Tip 1979 (WMO archive), from memory
        ("pressure_hpa", 870.0),
        # highest sea-level pressure 1083.8 hPa, Agata 1968 (WMO archive), from memory
        ("pressure_hpa", 1083.8),
        # station pressure at Lake Titicaca (about 3812 m a.s.l., from memory): 631.7 hPa by the
        # ICAO standard atmosphere, p = 1013.25 (1 - 2.25577e-5 z)^5.25588 (formula from memory)
        ("pressure_hpa", 1013.25 * (1 - 2.25577e-5 * 3812) ** 5.25588),
        # total solar irradiance 1361 W m-2 (Kopp & Lean 2011, GRL 38:L01706), from memory
        ("solar_wm2", 1361.0),
        # 5 m/s at 10 m, the FAO-56 example 14 input (REFERENCES.md weather table)
        ("wind_speed_ms", 5.0),
        # Microcystis optimum 27.5 degC (REFERENCES.md biology table)
        ("water_temp_c", 27.5),
    ],
)
def test_recorded_extremes_are_plausible(name, value):
    v = weather_variable(name)
    assert v.valid_min <= value <= v.valid_max


def test_unknown_variable_lists_the_valid_names():
    with pytest.raises(KeyError) as info:
        weather_variable("air_temp_f")
    message = info.value.args[0]
    assert "'air_temp_f'" in message
    assert message.split("valid names: ")[1].split(", ") == list(WEATHER_VARIABLES)


def test_rules_are_strings_for_configuration_files():
    assert [r.value for r in Resample] == ["mean", "sum", "circular_mean", "max", "min"]
    assert [f.value for f in Fill] == ["linear", "circular", "never"]
    assert Resample("circular_mean") is Resample.CIRCULAR_MEAN
    assert Fill("never") is Fill.NEVER
