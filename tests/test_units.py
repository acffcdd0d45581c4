"""Tests for cyanorisk.units: conversion factors against their published definitions."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from cyanorisk.units import (
    ALIASES,
    CONVERSIONS,
    KMH_MS,
    KNOT_MS,
    MPH_MS,
    Conversion,
    conversion,
    to_canonical,
)

# Published conversion checks: (source unit, value, canonical unit, expected value in canonical unit).
PUBLISHED_CONVERSIONS = [
    # knot = 1852/3600 m/s exactly: international nautical mile of 1852 m
    # (REFERENCES.md weather table, status V; BIPM SI Brochure 9th ed. table 8)
    pytest.param("knots", 1.0, "m s-1", 1852.0 / 3600.0, id="knot"),
    pytest.param("knots", 3600.0, "m s-1", 1852.0, id="3600-knots-is-one-nautical-mile-per-second"),
    # km/h = 1/3.6 m/s: SI definitions of kilometre and hour (REFERENCES.md weather table, status V)
    pytest.param("km/h", 1.0, "m s-1", 1.0 / 3.6, id="kmh"),
    pytest.param("km/h", 36.0, "m s-1", 10.0, id="36-kmh"),
    # mph = 0.44704 m/s exactly: mile = 1609.344 m (International Yard and Pound Agreement 1959;
    # NIST SP 811 (2008) appendix B.9), from memory
    pytest.param("mph", 1.0, "m s-1", 0.44704, id="mph"),
    pytest.param("mph", 3600.0, "m s-1", 1609.344, id="3600-mph-is-one-mile-per-second"),
    # t/degC = (t/degF - 32)/1.8: NIST SP 811 (2008) sec. 4.2.1.1 and B.9, from memory
    pytest.param("degF", 212.0, "degC", 100.0, id="boiling-point-212F"),
    pytest.param("degF", 32.0, "degC", 0.0, id="freezing-point-32F"),
    pytest.param("degF", -40.0, "degC", -40.0, id="minus-40-is-the-same-on-both-scales"),
    pytest.param("degF", 98.6, "degC", 37.0, id="98.6F"),
    # 1 kPa = 10 hPa: SI prefixes kilo = 1e3, hecto = 1e2 (BIPM SI Brochure 9th ed. table 7), from memory
    pytest.param("kPa", 101.325, "hPa", 1013.25, id="standard-atmosphere-in-kPa"),
    # 1 mbar = 1 hPa = 100 Pa: 1 bar = 1e5 Pa (BIPM SI Brochure 9th ed. table 8), from memory
    pytest.param("mbar", 1013.25, "hPa", 1013.25, id="mbar"),
    # 1 inHg (conventional) = 3386.389 Pa: NIST SP 811 (2008) B.9, from memory
    pytest.param("inHg", 29.92, "hPa", 29.92 * 33.86389, id="inHg"),
    # 1 in = 25.4 mm exactly: International Yard and Pound Agreement 1959, from memory
    pytest.param("in", 1.0, "mm", 25.4, id="inch-of-rain"),
]


@pytest.mark.parametrize(("unit", "value", "canonical", "expected"), PUBLISHED_CONVERSIONS)
def test_published_conversions(unit, value, canonical, expected):
    got = to_canonical(np.array([value]), unit, canonical)
    # rtol 1e-5 covers the rounding of the inHg factor (33.8639 vs 33.86389); the others are exact
    np.testing.assert_allclose(got, [expected], rtol=1e-5, atol=1e-12)


def test_exact_speed_constants():
    # knot = 1852/3600 m/s exactly (REFERENCES.md weather table, international nautical mile)
    assert KNOT_MS == pytest.approx(0.5144444444444444, rel=1e-15, abs=0.0)
    # km/h = 1/3.6 m/s (REFERENCES.md weather table, SI)
    assert KMH_MS == pytest.approx(0.2777777777777778, rel=1e-15, abs=0.0)
    # mph = 0.44704 m/s exactly (1959 yard of 0.9144 m, 1760 yd per mile), from memory
    assert MPH_MS == pytest.approx(1760 * 0.9144 / 3600, rel=1e-15, abs=0.0)


@given(st.floats(min_value=-200.0, max_value=200.0, allow_nan=False))
def test_fahrenheit_follows_the_defining_formula(deg_f):
    # t/degC = (t/degF - 32)/1.8: NIST SP 811 (2008) B.9, from memory
    got = to_canonical(np.array([deg_f]), "degF", "degC")
    np.testing.assert_allclose(got, [(deg_f - 32.0) / 1.8], rtol=0, atol=1e-9)


@given(st.floats(min_value=0.0, max_value=200.0, allow_nan=False))
def test_speed_units_agree_with_each_other(speed):
    # 1 knot = 1.852 km/h exactly (nautical mile of 1852 m; REFERENCES.md weather table)
    via_knots = to_canonical(np.array([speed]), "knots", "m s-1")
    via_kmh = to_canonical(np.array([speed * 1.852]), "km/h", "m s-1")
    np.testing.assert_allclose(via_knots, via_kmh, rtol=1e-12, atol=1e-12)


def test_nan_passes_through_as_nan():
    got = to_canonical(np.array([np.nan, 50.0]), "degF", "degC")
    assert np.isnan(got[0])
    # 50 degF = 10 degC: (50 - 32)/1.8, NIST SP 811 (2008) B.9, from memory
    np.testing.assert_allclose(got[1], 10.0, rtol=0, atol=1e-12)


@pytest.mark.parametrize("unit", ["m/s", "degC", "hPa", "W/m2", "mm", "%", "deg"])
def test_canonical_units_are_unchanged(unit):
    values = np.array([-3.5, 0.0, 12.25, np.nan])
    canonical = conversion(unit).canonical
    np.testing.assert_array_equal(to_canonical(values, unit, canonical), values)


@pytest.mark.parametrize(
    ("alias", "source"),
    [
        ("kt", "knots"), ("kn", "knots"), ("KT", "knots"), ("kts", "knots"),
        ("kph", "km/h"), ("kmh", "km/h"), ("mps", "m/s"), ("m s-1", "m/s"),
        ("°F", "degF"), ("F", "degF"), ("Fahrenheit", "degF"), ("°C", "degC"), ("celsius", "degC"),
        ("mb", "mbar"), ("kpa", "kPa"), ("inhg", "inHg"), ("W m-2", "W/m2"), ("percent", "%"),
        (" kt ", "knots"),
    ],
)
def test_aliases_resolve_to_their_unit(alias, source):
    assert conversion(alias) is CONVERSIONS[source]


@pytest.mark.parametrize(
    ("spelling", "source"),
    [("Knots", "knots"), ("KNOTS", "knots"), ("MPH", "mph"), ("M/S", "m/s"), ("KM/H", "km/h"),
     ("Km/h", "km/h"), ("MBAR", "mbar"), (" knots ", "knots")],
)
def test_canonical_unit_names_are_case_and_space_insensitive(spelling, source):
    # Aliases are matched case-insensitively ('KT' works); the canonical spellings must be too,
    # otherwise 'KT' is accepted but 'KNOTS' and 'MPH' (common in US station exports) are not.
    assert conversion(spelling) is CONVERSIONS[source]


def test_every_alias_points_at_a_known_unit():
    assert set(ALIASES.values()) <= set(CONVERSIONS)
    assert all(alias == alias.lower() for alias in ALIASES)


def test_conversion_table_is_keyed_by_source():
    assert all(isinstance(c, Conversion) and key == c.source for key, c in CONVERSIONS.items())


def test_unknown_unit_names_every_known_unit():
    with pytest.raises(KeyError) as info:
        conversion("furlongs per fortnight")
    message = info.value.args[0]
    assert "furlongs per fortnight" in message
    for unit in CONVERSIONS:
        assert unit in message


def test_unknown_unit_is_refused_by_to_canonical():
    with pytest.raises(KeyError, match="known units"):
        to_canonical(np.array([1.0]), "cubits", "m s-1")


@pytest.mark.parametrize(("unit", "canonical"), [("degF", "m s-1"), ("knots", "degC"), ("kPa", "mm")])
def test_unit_of_another_quantity_is_refused(unit, canonical):
    with pytest.raises(ValueError, match=f"unit '{unit}' cannot be converted to '{canonical}'"):
        to_canonical(np.array([1.0]), unit, canonical)
