"""From parsed rows to a regular grid: duplicates, off-grid readings and short gaps.

All steps are vectorised over rows sorted by time; the few intervals that hold more than one
reading are combined with ``numpy.ufunc.reduceat`` by each variable's resample rule
(:mod:`cyanorisk.variables`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from cyanorisk.compass import from_components
from cyanorisk.ingest.quality import Flag, Ledger
from cyanorisk.variables import WEATHER_VARIABLES, Fill, Resample


@dataclass
class Rows:
    """Parsed readings, one per raw row, before the grid."""

    t: np.ndarray
    """Stamps [ns since 1970-01-01 UTC]."""
    values: dict[str, np.ndarray]
    """Canonical values per variable."""
    states: dict[str, np.ndarray]
    """:class:`Flag` code per reading (OK, CALM, VARIABLE or OUT_OF_RANGE)."""
    file: np.ndarray
    """Index of the file each row came from."""
    line: np.ndarray
    """Physical line number of each row in its file."""
    conflict: dict[str, np.ndarray] = field(default_factory=dict)
    """Per variable, rows kept over a duplicate with another value (set by deduplicate)."""

    def take(self, index: np.ndarray) -> Rows:
        """Rows selected by a boolean mask or an index array."""
        return Rows(self.t[index], {v: a[index] for v, a in self.values.items()},
                    {v: s[index] for v, s in self.states.items()}, self.file[index],
                    self.line[index], {v: c[index] for v, c in self.conflict.items()})


@dataclass
class Grid:
    """Values on a regular grid of interval starts."""

    t: np.ndarray
    """Interval starts [ns since 1970-01-01 UTC]."""
    values: dict[str, np.ndarray]
    states: dict[str, np.ndarray]
    n_on_grid: int
    """Rows stamped on a grid point (kept)."""
    n_off_grid: int
    """Rows stamped between grid points (aggregated or dropped)."""


def _group_starts(keys: np.ndarray) -> np.ndarray:
    """Start positions of runs of equal values in a sorted array."""
    if not len(keys):
        return np.zeros(0, dtype=np.int64)
    return np.flatnonzero(np.r_[True, keys[1:] != keys[:-1]])


def deduplicate(rows: Rows, policy: str, ledger: Ledger,
                paths: list[Path]) -> tuple[np.ndarray, int, int]:
    """Order rows by time and merge rows with the same stamp.

    Rows identical in every value and state to the kept row are merged silently; others are
    superseded by the kept row (the last in file order, or the first), listed in the ledger as
    ``duplicate_conflict``, and the kept row's differing variables are flagged (in place).

    Returns the positions of the kept rows in time order (one per stamp), and the counts of
    identical and conflicting duplicates.
    """
    order = np.argsort(rows.t, kind="stable")  # equal stamps stay in file order
    ts = rows.t[order]
    same_as_next = ts[1:] == ts[:-1]
    if not same_as_next.any():
        return order, 0, 0
    involved = order[np.r_[same_as_next, False] | np.r_[False, same_as_next]]
    t = rows.t[involved]  # the few rows that share a stamp with another, in time order
    starts = _group_starts(t)
    ends = np.r_[starts[1:], len(t)] - 1
    kept_of_group = ends if policy == "last" else starts
    keep_at = kept_of_group[np.cumsum(np.r_[True, t[1:] != t[:-1]]) - 1]
    is_kept = np.arange(len(t)) == keep_at
    identical = np.ones(len(t), dtype=bool)
    for name, values in rows.values.items():
        v, s = values[involved], rows.states[name][involved]
        kv = v[keep_at]
        same = ((v == kv) | (np.isnan(v) & np.isnan(kv))) & (s == s[keep_at])
        identical &= same
        differs = np.add.reduceat((~same).astype(np.int64), starts) > 0
        if differs.any():
            conflict = rows.conflict.setdefault(name, np.zeros(len(rows.t), dtype=bool))
            conflict[involved[kept_of_group[differs]]] = True
    superseded = ~is_kept & ~identical
    for k in np.unique(rows.file[involved[superseded]]):
        sel = involved[superseded][rows.file[involved[superseded]] == k]
        winner = involved[keep_at[superseded]][rows.file[involved[superseded]] == k]
        ledger.add(str(paths[k]), rows.line[sel], "", [""] * len(sel), "duplicate_conflict",
                   [f"same stamp as {paths[f].name} line {ln} with other values; that row was kept"
                    for f, ln in zip(rows.file[winner], rows.line[winner], strict=True)])
    drop = np.zeros(len(rows.t), dtype=bool)
    drop[involved[~is_kept]] = True
    return order[~drop[order]], int((~is_kept & identical).sum()), int(superseded.sum())


def grid_origin_ns(t: np.ndarray, timezone: str, step_ns: int) -> int:
    """Offset of the grid from the epoch, so that grid points fall on local clock multiples.

    With half-hour zone offsets (e.g. +09:30) and an hourly interval, grid points then sit at
    local whole hours rather than at UTC whole hours.
    """
    if not len(t):
        return 0
    first = pd.Timestamp(int(t[0]), tz="UTC").tz_convert(timezone)
    offset_ns = int(first.utcoffset().total_seconds() * 10**9)
    return (-offset_ns) % step_ns


def to_grid(rows: Rows, idx: np.ndarray, step_ns: int, origin_ns: int, off_grid: str,
            ledger: Ledger, paths: list[Path]) -> Grid:
    """Put the rows at positions ``idx`` (time order, unique stamps) on the regular grid."""
    rel = rows.t[idx] - origin_ns
    on_grid = rel % step_ns == 0
    n_on, n_off = int(on_grid.sum()), int((~on_grid).sum())
    if off_grid == "drop" and n_off:
        off = idx[~on_grid]
        for k in np.unique(rows.file[off]):
            sel = off[rows.file[off] == k]
            ledger.add(str(paths[k]), rows.line[sel], "", [""] * len(sel), "off_grid_dropped",
                       "stamped between grid points; the configuration drops such readings")
        idx, rel = idx[on_grid], rel[on_grid]
    cell = rel // step_ns
    shared = cell[1:] == cell[:-1]
    multi_rows = np.flatnonzero(np.r_[shared, False] | np.r_[False, shared])
    lead = np.r_[True, ~shared]  # first row of each cell
    first_cell = int(cell[0]) if len(cell) else 0
    n_cells = int(cell[-1]) - first_cell + 1 if len(cell) else 0
    # One gather per variable: each grid cell reads its row; empty cells read row 0 and are
    # blanked after (they are few).
    src = np.zeros(n_cells, dtype=np.int64)
    src[cell[lead] - first_cell] = idx[lead]
    empty = np.ones(n_cells, dtype=bool)
    empty[cell[lead] - first_cell] = False
    empty = np.flatnonzero(empty)
    sub_starts = _group_starts(cell[multi_rows])
    multi_pos = cell[multi_rows][sub_starts] - first_cell
    # a cell whose one reading lies between grid points holds a reading moved, not one on the grid
    lead_pos = cell[lead] - first_cell
    moved = lead_pos[(rel[lead] % step_ns) != 0]
    cell_of_row = None  # grid position of each kept row, built only when a conflict needs it
    values, states = {}, {}
    for name, v in rows.values.items():
        full, full_state = np.take(v, src), np.take(rows.states[name], src)
        st = full_state[moved]
        full_state[moved] = np.where(st == Flag.OK, Flag.AGGREGATED, st)
        conflict = rows.conflict.get(name)
        if conflict is not None:
            if cell_of_row is None:
                cell_of_row = np.full(len(rows.t), -1, dtype=np.int64)
                cell_of_row[idx[lead]] = lead_pos
            pos = cell_of_row[np.flatnonzero(conflict)]
            pos = pos[pos >= 0]
            full_state[pos] = np.maximum(full_state[pos], Flag.DUPLICATE_CONFLICT)
        full[empty], full_state[empty] = np.nan, Flag.MISSING
        if len(multi_rows):
            at = idx[multi_rows]
            agg, agg_state = _aggregate(v[at], rows.states[name][at],
                                        None if conflict is None else conflict[at], sub_starts,
                                        WEATHER_VARIABLES[name].resample)
            full[multi_pos], full_state[multi_pos] = agg, agg_state
        full_state[np.isnan(full) & (full_state == Flag.OK)] = Flag.MISSING
        values[name], states[name] = full, full_state
    t = (first_cell + np.arange(n_cells, dtype=np.int64)) * step_ns + origin_ns
    return Grid(t, values, states, n_on, n_off)


def _aggregate(v: np.ndarray, s: np.ndarray, conflict: np.ndarray | None, starts: np.ndarray,
               rule: Resample) -> tuple[np.ndarray, np.ndarray]:
    """Combine the readings of each cell (rows from ``starts[i]`` to ``starts[i+1]``)."""
    known = ~np.isnan(v)
    n_known = np.add.reduceat(known.astype(np.int64), starts)
    if rule is Resample.MAX:
        agg = np.fmax.reduceat(v, starts)
    elif rule is Resample.MIN:
        agg = np.fmin.reduceat(v, starts)
    elif rule is Resample.CIRCULAR_MEAN:
        rad = np.deg2rad(np.where(known, v, 0.0))
        agg = from_components(np.add.reduceat(np.where(known, np.sin(rad), 0.0), starts),
                              np.add.reduceat(np.where(known, np.cos(rad), 0.0), starts))
    else:
        total = np.add.reduceat(np.where(known, v, 0.0), starts)
        agg = total / np.maximum(n_known, 1) if rule is Resample.MEAN else total
    agg = np.where(n_known > 0, agg, np.nan)
    worst = np.maximum.reduceat(s, starts)
    any_conflict = (np.add.reduceat(conflict.astype(np.int64), starts) > 0 if conflict is not None
                    else np.zeros(len(starts), dtype=bool))
    dup = np.where(any_conflict, Flag.DUPLICATE_CONFLICT, Flag.AGGREGATED)
    state = np.where(n_known > 0, dup,
                     np.where(worst > Flag.DUPLICATE_CONFLICT, worst, Flag.MISSING))
    return agg, state.astype(np.int8)


def fill_gaps(grid: Grid, step: pd.Timedelta) -> None:
    """Fill short gaps in place, each variable by its rule and up to its longest fillable gap.

    A gap is a run of missing values between two known ones; it is filled only when the whole
    run is at most the variable's ``max_fill_gap`` long (count of missing values times the
    interval) and none of it is flagged out of range, calm or variable. Values are linear in
    time between the two known neighbours; directions go through their sine and cosine
    components, so 350 and 10 deg fill to 0, never 180.
    """
    for name, v in grid.values.items():
        var = WEATHER_VARIABLES[name]
        limit = int(var.max_fill_gap // step) if var.fill is not Fill.NEVER else 0
        if limit < 1:
            continue
        st = grid.states[name]
        gap = np.flatnonzero(np.isnan(v))
        idx, before, after = fillable_runs(gap, st[gap] == Flag.MISSING, len(v), limit)
        if not len(idx):
            continue
        w = (idx - before) / (after - before)
        if var.fill is Fill.CIRCULAR:
            a, b = np.deg2rad(v[before]), np.deg2rad(v[after])
            new = from_components(np.sin(a) + w * (np.sin(b) - np.sin(a)),
                                  np.cos(a) + w * (np.cos(b) - np.cos(a)))
        else:
            new = v[before] + w * (v[after] - v[before])
        ok = ~np.isnan(new)
        v[idx[ok]] = new[ok]
        st[idx[ok]] = Flag.FILLED


def fillable_runs(gap: np.ndarray, plain: np.ndarray, n: int,
                  limit: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Which gap cells to fill, and the known neighbours on each side.

    Parameters
    ----------
    gap : numpy.ndarray of int
        Sorted positions of the missing cells.
    plain : numpy.ndarray of bool
        For each of those, whether it is plainly missing (not out of range, calm or variable).
    n : int
        Length of the series.
    limit : int
        Longest run of missing cells that may be filled.

    Returns
    -------
    idx, before, after : numpy.ndarray of int
        Cells to fill, with the position of the known cell before and after each one's run.
    """
    if not len(gap):
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    new_run = np.r_[True, np.diff(gap) > 1]
    run_id = np.cumsum(new_run) - 1
    start = gap[new_run]
    end = np.r_[gap[np.flatnonzero(new_run)[1:] - 1], gap[-1]]  # last cell of each run
    length = end - start + 1
    blocked = np.bincount(run_id, weights=~plain, minlength=len(start)) > 0
    ok = (length <= limit) & (start > 0) & (end < n - 1) & ~blocked
    take = ok[run_id]
    return gap[take], (start - 1)[run_id[take]], (end + 1)[run_id[take]]
