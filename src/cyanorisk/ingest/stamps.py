"""Parsing dates, times and timestamps, and turning local stamps into UTC.

Station exports repeat the same few dates and times many times over, so each column is
dictionary-encoded and only its distinct values are parsed; the results are then spread back
over the rows. Invalid entries come back as a mask, never as silent NaT.

Midnight stamped 24:00 is the end of the day, the same instant as 00:00 of the next day
(ISO 8601:2000 section 5.3.2; ISO 8601-1:2019/Amd 1:2022).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import date

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from cyanorisk.ingest.dialects import sniff_date_order

NS_PER_DAY = 86_400 * 10**9
NAT = np.iinfo(np.int64).min
EARLIEST_DATE = date(1900, 1, 1)
"""Dates before this are not plausible for a station log or a lab sheet (configurable:
``[ingest] earliest_date``)."""
LAST_REPRESENTABLE = date(2261, 12, 31)
"""The last day nanosecond time stamps can hold (numpy and pandas: up to 2262-04-11)."""
_EPOCH = date(1970, 1, 1)


def day_number(d: date) -> int:
    """Days since 1970-01-01 of a date."""
    return (d - _EPOCH).days


def year_of_text(values: list[str]) -> np.ndarray:
    """The four-digit year written in each text, NaN where there is none (for saying why an
    unreadable stamp was refused)."""
    found = pc.extract_regex(pa.array(values, pa.string()), r"(?:^|\D)(?P<y>\d{4})(?:\D|$)")
    return pc.cast(pc.struct_field(found, "y"), pa.float64()).to_numpy(zero_copy_only=False)

_DATE = re.compile(r"^\s*(?P<first>\d{1,4})[./-](?P<second>\d{1,2})[./-](?P<third>\d{1,4})\s*$")
_TIME = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?\s*$")
_HHMM = re.compile(r"^\s*(\d{2})(\d{2})\s*$")


def distinct(values: pa.Array | pa.ChunkedArray) -> tuple[np.ndarray, list[str]]:
    """Codes (one per row) and the distinct strings of a text column, surrounding space removed.

    Texts that differ only in surrounding space may keep separate codes for the same stripped
    string; the parsers treat each code on its own, so that is harmless.
    """
    if not pa.types.is_dictionary(values.type):
        values = pc.dictionary_encode(values)
    if isinstance(values, pa.Array):
        values = pa.chunked_array([values])
    values = values.unify_dictionaries()
    if values.num_chunks == 0:
        return np.zeros(0, dtype=np.int64), []
    codes = np.concatenate([c.indices.to_numpy(zero_copy_only=False) for c in values.chunks])
    return codes.astype(np.int64), [u.strip() for u in values.chunk(0).dictionary.to_pylist()]


@dataclass
class DateParse:
    """Days since 1970-01-01 per distinct date string (NaN where invalid), and the order used."""

    days: np.ndarray
    order: str
    note: str | None


def parse_dates(uniques: list[str], order: str | None, coerce_year: int | None = None) -> DateParse:
    """Parse distinct date strings ('31/01/2020', '01/31/2020', '2020-01-31', two-digit years).

    Returns days since the epoch as float (NaN for a string that is not a date in ``order``,
    e.g. '31/02/2020').
    """
    fields = pc.extract_regex(pa.array(uniques, pa.string()), _DATE.pattern)
    parts = np.column_stack([
        pc.cast(pc.struct_field(fields, k), pa.float64()).to_numpy(zero_copy_only=False)
        for k in range(3)]) if uniques else np.zeros((0, 3))
    widths = np.column_stack([
        pc.fill_null(pc.utf8_length(pc.struct_field(fields, k)), 0).to_numpy(zero_copy_only=False)
        for k in range(3)]) if uniques else np.zeros((0, 3))
    note = None
    if order is None:
        ok = ~np.isnan(parts[:, 0])
        order, note = sniff_date_order(parts[ok, 0], parts[ok, 1], parts[ok, 2])
    idx = {"dmy": (2, 1, 0), "mdy": (2, 0, 1), "ymd": (0, 1, 2)}[order]
    year, month, day = (parts[:, k] for k in idx)
    two_digit = widths[:, idx[0]] <= 2  # '24' is 2024; '0001' is the year 1, not 2001
    year = np.where(two_digit, year + np.where(year < 70, 2000, 1900), year)
    if coerce_year is not None:
        year = np.where(np.isnan(year), np.nan, coerce_year)
    valid = ~np.isnan(year) & (month >= 1) & (month <= 12) & (day >= 1)
    y, m, dd = (np.where(valid, a, 1).astype(np.int64) for a in (year, month, day))
    valid &= dd <= days_in_month(y, m)  # 31/02 is not a date
    days = np.where(valid, days_from_civil(y, m, dd), np.nan)
    return DateParse(days, order, note)


def days_in_month(year: np.ndarray, month: np.ndarray) -> np.ndarray:
    """Length of each month [days] in the proleptic Gregorian calendar (leap years included)."""
    leap = ((year % 4 == 0) & (year % 100 != 0)) | (year % 400 == 0)
    lengths = np.array([31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])
    return lengths[month - 1] + ((month == 2) & leap)


def days_from_civil(year: np.ndarray, month: np.ndarray, day: np.ndarray) -> np.ndarray:
    """Days since 1970-01-01 of proleptic Gregorian dates, vectorised.

    References
    ----------
    .. [1] H. Hinnant, "chrono-Compatible Low-Level Date Algorithms" (2013), days_from_civil.
    """
    y = year - (month <= 2)
    era = np.floor_divide(y, 400)
    yoe = y - era * 400
    doy = (153 * (month + np.where(month > 2, -3, 9)) + 2) // 5 + day - 1
    doe = yoe * 365 + yoe // 4 - yoe // 100 + doy
    return era * 146097 + doe - 719468


def parse_times(uniques: list[str]) -> np.ndarray:
    """Nanoseconds after midnight per distinct time string; -1 where not a time of day.

    Accepts H:MM, HH:MM, HH:MM:SS and HHMM; 24:00 (and 24:00:00) is accepted as the end of the day.
    """
    out = np.full(len(uniques), -1, dtype=np.int64)
    for i, u in enumerate(uniques):
        m = _TIME.match(u) or _HHMM.match(u)
        if not m:
            continue
        h, mi = int(m.group(1)), int(m.group(2))
        s = int(m.group(3)) if m.re is _TIME and m.group(3) else 0
        if mi > 59 or s > 59 or h > 24 or (h == 24 and (mi or s)):
            continue
        out[i] = ((h * 60 + mi) * 60 + s) * 10**9
    return out


def parse_timestamps(values: pa.Array, order: str | None,
                     coerce_year: int | None = None) -> tuple[np.ndarray, np.ndarray, str, str | None]:
    """Parse one timestamp column.

    Returns ``(naive_ns, offset_aware, order, note)``: nanoseconds since the epoch (``NAT`` where
    invalid; for stamps that carry an offset such as '2020-01-31T09:30+10:00', already in UTC),
    a mask of those that carried an offset, the date order used and the sniffing note.
    """
    text = pc.utf8_trim_whitespace(values.cast(pa.string()))
    has_t = pc.match_substring_regex(text, r"^\d{4}-\d{2}-\d{2}[T ]").to_numpy(zero_copy_only=False)
    out = np.full(len(text), NAT, dtype=np.int64)
    aware = np.zeros(len(text), dtype=bool)
    note = None
    if has_t.any():
        iso = pc.filter(text, pa.array(has_t))
        iso_out, iso_aware = _parse_iso(iso)
        out[has_t], aware[has_t] = iso_out, iso_aware
    rest = ~has_t
    if rest.any():
        parts = pc.extract_regex(pc.filter(text, pa.array(rest)),
                                 r"^(?P<date>[^ T]+)(?:[ T]+(?P<time>.*))?$")
        date = pc.fill_null(pc.struct_field(parts, "date"), "")
        time = pc.fill_null(pc.struct_field(parts, "time"), "")
        time = pc.if_else(pc.equal(time, ""), "00:00", time)
        parsed = parse_date_time(date, time, order, coerce_year)
        order, note = parsed.order, parsed.note
        out[rest] = parsed.ns()
    return out, aware, order or "ymd", note


def _parse_iso(iso: pa.Array) -> tuple[np.ndarray, np.ndarray]:
    s = pd.Series(iso.to_pylist(), dtype=object)
    end_of_day = s.str.contains(r"[T ]24:00(?::00)?(?:\.0+)?(?=$|[Z+-])", regex=True)
    s = s.where(~end_of_day, s.str.replace(r"([T ])24:00", r"\g<1>00:00", regex=True))
    aware = s.str.contains(r"(?:Z|[+-]\d{2}:?\d{2})$", regex=True).to_numpy()
    out = np.full(len(s), NAT, dtype=np.int64)
    if aware.any():
        t = pd.to_datetime(s[aware], format="ISO8601", utc=True, errors="coerce")
        out[aware] = _ns(t)
    if (~aware).any():
        t = pd.to_datetime(s[~aware], format="ISO8601", errors="coerce")
        out[~aware] = _ns(t)
    bump = end_of_day.to_numpy() & (out != NAT)
    out[bump] += NS_PER_DAY
    return out, aware


def _ns(t: pd.Series | pd.DatetimeIndex) -> np.ndarray:
    """Nanoseconds since the epoch, ``NAT`` for NaT and for instants nanoseconds cannot hold
    (pandas may parse the year 1 or 2999 at a coarser resolution), whatever the resolution."""
    if isinstance(t, pd.Series):
        t = pd.DatetimeIndex(t)
    if t.tz is not None:
        t = t.tz_convert("UTC").tz_localize(None)
    seconds = t.as_unit("s").asi8
    lo, hi = (day_number(date(1678, 1, 1)) * 86_400, (day_number(LAST_REPRESENTABLE) + 1) * 86_400)
    fits = (seconds != NAT) & (seconds >= lo) & (seconds < hi)
    out = np.full(len(t), NAT, dtype=np.int64)
    out[fits] = t[fits].as_unit("ns").asi8
    return out


@dataclass
class DateTimeParse:
    """A date column and an optional time column, parsed row by row."""

    days: np.ndarray
    """Days since 1970-01-01 (NaN where the date is not one)."""
    tod: np.ndarray
    """Nanoseconds after midnight (-1 where the time is not one; 0 without a time column)."""
    order: str
    note: str | None

    def ns(self) -> np.ndarray:
        """Naive nanoseconds since the epoch; ``NAT`` where the date or the time is bad."""
        return to_ns(self.days, self.tod)


def to_ns(days: np.ndarray, tod: np.ndarray) -> np.ndarray:
    """Naive nanoseconds since the epoch from days (NaN: bad) and time of day (negative: bad);
    ``NAT`` for days that nanosecond stamps cannot hold (never an overflow into another year)."""
    lo, hi = day_number(date(1678, 1, 1)), day_number(LAST_REPRESENTABLE)
    bad = np.isnan(days) | (tod < 0) | (days < lo) | (days > hi)
    safe = np.where(bad, 0, np.nan_to_num(days)).astype(np.int64)
    return np.where(bad, NAT, safe * NS_PER_DAY + np.where(bad, 0, tod))


def parse_date_time(date: pa.Array, time: pa.Array | None, order: str | None,
                    coerce_year: int | None = None) -> DateTimeParse:
    """Parse a date column and an optional time column through their distinct values."""
    d_codes, d_uniques = distinct(date)
    parsed = parse_dates(d_uniques, order, coerce_year)
    days = parsed.days[d_codes]
    if time is None:
        tod = np.zeros(len(days), dtype=np.int64)
    else:
        t_codes, t_uniques = distinct(time)
        tod = parse_times(t_uniques)[t_codes]
    return DateTimeParse(days, tod, parsed.order, parsed.note)


def runs_newest_first(naive_ns: np.ndarray) -> bool:
    """True when consecutive rows mostly step back in time (exports that list newest first)."""
    valid = naive_ns[naive_ns != NAT]
    step = np.diff(valid)
    return int((step < 0).sum()) > int((step > 0).sum())


def localize(naive_ns: np.ndarray, timezone: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Local wall-clock stamps of a zone with daylight saving to UTC.

    Ambiguous stamps (the repeated hour when clocks go back) are resolved by their order in the
    file: in a file written oldest first, the first occurrence of a wall-clock time is read as
    daylight time and a later one as standard time; in a file written newest first (see
    :func:`runs_newest_first`), the other way round. Stamps in the hour skipped when clocks go
    forward do not exist.

    Returns
    -------
    utc_ns : numpy.ndarray
        UTC nanoseconds; ``NAT`` for stamps that do not exist in the zone.
    ambiguous : numpy.ndarray of bool
        Stamps that were ambiguous and resolved by file order.
    nonexistent : numpy.ndarray of bool
        Stamps in the skipped hour.

    References
    ----------
    The 'repeated hour' rule follows the order a logger writes in; common practice, no source.
    """
    idx = pd.DatetimeIndex(naive_ns.astype("datetime64[ns]"))
    loc = idx.tz_localize(timezone, ambiguous="NaT", nonexistent="NaT")
    out = _ns(loc)
    unresolved = (out == NAT) & (naive_ns != NAT)
    ambiguous = np.zeros(len(out), dtype=bool)
    nonexistent = np.zeros(len(out), dtype=bool)
    if unresolved.any():
        pos = np.flatnonzero(unresolved)
        sub = idx[pos]
        as_dst = _ns(sub.tz_localize(timezone, ambiguous=np.ones(len(pos), bool), nonexistent="NaT"))
        nonexistent[pos[as_dst == NAT]] = True
        amb_pos = pos[as_dst != NAT]
        if len(amb_pos):
            ambiguous[amb_pos] = True
            stamps = pd.Series(naive_ns[amb_pos])
            first = (stamps.groupby(stamps).cumcount() == 0).to_numpy()
            is_dst = ~first if runs_newest_first(naive_ns) else first
            resolved = _ns(idx[amb_pos].tz_localize(timezone, ambiguous=is_dst))
            out[amb_pos] = resolved
    return out, ambiguous, nonexistent
