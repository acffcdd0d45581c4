"""How a weather file is laid out: declared in the configuration, sniffed where left unsaid.

A :class:`WeatherDialect` names the separator, decimal mark, preamble, stamp columns and date
order, the zone the stamps are in, whether a stamp marks the start or the end of its interval,
the missing-value markers and, per column, the canonical variable and source unit. Whatever is
left as ``None`` is sniffed from the file by :func:`sniff_layout` and :func:`sniff_date_order`,
and every such assumption is reported in the ingest metadata.
"""

from __future__ import annotations

import re
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from cyanorisk.ingest.lines import TextFile, read_text, split_header
from cyanorisk.ingest.quality import IngestError
from cyanorisk.units import conversion
from cyanorisk.variables import WEATHER_VARIABLES

SEPARATORS = ("\t", ";", ",", "|")
"""Separators tried when a dialect does not declare one, in this order of preference."""
SEPARATOR_NAMES = {"\t": "tab", ";": "semicolon", ",": "comma", "|": "pipe"}
DATE_ORDERS = ("dmy", "mdy", "ymd")
STAMP_MARKS = ("start", "end")
DEFAULT_MISSING = ("", "-", "--", "M", "NA", "N/A", "n/a", "NaN", "nan", "///", "//", "null", "*")
"""Markers read as a missing value unless a dialect declares its own list."""

_OFFSET = re.compile(r"^(?:UTC)?([+-])(\d{1,2})(?::?(\d{2}))?$")


@dataclass(frozen=True)
class ColumnSpec:
    """What one file column holds: a canonical variable in a source unit, or nothing we use."""

    variable: str | None
    """Canonical variable name, or None to ignore the column."""
    unit: str | None = None
    """Source unit (see :mod:`cyanorisk.units`); None means the canonical unit."""


@dataclass(frozen=True)
class WeatherDialect:
    """Layout of a weather-station export. ``None`` fields are sniffed from the file."""

    separator: str | None = None
    """Field separator, one character (',', ';', a tab as "\t")."""
    decimal: str | None = None
    """Decimal mark, '.' or ','."""
    encoding: str = "utf-8"
    """Text encoding of the file ('utf-8', 'latin-1', 'utf-16')."""
    skip_lines: int | None = None
    """Preamble lines above the header."""
    date_column: str | None = None
    """The column of dates (with time_column for the time of day)."""
    time_column: str | None = None
    """The column of times of day (HH:MM, 00:00 to 24:00)."""
    timestamp_column: str | None = None
    """One column with date and time (ISO 8601 with or without offset, or date and time)."""
    date_order: str | None = None
    """'dmy', 'mdy' or 'ymd'."""
    stamp_zone: str = "local"
    """'local' (the site's zone, daylight saving included), 'UTC', or a fixed offset '+10:00'."""
    stamp_marks: str | None = None
    """Whether a stamp marks the 'start' or the 'end' of the interval it reports; sniffed when
    not given (a 24:00 stamp, or words such as 'hour ending' above the data, mean 'end';
    otherwise 'start' is assumed and said)."""
    missing: tuple[str, ...] = DEFAULT_MISSING
    columns: Mapping[str, ColumnSpec] = field(default_factory=dict)
    other_columns: str = "error"
    """What to do with a column that is neither declared nor canonical: 'error' or 'ignore'."""
    coerce_year: int | None = None
    """Put every stamp into this year (for typical-year files whose months come from different
    years); the stamp that ends the last day of the year moves to the next year."""

    def __post_init__(self) -> None:
        if self.separator is not None and len(self.separator) != 1:
            raise ValueError(f"separator must be one character, not {self.separator!r}")
        if self.decimal not in (None, ".", ","):
            raise ValueError(f"decimal must be '.' or ',', not {self.decimal!r}")
        if self.date_order not in (None, *DATE_ORDERS):
            raise ValueError(f"date_order must be one of {', '.join(DATE_ORDERS)}")
        if self.stamp_marks not in (None, *STAMP_MARKS):
            raise ValueError("stamp_marks must be 'start' or 'end'")
        if self.other_columns not in ("error", "ignore"):
            raise ValueError("other_columns must be 'error' or 'ignore'")
        zone_offset(self.stamp_zone)  # validates
        if self.timestamp_column and (self.date_column or self.time_column):
            raise ValueError("declare either timestamp_column or date_column/time_column")
        for name, spec in self.columns.items():
            if spec.variable is None:
                continue
            if spec.variable not in WEATHER_VARIABLES:
                raise ValueError(f"column '{name}': '{spec.variable}' is not a canonical weather "
                                 f"variable; valid: {', '.join(WEATHER_VARIABLES)}")
            if spec.unit is not None and spec.unit.lower() not in ("compass", "deg"):
                conversion(spec.unit)


def zone_offset(stamp_zone: str) -> int | None:
    """Fixed offset [minutes east of UTC] of a ``stamp_zone``; None for 'local'.

    Raises
    ------
    ValueError
        When the text is neither 'local', 'UTC' nor an offset like '+10:00' or 'UTC-05:00'.
    """
    if stamp_zone == "local":
        return None
    if stamp_zone.upper() in ("UTC", "Z", "GMT"):
        return 0
    m = _OFFSET.match(stamp_zone.strip())
    if not m:
        raise ValueError(f"stamp_zone must be 'local', 'UTC' or an offset like '+10:00', "
                         f"not {stamp_zone!r}")
    sign = 1 if m.group(1) == "+" else -1
    return sign * (int(m.group(2)) * 60 + int(m.group(3) or 0))


@dataclass(frozen=True)
class Layout:
    """The resolved layout of one file and the assumptions made to resolve it."""

    dialect: WeatherDialect
    header: list[str]
    header_index: int
    assumptions: tuple[str, ...]


@dataclass(frozen=True)
class Table:
    """Separator, preamble, decimal mark and header of a delimited file, declared or sniffed."""

    separator: str
    skip_lines: int
    decimal: str
    header: list[str]
    assumptions: tuple[str, ...]


def read_text_naming_column(path: Path, encoding: str, separator: str | None,
                            skip_lines: int | None, decimal: str | None,
                            declared_in: str = "the dialect") -> TextFile:
    """:func:`read_text`, with the column of a byte that is not in the encoding named (found by
    reading the file leniently)."""
    try:
        return read_text(path, encoding, declared_in)
    except IngestError as exc:
        if exc.line is None or exc.byte_in_line is None:
            raise
        try:
            raw = path.read_bytes()
            text = TextFile(path, raw.decode("utf-8", "replace").encode("utf-8"))
            table = sniff_table(text, separator, skip_lines, decimal)
            field = raw.split(b"\n")[exc.line - 1][:exc.byte_in_line - 1].count(
                table.separator.encode())
        except (IngestError, IndexError, UnicodeError):
            raise exc from None
        if exc.line <= table.skip_lines + 1 or field >= len(table.header):
            raise
        raise IngestError(path, exc.reason, line=exc.line, column=table.header[field]) from None


def sniff_table(text: TextFile, separator: str | None, skip_lines: int | None,
                decimal: str | None) -> Table:
    """Resolve separator, preamble and decimal mark of a file; report what was sniffed.

    The separator and the header line are chosen together: for each candidate separator the
    modal number of fields over the sampled lines is found; the header is the first line with
    that many fields.

    Raises
    ------
    IngestError
        When no candidate separator splits the lines into a steady number of fields, or the
        header has a single column.
    """
    said: list[str] = []
    sample = text.head(60)
    sep, skip = separator, skip_lines
    if sep is None or skip is None:
        candidates = [sep] if sep is not None else list(SEPARATORS)
        best = None
        for cand in candidates:
            counts = [len(split_header(line, cand)) if line.strip() else 0 for line in sample]
            modal = Counter(c for c in counts if c).most_common(1)[0][0] if any(counts) else 0
            if modal < 2:
                continue
            header_at = skip if skip is not None else next(
                (i for i, c in enumerate(counts) if c == modal), 0)
            if best is None or modal > best[1]:
                best = (cand, modal, header_at)
        if sep is not None and skip is None and best is not None and best[2] > 0:
            _refuse_wrong_separator(text.path, sample, sep)
        if best is None:
            what = f"separator {SEPARATOR_NAMES.get(sep, repr(sep))}" if sep else "any separator"
            raise IngestError(text.path, f"the lines do not split into columns with {what}; "
                                         "declare the separator in the dialect", line=1)
        if sep is None:
            said.append(f"separator: {SEPARATOR_NAMES[best[0]]} (sniffed)")
        if skip is None and best[2]:
            said.append(f"{best[2]} preamble line(s) above the header (sniffed)")
        sep, skip = best[0], best[2]
    lines = text.head(skip + 1)
    if len(lines) <= skip:
        raise IngestError(text.path, f"no header line: the file has {len(lines)} line(s) and the "
                                     f"layout skips {skip}")
    header = split_header(lines[skip], sep)
    if len(header) < 2:
        raise IngestError(text.path, f"the header has one column only with the "
                                     f"{SEPARATOR_NAMES.get(sep, repr(sep))} separator; the file "
                                     "uses another separator", line=skip + 1)
    if decimal is None:
        decimal = _sniff_decimal(text, sep, skip)
        if decimal == ",":
            said.append("decimal comma (sniffed)")
    return Table(sep, skip, decimal, header, tuple(said))


def _refuse_wrong_separator(path: object, sample: list[str], declared: str) -> None:
    """Raise when every sampled line splits evenly on another separator than the declared one
    (a semicolon file with decimal commas read as comma-separated looks like a preamble)."""
    lines = [line for line in sample if line.strip()]
    for other in SEPARATORS:
        if other == declared:
            continue
        counts = {len(split_header(line, other)) for line in lines}
        if len(counts) == 1 and counts.pop() >= 2:
            raise IngestError(path, f"the lines split evenly on {SEPARATOR_NAMES[other]}s, not on "
                                    f"the declared {SEPARATOR_NAMES.get(declared, repr(declared))} "
                                    "separator; correct the separator in the dialect", line=1)


def sniff_layout(text: TextFile, dialect: WeatherDialect) -> Layout:
    """Resolve a weather file's layout: :func:`sniff_table`, then the stamp columns."""
    table = sniff_table(text, dialect.separator, dialect.skip_lines, dialect.decimal)
    said = list(table.assumptions)
    header, skip = table.header, table.skip_lines
    date_col, time_col, ts_col = dialect.date_column, dialect.time_column, dialect.timestamp_column
    if not (date_col or ts_col):
        date_col, time_col, ts_col, note = _sniff_stamp_columns(header, text.path, skip + 1)
        said.append(note)
    for name in (date_col, time_col, ts_col):
        if name and name not in header:
            raise IngestError(text.path, f"the dialect names column '{name}' but the header has "
                                         f"{', '.join(header)}", line=skip + 1, column=name)
    marks = dialect.stamp_marks
    if marks is None:
        marks, note = sniff_stamp_marks(text, skip)
        said.append(note)
    resolved = replace(dialect, separator=table.separator, skip_lines=skip, decimal=table.decimal,
                       date_column=date_col, time_column=time_col, timestamp_column=ts_col,
                       stamp_marks=marks)
    return Layout(resolved, header, skip, tuple(said))


_END_WORDS = re.compile(r"\b(?:hour|period|interval)[ _-]?ending\b|\bending\b"
                        r"|\bend of (?:the )?(?:hour|interval|period)\b|\binterval end\b", re.I)
_START_WORDS = re.compile(r"\b(?:hour|period|interval)[ _-]?(?:beginning|starting)\b"
                          r"|\bbeginning\b|\bstart of (?:the )?(?:hour|interval|period)\b", re.I)
_END_OF_DAY = re.compile(rb"(?:^|[^0-9:])24:00(?![0-9])", re.M)


def sniff_stamp_marks(text: TextFile, skip: int) -> tuple[str, str]:
    """Whether a file's stamps mark the start or the end of their intervals, with the evidence.

    A stamp of 24:00 can only end an interval (ISO 8601:2000 section 5.3.2: 24:00 is the end
    of a calendar day). Words in the preamble or header
    ('hour ending', 'beginning') say it outright. Without either, the start is assumed, and the
    note says that it is an assumption.

    Returns
    -------
    marks : {'start', 'end'}
    note : str
        One sentence for the file's assumptions, naming the line of the evidence.
    """
    top = text.head(skip + 1)
    for k, line in enumerate(top, start=1):
        if found := _END_WORDS.search(line):
            return "end", (f"line {k} says '{found.group(0)}': stamps mark the end of the "
                           "interval (sniffed)")
    body_start = text.offset_of_line(skip + 1)
    hit = _END_OF_DAY.search(text.data, body_start)
    if hit is not None:
        number = int(np.searchsorted(text.starts, hit.start() + 1, side="right"))
        return "end", f"line {number} has 24:00: stamps mark the end of the interval (sniffed)"
    for k, line in enumerate(top, start=1):
        if found := _START_WORDS.search(line):
            return "start", (f"line {k} says '{found.group(0)}': stamps mark the start of the "
                             "interval (sniffed)")
    return "start", ("stamps assumed to mark the start of the interval: no 24:00 and no words "
                     "such as 'hour ending' in the file; set stamp_marks to confirm")


def _sniff_decimal(text: TextFile, sep: str, skip: int) -> str:
    if sep == ",":
        return "."
    body = "\n".join(text.head(skip + 200)[skip + 1:])
    commas = len(re.findall(rf"(?:^|{re.escape(sep)})-?\d+,\d+(?={re.escape(sep)}|$)", body, re.M))
    points = len(re.findall(rf"(?:^|{re.escape(sep)})-?\d+\.\d+(?={re.escape(sep)}|$)", body, re.M))
    return "," if commas > points else "."


def _sniff_stamp_columns(header: list[str], path: object,
                         line: int) -> tuple[str | None, str | None, str | None, str]:
    lower = {h.lower(): h for h in header}
    for key in ("timestamp", "datetime", "date_time", "date time", "time stamp", "time_utc"):
        if key in lower:
            return None, None, lower[key], f"timestamp column: '{lower[key]}' (sniffed)"
    date = next((h for h in header if h.lower().startswith("date")), None)
    time = next((h for h in header if h.lower().startswith("time")), None)
    if date and time:
        return date, time, None, f"date column '{date}', time column '{time}' (sniffed)"
    if date:
        return None, None, date, f"timestamp column: '{date}' (sniffed)"
    raise IngestError(path, f"no date or timestamp column found among {', '.join(header)}; "
                            "declare date_column and time_column, or timestamp_column, in the "
                            "dialect", line=line)


def sniff_date_order(first: np.ndarray, second: np.ndarray, third: np.ndarray) -> tuple[str, str]:
    """Choose the date order from the integer parts of all distinct dates in a file.

    Returns the order and a sentence saying why (reported as an assumption).
    """
    if len(first) and np.nanmax(first) > 31:
        return "ymd", "dates are year-first (sniffed)"
    if len(first) and np.nanmax(first) > 12:
        return "dmy", "dates are day-first: a first field above 12 (sniffed)"
    if len(second) and np.nanmax(second) > 12:
        return "mdy", "dates are month-first: a second field above 12 (sniffed)"
    return "dmy", "date order ambiguous (no field above 12); assumed day-first"


def column_plan(layout: Layout, path: object) -> tuple[dict[str, ColumnSpec], list[str]]:
    """Map each file column to a canonical variable.

    Returns the plan (file column -> spec, variables only) and the names of ignored columns.

    Raises
    ------
    IngestError
        A column that is neither declared, canonical nor a stamp column while the dialect says
        ``other_columns = 'error'``; a variable mapped twice.
    """
    d = layout.dialect
    stamp_cols = {d.date_column, d.time_column, d.timestamp_column} - {None}
    plan: dict[str, ColumnSpec] = {}
    ignored: list[str] = []
    for pos, name in enumerate(layout.header):
        if name in stamp_cols:
            continue
        spec = d.columns.get(name)
        if spec is None and name in WEATHER_VARIABLES:
            spec = ColumnSpec(name)
        if spec is None:
            if d.other_columns == "ignore" or name == "":
                ignored.append(name)
                continue
            raise IngestError(
                path, f"unknown column '{name}' (field {pos + 1} of the header): not a canonical "
                      f"variable and not declared in the dialect; map it, e.g. "
                      f"\"{name}\" = {{ variable = \"air_temp_c\", unit = \"degC\" }}, or ignore "
                      f"it with \"{name}\" = \"ignore\"", line=layout.header_index + 1, column=name)
        if spec.variable is None:
            ignored.append(name)
            continue
        if spec.variable in {s.variable for s in plan.values()}:
            raise IngestError(path, f"variable '{spec.variable}' is mapped from two columns",
                              line=layout.header_index + 1, column=name)
        plan[name] = spec
    if not plan:
        raise IngestError(path, "no column maps to a weather variable", line=layout.header_index + 1)
    return plan, ignored


def absent_columns(layout: Layout) -> list[str]:
    """The columns the dialect maps to a variable that this file's header lacks."""
    header = set(layout.header)
    return [name for name, spec in layout.dialect.columns.items()
            if spec.variable is not None and name not in header]


def absent_column_text(layout: Layout, name: str) -> str:
    """What a column the dialect declares, and the file lacks, means for its rows."""
    variable = layout.dialect.columns[name].variable
    return (f"the dialect declares column '{name}' ({variable}) but this file has no such "
            f"column: {variable} is missing for its rows")
