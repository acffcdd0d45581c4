"""Weather-station logs in, a clean, flagged, regular series out.

The steps, each recorded: parse (unparseable rows to the rejects ledger) -> convert units ->
range checks (value to NaN, flag ``out_of_range``) -> duplicated stamps (identical rows merged;
conflicting rows resolved by policy, flag ``duplicate_conflict``) -> sort -> regular grid
(off-grid readings aggregated by each variable's resample rule, or dropped) -> fill short gaps
(linear in time; directions through their components; never accumulations) -> flags.

The grid's index labels the *start* of each interval, in UTC. A dialect whose stamps mark the end
of the interval is shifted back by one interval.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass, field
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa

from cyanorisk.compass import BEARINGS_DEG, CALM, VARIABLE
from cyanorisk.ingest import regular
from cyanorisk.ingest.dialects import (
    SEPARATOR_NAMES,
    ColumnSpec,
    WeatherDialect,
    absent_column_text,
    absent_columns,
    column_plan,
    read_text_naming_column,
    sniff_layout,
    zone_offset,
)
from cyanorisk.ingest.lines import Parsing, RawTable, read_table, read_text
from cyanorisk.ingest.quality import (
    AFTER_LATEST,
    BAD_ROW_POLICIES,
    DEFAULT_BAD_ROWS,
    DEFAULT_DUPLICATES,
    DEFAULT_OFF_GRID,
    DUPLICATE_POLICIES,
    OFF_GRID_POLICIES,
    Flag,
    IngestError,
    Ledger,
    RowAccount,
    flag_column,
)
from cyanorisk.ingest.regular import Rows
from cyanorisk.ingest.stamps import (
    EARLIEST_DATE,
    LAST_REPRESENTABLE,
    NAT,
    NS_PER_DAY,
    day_number,
    distinct,
    localize,
    parse_date_time,
    parse_timestamps,
    year_of_text,
)
from cyanorisk.units import to_canonical
from cyanorisk.variables import WEATHER_VARIABLES


@dataclass
class FileReport:
    """What was read from one file and how its layout was resolved."""

    path: str
    rows_read: int
    dialect: dict
    """The dialect as resolved (declared values plus sniffed ones)."""
    assumptions: list[str]
    """Sentences saying what was sniffed or assumed."""
    ignored_columns: list[str]
    warnings: list[str] = field(default_factory=list)
    """Sentences on what the file lacks that the dialect declares."""


@dataclass
class WeatherMeta:
    """Everything :func:`read_weather` knows about its inputs and what it did to them."""

    files: list[FileReport]
    account: RowAccount
    """Row accounting over all files; it balances (checked)."""
    rejects: pd.DataFrame
    """The rejects ledger: file, line, column, raw, reason, message."""
    interval: pd.Timedelta
    timezone: str
    start: pd.Timestamp | None
    """First interval start on the grid [UTC]."""
    end: pd.Timestamp | None
    """Last interval start on the grid [UTC]."""
    flag_counts: dict[str, dict[str, int]] = field(default_factory=dict)
    """Per variable, how many grid values carry each flag."""
    ambiguous_resolved: int = 0
    """Local stamps in the repeated hour of a daylight-saving change, resolved by file order."""
    nonexistent_rejected: int = 0
    """Local stamps in the skipped hour of a daylight-saving change (rejected)."""

    def summary(self) -> dict:
        """A JSON-friendly summary: span, rows, fills, gaps, rejects by reason."""
        reasons = self.rejects["reason"].value_counts().sort_index()
        return {
            "files": [f.path for f in self.files],
            "assumptions": sorted({a for f in self.files for a in f.assumptions}),
            "warnings": [f"{Path(f.path).name}: {w}" for f in self.files for w in f.warnings],
            "interval": str(self.interval),
            "timezone": self.timezone,
            "start_utc": None if self.start is None else self.start.isoformat(),
            "end_utc": None if self.end is None else self.end.isoformat(),
            "rows": self.account.as_dict(),
            "ambiguous_resolved": self.ambiguous_resolved,
            "nonexistent_rejected": self.nonexistent_rejected,
            "ledger_by_reason": {str(k): int(v) for k, v in reasons.items()},
            "flags": self.flag_counts,
        }


def read_weather(
    paths: str | Path | Sequence[str | Path],
    dialect: WeatherDialect | None = None,
    interval: str | pd.Timedelta = "30min",
    timezone: str = "UTC",
    *,
    period: tuple[str | pd.Timestamp | None, str | pd.Timestamp | None] | None = None,
    off_grid: str = DEFAULT_OFF_GRID,
    duplicates: str = DEFAULT_DUPLICATES,
    bad_rows: str = DEFAULT_BAD_ROWS,
    earliest: date = EARLIEST_DATE,
    latest: date | None = None,
) -> tuple[pd.DataFrame, WeatherMeta]:
    """Read, clean and regularise weather-station logs.

    The same as :func:`parse_weather_file` on each file, then :func:`assemble_weather`.

    Parameters
    ----------
    paths : path or sequence of paths
        Files of one station, in the order they should be read (later files win duplicates
        under the default policy).
    dialect : WeatherDialect, optional
        Layout of the files; what it leaves unsaid is sniffed and reported.
    interval : str or pandas.Timedelta
        Regular interval of the output grid, e.g. ``'30min'``.
    timezone : str
        The site's IANA zone; local stamps are read in it.
    period : (start, end), optional
        Keep only stamps in [start, end]; dates without a zone are read in the site's zone.
        A file whose stamps all fall outside is an error.
    off_grid : {'aggregate', 'drop'}
        What to do with readings stamped between grid points.
    duplicates : {'last', 'first'}
        Which of several conflicting rows with one stamp to keep, in file order.
    bad_rows : {'reject', 'stop'}
        Put unparseable rows in the ledger and go on, or stop at the first with an error.
    earliest, latest : datetime.date, optional
        Plausible dates: stamps before ``earliest`` or after ``latest`` (the day after the run,
        in the pipeline) go to the ledger as ``implausible_date``.

    Returns
    -------
    data : pandas.DataFrame
        Regular UTC index (interval starts), one column per canonical variable found and a
        ``<variable>_flag`` categorical beside each.
    meta : WeatherMeta
        Row accounting (balanced), rejects ledger, assumptions, flag counts.

    Raises
    ------
    IngestError
        A file that cannot be read as a whole, or (``bad_rows='stop'``) the first bad row.
    """
    paths = [Path(p) for p in ([paths] if isinstance(paths, (str, Path)) else paths)]
    if not paths:
        raise ValueError("no weather files given")
    _check_policy("bad_rows", bad_rows, BAD_ROW_POLICIES)
    dialect = dialect or WeatherDialect()
    files = [parse_weather_file(p, dialect, timezone, interval, bad_rows=bad_rows,
                                earliest=earliest) for p in paths]
    return assemble_weather(files, interval, timezone, period=period, off_grid=off_grid,
                            duplicates=duplicates, encoding=dialect.encoding, latest=latest)


def _check_policy(name: str, value: str, allowed: tuple[str, ...]) -> None:
    if value not in allowed:
        raise ValueError(f"{name} must be one of {', '.join(allowed)}, not {value!r}")


@dataclass
class WeatherFile:
    """One weather file parsed: its readings, before they meet the other files on the grid."""

    path: Path
    rows: Rows
    """Readings of the rows that parsed, in file order, stamps in UTC."""
    rejects: pd.DataFrame
    """Rows of this file that could not be parsed (the ledger's columns)."""
    report: FileReport
    n_ambiguous: int = 0
    n_nonexistent: int = 0

    def to_frame(self) -> pd.DataFrame:
        """The readings as a table (for the clean-data cache): t, line, and per variable its
        value and its state."""
        cols: dict[str, np.ndarray] = {"t": self.rows.t, "line": self.rows.line}
        for v, values in self.rows.values.items():
            cols[v] = values
            cols[f"{v}__state"] = self.rows.states[v]
        return pd.DataFrame(cols)

    @classmethod
    def from_frame(cls, path: Path, frame: pd.DataFrame, rejects: pd.DataFrame, report: dict,
                   n_ambiguous: int, n_nonexistent: int) -> WeatherFile:
        names = [c for c in frame.columns if c not in ("t", "line") and not c.endswith("__state")]
        rows = Rows(frame["t"].to_numpy(dtype=np.int64),
                    {v: frame[v].to_numpy(dtype=np.float64).copy() for v in names},
                    {v: frame[f"{v}__state"].to_numpy(dtype=np.int8).copy() for v in names},
                    np.zeros(len(frame), dtype=np.int32), frame["line"].to_numpy(dtype=np.int64))
        return cls(Path(path), rows, rejects, FileReport(**report), n_ambiguous, n_nonexistent)


def parse_weather_file(path: str | Path, dialect: WeatherDialect | None, timezone: str,
                       interval: str | pd.Timedelta, *, bad_rows: str = DEFAULT_BAD_ROWS,
                       earliest: date = EARLIEST_DATE) -> WeatherFile:
    """Parse one weather file: layout, stamps to UTC, values in canonical units, row problems.
    Rows dated before ``earliest`` (or beyond what time stamps can hold) go to the ledger as
    ``implausible_date``, never misread as another year.

    Raises
    ------
    IngestError
        A file that cannot be read as a whole, or (``bad_rows='stop'``) its first bad row.
    """
    dialect = dialect or WeatherDialect()
    ledger = Ledger()
    rows, report, n_amb, n_non = _parse_file(Path(path), 0, dialect, timezone,
                                             int(pd.Timedelta(interval).value), bad_rows, ledger,
                                             earliest)
    return WeatherFile(Path(path), rows, ledger.frame(), report, n_amb, n_non)


def assemble_weather(files: Sequence[WeatherFile], interval: str | pd.Timedelta, timezone: str, *,
                     period: tuple | None = None, off_grid: str = DEFAULT_OFF_GRID,
                     duplicates: str = DEFAULT_DUPLICATES, encoding: str = "utf-8",
                     latest: date | None = None) -> tuple[pd.DataFrame, WeatherMeta]:
    """Put parsed files together on the regular grid: period, ranges, duplicates across files,
    off-grid readings, short gaps, flags; the row account is proved before anything is returned.
    See :func:`read_weather`. The files' rows are consumed (range checks write into them)."""
    _check_policy("off_grid", off_grid, OFF_GRID_POLICIES)
    _check_policy("duplicates", duplicates, DUPLICATE_POLICIES)
    step = pd.Timedelta(interval)
    step_ns = int(step.value)
    paths = [f.path for f in files]
    ledger = Ledger([f.rejects for f in files if len(f.rejects)])
    for k, f in enumerate(files):
        f.rows.file = np.full(len(f.rows.t), k, dtype=np.int32)
    rows = _concat([f.rows for f in files])
    account = RowAccount(read=sum(f.report.rows_read for f in files))
    account.rejected = sum(len(p) for p in ledger.parts)
    rows = _keep_period(rows, period, timezone, paths, ledger, account)
    rows = _keep_before(rows, latest, timezone, paths, ledger, account)
    if files and not len(rows.t):
        raise _nothing_left(paths, ledger, account)
    _range_check(rows)
    order, n_ident, n_conf = regular.deduplicate(rows, duplicates, ledger, paths)
    account.duplicates_identical, account.duplicates_conflicting = n_ident, n_conf
    origin_ns = regular.grid_origin_ns(rows.t[order[:1]], timezone, step_ns)
    grid = regular.to_grid(rows, order, step_ns, origin_ns, off_grid, ledger, paths)
    account.kept, account.off_grid = grid.n_on_grid, grid.n_off_grid
    account.check()
    regular.fill_gaps(grid, step)
    data = _frame(grid)
    meta = WeatherMeta(
        files=[f.report for f in files], account=account,
        rejects=_with_raw_lines(ledger.frame(), encoding), interval=step, timezone=timezone,
        start=data.index[0] if len(data) else None, end=data.index[-1] if len(data) else None,
        flag_counts={v: _flag_counts(s) for v, s in grid.states.items()},
        ambiguous_resolved=sum(f.n_ambiguous for f in files),
        nonexistent_rejected=sum(f.n_nonexistent for f in files),
    )
    return data, meta


def _nothing_left(paths: list[Path], ledger: Ledger, account: RowAccount) -> IngestError:
    """Every row rejected (unreadable, or dated after the run day): one sentence with the first
    reason, instead of an empty grid."""
    first = ledger.frame().sort_values(["file", "line"]).iloc[0] if account.rejected else None
    why = (f"; the first, line {first['line']} of {Path(first['file']).name}: "
           f"{first['message']}") if first is not None else ""
    return IngestError(", ".join(map(str, paths)),
                       f"no reading is left: every one of the {account.read} rows was "
                       f"rejected{why}")


def _parse_file(path: Path, k: int, dialect: WeatherDialect, timezone: str, step_ns: int,
                bad_rows: str, ledger: Ledger, earliest: date) -> tuple[Rows, FileReport, int, int]:
    text = read_text_naming_column(path, dialect.encoding, dialect.separator,
                                   dialect.skip_lines, dialect.decimal)
    layout = sniff_layout(text, dialect)
    d = layout.dialect
    plan, ignored = column_plan(layout, path)
    missing = absent_columns(layout)
    absent = [absent_column_text(layout, name) for name in missing]
    if absent and bad_rows == "stop":
        raise IngestError(path, absent[0], line=layout.header_index + 1, column=missing[0])
    stamp_cols = (d.date_column, d.time_column, d.timestamp_column)
    stamps = tuple(c for c in stamp_cols if c)
    raw = read_table(text, layout.header_index, Parsing(
        d.separator, d.decimal, tuple(d.missing),
        string_columns=stamps + tuple(c for c, s in plan.items() if s.variable == "wind_dir_deg"),
        keep=stamps + tuple(plan)))
    problems = _Problems(raw, str(path))
    sep_name = SEPARATOR_NAMES.get(d.separator, repr(d.separator))
    problems.add_lines(raw.bad_lines, "field_count", [
        f"expected {len(raw.header)} {sep_name}-separated fields as in the header, found {c}"
        for c in raw.bad_counts])
    t, aware, notes = _parse_stamps(raw, d, problems, earliest)
    values, states = {}, {}
    for col, spec in plan.items():
        values[spec.variable], states[spec.variable] = _parse_values(raw, col, spec, d, problems)
    t = _to_utc(t, aware, d, timezone, step_ns, problems)
    if bad_rows == "stop" and problems.any():
        raise problems.first_error()
    n_amb, n_non = problems.n_ambiguous, problems.n_nonexistent
    problems.flush(ledger)
    rows = Rows(t, values, states, np.full(len(t), k, dtype=np.int32), raw.line_numbers)
    if problems.bad.any():
        rows = rows.take(~problems.bad)
    resolved = {key: (list(val) if isinstance(val, tuple) else val)
                for key, val in asdict(d).items() if key != "columns"}
    resolved["columns"] = {c: asdict(s) for c, s in plan.items()}
    report = FileReport(str(path), raw.n_rows + len(raw.bad_lines), resolved,
                        list(layout.assumptions) + notes, ignored, absent)
    return rows, report, n_amb, n_non


class _Problems:
    """Row problems of one file; the first problem of a row is the one recorded."""

    def __init__(self, raw: RawTable, path: str) -> None:
        self.raw, self.path = raw, path
        self.bad = np.zeros(raw.n_rows, dtype=bool)
        self.entries: list[tuple[np.ndarray, str, str, list[str], list[str]]] = []
        self.line_entries: list[tuple[np.ndarray, str, list[str]]] = []
        self.n_ambiguous = 0
        self.n_nonexistent = 0

    def add(self, mask: np.ndarray, column: str, reason: str, values: pa.Array | None,
            message: str) -> None:
        """Record rows in ``mask``; ``message`` may use ``{raw}`` for the cell's text."""
        new = np.flatnonzero(mask & ~self.bad)
        if not len(new):
            return
        self.bad[new] = True
        cells = (values.take(pa.array(new)).to_pylist() if values is not None
                 else [""] * len(new))
        self.entries.append((new, column, reason, cells, [_said(message, c) for c in cells]))

    def add_lines(self, lines: np.ndarray, reason: str, messages: list[str]) -> None:
        if len(lines):
            self.line_entries.append((lines, reason, messages))

    def any(self) -> bool:
        return bool(self.entries or self.line_entries)

    def first_error(self) -> IngestError:
        best = None
        for rows, column, _, _, messages in self.entries:
            line = int(self.raw.line_numbers[rows[0]])
            if best is None or line < best[0]:
                best = (line, column, messages[0])
        for lines, _, messages in self.line_entries:
            if best is None or int(lines[0]) < best[0]:
                best = (int(lines[0]), None, messages[0])
        assert best is not None
        return IngestError(self.path, best[2], line=best[0], column=best[1])

    def flush(self, ledger: Ledger) -> None:
        text = self.raw.text
        for rows, column, reason, _, messages in self.entries:
            lines = self.raw.line_numbers[rows]
            ledger.add(self.path, lines, column, [text.line(int(n)) for n in lines], reason,
                       messages)
        for lines, reason, messages in self.line_entries:
            ledger.add(self.path, lines, "", [text.line(int(n)) for n in lines], reason, messages)


def _said(message: str, cell: str | None) -> str:
    """A row's message with its cell's text; stray NUL bytes (read as U+FFFD) are named."""
    text = message.format(raw=cell)
    if cell and "\ufffd" in cell:
        text += " (the file holds NUL bytes here, shown as \ufffd: the export is damaged)"
    return text


def _add_implausible(problems: _Problems, early: np.ndarray, far: np.ndarray, column: str,
                     values: pa.Array, earliest: date) -> None:
    """Rows dated before ``earliest``, or beyond the last day time stamps can hold."""
    problems.add(early, column, "implausible_date", values,
                 f"'{{raw}}' is not a plausible date for this record: before {earliest}, the "
                 "earliest date allowed ([ingest] earliest_date)")
    problems.add(far, column, "implausible_date", values,
                 f"'{{raw}}' is not a plausible date for this record: after "
                 f"{LAST_REPRESENTABLE}, the last day time stamps can hold")


def _parse_stamps(raw: RawTable, d: WeatherDialect, problems: _Problems,
                  earliest: date) -> tuple[np.ndarray, np.ndarray, list[str]]:
    notes: list[str] = []
    n = raw.n_rows
    lo = day_number(earliest) * NS_PER_DAY
    if d.timestamp_column:
        col = raw.columns[d.timestamp_column]
        t, aware, _, note = parse_timestamps(col, d.date_order, d.coerce_year)
        codes, uniques = distinct(col)
        year = year_of_text(uniques)[codes] if len(codes) else np.zeros(0)
        unreadable = (t == NAT) & ~np.isnan(year)
        _add_implausible(problems, (unreadable & (year < earliest.year)) | ((t != NAT) & (t < lo)),
                         unreadable & (year > LAST_REPRESENTABLE.year), d.timestamp_column, col,
                         earliest)
        problems.add(t == NAT, d.timestamp_column, "bad_timestamp", col,
                     "'{raw}' is not a date and time; expected e.g. 2024-01-31T09:30+10:00 or "
                     "31/01/2024 09:30")
        return t, aware, [note] if note else notes
    date_col = raw.columns[d.date_column]
    time_col = raw.columns[d.time_column] if d.time_column else None
    parsed = parse_date_time(date_col, time_col, d.date_order, d.coerce_year)
    if parsed.note:
        notes.append(parsed.note)
    form = {"dmy": "DD/MM/YYYY", "mdy": "MM/DD/YYYY", "ymd": "YYYY-MM-DD"}[parsed.order]
    days = parsed.days
    known = ~np.isnan(days)
    _add_implausible(problems, known & (days < day_number(earliest)),
                     known & (days > day_number(LAST_REPRESENTABLE)), d.date_column, date_col,
                     earliest)
    problems.add(np.isnan(parsed.days), d.date_column, "bad_date", date_col,
                 f"'{{raw}}' is not a date in the form {form}")
    if time_col is not None:
        problems.add(parsed.tod < 0, d.time_column, "bad_time", time_col,
                     "'{raw}' is not a time of day; expected HH:MM from 00:00 to 24:00")
    return parsed.ns(), np.zeros(n, dtype=bool), notes


def _to_utc(t: np.ndarray, aware: np.ndarray, d: WeatherDialect, timezone: str, step_ns: int,
            problems: _Problems) -> np.ndarray:
    naive = ~aware & (t != NAT)
    offset = zone_offset(d.stamp_zone)
    out = t.copy()
    if offset is None and naive.any():
        utc, ambiguous, nonexistent = localize(np.where(naive, t, NAT), timezone)
        out[naive] = utc[naive]
        problems.n_ambiguous = int(ambiguous.sum())
        before = problems.bad.copy()
        problems.add(nonexistent, d.timestamp_column or d.time_column or d.date_column,
                     "nonexistent_local_time", None,
                     f"this local time does not exist in {timezone}: clocks went forward")
        problems.n_nonexistent = int((nonexistent & ~before).sum())
    elif offset:
        out[naive] -= offset * 60 * 10**9
    if d.stamp_marks == "end":
        out[out != NAT] -= step_ns
    return out


def _parse_values(raw: RawTable, col: str, spec: ColumnSpec, d: WeatherDialect,
                  problems: _Problems) -> tuple[np.ndarray, np.ndarray]:
    var = WEATHER_VARIABLES[spec.variable]
    column = raw.columns[col]
    if pa.types.is_floating(column.type):  # every value was a number or a missing marker
        num = column.to_numpy()  # nulls (missing markers) become NaN
        num = num if num.flags.writeable else num.copy()
        if spec.unit and spec.unit.lower() not in ("compass", "deg"):
            num = to_canonical(num, spec.unit, var.unit)
        return num, np.zeros(len(num), dtype=np.int8)
    codes, uniques = distinct(column)
    text = pd.Series(uniques, dtype=object)
    if d.decimal == ",":
        text = text.str.replace(",", ".", regex=False)
    num = np.array(pd.to_numeric(text, errors="coerce"), dtype=np.float64)
    state = np.zeros(len(uniques), dtype=np.int8)
    missing = set(d.missing)
    marker = _missing_numbers(d.missing)
    # a marker is missing whether written as declared or as the same number ('-9999.0')
    is_marker = np.isin(num, list(marker)) if marker else np.zeros(len(num), dtype=bool)
    is_marker |= np.array([u.strip() in missing for u in uniques], dtype=bool)
    num[is_marker] = np.nan
    invalid = np.isnan(num) & ~is_marker
    is_dir = spec.variable == "wind_dir_deg"
    for i in np.flatnonzero(invalid):
        u = uniques[i]
        if u in missing:
            invalid[i] = False
        elif is_dir and u.upper() in BEARINGS_DEG:
            num[i], invalid[i] = BEARINGS_DEG[u.upper()], False
        elif is_dir and u.upper() in (CALM, "C", "CLM"):
            state[i], invalid[i] = Flag.CALM, False
        elif is_dir and u.upper() == VARIABLE:
            state[i], invalid[i] = Flag.VARIABLE, False
    if spec.unit and not (is_dir and spec.unit.lower() in ("compass", "deg")):
        num = to_canonical(num, spec.unit, var.unit)
    expected = "a number" + (", a 16-point compass name, CALM or VRB" if is_dir else "")
    problems.add(invalid[codes], col, "bad_number", column,
                 f"'{{raw}}' is not {expected} or a missing-value marker")
    return num[codes], state[codes]


def _missing_numbers(markers: Sequence[str]) -> set[float]:
    """The markers that are numbers (-9999, 9999.9): sensor-fault codes."""
    out = set()
    for m in markers:
        try:
            out.add(float(m))
        except ValueError:
            continue
    return {v for v in out if np.isfinite(v)}


def _concat(parts: list[Rows]) -> Rows:
    if len(parts) == 1:
        return parts[0]
    names = [v for v in WEATHER_VARIABLES if any(v in p.values for p in parts)]

    def cat(attr: str, v: str, fill: float | int, dtype: type) -> np.ndarray:
        return np.concatenate([getattr(p, attr).get(v, np.full(len(p.t), fill, dtype))
                               for p in parts])

    return Rows(
        t=np.concatenate([p.t for p in parts]),
        values={v: cat("values", v, np.nan, np.float64) for v in names},
        states={v: cat("states", v, 0, np.int8) for v in names},
        file=np.concatenate([p.file for p in parts]),
        line=np.concatenate([p.line for p in parts]),
    )


def _keep_period(rows: Rows, period: tuple | None, timezone: str, paths: list[Path],
                 ledger: Ledger, account: RowAccount) -> Rows:
    if not period or (period[0] is None and period[1] is None):
        return rows
    lo, hi = (_bound(p, timezone) for p in period)
    inside = np.ones(len(rows.t), dtype=bool)
    if lo is not None:
        inside &= rows.t >= lo
    if hi is not None:
        inside &= rows.t <= hi
    if len(rows.t) and not inside.any():
        span = pd.to_datetime([rows.t.min(), rows.t.max()], utc=True)
        raise IngestError(", ".join(map(str, paths)),
                          f"all {len(rows.t)} stamps fall outside the requested period "
                          f"{_period_text(period)}; the data span {span[0]} to {span[1]} UTC")
    out = ~inside
    for k in np.unique(rows.file[out]):
        sel = out & (rows.file == k)
        ledger.add(str(paths[k]), rows.line[sel], "", [""] * int(sel.sum()), "outside_period",
                   f"outside the requested period {_period_text(period)}")
    account.rejected += int(out.sum())
    return rows.take(inside)


def _keep_before(rows: Rows, latest: date | None, timezone: str, paths: list[Path],
                 ledger: Ledger, account: RowAccount) -> Rows:
    """Rows stamped after the local day ``latest`` go to the ledger: a logger clock or a
    typing error."""
    if latest is None:
        return rows
    limit = (pd.Timestamp(latest + timedelta(days=1)).tz_localize(timezone)
             .tz_convert("UTC").tz_localize(None).value)
    late = rows.t >= limit
    for k in np.unique(rows.file[late]):
        sel = late & (rows.file == k)
        ledger.add(str(paths[k]), rows.line[sel], "", [""] * int(sel.sum()), "implausible_date",
                   f"dated after {latest}, {AFTER_LATEST} (by default the day after the run): "
                   "a logger clock or typing error")
    account.rejected += int(late.sum())
    return rows.take(~late)


def _with_raw_lines(rejects: pd.DataFrame, encoding: str) -> pd.DataFrame:
    """Fill in the raw text of ledger rows recorded after parsing (duplicates, off-grid, period)."""
    blank = rejects["raw"] == ""
    for file in rejects.loc[blank, "file"].unique():
        text = read_text(Path(file), encoding)
        sel = blank & (rejects["file"] == file)
        rejects.loc[sel, "raw"] = [text.line(int(n)) for n in rejects.loc[sel, "line"]]
    return rejects


def _period_text(period: tuple) -> str:
    start, end = period
    if start is None:
        return f"up to {end}"
    return f"from {start}" if end is None else f"{start} to {end}"


def _bound(value: str | pd.Timestamp | None, timezone: str) -> int | None:
    if value is None:
        return None
    ts = pd.Timestamp(value)
    ts = ts.tz_localize(timezone) if ts.tzinfo is None else ts
    return int(ts.tz_convert("UTC").as_unit("ns").value)


def _range_check(rows: Rows) -> None:
    for name, values in rows.values.items():
        var = WEATHER_VARIABLES[name]
        if name == "wind_dir_deg":
            values[values == 360.0] = 0.0
            out = (values < 0.0) | (values > 360.0)
        else:
            out = (values < var.valid_min) | (values > var.valid_max)
        values[out] = np.nan
        rows.states[name][out] = Flag.OUT_OF_RANGE


def _flag_counts(states: np.ndarray) -> dict[str, int]:
    counts = np.bincount(states, minlength=len(Flag))
    return {Flag(k).name.lower(): int(c) for k, c in enumerate(counts) if c}


def _frame(grid: regular.Grid) -> pd.DataFrame:
    cols: dict[str, Iterable] = {}
    for name, values in grid.values.items():
        cols[name] = values
        cols[f"{name}_flag"] = flag_column(grid.states[name])
    index = pd.DatetimeIndex(grid.t.view("datetime64[ns]"), name="time_utc").tz_localize("UTC")
    return pd.DataFrame(cols, index=index, copy=False)
