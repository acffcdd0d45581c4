"""Tests for cyanorisk.compass: the 16-point table, the tie rule and circular means."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from cyanorisk.compass import (
    BEARINGS_DEG,
    POINTS_16,
    bearing,
    circular_mean_deg,
    from_components,
    point,
)

# 16-point compass: N 0, NNE 22.5, ... NNW 337.5 deg, direction the wind blows from, clockwise
# from true north (REFERENCES.md weather table, WMO-No. 8 convention, status V)
COMPASS_16_WMO = {
    "N": 0.0, "NNE": 22.5, "NE": 45.0, "ENE": 67.5,
    "E": 90.0, "ESE": 112.5, "SE": 135.0, "SSE": 157.5,
    "S": 180.0, "SSW": 202.5, "SW": 225.0, "WSW": 247.5,
    "W": 270.0, "WNW": 292.5, "NW": 315.0, "NNW": 337.5,
}

angles = st.floats(min_value=-720.0, max_value=720.0, allow_nan=False)


def circular_difference(a, b):
    """Signed difference a - b [deg] folded into [-180, 180)."""
    return (np.asarray(a) - np.asarray(b) + 180.0) % 360.0 - 180.0


@pytest.mark.parametrize(("name", "deg"), COMPASS_16_WMO.items())
def test_bearing_of_each_point(name, deg):
    # REFERENCES.md weather table, WMO-No. 8 convention
    assert bearing(name) == pytest.approx(deg, abs=1e-12)
    assert point(deg) == name


def test_tables_list_the_16_points_clockwise():
    # REFERENCES.md weather table, WMO-No. 8 convention
    assert POINTS_16 == tuple(COMPASS_16_WMO)
    assert BEARINGS_DEG == pytest.approx(COMPASS_16_WMO, abs=1e-12)


@pytest.mark.parametrize("name", ["nne", " Ssw ", "nW"])
def test_bearing_is_case_insensitive(name):
    assert bearing(name) == pytest.approx(COMPASS_16_WMO[name.strip().upper()], abs=1e-12)


@given(st.sampled_from(POINTS_16), st.sampled_from([str.upper, str.lower, str.title]))
def test_point_of_bearing_is_the_name(name, spelling):
    assert point(bearing(spelling(name))) == name


@pytest.mark.parametrize(
    ("deg", "name"),
    [
        # documented tie rule floor((deg + 11.25) / 22.5) mod 16: a point covers
        # [bearing - 11.25, bearing + 11.25) (REFERENCES.md weather table suggests this rule)
        (11.25, "NNE"),
        (11.2499, "N"),
        (348.75, "N"),
        (348.7499, "NNW"),
        (360.0, "N"),
        (0.0, "N"),
        (33.75, "NE"),
        (191.25, "SSW"),
        (168.75, "S"),
        (-11.25, "N"),  # -11.25 deg is 348.75 deg
        (-11.2501, "NNW"),
        (720.0 + 11.25, "NNE"),
        (359.999999, "N"),
    ],
)
def test_tie_rule(deg, name):
    assert point(deg) == name


@given(angles)
def test_point_is_nearest_with_half_open_sectors(deg):
    # each point covers [bearing - 11.25, bearing + 11.25) (REFERENCES.md weather table)
    diff = circular_difference(deg, COMPASS_16_WMO[point(deg)])
    assert -11.25 - 1e-9 <= diff < 11.25 + 1e-9


def test_unknown_name_lists_the_16_points():
    with pytest.raises(KeyError) as info:
        bearing("NNNE")
    message = info.value.args[0]
    assert "NNNE" in message
    assert message.split("valid: ")[1].split() == list(COMPASS_16_WMO)


@pytest.mark.parametrize(
    ("degs", "expected"),
    [
        # circular mean through unit vectors: mean of 350 and 10 is 0, never 180
        # (REFERENCES.md weather table / module notes; common practice, no source)
        ([350.0, 10.0], 0.0),
        ([10.0, 350.0], 0.0),
        ([0.0, 90.0], 45.0),
        ([45.0, 135.0], 90.0),
        ([170.0, 190.0], 180.0),
        ([270.0, 0.0], 315.0),
        ([359.0, 359.0], 359.0),
        ([350.0, np.nan, 10.0], 0.0),  # NaN readings are ignored
        ([30.0], 30.0),
    ],
)
def test_circular_mean_examples(degs, expected):
    got = circular_mean_deg(np.array(degs))
    assert abs(circular_difference(got, expected)) <= 1e-9
    assert 0.0 <= got < 360.0


@pytest.mark.parametrize("degs", [[0.0, 180.0], [90.0, 270.0], [0.0, 120.0, 240.0], [45.0, 225.0]])
def test_circular_mean_of_cancelling_directions_is_nan(degs):
    # unit vectors that sum to zero have no mean direction (common practice, no source)
    assert np.isnan(circular_mean_deg(np.array(degs)))


@given(st.floats(min_value=0.0, max_value=360.0, allow_nan=False))
def test_opposite_directions_give_nan(deg):
    assert np.isnan(circular_mean_deg(np.array([deg, deg + 180.0])))


@given(st.lists(angles, min_size=1, max_size=12), angles)
def test_circular_mean_is_invariant_to_rotation(degs, rotation):
    degs = np.array(degs)
    rad = np.deg2rad(degs)
    resultant = np.hypot(np.sin(rad).mean(), np.cos(rad).mean())
    assume(resultant > 0.05)  # well away from a cancelling set, where the mean is ill-conditioned
    rotated = circular_mean_deg(degs + rotation)
    assert abs(circular_difference(rotated, circular_mean_deg(degs) + rotation)) <= 1e-6
    assert 0.0 <= rotated < 360.0


@given(st.lists(angles, min_size=2, max_size=12), st.randoms(use_true_random=False))
def test_circular_mean_does_not_depend_on_order(degs, rnd):
    rad = np.deg2rad(degs)
    assume(np.hypot(np.sin(rad).mean(), np.cos(rad).mean()) > 0.05)
    shuffled = list(degs)
    rnd.shuffle(shuffled)
    diff = circular_difference(circular_mean_deg(np.array(shuffled)), circular_mean_deg(np.array(degs)))
    assert abs(diff) <= 1e-6


def test_circular_mean_along_an_axis():
    degs = np.array([[350.0, 10.0], [80.0, 100.0], [0.0, 180.0]])
    got = circular_mean_deg(degs, axis=1)
    np.testing.assert_allclose(got[:2], [0.0, 90.0], rtol=0, atol=1e-9)
    assert np.isnan(got[2])


@pytest.mark.parametrize(
    ("sin_part", "cos_part", "expected"),
    [
        # bearing clockwise from north: east component is the sine, north the cosine
        # (REFERENCES.md weather table, WMO-No. 8 convention)
        (0.0, 1.0, 0.0),
        (1.0, 0.0, 90.0),
        (0.0, -1.0, 180.0),
        (-1.0, 0.0, 270.0),
        (-0.5, 0.5, 315.0),
        (-1e-12, 1.0, 0.0),  # rounds to 360, reported as 0
    ],
)
def test_from_components(sin_part, cos_part, expected):
    got = from_components(sin_part, cos_part)
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-9)
    assert 0.0 <= got < 360.0


def test_from_components_of_zero_vector_is_nan():
    got = from_components(np.array([0.0, 1e-12, 0.3]), np.array([0.0, -1e-12, 0.0]))
    assert np.isnan(got[0]) and np.isnan(got[1])
    np.testing.assert_allclose(got[2], 90.0, rtol=0, atol=1e-9)
