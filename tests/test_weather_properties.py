"""Property tests of the weather cleaner, :func:`cyanorisk.ingest.read_weather`.

The cleaner must not care how a station export happens to be ordered, repeated or cut into
files (STYLE.md, Tests): shuffling the data rows, repeating rows, or splitting a file in two
gives the same clean series; and the row accounting balances on any messy input.

The files are generated from a small random half-hourly series and written as text. The stamps
are in UTC or a fixed offset, so the daylight-saving rule that resolves a repeated hour by file
order (which legitimately depends on order) does not apply. Each test writes its files into a
``tempfile.TemporaryDirectory()``: pytest's ``tmp_path`` is function-scoped and would be shared
by all hypothesis examples.

The accounting test does not only call ``RowAccount.check`` (``read_weather`` does that itself):
it computes the expected account, ledger and a few values from the generator's own knowledge of
every row it wrote, independently of the cleaner.
"""

from __future__ import annotations

import tempfile
from collections import Counter, defaultdict
from dataclasses import dataclass, replace
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from cyanorisk.ingest import ColumnSpec, WeatherDialect, read_weather

SEP = ";"
PREAMBLE = "Test Reservoir AWS - logger export"
HEADER = ["Date", "Time", "AirT", "WindSpd", "WindDir", "Rain"]
FIRST_BODY_LINE = 3
"""Physical line number of the first body line: a preamble line, then the header."""
STEP_MIN = 30
ZONES = {"UTC": "UTC", "+10:00": "Australia/Brisbane", "+05:30": "Asia/Kolkata"}
"""Fixed stamp offsets and a site zone with that offset and no daylight saving in the 2020s."""
ZONE_OFFSET_MIN = {"UTC": 0, "+10:00": 600, "+05:30": 330}
STARTS = [datetime(2020, 2, 28, 22, 0), datetime(2021, 12, 31, 20, 30), datetime(2022, 6, 15, 0, 0)]
"""Local series starts that cross a leap day, a year end and nothing in particular."""
POINTS_16 = ["N", "NNE", "NE", "ENE", "E", "ESE", "SE", "SSE",
             "S", "SSW", "SW", "WSW", "W", "WNW", "NW", "NNW"]
MISSING = ("", "-")
OUT_OF_RANGE = "999.0"
"""The one out-of-range air temperature the generator writes (plausible range is -60..60 degC)."""
BAD_KINDS = {"bad_date": "Date", "bad_time": "Time", "bad_number": "AirT", "field_count": ""}
"""Defects the generator writes, with the ledger reason and the column the ledger names."""
BLANKS = ["", "  ", "\t"]
"""Blank lines: not data rows. Only short ones: see
test_long_whitespace_line_is_blank_like_a_short_one for longer ones."""

SETTINGS = settings(max_examples=40, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def dialect(zone: str) -> WeatherDialect:
    return WeatherDialect(
        separator=SEP, decimal=".", skip_lines=1, date_column="Date", time_column="Time",
        date_order="dmy", stamp_zone=zone, stamp_marks="start", missing=MISSING,
        columns={"AirT": ColumnSpec("air_temp_c", "degC"),
                 "WindSpd": ColumnSpec("wind_speed_ms", "km/h"),
                 "WindDir": ColumnSpec("wind_dir_deg", "compass"),
                 "Rain": ColumnSpec("rain_mm", "mm")})


@dataclass(frozen=True)
class Row:
    """One data row as the generator means it."""

    minute: int
    """Minutes after the series start (local clock of the stamp zone)."""
    air: str
    wind: str
    direction: str
    rain: str
    midnight_24: bool = False
    """Write a midnight stamp as 24:00 of the day before (ISO 8601:2000 5.3.2: same instant)."""
    bad: str | None = None
    """One of BAD_KINDS, or None for a good row."""

    def values(self) -> tuple:
        """What the row says, as the cleaner should compare rows: missing markers are one."""
        return tuple(None if v in MISSING else v for v in (self.air, self.wind, self.direction,
                                                           self.rain))

    def text(self, start: datetime) -> str:
        stamp = start + timedelta(minutes=self.minute)
        if self.midnight_24 and stamp.hour == 0 and stamp.minute == 0:
            date, time = (stamp - timedelta(days=1)).strftime("%d/%m/%Y"), "24:00"
        else:
            date, time = stamp.strftime("%d/%m/%Y"), stamp.strftime("%H:%M")
        fields = [date, time, self.air, self.wind, self.direction, self.rain]
        if self.bad == "bad_date":
            fields[0] = "31/02/2019"
        elif self.bad == "bad_time":
            fields[1] = "25:00"
        elif self.bad == "bad_number":
            fields[2] = "21..4"
        elif self.bad == "field_count":
            fields.append("0.0")
        return SEP.join(fields)


Body = list  # items: Row (a data line) or str (a blank line)


@dataclass
class Scenario:
    zone: str
    start: datetime
    body: Body

    def lines(self, body: Body | None = None) -> list[str]:
        body = self.body if body is None else body
        return [item if isinstance(item, str) else item.text(self.start) for item in body]

    def write(self, folder: Path, name: str, body: Body | None = None) -> Path:
        path = folder / name
        text = "\n".join([PREAMBLE, SEP.join(HEADER), *self.lines(body)]) + "\n"
        path.write_text(text, encoding="utf-8")
        return path

    def read(self, paths: list[Path], **kwargs) -> tuple[pd.DataFrame, object]:
        kwargs.setdefault("bad_rows", "reject")
        return read_weather(paths, dialect(self.zone), f"{STEP_MIN}min", ZONES[self.zone],
                            **kwargs)


air_values = st.one_of(st.integers(-50, 350).map(lambda k: f"{k / 10:.1f}"),
                       st.sampled_from([*MISSING, OUT_OF_RANGE]))
wind_values = st.one_of(st.integers(0, 60).map(str), st.sampled_from(MISSING))
dir_values = st.sampled_from([*POINTS_16, "CALM", "-"])
rain_values = st.one_of(st.integers(0, 50).map(lambda k: f"{k / 10:.1f}"), st.just("-"))


@st.composite
def rows_at(draw, minute: int, bad: str | None = None) -> Row:
    return Row(minute, draw(air_values), draw(wind_values), draw(dir_values), draw(rain_values),
               draw(st.booleans()), bad)


def conflicting(row: Row, draw) -> Row:
    """A row with the same stamp as ``row`` and another air temperature."""
    old = None if row.air in MISSING or row.air == OUT_OF_RANGE else float(row.air)
    new = draw(st.integers(-50, 350).map(lambda k: k / 10).filter(lambda v: v != old))
    return replace(row, air=f"{new:.1f}", midnight_24=draw(st.booleans()))


@st.composite
def scenarios(draw, conflicts: bool = True) -> Scenario:
    """A messy export: gaps, off-grid readings, repeats, conflicts, bad rows, blank lines."""
    n = draw(st.integers(2, 24))
    present = draw(st.lists(st.booleans(), min_size=n, max_size=n))
    present[draw(st.integers(0, n - 1))] = True
    rows = [draw(rows_at(STEP_MIN * i)) for i in range(n) if present[i]]
    offs = draw(st.sets(st.tuples(st.integers(0, n - 1), st.integers(1, STEP_MIN - 1)), max_size=4))
    rows += [draw(rows_at(STEP_MIN * i + j)) for i, j in sorted(offs)]
    good = list(rows)
    for k in draw(st.lists(st.integers(0, len(good) - 1), max_size=4)):  # identical repeats
        rows.append(replace(good[k], midnight_24=draw(st.booleans())))
    if conflicts:
        for k in draw(st.lists(st.integers(0, len(good) - 1), max_size=3)):
            rows.append(conflicting(good[k], draw))
    for kind in draw(st.lists(st.sampled_from(sorted(BAD_KINDS)), max_size=4)):
        rows.append(draw(rows_at(STEP_MIN * draw(st.integers(0, n - 1)), kind)))
    body: Body = [*rows, *draw(st.lists(st.sampled_from(BLANKS), max_size=2))]
    body = draw(st.permutations(body))
    return Scenario(draw(st.sampled_from(sorted(ZONES))), draw(st.sampled_from(STARTS)), body)


def ledger_multiset(rejects: pd.DataFrame) -> Counter:
    return Counter(zip(rejects["reason"], rejects["column"], rejects["raw"], strict=True))


def assert_same_clean_output(got: pd.DataFrame, want: pd.DataFrame) -> None:
    # Exact: the same readings must give bit-identical values and identical flags.
    pd.testing.assert_frame_equal(got, want, check_exact=True)


@SETTINGS
@given(scenario=scenarios(conflicts=False), order=st.randoms(use_true_random=False))
def test_shuffling_rows_does_not_change_the_clean_output(scenario, order):
    shuffled = list(scenario.body)
    order.shuffle(shuffled)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        data, meta = scenario.read([scenario.write(folder, "a.txt")])
        data2, meta2 = scenario.read([scenario.write(folder, "b.txt", shuffled)])
    assert_same_clean_output(data2, data)
    assert meta2.account == meta.account
    assert ledger_multiset(meta2.rejects) == ledger_multiset(meta.rejects)


@SETTINGS
@given(scenario=scenarios(conflicts=False), data=st.data())
def test_repeating_rows_does_not_change_the_clean_output(scenario, data):
    rows = [item for item in scenario.body if isinstance(item, Row) and item.bad is None]
    picks = data.draw(st.lists(st.sampled_from(rows), min_size=1, max_size=6), label="repeated")
    body = list(scenario.body)
    for row in picks:
        body.insert(data.draw(st.integers(0, len(body)), label="at"), row)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        data1, meta1 = scenario.read([scenario.write(folder, "a.txt")])
        data2, meta2 = scenario.read([scenario.write(folder, "b.txt", body)])
    assert_same_clean_output(data2, data1)
    a1, a2 = meta1.account, meta2.account
    assert a2.read == a1.read + len(picks)
    assert a2.duplicates_identical == a1.duplicates_identical + len(picks)
    assert (a2.kept, a2.off_grid, a2.duplicates_conflicting, a2.rejected) == (
        a1.kept, a1.off_grid, a1.duplicates_conflicting, a1.rejected)
    assert ledger_multiset(meta2.rejects) == ledger_multiset(meta1.rejects)


@SETTINGS
@given(scenario=scenarios(), data=st.data())
def test_splitting_a_file_in_two_does_not_change_the_clean_output(scenario, data):
    # Conflicting repeats are allowed here: splitting keeps the file order, so the duplicate
    # policy ('last' in file order) picks the same rows.
    rows_at_pos = [i for i, item in enumerate(scenario.body) if isinstance(item, Row)]
    assume(len(rows_at_pos) >= 2)
    # Each part keeps at least one data row (a file with a header and no rows is an error).
    cut = data.draw(st.integers(rows_at_pos[0] + 1, rows_at_pos[-1]), label="cut")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        whole = scenario.write(folder, "whole.txt")
        first = scenario.write(folder, "part1.txt", scenario.body[:cut])
        second = scenario.write(folder, "part2.txt", scenario.body[cut:])
        data1, meta1 = scenario.read([whole])
        data2, meta2 = scenario.read([first, second])
    assert_same_clean_output(data2, data1)
    assert meta2.account == meta1.account

    def located(meta, shift_second: int) -> Counter:
        r = meta.rejects
        line = np.where(r["file"].str.endswith("part2.txt"), r["line"] + shift_second, r["line"])
        return Counter(zip(line.tolist(), r["reason"], r["column"], strict=True))

    assert located(meta2, cut) == located(meta1, 0)


# --- the accounting, against an oracle built from what the generator wrote -------------------

def expected(scenario: Scenario, off_grid: str, duplicates: str,
             period: tuple[int, int] | None) -> dict:
    """Account, ledger (line, reason, column) and some air temperatures, from the rows written."""
    ledger: list[tuple[int, str, str]] = []
    groups: dict[int, list[tuple[int, Row]]] = defaultdict(list)
    read = rejected = 0
    for pos, item in enumerate(scenario.body):
        if isinstance(item, str):
            continue  # blank line: not a data row
        read += 1
        line = FIRST_BODY_LINE + pos
        if item.bad:
            ledger.append((line, item.bad, BAD_KINDS[item.bad]))
            rejected += 1
        elif period and not period[0] <= item.minute <= period[1]:
            ledger.append((line, "outside_period", ""))
            rejected += 1
        else:
            groups[item.minute].append((line, item))
    kept = off = identical = conflicting_ = 0
    stamps: dict[int, tuple[Row, set[int]]] = {}
    for minute, group in groups.items():
        winner_line, winner = group[-1] if duplicates == "last" else group[0]
        differs: set[int] = set()
        for line, row in group:
            if line == winner_line:
                continue
            if row.values() == winner.values():
                identical += 1
            else:
                conflicting_ += 1
                ledger.append((line, "duplicate_conflict", ""))
                differs |= {k for k, (a, b) in enumerate(zip(row.values(), winner.values(),
                                                             strict=True)) if a != b}
        if minute % STEP_MIN == 0:
            kept += 1
        else:
            off += 1
            if off_grid == "drop":
                ledger.append((winner_line, "off_grid_dropped", ""))
                continue
        stamps[minute] = (winner, differs)
    cells: dict[int, list[tuple[Row, set[int]]]] = defaultdict(list)
    for minute in sorted(stamps):
        cells[minute // STEP_MIN].append(stamps[minute])
    air = {}
    for cell, members in cells.items():
        known = [float(r.air) for r, _ in members if r.air not in (*MISSING, OUT_OF_RANGE)]
        conflict = any(0 in differs for _, differs in members)
        if len(members) == 1:
            row = members[0][0]
            if row.air == OUT_OF_RANGE:
                air[cell] = (np.nan, "out_of_range")
            elif known:
                # a lone reading between grid points was moved into its interval: aggregated
                flag = ("duplicate_conflict" if conflict
                        else "aggregated" if row.minute % STEP_MIN else "ok")
                air[cell] = (known[0], flag)
        elif known:  # several readings in the interval: mean of the known ones
            flag = "duplicate_conflict" if conflict else "aggregated"
            air[cell] = (float(np.mean(known)), flag)
    return {
        "account": dict(read=read, kept=kept, duplicates_identical=identical,
                        duplicates_conflicting=conflicting_, off_grid=off, rejected=rejected),
        "ledger": sorted(ledger),
        "cells": (min(cells), max(cells)) if cells else None,
        "air": air,
    }


@st.composite
def periods(draw, scenario: Scenario) -> tuple[int, int] | None:
    """None, or a period [lo, hi] (minutes) that holds at least one good on-grid row."""
    on_grid = sorted({item.minute for item in scenario.body if isinstance(item, Row)
                      and item.bad is None and item.minute % STEP_MIN == 0})
    if not on_grid or draw(st.booleans()):
        return None
    lo = draw(st.sampled_from(on_grid))
    return lo, draw(st.sampled_from([m for m in on_grid if m >= lo]))


@settings(max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(scenario=scenarios(), off_grid=st.sampled_from(["aggregate", "drop"]),
       duplicates=st.sampled_from(["last", "first"]), data=st.data())
def test_row_accounting_balances_on_messy_input(scenario, off_grid, duplicates, data):
    period = data.draw(periods(scenario), label="period")
    kwargs = {}
    if period:
        kwargs["period"] = tuple(str(scenario.start + timedelta(minutes=m)) for m in period)
    with tempfile.TemporaryDirectory() as tmp:
        path = scenario.write(Path(tmp), "messy.txt")
        frame, meta = scenario.read([path], off_grid=off_grid, duplicates=duplicates, **kwargs)
    want = expected(scenario, off_grid, duplicates, period)
    got = meta.account
    assert got.read == (got.kept + got.duplicates_identical + got.duplicates_conflicting
                        + got.off_grid + got.rejected)
    assert got.as_dict() == want["account"]
    assert sorted(zip(meta.rejects["line"].tolist(), meta.rejects["reason"],
                      meta.rejects["column"], strict=True)) == want["ledger"]
    # The grid: interval starts in UTC, one per interval from the first cell to the last.
    offset = timedelta(minutes=ZONE_OFFSET_MIN[scenario.zone])
    if want["cells"] is None:
        assert len(frame) == 0
        return
    first, last = want["cells"]
    start_utc = pd.Timestamp(scenario.start - offset, tz="UTC")
    index = pd.DatetimeIndex([start_utc + pd.Timedelta(minutes=STEP_MIN * c)
                              for c in range(first, last + 1)], name="time_utc")
    pd.testing.assert_index_equal(frame.index, index.as_unit("ns"))
    # Air temperatures of intervals the oracle can tell without gap filling.
    for cell, (value, flag) in want["air"].items():
        at = start_utc + pd.Timedelta(minutes=STEP_MIN * cell)
        np.testing.assert_allclose(frame.at[at, "air_temp_c"], value, rtol=1e-12, atol=1e-12)
        if flag is not None:
            assert frame.at[at, "air_temp_c_flag"] == flag


# --- odd lines that must not change the accounting ---------------------------------------------

def _read(text: str) -> tuple[pd.DataFrame, object]:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "x.txt"
        path.write_text(text, encoding="utf-8")
        return read_weather([path], dialect("UTC"), "30min", "UTC", bad_rows="reject")


GOOD = (f"{PREAMBLE}\n{SEP.join(HEADER)}\n"
        "01/01/2020;00:00;1.0;3;N;0.0\n"
        "{odd}\n"
        "01/01/2020;00:30;2.0;4;NE;0.2\n")


def test_long_whitespace_line_is_blank_like_a_short_one():
    _, short = _read(GOOD.replace("{odd}", "   "))
    _, long = _read(GOOD.replace("{odd}", " " * 12))
    assert short.account.as_dict() == long.account.as_dict()
    assert len(long.rejects) == 0


def test_separator_only_line_is_accounted_the_same_on_both_read_paths():
    # The same file, once alone (fast path) and once with one extra row of the wrong field count
    # at the end (exact path). The extra row must add exactly one read and one rejected row.
    alone = GOOD.replace("{odd}", SEP * (len(HEADER) - 1))
    _, fast = _read(alone)
    _, exact = _read(alone + "01/01/2020;01:00;3.0;5;E;0.0;9\n")
    assert exact.account.read == fast.account.read + 1
    assert exact.account.rejected == fast.account.rejected + 1
    assert exact.account.kept == fast.account.kept


CONFLICT_IN_AN_INTERVAL = (f"{PREAMBLE}\n{SEP.join(HEADER)}\n"
                           "01/01/2020;00:00;10.0;3;N;0.0\n"
                           f"01/01/2020;00:07;{OUT_OF_RANGE};3;N;0.0\n"
                           "01/01/2020;00:07;12.0;3;N;0.0\n")
"""An interval with a reading on the grid and two conflicting off-grid readings at 00:07, one of
them out of range."""


@pytest.mark.parametrize(("duplicates", "mean"), [
    ("last", 11.0),  # 12.0 kept: mean of 10.0 and 12.0
    pytest.param("first", 10.0),  # 999.0 kept, out of range: 10.0 alone
])
def test_conflict_flag_kept_when_the_kept_reading_is_out_of_range(duplicates, mean):
    # Which row the duplicate policy keeps changes the interval's value, so the value must say
    # so: Flag precedence (quality.Flag) puts duplicate_conflict (2) above aggregated (1).
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "x.txt"
        path.write_text(CONFLICT_IN_AN_INTERVAL, encoding="utf-8")
        data, meta = read_weather([path], dialect("UTC"), "30min", "UTC", duplicates=duplicates,
                                  bad_rows="reject")
    assert meta.account.duplicates_conflicting == 1
    np.testing.assert_allclose(data["air_temp_c"].iloc[0], mean, rtol=0, atol=1e-12)
    assert data["air_temp_c_flag"].iloc[0] == "duplicate_conflict"


def test_lone_off_grid_reading_is_not_flagged_ok():
    text = (f"{PREAMBLE}\n{SEP.join(HEADER)}\n"
            "01/01/2020;00:00;10.0;3;N;0.0\n"
            "01/01/2020;00:37;12.0;3;N;0.0\n"  # a manual poll: the only reading of 00:30-01:00
            "01/01/2020;01:00;14.0;3;N;0.0\n")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "x.txt"
        path.write_text(text, encoding="utf-8")
        data, meta = read_weather([path], dialect("UTC"), "30min", "UTC", bad_rows="reject")
    assert (meta.account.kept, meta.account.off_grid) == (2, 1)
    np.testing.assert_allclose(data["air_temp_c"].to_numpy(), [10.0, 12.0, 14.0], rtol=0, atol=0)
    # Flag.OK: "A reading on the grid, kept as read"; Flag.AGGREGATED: combined by the resample
    # rule. A reading stamped 00:37 standing for 00:30-01:00 is not a reading on the grid.
    assert data["air_temp_c_flag"].iloc[1] == "aggregated"
