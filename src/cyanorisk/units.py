"""Unit conversions to the canonical units of :mod:`cyanorisk.variables`.

Each source unit maps to a canonical unit through an affine conversion ``y = x * scale + offset``.
The factors and their sources:

- km/h to m/s: 1/3.6, by the SI definitions of kilometre and hour.
- knot to m/s: 1852/3600 exactly; the international nautical mile is 1852 m (International
  Hydrographic Conference 1929, adopted by the BIPM SI Brochure, 9th ed. 2019, table 8).
- mph to m/s: 0.44704 exactly; the international yard is 0.9144 m (International Yard and Pound
  Agreement 1959), so a mile is 1609.344 m.
- degF to degC: (F - 32) * 5/9 (definition of the Fahrenheit scale, NIST SP 811, 2008, B.9).
- kPa to hPa: 10; mbar to hPa: 1 (SI prefixes; 1 mbar = 1 hPa = 100 Pa).
- inHg to hPa: 33.8639 (NIST SP 811, 2008, B.9: 1 inHg (32 degF) = 3.38639 kPa).
- W/m2 and mm are already canonical; inches of rain to mm: 25.4 exactly (1959 agreement).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Conversion:
    """An affine conversion ``canonical = source * scale + offset``."""

    source: str
    """Source unit as written in a dialect."""
    canonical: str
    """Canonical unit it converts to."""
    scale: float
    """Multiplier [canonical unit per source unit]."""
    offset: float = 0.0
    """Added after scaling [canonical unit]."""


KNOT_MS = 1852.0 / 3600.0
"""One knot in metres per second, exactly (international nautical mile of 1852 m)."""
KMH_MS = 1.0 / 3.6
"""One kilometre per hour in metres per second, exactly (SI)."""
MPH_MS = 0.44704
"""One statute mile per hour in metres per second, exactly (1959 yard of 0.9144 m)."""

CONVERSIONS: dict[str, Conversion] = {
    c.source: c
    for c in (
        Conversion("m/s", "m s-1", 1.0),
        Conversion("km/h", "m s-1", KMH_MS),
        Conversion("knots", "m s-1", KNOT_MS),
        Conversion("mph", "m s-1", MPH_MS),
        Conversion("degC", "degC", 1.0),
        Conversion("degF", "degC", 5.0 / 9.0, -32.0 * 5.0 / 9.0),
        Conversion("hPa", "hPa", 1.0),
        Conversion("mbar", "hPa", 1.0),
        Conversion("kPa", "hPa", 10.0),
        Conversion("inHg", "hPa", 33.8639),
        Conversion("W/m2", "W m-2", 1.0),
        Conversion("mm", "mm", 1.0),
        Conversion("in", "mm", 25.4),
        Conversion("%", "%", 1.0),
        Conversion("deg", "deg", 1.0),
    )
}
"""Known source units, by the name a dialect uses for them."""

ALIASES: dict[str, str] = {
    "ms": "m/s", "m s-1": "m/s", "mps": "m/s",
    "kmh": "km/h", "kph": "km/h", "km h-1": "km/h",
    "kt": "knots", "kn": "knots", "knot": "knots", "kts": "knots",
    "c": "degC", "degc": "degC", "°c": "degC", "celsius": "degC",
    "f": "degF", "degf": "degF", "°f": "degF", "fahrenheit": "degF",
    "hpa": "hPa", "mb": "mbar", "millibar": "mbar", "kpa": "kPa", "inhg": "inHg",
    "w m-2": "W/m2", "w/m^2": "W/m2", "w/m2": "W/m2", "wm2": "W/m2",
    "pct": "%", "percent": "%", "degrees": "deg", "inches": "in",
}
"""Other spellings of the units above, in lower case."""

_LOWER = {name.lower(): name for name in CONVERSIONS}


def conversion(unit: str) -> Conversion:
    """Look up the conversion for a source unit, accepting common spellings.

    Raises
    ------
    KeyError
        With the list of known units when ``unit`` is not one of them.
    """
    key = unit.strip().lower()
    name = unit if unit in CONVERSIONS else _LOWER.get(key) or ALIASES.get(key, unit)
    try:
        return CONVERSIONS[name]
    except KeyError:
        raise KeyError(f"unknown unit '{unit}'; known units: {', '.join(CONVERSIONS)}") from None


def to_canonical(values: np.ndarray, unit: str, canonical: str) -> np.ndarray:
    """Convert ``values`` from ``unit`` to the ``canonical`` unit of a variable.

    Parameters
    ----------
    values : numpy.ndarray
        Values in the source unit.
    unit : str
        Source unit (a key of :data:`CONVERSIONS` or an alias).
    canonical : str
        Canonical unit of the target variable, e.g. ``'m s-1'``.

    Raises
    ------
    ValueError
        When the source unit measures another quantity than the canonical unit.
    """
    conv = conversion(unit)
    if conv.canonical != canonical:
        raise ValueError(f"unit '{unit}' cannot be converted to '{canonical}'")
    if conv.scale == 1.0 and conv.offset == 0.0:
        return values
    return values * conv.scale + conv.offset
