"""Wind direction names and angles.

The 16-point compass (WMO-No. 8, Guide to Instruments and Methods of Observation, the convention
published by national meteorological services): N is 0 deg, each following point 22.5 deg further
clockwise, NNW is 337.5 deg. Directions are those the wind blows *from*, clockwise from true north.

Tie rule for angles to names: a point covers [bearing - 11.25, bearing + 11.25); the index is
``floor((deg + 11.25) / 22.5) mod 16``, so 11.25 deg is NNE and 348.75 deg is N.

Averages and interpolation of directions go through the unit-vector components (sine, cosine):
the mean of 350 and 10 deg is 0 deg, never 180 deg.
"""

from __future__ import annotations

import numpy as np

POINTS_16: tuple[str, ...] = (
    "N", "NNE", "NE", "ENE", "E", "ESE", "SE", "SSE",
    "S", "SSW", "SW", "WSW", "W", "WNW", "NW", "NNW",
)
"""The 16 compass points, clockwise from north."""

BEARINGS_DEG: dict[str, float] = {p: i * 22.5 for i, p in enumerate(POINTS_16)}
"""Bearing of each compass point [deg], WMO-No. 8 convention."""

CALM = "CALM"
"""Marker for calm air: speed zero, direction undefined."""
VARIABLE = "VRB"
"""Marker for a variable direction: speed known, direction undefined."""


def bearing(name: str) -> float:
    """Bearing [deg] of a 16-point compass name (case-insensitive).

    Raises
    ------
    KeyError
        With the valid names when ``name`` is not a compass point.
    """
    try:
        return BEARINGS_DEG[name.strip().upper()]
    except KeyError:
        raise KeyError(f"'{name}' is not a 16-point compass name; valid: {' '.join(POINTS_16)}") from None


def point(deg: float) -> str:
    """Nearest 16-point compass name for a bearing [deg], tie rule in the module notes."""
    return POINTS_16[int(np.floor((deg % 360.0 + 11.25) / 22.5)) % 16]


def circular_mean_deg(deg: np.ndarray, axis: int | None = None) -> np.ndarray:
    """Mean direction [deg] in [0, 360) through unit-vector components; NaN values are ignored.

    Where the components cancel (opposite directions), the mean is undefined and NaN.
    """
    rad = np.deg2rad(deg)
    s = np.nanmean(np.sin(rad), axis=axis)
    c = np.nanmean(np.cos(rad), axis=axis)
    return from_components(s, c)


def from_components(sin_part: np.ndarray, cos_part: np.ndarray) -> np.ndarray:
    """Direction [deg] in [0, 360) from sine and cosine components; NaN where both are ~0."""
    sin_part = np.asarray(sin_part, dtype=float)
    cos_part = np.asarray(cos_part, dtype=float)
    out = np.rad2deg(np.arctan2(sin_part, cos_part)) % 360.0
    undefined = np.hypot(sin_part, cos_part) < 1e-9
    return np.where(undefined, np.nan, np.round(out, 9) % 360.0)
