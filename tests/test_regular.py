"""Regular grid, off-grid aggregation and gap filling (cyanorisk.ingest.regular)."""

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from cyanorisk.ingest.quality import Flag
from cyanorisk.ingest.regular import Grid, fill_gaps, fillable_runs

STEP = pd.Timedelta("30min")


def _grid(name, values, states=None):
    v = np.asarray(values, dtype=float)
    s = np.where(np.isnan(v), Flag.MISSING, Flag.OK).astype(np.int8) if states is None else states
    t = np.arange(len(v), dtype=np.int64) * STEP.value
    return Grid(t, {name: v}, {name: s}, len(v), 0)


def test_fillable_runs_bounds_and_length():
    #            0  1  2  3  4  5  6  7  8  9
    gap = np.array([0, 3, 4, 6, 7, 8, 9])  # run at the start, a run of 2, a run of 4 to the end
    idx, before, after = fillable_runs(gap, np.ones(len(gap), bool), 10, limit=2)
    np.testing.assert_array_equal(idx, [3, 4])
    np.testing.assert_array_equal(before, [2, 2])
    np.testing.assert_array_equal(after, [5, 5])


def test_linear_fill_within_limit_and_flagged():
    # Linear interpolation in time: the values between 10 and 13 over 3 steps are 11 and 12
    # (definition of linear interpolation).
    g = _grid("air_temp_c", [10, np.nan, np.nan, 13, 14])
    fill_gaps(g, STEP)
    np.testing.assert_allclose(g.values["air_temp_c"], [10, 11, 12, 13, 14], atol=1e-12)
    assert list(g.states["air_temp_c"][1:3]) == [Flag.FILLED, Flag.FILLED]


def test_gap_longer_than_limit_stays_missing():
    # air temperature fills gaps up to 2 h: five missing half-hours (2.5 h) stay missing
    g = _grid("air_temp_c", [10] + [np.nan] * 5 + [16])
    fill_gaps(g, STEP)
    assert np.isnan(g.values["air_temp_c"][1:6]).all()
    assert (g.states["air_temp_c"][1:6] == Flag.MISSING).all()


def test_direction_fills_through_north_not_south():
    # Circular quantities are interpolated through their vector components: 350 and 10 deg
    # meet at 0 deg, never 180 (REFERENCES.md, 16-point compass row; common practice).
    g = _grid("wind_dir_deg", [350, np.nan, 10])
    fill_gaps(g, STEP)
    assert abs((g.values["wind_dir_deg"][1] + 180) % 360 - 180) < 1e-9


def test_rain_never_filled():
    # Accumulations are never interpolated; a gap stays unknown (DESIGN.md rules of the domain).
    g = _grid("rain_mm", [0.2, np.nan, 0.4])
    fill_gaps(g, STEP)
    assert np.isnan(g.values["rain_mm"][1])
    assert g.states["rain_mm"][1] == Flag.MISSING


def test_out_of_range_and_calm_cells_block_filling():
    states = np.array([Flag.OK, Flag.OUT_OF_RANGE, Flag.OK], dtype=np.int8)
    g = _grid("air_temp_c", [10, np.nan, 12], states)
    fill_gaps(g, STEP)
    assert np.isnan(g.values["air_temp_c"][1])
    states = np.array([Flag.OK, Flag.CALM, Flag.OK], dtype=np.int8)
    g = _grid("wind_dir_deg", [90, np.nan, 90], states)
    fill_gaps(g, STEP)
    assert np.isnan(g.values["wind_dir_deg"][1])


@settings(max_examples=60, deadline=None)
@given(st.lists(st.one_of(st.none(), st.floats(-20, 40)), min_size=1, max_size=60))
def test_fill_never_changes_known_values_and_stays_between_neighbours(raw):
    values = np.array([np.nan if x is None else x for x in raw])
    g = _grid("air_temp_c", values.copy())
    fill_gaps(g, STEP)
    out = g.values["air_temp_c"]
    known = ~np.isnan(values)
    np.testing.assert_array_equal(out[known], values[known])
    filled = g.states["air_temp_c"] == Flag.FILLED
    assert not (filled & known).any()
    for i in np.flatnonzero(filled):
        left = values[:i][~np.isnan(values[:i])][-1]
        right = values[i + 1:][~np.isnan(values[i + 1:])][0]
        assert min(left, right) - 1e-9 <= out[i] <= max(left, right) + 1e-9
