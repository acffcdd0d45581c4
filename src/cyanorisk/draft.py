"""A first site configuration drafted from a new user's own files (``cyanorisk init``).

:func:`draft_config` reads a station's weather exports and a laboratory's sheets and drafts the
TOML a site needs. Every key carries a comment saying what in the files decided it ("line 25 has
24:00 and no row has 00:00"); a value the files suggest but cannot settle is marked ``CONFIRM``
in its comment and listed in :attr:`Draft.to_confirm`; what the files cannot tell at all (the
water body's name, its time zone, its use, who decides advisories) is a blank starting with
:data:`cyanorisk.config.BLANK`, which :func:`cyanorisk.config.load_config` refuses, naming the
key, until it is filled in.

The separator, preamble and decimal mark are sniffed with the readers' own
:func:`cyanorisk.ingest.dialects.sniff_table` and the stamps parsed with
:mod:`cyanorisk.ingest.stamps`, so that the draft describes the files as the ingest reads them.
Input files are named by absolute paths; ``root`` is the configuration file's own folder, so
the clean tables, reports and models are written beside it.

The header words and value ranges behind each guess are documented data below
(:data:`HEADER_WORDS`, :data:`CYANOBACTERIA`); they are common practice, no source.
"""

from __future__ import annotations

import json
import os
import re
import textwrap
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.atomic import file_mode, settle, temporary_beside
from cyanorisk.compass import CALM, POINTS_16, VARIABLE
from cyanorisk.config import BLANK
from cyanorisk.errors import ConfigError, IngestError
from cyanorisk.ingest.counts import CENSOR_ABOVE, CENSOR_BELOW, MISSING, NOT_DETECTED, TOO_MANY, parse_count
from cyanorisk.ingest.dialects import DEFAULT_MISSING, SEPARATOR_NAMES, sniff_table
from cyanorisk.ingest.lines import Parsing, read_table, read_text, split_header
from cyanorisk.ingest.stamps import NS_PER_DAY, distinct, parse_dates, parse_times, to_ns
from cyanorisk.levels import SCHEMES
from cyanorisk.units import conversion
from cyanorisk.variables import WEATHER_VARIABLES

__all__ = ["CONFIRM", "CYANOBACTERIA", "HEADER_WORDS", "TYPICAL_YEAR", "Draft", "HeaderWords",
           "draft_config", "write_draft"]

CONFIRM = "CONFIRM"
"""Opens the comment of a drafted value that is a guess."""
TYPICAL_YEAR = 1990
"""The year stamps of a typical-year file are put into: a non-leap year, the one pvlib's
``iotools.get_pvgis_tmy`` coerces typical years to by default (pvlib 0.16)."""
HOUR_NS = 3_600 * 10**9


@dataclass(frozen=True)
class HeaderWords:
    """Words of a column header that say what the column holds."""

    variable: str | None
    """Canonical variable (:data:`cyanorisk.variables.WEATHER_VARIABLES`); None for a column
    cyanorisk does not use."""
    pattern: str
    """Regular expression searched in the header's letters and digits, lower case, without the
    unit in brackets ('Dry-bulb (C)' is searched as 'drybulb')."""
    what: str
    """What such a column holds, for the comment."""


HEADER_WORDS: tuple[HeaderWords, ...] = (
    HeaderWords(None, r"source|uncert|flag|^qc|qc$|quality|code|^std", "a source, quality or code "
                "column of another reading"),
    HeaderWords(None, r"batt|volt|panel|logger|signal|rssi", "a logger status reading, not weather"),
    HeaderWords(None, r"dew|wetbulb|vapou?r|pwat", "a humidity measure cyanorisk does not use"),
    HeaderWords(None, r"illum|zenithlum|luminance|dni|dhi|^etr|^direct|diffuse|beam|extrater|reflect"
                r"|albedo|^alb$|^uv|^par$|^net|netrad|longwave|^lw", "a radiation quantity other "
                "than global horizontal irradiance"),
    HeaderWords(None, r"sunshine|duration|quantity|soil|leaf|snow|^h?vis|ceil|cloud|cld|aod|evap|^et0"
                r"|^pet$|chill|feels|apparent|heat|wth|metar|run$", "a quantity cyanorisk does not use"),
    HeaderWords("water_temp_c", r"water|^wt(emp|mp)?$|^tw$|^sst$|^wtr", "the water temperature"),
    HeaderWords("air_temp_max_c", r"(max|high)(air)?t(emp)?|t(emp)?(air)?max|^tx$", "the highest air "
                "temperature"),
    HeaderWords("air_temp_min_c", r"(min|low)(air)?t(emp)?|t(emp)?(air)?min|^tn$", "the lowest air "
                "temperature"),
    HeaderWords("air_temp_c", r"drybulb|temp|^(air)?t(air)?$|^ta$|^airt|^at$", "the air temperature"),
    HeaderWords("wind_gust_ms", r"gust|^wg$|peak|windmax|^ws(pd)?max$|maxw", "the highest gust"),
    HeaderWords("wind_dir_deg", r"dir|^wd$|bearing", "the wind direction"),
    HeaderWords("wind_speed_ms", r"wind|spd|speed|^ws$|^wsp", "the wind speed"),
    HeaderWords("rain_mm", r"rain|precip|prcp|^ppt|^rr$", "the rainfall"),
    HeaderWords("rel_humidity_pct", r"hum|^rh", "the relative humidity"),
    HeaderWords("solar_wm2", r"solar|ghi|global|rad|pyran|^sr$|swin|swdown|insol", "the global solar "
                "irradiance"),
    HeaderWords("pressure_hpa", r"press|^pres$|baro|^bp$|slp|qfe|qnh|^p$|stnp|^atm", "the air pressure"),
)
"""What a weather column's header says it holds, tried in this order (the first match wins).
Common practice, no source."""

OTHER_UNITS = {"h", "hr", "hrs", "hour", "hours", "min", "s", "sec", "m", "cm", "km", "lx", "lux",
               "cd/m^2", "cd/m2", "tenths", "okta", "oktas", "code", "metar code", "unitless",
               "v", "volts", "ma", "ppm"}
"""Units in a header that belong to no weather variable cyanorisk reads."""

CYANOBACTERIA: dict[str, bool] = {
    "Microcystis": True, "Dolichospermum": True, "Anabaena": True, "Planktothrix": True,
    "Cylindrospermopsis": True, "Raphidiopsis": True, "Nodularia": True,
    "Aphanizomenon": False, "Oscillatoria": False, "Cuspidothrix": False, "Pseudanabaena": False,
    "Woronichinia": False, "Chrysosporum": False, "Aphanocapsa": False, "Aphanothece": False,
    "Chroococcus": False, "Coelosphaerium": False, "Gloeotrichia": False, "Limnothrix": False,
    "Lyngbya": False, "Merismopedia": False, "Phormidium": False, "Snowella": False,
    "Synechococcus": False, "Synechocystis": False, "Anabaenopsis": False,
    "Sphaerospermopsis": False, "Planktolyngbya": False, "Romeria": False, "Radiocystis": False,
    "Gomphosphaeria": False, "Nostoc": False, "Trichodesmium": False, "Arthrospira": False,
    "Leptolyngbya": False, "Geitlerinema": False, "Jaaginema": False, "Tychonema": False,
}
"""Cyanobacterial genera, each with whether it is commonly reported as a toxin producer.
Common practice, no source: the draft marks every entry for the user to confirm."""

_BRACKET = re.compile(r"^(?P<label>.*?)\s*[(\[]\s*(?P<unit>[^)\]]*?)\s*[)\]]\s*$")
_TRAILING_UNIT = re.compile(r"^(?P<label>.*?\S)[\s_]+(?P<unit>km/h|kmh|kph|m/s|mps|knots|kts|kt|mph"
                            r"|degc|degf|°c|°f|hpa|mbar|mb|kpa|inhg|w/m2|w/m\^2|mm|in|%|pct)$", re.I)
_DATE_TEXT = re.compile(r"^\d{1,4}[./-]\d{1,2}[./-]\d{1,4}$")
_TIME_TEXT = re.compile(r"^\d{1,2}:\d{2}(?::\d{2}(?:\.\d+)?)?$")
_STAMP_TEXT = re.compile(r"^(?P<date>\d{1,4}[./-]\d{1,2}[./-]\d{1,4})(?:[T ]+(?P<time>\d{1,2}:\d{2}"
                         r"(?::\d{2}(?:\.\d+)?)?))?\s*(?P<offset>Z|[+-]\d{2}:?\d{2})?$")
_DATE_FIELDS = re.compile(r"^(\d{1,4})[./-](\d{1,2})[./-](\d{1,4})")
_DATE_FORMAT = re.compile(r"\b(dd|mm|yyyy|yy)[./-](dd|mm)[./-](dd|mm|yyyy|yy)\b", re.I)
_ENDING = re.compile(r"\b(?:hour|period|interval)[ _-]?ending\b|\bending\b|\bend\b", re.I)
_BEGINNING = re.compile(r"\b(?:hour|period|interval)[ _-]?(?:beginning|starting)\b|\bbeginning\b"
                        r"|\bstart\b", re.I)
_UTC_WORDS = re.compile(r"(?<![A-Za-z])(?:UTC|GMT)\s*(?P<offset>[+-]\s*\d{1,2}(?:[:.]?\d{2}|\.5)?)?", re.I)
_ZONE_WORDS = re.compile(r"\b(?:time ?zone|utc offset|tz)\W+(?P<offset>[+-]?\d{1,2}(?:[:.]\d{1,2})?)\b",
                         re.I)
_COUNT_UNIT = re.compile(r"cells\s*(?:/|per)\s*(m?l)\b|cells\s*(m?l)-1", re.I)
_MONTHS = ("January", "February", "March", "April", "May", "June", "July", "August",
           "September", "October", "November", "December")
_SENTINELS = {-99.0, -999.0, -9999.0, -99999.0, 999.0, 9999.0, 99999.0, -6999.0, -7999.0, -9900.0,
              -99.9, -999.9, 999.9}


@dataclass
class Draft:
    """A drafted configuration and what it rests on."""

    text: str
    """The configuration, TOML, with a comment on every key."""
    evidence: list[str]
    """One sentence per value drawn from the files, with what in them decided it."""
    to_confirm: list[str]
    """The guesses the files could not settle, each saying what to check."""
    blanks: list[str] = field(default_factory=list)
    """Keys left to fill in (their values start with :data:`cyanorisk.config.BLANK`)."""


def draft_config(weather: Sequence[Path], samples: Sequence[Path] = ()) -> Draft:
    """Draft a site configuration from its weather exports and lab sheets.

    Parameters
    ----------
    weather : sequence of paths
        A station's exports, all in one layout.
    samples : sequence of paths, optional
        A laboratory's phytoplankton sheets, all in one layout.

    Returns
    -------
    Draft
        The TOML text, the evidence of each value, the guesses to confirm and the blanks. The
        text becomes a configuration :func:`cyanorisk.config.load_config` accepts once its
        blanks are filled in.

    Raises
    ------
    IngestError
        A file that cannot be read, or that has no column of dates.
    ValueError
        No weather file given.

    Notes
    -----
    Reads the files and writes nothing; the same files give the same draft.

    Examples
    --------
    >>> draft = draft_config([Path("aws_2024.txt")], [Path("lab.csv")])  # doctest: +SKIP
    >>> write_draft(draft, Path("site.toml"))  # doctest: +SKIP
    >>> print("\\n".join(draft.to_confirm))  # doctest: +SKIP
    """
    weather = [Path(p) for p in weather]
    samples = [Path(p) for p in samples]
    if not weather:
        raise ValueError("a draft needs at least one weather file")
    doc = _Document()
    _draft_top(doc)
    station = _draft_weather(weather, doc)
    lab = _draft_lab(samples, doc) if samples else None
    _draft_site(doc, station, lab, weather, samples)
    return doc.finish(weather, samples)


def write_draft(draft: Draft, out: Path) -> Path:
    """Write a draft's text to ``out`` atomically, never over an existing file.

    Raises
    ------
    ConfigError
        When ``out`` exists; nothing is written.
    """
    out = Path(out)
    if out.exists():
        raise ConfigError(out, None, "a file is already there; the draft is not written over it, "
                                     "so choose another path or move that file away")
    tmp = temporary_beside(out)
    try:
        tmp.write_text(draft.text, encoding="utf-8", newline="\n")
        settle(tmp, file_mode())
        try:
            os.link(tmp, out)  # atomic, and fails rather than replace a file made meanwhile
        except FileExistsError:
            raise ConfigError(out, None, "a file appeared there while the draft was written; it "
                                         "is left as it was") from None
        except OSError:  # a file system without hard links
            if out.exists():
                raise ConfigError(out, None, "a file is already there; the draft is not written "
                                             "over it") from None
            os.replace(tmp, out)
    finally:
        tmp.unlink(missing_ok=True)
    return out


# ---------------------------------------------------------------------------------------------
# The document: tables of keys, each with its value and comment
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Blank:
    hint: str

    @property
    def text(self) -> str:
        return f"{BLANK}: {self.hint}"


@dataclass
class _Entry:
    key: str
    value: Any
    note: str


@dataclass
class _Table:
    header: str | None
    """'[name]', '[[sites]]' or None for the top level."""
    where: str
    """Dotted path of the table as configuration errors name it ('sites[0].weather')."""
    intro: list[str] = field(default_factory=list)
    entries: list[_Entry] = field(default_factory=list)


class _Document:
    """The configuration being drafted, with its evidence, guesses and blanks."""

    def __init__(self) -> None:
        self.tables: list[_Table] = []
        self.evidence: list[str] = []
        self.to_confirm: list[str] = []
        self.blanks: list[str] = []

    def table(self, header: str | None, where: str, *intro: str) -> _Table:
        t = _Table(header, where, list(intro))
        self.tables.append(t)
        return t

    def _full(self, table: _Table, key: str) -> str:
        name = key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else json.dumps(key, ensure_ascii=False)
        return f"{table.where}.{name}" if table.where else name

    def fixed(self, table: _Table, key: str, value: Any, note: str) -> None:
        """A value that does not come from the files (a policy, a default)."""
        table.entries.append(_Entry(key, value, note))

    def found(self, table: _Table, key: str, value: Any, evidence: str) -> None:
        """A value the files settle."""
        table.entries.append(_Entry(key, value, evidence))
        self.evidence.append(f"{self._full(table, key)} = {_toml(value)}: {evidence}")

    def guess(self, table: _Table, key: str, value: Any, evidence: str, check: str) -> None:
        """A value the files suggest but do not settle; ``check`` says what to confirm."""
        table.entries.append(_Entry(key, value, f"{CONFIRM}: {evidence}; {check}"))
        self.evidence.append(f"{self._full(table, key)} = {_toml(value)}: {evidence}")
        self.to_confirm.append(f"{self._full(table, key)} = {_toml(value)}: {check}")

    def blank(self, table: _Table, key: str, hint: str, note: str) -> None:
        """A value only the user can give."""
        table.entries.append(_Entry(key, _Blank(hint), note))
        self.blanks.append(self._full(table, key))

    def finish(self, weather: list[Path], samples: list[Path]) -> Draft:
        out = ["# cyanorisk site configuration drafted from these files:"]
        out += [f"#   {p.resolve()}" for p in [*weather, *samples]]
        out += ["#",
                f"# Values starting with \"{BLANK}\" are for you to give: cyanorisk refuses this file,",
                "# naming the key, until each is filled in. Comments starting with "
                f"{CONFIRM} mark guesses",
                "# the files could not settle; every other comment says what in the files decided "
                "the value."]
        for t in self.tables:
            out.append("")
            out += [f"# {line}" for text in t.intro for line in textwrap.wrap(text, 100)]
            if t.header:
                out.append(t.header)
            for e in t.entries:
                out += _line(e)
        return Draft("\n".join(out) + "\n", self.evidence, self.to_confirm, self.blanks)


def _line(entry: _Entry) -> list[str]:
    key = entry.key if re.fullmatch(r"[A-Za-z0-9_-]+", entry.key) else json.dumps(entry.key,
                                                                                   ensure_ascii=False)
    body = f"{key} = {_toml(entry.value)}"
    note = " ".join(entry.note.split())
    if len(body) + len(note) + 4 <= 110:
        return [f"{body}  # {note}"]
    return [f"# {line}" for line in textwrap.wrap(note, 100)] + [body]


def _toml(value: Any) -> str:
    """A TOML value: string, boolean, number, list or inline table."""
    if isinstance(value, _Blank):
        value = value.text
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False).replace("\x7f", "\\u007f")
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml(v)}" for k, v in value.items()) + " }"
    raise TypeError(f"no TOML form for {value!r}")


# ---------------------------------------------------------------------------------------------
# Reading files as text columns
# ---------------------------------------------------------------------------------------------

@dataclass
class _Sheet:
    """Files of one layout, every column as text, every row with its file and line."""

    paths: list[Path]
    encoding: str
    encoding_note: str
    separator: str
    skip_lines: int
    decimal: str
    header: list[str]
    head: list[str]
    """The first lines of the first file (preamble and header included)."""
    text: dict[str, np.ndarray]
    file: np.ndarray
    line: np.ndarray
    headers: list[list[str]]
    """The header of each file (``header`` has every column of any of them)."""
    _distinct: dict[str, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)

    def at(self, row: int) -> str:
        """Where a row is, e.g. 'tallowbark_aws_2023.txt line 27' ('line 27' for one file)."""
        line = f"line {int(self.line[row])}"
        return f"{self.paths[int(self.file[row])].name} {line}" if len(self.paths) > 1 else line

    def distinct(self, column: str) -> tuple[np.ndarray, np.ndarray]:
        """Codes (one per row) and the distinct texts of a column."""
        if column not in self._distinct:
            codes, uniques = pd.factorize(self.text[column], use_na_sentinel=False)
            self._distinct[column] = (codes.astype(np.int64), np.asarray(uniques, dtype=object))
        return self._distinct[column]

    def lacking(self, columns: Sequence[str]) -> list[str]:
        """Files whose header lacks one of ``columns``, each with what it lacks."""
        out = []
        for path, header in zip(self.paths, self.headers, strict=True):
            gone = [c for c in columns if c not in header]
            if gone:
                out.append(f"{path.name} has no column {', '.join(repr(c) for c in gone)}")
        return out

    def first_rows(self, column: str) -> np.ndarray:
        """The first row holding each distinct text of a column."""
        codes, uniques = self.distinct(column)
        first = np.full(len(uniques), -1, dtype=np.int64)
        present, at = np.unique(codes, return_index=True)
        first[present] = at
        return first


def _encoding(raw: bytes) -> tuple[str, str]:
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16", "the file opens with a UTF-16 byte-order mark"
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        return "latin-1", (f"byte 0x{raw[exc.start]:02x} on line {line} is not UTF-8, so the file "
                           "is read as latin-1")
    if raw.isascii():
        return "utf-8", "every byte is ASCII, which UTF-8 reads as it is"
    return "utf-8", "the file decodes as UTF-8"


def _read_sheet(paths: list[Path]) -> _Sheet:
    parts: list[tuple[dict[str, np.ndarray], np.ndarray, np.ndarray]] = []
    first = None
    for k, path in enumerate(paths):
        if not path.is_file():
            raise IngestError(path, "no such file")
        encoding, note = _encoding(path.read_bytes())
        text = read_text(path, encoding)
        table = sniff_table(text, first.separator if first else None, None,
                            first.decimal if first else None)
        raw = read_table(text, table.skip_lines, Parsing(table.separator, table.decimal, (),
                                                         string_columns=tuple(table.header)))
        columns = {}
        for h in table.header:
            codes, uniques = distinct(raw.columns[h])
            columns[h] = np.asarray(uniques, dtype=object)[codes]
        if first is None:
            first = _Sheet(paths, encoding, note, table.separator, table.skip_lines, table.decimal,
                           list(table.header), text.head(table.skip_lines + 60), {}, np.zeros(0),
                           np.zeros(0), [])
        elif encoding != first.encoding and first.encoding == "utf-8":
            first.encoding, first.encoding_note = encoding, f"{path.name}: {note}"
        first.header += [h for h in table.header if h not in first.header]
        first.headers.append(table.header)
        parts.append((columns, np.full(raw.n_rows, k), raw.line_numbers))
    assert first is not None
    first.text = {h: np.concatenate([p[0].get(h, np.full(len(p[1]), "", dtype=object)) for p in parts])
                  for h in first.header}
    first.file = np.concatenate([p[1] for p in parts])
    first.line = np.concatenate([p[2] for p in parts])
    if not len(first.file):
        raise IngestError(paths[0], "no data rows below the header")
    return first


def _layout(doc: _Document, table: _Table, sheet: _Sheet, what: str) -> None:
    """separator, decimal, encoding and skip_lines, with their evidence."""
    name = SEPARATOR_NAMES.get(sheet.separator, repr(sheet.separator))
    body = sheet.head[sheet.skip_lines:]
    fields = len(sheet.headers[0])
    even = sum(1 for line in body if line.strip() and len(split_header(line, sheet.separator)) == fields)
    doc.found(table, "separator", sheet.separator,
              f"the header (line {sheet.skip_lines + 1}) and {even - 1} of the lines below it split "
              f"into {fields} fields on {name}s")
    sample = "\n".join(body[1:])
    if sheet.decimal == ",":
        m = re.search(r"-?\d+,\d+", sample)
        doc.found(table, "decimal", ",", f"values such as '{m.group(0) if m else ''}' use a "
                                         "decimal comma")
    else:
        m = re.search(r"(?<![\d.])-?\d+\.\d+(?![\d.])", sample)
        if m:
            doc.found(table, "decimal", ".", f"values such as '{m.group(0)}' use a decimal point")
        else:
            doc.fixed(table, "decimal", ".", "no value in the first lines has a fractional part; "
                                             "the decimal point is assumed")
    if sheet.encoding == "latin-1":
        doc.guess(table, "encoding", sheet.encoding, sheet.encoding_note,
                  f"check the accented letters of the {what} read right (cp1252 is the other "
                  "common choice)")
    else:
        doc.found(table, "encoding", sheet.encoding, sheet.encoding_note)
    if sheet.skip_lines:
        above = sheet.head[0].strip()
        above = above if len(above) <= 60 else above[:57] + "..."
        lines = "line 1" if sheet.skip_lines == 1 else f"lines 1 to {sheet.skip_lines}"
        verb = "does" if sheet.skip_lines == 1 else "do"
        doc.found(table, "skip_lines", sheet.skip_lines,
                  f"{lines} above the header ({above!r}) {verb} not split into its fields")
    else:
        doc.found(table, "skip_lines", 0, "the header is the first line")


# ---------------------------------------------------------------------------------------------
# Dates and times
# ---------------------------------------------------------------------------------------------

@dataclass
class _Stamps:
    """Stamps of a sheet's rows as written (wall clock, no zone)."""

    ns: np.ndarray
    """Nanoseconds since the epoch, naive; valid only where ``valid``."""
    days: np.ndarray
    tod: np.ndarray
    """Time of day as written [ns]; 24:00 is a whole day."""
    valid: np.ndarray
    offsets: list[str]
    """UTC offsets written in the stamps (ISO 8601 with offset), if any."""


def _share(uniques: np.ndarray, pattern: re.Pattern) -> float:
    filled = [u for u in uniques if u]
    return sum(1 for u in filled if pattern.match(u)) / len(filled) if filled else 0.0


def _date_order(sheet: _Sheet, texts: np.ndarray, first_row: np.ndarray, sequence: np.ndarray,
                label: str) -> tuple[str, str, bool]:
    """The date order of distinct date texts, its evidence and whether it is settled.

    ``first_row`` is the first row of each text (for the evidence), ``sequence`` the texts'
    indices in row order (for the fallback: the day changes more often than the month).
    """
    found = [_DATE_FIELDS.match(t) for t in texts]
    parts = np.array([[float(x) for x in m.groups()] if m else [np.nan] * 3 for m in found],
                     dtype=float).reshape(-1, 3)
    widths = np.array([len(m.group(1)) if m else 0 for m in found])
    ok = ~np.isnan(parts[:, 0])
    hint = _DATE_FORMAT.search(label)
    hinted = "".join(g[0].lower() for g in hint.groups()) if hint else None
    hinted = hinted if hinted in ("dmy", "mdy", "ymd") else None

    def example(mask: np.ndarray) -> str:
        k = int(np.flatnonzero(mask)[np.argmin(first_row[mask])])
        return f"{sheet.at(int(first_row[k]))} has '{texts[k]}'"

    year_first = ok & ((widths == 4) | (parts[:, 0] > 31))
    if year_first.any():
        order, why = "ymd", f"{example(year_first)}: the year comes first"
    elif (ok & (parts[:, 0] > 12)).any():
        order, why = "dmy", f"{example(ok & (parts[:, 0] > 12))}: a first field above 12 is the day"
    elif (ok & (parts[:, 1] > 12)).any():
        order, why = "mdy", f"{example(ok & (parts[:, 1] > 12))}: a second field above 12 is the day"
    elif hinted:
        return hinted, f"the header '{label}' gives the date form", True
    else:
        seq = parts[sequence[ok[sequence]]]
        seq = seq[np.r_[True, (np.diff(seq, axis=0) != 0).any(axis=1)]] if len(seq) else seq
        moves = (np.diff(seq, axis=0) != 0).sum(axis=0) if len(seq) > 1 else np.zeros(3, int)
        order = "dmy" if moves[0] >= moves[1] else "mdy"
        return order, (f"no date field is above 12; from one date to the next the first field "
                       f"changes {int(moves[0])} times and the second {int(moves[1])}, so the "
                       f"{'first' if order == 'dmy' else 'second'} is taken for the day"), False
    if hinted and hinted != order:
        return order, why + f", though the header '{label}' says otherwise", False
    return order, why + (f"; the header '{label}' says the same" if hinted else ""), True


def _parse_stamps(sheet: _Sheet, date_col: str, time_col: str | None, order: str,
                  coerce_year: int | None) -> _Stamps:
    codes, uniques = sheet.distinct(date_col)
    offsets: list[str] = []
    if time_col is None:
        found = [_STAMP_TEXT.match(u) for u in uniques]
        dates = [m.group("date") if m else "" for m in found]
        times = [(m.group("time") or "00:00") if m else "" for m in found]
        offsets = sorted({m.group("offset") for m in found if m and m.group("offset")})
        days = parse_dates(dates, order, coerce_year).days[codes]
        tod = parse_times(times)[codes]
    else:
        days = parse_dates(list(uniques), order, coerce_year).days[codes]
        t_codes, t_uniques = sheet.distinct(time_col)
        tod = parse_times(list(t_uniques))[t_codes]
    valid = ~np.isnan(days) & (tod >= 0)
    return _Stamps(to_ns(days, np.where(valid, tod, 0)), days, tod, valid, offsets)


def _year_month(texts: np.ndarray, order: str) -> tuple[np.ndarray, np.ndarray]:
    parts = np.array([[float(x) for x in m.groups()] if (m := _DATE_FIELDS.match(t)) else [np.nan] * 3
                      for t in texts], dtype=float).reshape(-1, 3)
    y, m, _ = (parts[:, k] for k in {"dmy": (2, 1, 0), "mdy": (2, 0, 1), "ymd": (0, 1, 2)}[order])
    return np.where(y < 100, y + np.where(y < 70, 2000, 1900), y), m


def _typical_year(sheet: _Sheet, column: str, order: str) -> str | None:
    """Evidence that the months come from different years, each once (a typical-year file)."""
    codes, uniques = sheet.distinct(column)
    texts = np.array([(m.group("date") if (m := _STAMP_TEXT.match(u)) else u) for u in uniques],
                     dtype=object)
    y_u, m_u = _year_month(texts, order)
    year, month = y_u[codes], m_u[codes]
    ok = ~np.isnan(year) & ~np.isnan(month)
    year, month = year[ok], month[ok]
    if len(np.unique(year)) < 2:
        return None
    per_month = pd.Series(year).groupby(month).nunique()
    if (per_month > 1).any():
        return None
    starts = np.r_[True, month[1:] != month[:-1]]
    seq = year[starts]
    steps = np.diff(seq)
    if (steps >= 0).all() or (steps <= 0).all():
        return None
    pairs = pd.Series(year).groupby(month).first()
    listed = ", ".join(f"{_MONTHS[int(m) - 1]} {int(y)}" for m, y in pairs.items())
    return (f"the {len(pairs)} months come from {len(np.unique(year))} different years, each month "
            f"from one year only ({listed}): a typical-year file; every stamp is put into "
            f"{TYPICAL_YEAR}, a non-leap year")


def _interval(ns: np.ndarray) -> tuple[int, int, int]:
    """The modal step between consecutive distinct stamps [ns], how many steps have it, of how
    many."""
    u = np.unique(ns)
    steps = np.diff(u)
    if not len(steps):
        return 0, 0, 0
    values, counts = np.unique(steps, return_counts=True)
    k = int(np.argmax(counts))
    return int(values[k]), int(counts[k]), len(steps)


def _interval_text(step: int) -> str | None:
    td = pd.Timedelta(step, "ns")
    if td < pd.Timedelta("1min") or pd.Timedelta("1D") % td:
        return None
    if td == pd.Timedelta("1D"):
        return "1D"
    minutes = int(td / pd.Timedelta("1min"))
    return f"{minutes // 60}h" if minutes % 60 == 0 else f"{minutes}min"


def _clock(ns: int) -> str:
    minutes = int(ns // (60 * 10**9))
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def _when(ns: int) -> str:
    return pd.Timestamp(int(ns), unit="ns").strftime("%Y-%m-%d")


# ---------------------------------------------------------------------------------------------
# Weather
# ---------------------------------------------------------------------------------------------

@dataclass
class _Station:
    """What the weather files told about the site."""

    dialect: str
    interval: str | None
    interval_note: str
    offset: str | None
    """The stamps' fixed UTC offset, when the files say it."""
    warmest: tuple[int, float] | None
    """The warmest month of the record (1-12) and its mean air temperature [file unit]."""


def _stamp_columns(sheet: _Sheet) -> tuple[str, str | None, str, str]:
    """The stamp columns: (date or timestamp column, time column or None, and the evidence of
    each)."""
    dates, times, stamps = [], [], []
    for h in sheet.header:
        _, uniques = sheet.distinct(h)
        if _share(uniques, _DATE_TEXT) >= 0.9:
            dates.append(h)
        elif _share(uniques, _TIME_TEXT) >= 0.9:
            times.append(h)
        elif _share(uniques, _STAMP_TEXT) >= 0.9:
            stamps.append(h)
    if stamps:
        col = stamps[0]
        return col, None, (f"the column holds dates with times, such as '{sheet.text[col][0]}' "
                           f"({sheet.at(0)})"), ""
    if dates and times:
        d, t = dates[0], times[0]
        return d, t, (f"the column holds dates, such as '{sheet.text[d][0]}' ({sheet.at(0)})"), \
            f"the column holds times of day, such as '{sheet.text[t][0]}' ({sheet.at(0)})"
    if dates:
        d = dates[0]
        return d, None, (f"the column holds dates, such as '{sheet.text[d][0]}' ({sheet.at(0)}), and "
                         "no column holds times of day"), ""
    raise IngestError(sheet.paths[0], f"no column of dates found among {', '.join(sheet.header)}; a "
                                      "draft needs one (e.g. '31/01/2024' or '2024-01-31T09:30')",
                      line=sheet.skip_lines + 1)


def _slug(names: list[str], fallback: str) -> str:
    stems = [re.sub(r"[_\-. ]*(?:19|20)\d{2}(?:[_\-.]?\d{2}){0,2}$|[_\-. ]+\d+$", "", n) for n in names]
    common = os.path.commonprefix(stems) or stems[0]
    slug = re.sub(r"[^a-z0-9]+", "_", common.lower()).strip("_")
    return slug or fallback


def _draft_weather(paths: list[Path], doc: _Document) -> _Station:
    sheet = _read_sheet(paths)
    name = _slug([p.stem for p in paths], "station")
    t = doc.table(f"[dialects.{name}]", f"dialects.{name}",
                  f"How the station's exports are laid out, as read from {len(paths)} file(s).")
    _layout(doc, t, sheet, "weather files")
    date_col, time_col, how, how_time = _stamp_columns(sheet)
    key = "timestamp_column" if time_col is None and _is_stamp(sheet, date_col) else "date_column"
    doc.found(t, key, date_col, how)
    if time_col:
        doc.found(t, "time_column", time_col, how_time)
    codes, uniques = sheet.distinct(date_col)
    date_texts = np.array([(m.group("date") if (m := _STAMP_TEXT.match(u)) else u) for u in uniques],
                          dtype=object)
    order, why, settled = _date_order(sheet, date_texts, sheet.first_rows(date_col), codes, date_col)
    if settled:
        doc.found(t, "date_order", order, why)
    else:
        doc.guess(t, "date_order", order, why, "check a date whose day is 13 or more in the file")
    typical = _typical_year(sheet, date_col, order)
    stamps = _parse_stamps(sheet, date_col, time_col, order, TYPICAL_YEAR if typical else None)
    if not stamps.valid.any():
        raise IngestError(paths[0], f"no row has a date and time that can be read in '{date_col}'")
    step, n_modal, n_steps = _interval(stamps.ns[stamps.valid])
    values = [h for h in sheet.header if h not in (date_col, time_col)]
    ongrid = stamps.valid & (stamps.tod % step == 0) if step else stamps.valid
    zone, zone_note, zone_settled, offset = _stamp_zone(sheet, stamps, ongrid, step, values,
                                                        date_col, time_col, typical is not None)
    if zone is None:
        doc.blank(t, "stamp_zone", "the logger's fixed UTC offset, e.g. \"+10:00\" (no daylight-saving "
                                   "gap or repeat seen)", zone_note)
    elif zone_settled:
        doc.found(t, "stamp_zone", zone, zone_note)
    else:
        doc.guess(t, "stamp_zone", zone, zone_note, "check whether the logger's clock follows "
                                                    "daylight saving")
    marks, marks_note, marks_settled = _stamp_marks(sheet, stamps, ongrid, step, date_col, time_col)
    if marks_settled:
        doc.found(t, "stamp_marks", marks, marks_note)
    else:
        doc.guess(t, "stamp_marks", marks, marks_note, "the logger's manual says whether a row's "
                                                       "stamp is the start or the end of its interval")
    if typical:
        doc.guess(t, "coerce_year", TYPICAL_YEAR, typical, "any non-leap year will do; check the "
                                                           "file is a typical (synthetic) year")
    plan = _plan_columns(sheet, values)
    markers = _missing_markers(sheet, plan)
    doc.found(t, "missing", markers[0], markers[1])
    columns = doc.table(f"[dialects.{name}.columns]", f"dialects.{name}.columns",
                        "Each column: the canonical variable it holds and its unit, or \"ignore\".")
    unplaced = []
    for col, (spec, note, check) in plan.items():
        if check:
            doc.guess(columns, col, spec, note, check)
        elif spec == "ignore":
            doc.fixed(columns, col, spec, note)
            if note.startswith("could not tell"):
                unplaced.append(col)
        else:
            doc.found(columns, col, spec, note)
    if unplaced:
        doc.to_confirm.append(f"{columns.where}: could not tell what {len(unplaced)} column(s) hold "
                              f"({', '.join(unplaced)}); they are ignored")
    used = [c for c in (date_col, time_col) if c] + [c for c, (s, _, _) in plan.items() if s != "ignore"]
    if lacking := sheet.lacking(used):
        doc.to_confirm.append(f"{t.where}: {'; '.join(lacking)}; one dialect cannot read them all")
    interval = _interval_text(step) if step else None
    interval_note = (f"{n_modal} of the {n_steps} steps between consecutive distinct stamps are "
                     f"{_interval_text(step) or pd.Timedelta(step, 'ns')}")
    return _Station(name, interval, interval_note, offset, _warmest(sheet, plan, stamps))


def _is_stamp(sheet: _Sheet, column: str) -> bool:
    _, uniques = sheet.distinct(column)
    return any((m := _STAMP_TEXT.match(u)) and m.group("time") for u in uniques[:200])


def _content(sheet: _Sheet, columns: list[str]) -> np.ndarray:
    """A number per row that differs between rows whose values differ (almost surely)."""
    h = np.zeros(len(sheet.file), dtype=np.uint64)
    with np.errstate(over="ignore"):
        for c in columns:
            h = h * np.uint64(1_000_003) + sheet.distinct(c)[0].astype(np.uint64)
    return h


def _stamp_zone(sheet: _Sheet, stamps: _Stamps, ongrid: np.ndarray, step: int, values: list[str],
                date_col: str, time_col: str | None,
                typical: bool) -> tuple[str | None, str, bool, str | None]:
    """(stamp_zone or None for a blank, evidence, settled, fixed offset if known)."""
    if stamps.offsets:
        zone = "UTC" if stamps.offsets[0] == "Z" else _offset_text(stamps.offsets[0])
        return zone, (f"the stamps carry their UTC offset ({', '.join(stamps.offsets[:4])}), which "
                      "the reader applies itself"), True, zone if len(stamps.offsets) == 1 else None
    said = _offset_in_words(sheet, date_col, time_col)
    if typical:
        if said:
            return said[0], said[1] + " (a typical year keeps standard time)", said[2], said[0]
        return None, "a typical-year file keeps standard time; the offset is not in the file", False, None
    spring, autumn = _clock_changes(stamps, ongrid, step, _content(sheet, values))
    span = (stamps.ns[stamps.valid].max() - stamps.ns[stamps.valid].min() + step) / NS_PER_DAY
    if spring and autumn:
        s, a = spring[0], autumn[0]
        note = (f"the wall-clock hour from {_clock(s % NS_PER_DAY)} is missing on "
                f"{', '.join(_when(x) for x in spring[:3])} and the hour from "
                f"{_clock(a % NS_PER_DAY)} is written twice with different readings on "
                f"{', '.join(_when(x) for x in autumn[:3])}: the clock follows daylight saving")
        if said:
            return "local", note + f", though {said[1]}", False, None
        return "local", note, True, None
    if spring or autumn:
        which = ("a wall-clock hour is missing on " + _when(spring[0]) if spring else
                 "a wall-clock hour is written twice on " + _when(autumn[0]))
        return "local", f"{which}, but its counterpart half a year away is not seen", False, None
    if said:
        return said[0], said[1] + ", and no daylight-saving gap or repeat is seen", said[2], said[0]
    if span >= 365:
        return None, (f"over {span:.0f} days of stamps no hour is skipped in spring or repeated in "
                      "autumn, so the logger keeps standard time (or UTC), whose offset the files "
                      "do not say"), False, None
    return None, (f"the stamps span {span:.0f} days, less than a year, and show no clock change; "
                  "write \"local\" if the logger follows daylight saving"), False, None


def _offset_text(text: str) -> str:
    t = text.replace(" ", "")
    sign = "-" if t.startswith("-") else "+"
    t = t.lstrip("+-")
    if ":" in t or (len(t) == 4 and "." not in t):
        hh, mm = (t.split(":") if ":" in t else (t[:2], t[2:]))
        hours, minutes = int(hh), int(mm)
    else:
        value = float(t)
        hours, minutes = int(value), int(round((value % 1) * 60))
    if hours == 0 and minutes == 0:
        return "UTC"
    return f"{sign}{hours:02d}:{minutes:02d}"


def _offset_in_words(sheet: _Sheet, date_col: str,
                     time_col: str | None) -> tuple[str, str, bool] | None:
    """A UTC offset named in the stamp headers or the preamble: (zone, evidence, settled)."""
    for label in (date_col, time_col):
        if label and (m := _UTC_WORDS.search(label)):
            zone = _offset_text(m.group("offset")) if m.group("offset") else "UTC"
            return zone, f"the header '{label}' says the stamps are in {m.group(0).strip()}", True
    for k, line in enumerate(sheet.head[:sheet.skip_lines], start=1):
        fields = split_header(line, sheet.separator)
        if len(fields) >= 7 and _tmy3_station(fields):
            shown = line if len(line) <= 70 else line[:67] + "..."
            return _offset_text(fields[3]), (
                f"line {k} above the header ({shown!r}) is a TMY3 station line (station, name, "
                f"state, UTC offset, latitude, longitude, elevation) whose 4th field, {fields[3]}, "
                "is the stamps' offset from UTC in hours"), True
        for pattern in (_UTC_WORDS, _ZONE_WORDS):
            if (m := pattern.search(line)) and m.group("offset"):
                return (_offset_text(m.group("offset")), f"line {k} above the header says "
                        f"'{m.group(0).strip()}', perhaps of the stamps", False)
    return None


def _tmy3_station(fields: list[str]) -> bool:
    try:
        offset, lat, lon = float(fields[3]), float(fields[4]), float(fields[5])
    except ValueError:
        return False
    return -12 <= offset <= 14 and (offset * 2) % 1 == 0 and abs(lat) <= 90 and abs(lon) <= 180


def _clock_changes(stamps: _Stamps, ongrid: np.ndarray, step: int,
                   content: np.ndarray) -> tuple[list[int], list[int]]:
    """Wall-clock hours skipped (spring) and written twice with other readings (autumn).

    A change is counted only when it is one hour long and the series is otherwise regular; a
    plausible pattern has at most one of each per year, and a skipped hour and a repeated one
    four to eight months apart.
    """
    if not step or step > HOUR_NS or HOUR_NS % step:
        return [], []
    t, c = stamps.ns[ongrid], content[ongrid]
    frame = pd.DataFrame({"t": t, "c": c}).drop_duplicates()
    counts = frame.groupby("t").size()
    repeated = np.sort(counts.index[counts.to_numpy() >= 2].to_numpy())
    autumn = []
    if len(repeated):
        breaks = np.flatnonzero(np.diff(repeated) != step) + 1
        for run in np.split(repeated, breaks):
            if len(run) * step == HOUR_NS:
                autumn.append(int(run[0]))
    u = np.unique(t)
    gaps = np.flatnonzero(np.diff(u) == step + HOUR_NS)
    spring = [int(u[k] + step) for k in gaps]
    spring, autumn = _same_clock(spring), _same_clock(autumn)
    years = (u[-1] - u[0]) / (365.25 * NS_PER_DAY) + 1 if len(u) else 1
    if len(spring) > years + 1 or len(autumn) > years + 1:
        return [], []
    month = lambda x: pd.Timestamp(x, unit="ns").month  # noqa: E731
    if spring and autumn and not any(4 <= (month(a) - month(s)) % 12 <= 8
                                     for s in spring for a in autumn):
        return [], []
    return spring, autumn


def _same_clock(changes: list[int]) -> list[int]:
    """The changes at the most common time of day (a drop-out elsewhere is not a clock change)."""
    if not changes:
        return changes
    clock = Counter(c % NS_PER_DAY for c in changes).most_common(1)[0][0]
    return [c for c in changes if c % NS_PER_DAY == clock]


def _stamp_marks(sheet: _Sheet, stamps: _Stamps, ongrid: np.ndarray, step: int, date_col: str,
                 time_col: str | None) -> tuple[str, str, bool]:
    """(stamp_marks, evidence, settled)."""
    for label in (time_col, date_col):
        if label and (m := _ENDING.search(label)):
            return "end", f"the header '{label}' says '{m.group(0)}'", True
        if label and (m := _BEGINNING.search(label)):
            return "start", f"the header '{label}' says '{m.group(0)}'", True
    for k, line in enumerate(sheet.head[:sheet.skip_lines], start=1):
        if m := re.search(r"\b(?:hour|period|interval)[ _-]?ending\b|\bending\b", line, re.I):
            return "end", f"line {k} above the header says '{m.group(0)}'", True
        if m := re.search(r"\b(?:hour|period|interval)[ _-]?(?:beginning|starting)\b", line, re.I):
            return "start", f"line {k} above the header says '{m.group(0)}'", True
    if step >= NS_PER_DAY:
        return "start", "one row per date: a date names its own day", True
    on = np.flatnonzero(ongrid)
    tod = stamps.tod[on]
    end_of_day = on[tod == NS_PER_DAY]
    midnight = on[tod == 0]
    first_of_day = pd.Series(tod).groupby(stamps.days[on]).min()
    modal_first = int(first_of_day.mode().iloc[0]) if len(first_of_day) else -1
    first, last = on[np.argmin(stamps.ns[on])], on[np.argmax(stamps.ns[on])]
    first_tod, last_tod = int(stamps.tod[first]), int(stamps.tod[last])
    if len(end_of_day) and not len(midnight):
        note = (f"{sheet.at(int(end_of_day[0]))} has 24:00 and no row has 00:00; the earliest "
                f"stamp of {'every day' if (first_of_day == step).all() else 'most days'} is "
                f"{_clock(modal_first)}, one interval after midnight: stamps mark the end of the "
                "interval")
        if first_tod == step and last_tod == NS_PER_DAY:
            return "end", (note + f"; the record runs from {_clock(first_tod)} on its first day "
                                  "to 24:00 on its last, whole days"), True
        return "end", (note + ", though a logger that stamps the start and writes midnight as "
                              "24:00 of the day before looks the same"), False
    if len(midnight) and not len(end_of_day):
        note = (f"{sheet.at(int(midnight[0]))} has 00:00 and no row has 24:00: stamps are taken "
                "to mark the start of the interval")
        if first_tod == 0 and last_tod == NS_PER_DAY - step:
            return "start", (note + f"; the record runs from 00:00 on its first day to "
                                    f"{_clock(last_tod)} on its last, whole days"), True
        return "start", (note + ", though a logger that stamps the end and writes midnight as "
                                "00:00 looks the same"), False
    if len(midnight) and len(end_of_day):
        return "start", (f"both 00:00 ({sheet.at(int(midnight[0]))}) and 24:00 "
                         f"({sheet.at(int(end_of_day[0]))}) appear"), False
    if modal_first == step:
        return "end", (f"no stamp falls on midnight and the earliest stamp of most days is "
                       f"{_clock(modal_first)}, one interval after it: stamps are taken to mark the "
                       "end of the interval"), False
    return "start", "no stamp falls on midnight, so nothing in the stamps says", False


def _split_unit(header: str) -> tuple[str, str | None]:
    """A header's label and the unit written in it ('Dry-bulb (C)' -> 'Dry-bulb', 'C')."""
    if m := _BRACKET.match(header):
        return m.group("label"), m.group("unit")
    if m := _TRAILING_UNIT.match(header):
        return m.group("label"), m.group("unit")
    return header, None


def _unit_of(text: str) -> tuple[str | None, str | None]:
    """(source unit, canonical unit) of a unit written in a header; (None, None) if unknown."""
    t = text.strip()
    low = t.lower()
    if low in ("compass", "16 points", "points"):
        return "compass", "deg"
    if low in ("°", "deg", "degree", "degrees", "° true", "deg true"):
        return "deg", "deg"
    for candidate in (t, low.replace(" ", ""), low.replace("deg ", "deg"), low.replace("°", "deg")):
        try:
            conv = conversion(candidate)
        except KeyError:
            continue
        return conv.source, conv.canonical
    if low in OTHER_UNITS:
        return None, "other"
    return None, None


def _numbers(sheet: _Sheet, column: str) -> tuple[np.ndarray, np.ndarray]:
    """Per distinct text of a column: its number (NaN if it is none), and per row the code."""
    codes, uniques = sheet.distinct(column)
    text = pd.Series(uniques, dtype=object)
    if sheet.decimal == ",":
        text = text.str.replace(",", ".", regex=False)
    return np.array(pd.to_numeric(text, errors="coerce"), dtype=float), codes


def _plan_columns(sheet: _Sheet, columns: list[str]) -> dict[str, tuple[Any, str, str | None]]:
    """Per column: its spec ({variable, unit} or 'ignore'), the evidence and what to confirm."""
    plan: dict[str, tuple[Any, str, str | None]] = {}
    taken: dict[str, str] = {}
    units: dict[str, tuple[str, bool]] = {}
    for col in columns:
        label, unit_text = _split_unit(col)
        compact = re.sub(r"[^a-z0-9]", "", label.lower())
        rule = next((r for r in HEADER_WORDS if re.search(r.pattern, compact)), None)
        if rule is None:
            plan[col] = ("ignore", "could not tell what this column holds from its header", None)
            continue
        if rule.variable is None:
            plan[col] = ("ignore", f"{rule.what}", None)
            continue
        var = WEATHER_VARIABLES[rule.variable]
        source, canonical = _unit_of(unit_text) if unit_text else (None, None)
        if canonical is not None and canonical != var.unit:
            plan[col] = ("ignore", f"the name suggests {rule.what}, but its unit '{unit_text}' is not "
                                   f"one of {rule.variable}", None)
            continue
        if rule.variable in taken:
            plan[col] = ("ignore", f"another column for {rule.what}; '{taken[rule.variable]}' is "
                                   "the one read", None)
            continue
        num, codes = _numbers(sheet, col)
        filled = np.array([bool(u) for u in sheet.distinct(col)[1]])
        compass = np.array([str(u).upper() in (*POINTS_16, CALM, VARIABLE) for u in sheet.distinct(col)[1]])
        counts = np.bincount(codes, minlength=len(num))
        numeric_rows = counts[~np.isnan(num)].sum()
        compass_rows = counts[compass].sum()
        filled_rows = max(counts[filled].sum(), 1)
        if rule.variable == "wind_dir_deg" and compass_rows > 0.5 * filled_rows:
            example = next(u for u in sheet.distinct(col)[1] if str(u).upper() in POINTS_16)
            plan[col] = ({"variable": rule.variable, "unit": "compass"},
                         f"the header names {rule.what} and the values are compass points such as "
                         f"'{example}'", None)
            taken[rule.variable] = col
            continue
        if numeric_rows < 0.5 * filled_rows:
            plan[col] = ("ignore", f"the name suggests {rule.what}, but most values are not "
                                   "numbers", None)
            continue
        values = np.repeat(num, counts)
        values = values[~np.isnan(values) & ~np.isin(values, list(_SENTINELS))]
        taken[rule.variable] = col
        if source is not None:
            plan[col] = ({"variable": rule.variable, "unit": source},
                         f"the header names {rule.what} and its unit, {unit_text}", None)
            units[rule.variable] = (source, True)
            continue
        unit, why = _unit_from_values(rule.variable, values, units)
        units[rule.variable] = (unit, False)
        plan[col] = ({"variable": rule.variable, "unit": unit},
                     f"the header names {rule.what} but no unit; {why}",
                     "the unit is inferred from the values; check it in the logger's settings")
    return plan


def _unit_from_values(variable: str, values: np.ndarray,
                      known: dict[str, tuple[str, bool]]) -> tuple[str, str]:
    if not len(values):
        return WEATHER_VARIABLES[variable].unit.replace("m s-1", "m/s").replace("W m-2", "W/m2"), \
            "no value to judge by, so the canonical unit is assumed"
    lo, mid, hi = (float(np.percentile(values, q)) for q in (1, 50, 99))
    span = f"values from {lo:.4g} to {hi:.4g} (1st to 99th percentile, median {mid:.4g})"
    if variable in ("air_temp_c", "water_temp_c", "air_temp_min_c", "air_temp_max_c"):
        unit = "degF" if hi > 55 or mid > 40 else "degC"
        return unit, f"{span} look like {unit}"
    if variable == "wind_gust_ms" and "wind_speed_ms" in known:
        unit = known["wind_speed_ms"][0]
        return unit, f"{span}; taken in the unit of the wind speed, {unit}"
    if variable in ("wind_speed_ms", "wind_gust_ms"):
        limit = 20 if variable == "wind_speed_ms" else 30
        unit = "km/h" if hi > limit else "m/s"
        return unit, (f"{span} look like {unit} (a 99th percentile above {limit} is rare in m/s; "
                      "knots or mph would look alike)")
    if variable == "pressure_hpa":
        unit = "inHg" if mid < 40 else "kPa" if mid < 200 else "hPa"
        return unit, f"{span} look like {unit}"
    if variable == "rain_mm":
        return "mm", f"{span}; mm is assumed"
    if variable == "wind_dir_deg":
        return "deg", f"{span} look like degrees"
    if variable == "rel_humidity_pct":
        return "%", f"{span} look like percent"
    return "W/m2", f"{span} look like W/m2"


def _missing_markers(sheet: _Sheet, plan: dict[str, tuple[Any, str, str | None]]) -> tuple[list[str], str]:
    """Texts that stand for a missing value in the columns read, with the evidence."""
    seen: dict[str, list[Any]] = {}
    for col, (spec, _, _) in plan.items():
        if spec == "ignore":
            continue
        num, codes = _numbers(sheet, col)
        uniques = sheet.distinct(col)[1]
        counts = np.bincount(codes, minlength=len(uniques))
        first = sheet.first_rows(col)
        var = WEATHER_VARIABLES[spec["variable"]]
        for k, u in enumerate(uniques):
            u = str(u)
            if spec["variable"] == "wind_dir_deg" and u.upper() in (*POINTS_16, CALM, VARIABLE):
                continue
            if not np.isnan(num[k]):
                if num[k] not in _SENTINELS or _in_range(num[k], spec.get("unit"), var):
                    continue
            entry = seen.setdefault(u, [0, int(first[k]), set()])
            entry[0] += int(counts[k])
            entry[2].add(col)
    markers, slips = [], []
    for text, (count, row, cols) in seen.items():
        known = text in DEFAULT_MISSING or text.lower() in MISSING
        typo = any(ch.isdigit() for ch in text) and not _is_sentinel(text)  # '21..4', '1O.5'
        if not typo and (text == "" or known or count >= 2 or len(cols) >= 2
                         or _is_sentinel(text)):
            markers.append((text, count, row, cols))
        else:
            slips.append(f"'{text}' ({sheet.at(row)})")
    markers.sort(key=lambda m: (m[0] != "", -m[1]))
    if not markers:
        return [""], "no missing-value marker is seen in the columns read; a blank cell is read as missing"
    said = "; ".join(f"'{t}' {c} time(s) in {', '.join(sorted(cols))}, first {sheet.at(r)}"
                     for t, c, r, cols in markers[:6])
    if slips:
        said += f"; single odd entries such as {', '.join(slips[:3])} are left as bad values"
    if "" not in [m[0] for m in markers]:
        markers.insert(0, ("", 0, 0, set()))
        said += "; a blank cell is read as missing too"
    return [m[0] for m in markers], "seen in the columns read: " + said


def _is_sentinel(text: str) -> bool:
    try:
        return float(text) in _SENTINELS
    except ValueError:
        return False


def _in_range(value: float, unit: str | None, var: Any) -> bool:
    try:
        conv = conversion(unit) if unit and unit not in ("compass", "deg") else None
    except KeyError:
        conv = None
    v = value * conv.scale + conv.offset if conv else value
    return var.valid_min <= v <= var.valid_max


def _warmest(sheet: _Sheet, plan: dict[str, tuple[Any, str, str | None]],
             stamps: _Stamps) -> tuple[int, float] | None:
    """The warmest month of the record by mean air (else water) temperature."""
    for variable in ("air_temp_c", "water_temp_c"):
        col = next((c for c, (s, _, _) in plan.items() if s != "ignore" and s["variable"] == variable),
                   None)
        if col is None:
            continue
        num, codes = _numbers(sheet, col)
        v = num[codes]
        ok = stamps.valid & ~np.isnan(v) & ~np.isin(v, list(_SENTINELS))
        months = pd.DatetimeIndex(stamps.ns[ok].astype("datetime64[ns]")).month
        means = pd.Series(v[ok]).groupby(months).mean()
        if len(means) >= 10:
            return int(means.idxmax()), float(means.max())
    return None


# ---------------------------------------------------------------------------------------------
# Lab sheets
# ---------------------------------------------------------------------------------------------

_LAB_ROLES: tuple[tuple[str, str], ...] = (
    ("reported_date_column", r"date.*(report|result|analy|receiv|issu|complet)"
                             r"|(report|result|analy|receiv|issu).*date|^reported$"),
    ("sampled_date_column", r"date.*(sampl|collect|taken)|(sampl|collect).*date|^date$|^sampled$"),
    ("sampled_time_column", r"time"),
    ("site_column", r"^site|location|station|waterbody|^lake|reservoir"),
    ("sample_id_column", r"^sample(id|no|number|code|ref)?$|^lab(id|no|ref)|^id$|sampleid"),
    ("depth_column", r"depth"),
    ("chl_a_column", r"^chl(a|orophyll)?a?$|chlorophyll|^chla"),
    ("microcystin_column", r"microcystin|^mc(lr)?$|mcyst"),
    ("biovolume_column", r"biovol"),
    ("comment_column", r"comment|note|remark|observ"),
    ("taxon_column", r"taxon|taxa|species|genus|organism|scientificname|^name$"),
    ("unit_column", r"^units?$|countunit|^uom$|unitofmeasure"),
    ("count_column", r"count|cells|density|abundance|result|^value$|concentration|^conc$|number"),
)
"""Header words of a lab sheet's columns, tried in this order. Common practice, no source."""


@dataclass
class _Lab:
    layout: str
    site_ids: list[str]
    site_column: str | None
    delay_days: float | None
    delay_note: str


def _count_unit(text: str) -> str | None:
    m = _COUNT_UNIT.search(text)
    if not m:
        return None
    return "cells/mL" if (m.group(1) or m.group(2)).lower() == "ml" else "cells/L"


def _draft_lab(paths: list[Path], doc: _Document) -> _Lab:
    sheet = _read_sheet(paths)
    name = _slug([p.stem for p in paths], "lab")
    t = doc.table(f"[sample_layouts.{name}]", f"sample_layouts.{name}",
                  f"How the laboratory's sheets are laid out, as read from {len(paths)} file(s).")
    roles: dict[str, str] = {}
    for col in sheet.header:
        label, _ = _split_unit(col)
        compact = re.sub(r"[^a-z0-9]", "", label.lower())
        uniques = sheet.distinct(col)[1]
        if label.split(" ")[0].split("/")[0] in CYANOBACTERIA or (
                _count_unit(col) and not re.search(r"count|cells|density|abundance|result|value",
                                                   compact)):
            continue
        for role, pattern in _LAB_ROLES:
            if role in roles or not re.search(pattern, compact):
                continue
            if role.endswith("date_column") and _share(uniques, _DATE_TEXT) < 0.8:
                continue
            if role == "sampled_time_column" and _share(uniques, _TIME_TEXT) < 0.8:
                continue
            roles[role] = col
            break
    if "sampled_date_column" not in roles:
        dated = [c for c in sheet.header if c not in roles.values()
                 and _share(sheet.distinct(c)[1], _DATE_TEXT) >= 0.8]
        if dated:
            roles["sampled_date_column"] = dated[0]
    long = "taxon_column" in roles and "count_column" in roles
    placed = set(roles.values())
    taxa_cols: list[str] = []
    unplaced: list[str] = []
    if not long:
        roles.pop("count_column", None)
        roles.pop("taxon_column", None)
        placed = set(roles.values())
        for col in sheet.header:
            if col in placed:
                continue
            label, _ = _split_unit(col)
            genus = label.split(" ")[0] if label else ""
            if _count_unit(col) or genus.split("/")[0] in CYANOBACTERIA or _countlike(sheet, col):
                taxa_cols.append(col)
            else:
                unplaced.append(col)
        if not taxa_cols:
            raise IngestError(paths[0], "no taxon and count columns (one row per taxon) and no "
                                        "column per taxon (one row per sample) found among "
                                        f"{', '.join(sheet.header)}", line=sheet.skip_lines + 1)
    shape = "long" if long else "wide"
    doc.found(t, "shape", shape,
              f"column '{roles['taxon_column']}' names the taxon and '{roles['count_column']}' holds "
              "its count, a row per taxon per sample" if long else
              f"{len(taxa_cols)} columns hold counts of one taxon each, such as '{taxa_cols[0]}', a "
              "row per sample")
    _layout(doc, t, sheet, "lab sheets")
    dates = [roles[r] for r in ("sampled_date_column", "reported_date_column") if r in roles]
    order = None
    if dates:
        texts = np.concatenate([sheet.distinct(c)[1] for c in dates])
        first = np.concatenate([sheet.first_rows(c) for c in dates])
        order, why, settled = _date_order(sheet, texts, first, sheet.distinct(dates[0])[0], dates[0])
        if settled:
            doc.found(t, "date_order", order, why)
        else:
            doc.guess(t, "date_order", order, why, "check a sampling date whose day is 13 or more")
    described = {
        "sample_id_column": "identifies the sample",
        "site_column": "names the site",
        "sampled_date_column": "holds the sampling date",
        "sampled_time_column": "holds the sampling time",
        "reported_date_column": "holds the date the result was reported",
        "depth_column": "holds the sampling depth",
        "taxon_column": "names the taxon",
        "count_column": "holds the count",
        "unit_column": "holds the unit of each count",
        "biovolume_column": "holds the biovolume",
        "chl_a_column": "holds chlorophyll-a",
        "microcystin_column": "holds microcystin",
        "comment_column": "holds comments",
    }
    for role, what in described.items():
        if role == "sampled_date_column" and role not in roles:
            doc.blank(t, role, "the column with the sampling dates", "no column of dates found")
        elif role in roles:
            col = roles[role]
            example = next((u for u in sheet.text[col] if u), "")
            doc.found(t, role, col, f"the header '{col}' {what}" + (f", e.g. '{example}'"
                                                                   if example and len(example) < 30
                                                                   else ""))
        if role == "sampled_time_column":
            _default_time(doc, t, sheet, roles.get(role))
    if unplaced:
        doc.found(t, "taxa_columns", taxa_cols, f"the columns holding counts; {', '.join(unplaced)} "
                                                "could not be placed and are left out")
        doc.to_confirm.append(f"{t.where}: could not tell what {', '.join(unplaced)} hold(s); "
                              "left out of the taxa")
    if lacking := sheet.lacking(list(roles.values())):
        doc.to_confirm.append(f"{t.where}: {'; '.join(lacking)}; one layout cannot read them all")
    factor = _draft_count_unit(doc, t, sheet, roles, taxa_cols)
    _draft_limits(doc, t, sheet, [roles["count_column"]] if long else taxa_cols, factor)
    doc.fixed(t, "duplicates", "last", "conflicting records of one sample and taxon: the last in "
                                       "file order is kept (the default policy)")
    _draft_taxa(doc, sheet, roles.get("taxon_column"), taxa_cols)
    sites: list[str] = []
    if "site_column" in roles:
        codes, uniques = sheet.distinct(roles["site_column"])
        sites = [str(u) for u in uniques if u]
    delay, delay_note = _delay(sheet, roles, order)
    return _Lab(name, sites, roles.get("site_column"), delay, delay_note)


def _countlike(sheet: _Sheet, column: str) -> bool:
    uniques = [u for u in sheet.distinct(column)[1] if u]
    if not uniques:
        return False
    good = sum(1 for u in uniques if parse_count(u, sheet.decimal, 1.0, 1.0).censor is not None)
    return good >= 0.7 * len(uniques)


def _default_time(doc: _Document, t: _Table, sheet: _Sheet, column: str | None) -> None:
    if column is None:
        doc.guess(t, "default_sample_time", "10:00", "the sheets give no sampling time",
                  "the usual time of day of your sampling runs")
        return
    codes, uniques = sheet.distinct(column)
    tod = parse_times(list(uniques))[codes]
    tod = tod[tod >= 0]
    blank = int((np.asarray(uniques)[codes] == "").sum())
    if not len(tod):
        doc.guess(t, "default_sample_time", "10:00", f"no time in '{column}' can be read",
                  "the usual time of day of your sampling runs")
        return
    median = float(np.median(tod)) / 60e9
    rounded = int(round(median / 30) * 30) % (24 * 60)
    text = f"{rounded // 60:02d}:{rounded % 60:02d}"
    doc.guess(t, "default_sample_time", text,
              f"assumed (and flagged) for the {blank} row(s) without a time: the median sampling "
              f"time of the {len(tod)} rows with one is {_clock(int(median * 60e9))}, rounded to "
              "the half hour", "the usual time of day of your sampling runs")


def _draft_count_unit(doc: _Document, t: _Table, sheet: _Sheet, roles: dict[str, str],
                      taxa_cols: list[str]) -> dict[str, float]:
    """count_unit (and its evidence); returns the factor to cells/mL per count column."""
    factor = {"cells/mL": 1.0, "cells/L": 1000.0}
    if taxa_cols:
        units = {c: _count_unit(c) for c in taxa_cols}
        named = Counter(u for u in units.values() if u)
        if named:
            unit = named.most_common(1)[0][0]
            said = ("every taxon column names its unit in the header" if len(named) == 1
                    and all(units.values()) else "the taxon columns name their units in the header, "
                    "this one most often")
            doc.found(t, "count_unit", unit, f"{said}, e.g. '{taxa_cols[0]}'; this is only the "
                                             "fallback for a column without one")
            return {c: factor[units[c] or unit] for c in taxa_cols}
        doc.blank(t, "count_unit", "cells/mL or cells/L", "no taxon column names its unit")
        return {c: 1.0 for c in taxa_cols}
    count = roles["count_column"]
    header = _count_unit(count)
    if "unit_column" in roles:
        col = roles["unit_column"]
        values = Counter(u for u in sheet.text[col] if u)
        unit = _count_unit(values.most_common(1)[0][0]) if values else None
        if unit:
            doc.found(t, "count_unit", unit, f"the column '{col}' says '{values.most_common(1)[0][0]}' "
                                             f"on {values.most_common(1)[0][1]} of {len(sheet.file)} "
                                             "rows; this is the unit of rows where it is blank")
            return {count: factor[unit]}
    if header:
        doc.found(t, "count_unit", header, f"the header '{count}' names the unit")
        return {count: factor[header]}
    doc.blank(t, "count_unit", "cells/mL or cells/L", f"neither the header '{count}' nor a unit "
                                                       "column names the unit of the counts")
    return {count: 1.0}


def _draft_limits(doc: _Document, t: _Table, sheet: _Sheet, columns: list[str],
                  factor: dict[str, float]) -> None:
    """detection_limit and upper_limit, in the sheet's unit, from '<N', 'ND', '>N', 'TNTC'."""
    below: Counter = Counter()
    above: Counter = Counter()
    nd = tntc = 0
    where: dict[Any, str] = {}
    for col in columns:
        codes, uniques = sheet.distinct(col)
        counts = np.bincount(codes, minlength=len(uniques))
        first = sheet.first_rows(col)
        for k, u in enumerate(uniques):
            low = str(u).strip().lower()
            if low in NOT_DETECTED:
                nd += int(counts[k])
                continue
            if low in TOO_MANY:
                tntc += int(counts[k])
                continue
            if str(u).strip()[:1] not in ("<", ">"):
                continue
            c = parse_count(str(u), sheet.decimal)
            if c.censor not in (CENSOR_BELOW, CENSOR_ABOVE):
                continue
            key = (c.value, factor.get(col, 1.0))
            (below if c.censor == CENSOR_BELOW else above)[key] += int(counts[k])
            where.setdefault((c.censor, *key), f"'{u}' ({sheet.at(int(first[k]))})")
    for key_name, seen, n_words, words, censor in (
            ("detection_limit", below, nd, "'ND'", CENSOR_BELOW),
            ("upper_limit", above, tntc, "'TNTC'", CENSOR_ABOVE)):
        if seen:
            (value, f), n = seen.most_common(1)[0]
            unit = "cells/L" if f == 1000.0 else "cells/mL"
            converted = f" (= {_number(value / f)} cells/mL, 1 L = 1000 mL)" if f != 1.0 else ""
            doc.found(t, key_name, f"{_number(value)} {unit}",
                      f"{where[(censor, value, f)]} is the most common of {sum(seen.values())} "
                      f"'{censor}N' entries ({n} times), in the sheet's unit{converted}; {words} "
                      f"entries ({n_words} seen) are read as this")
        elif n_words:
            doc.blank(t, key_name, f"what {words} means, with its unit, e.g. \"100 cells/mL\"",
                      f"{words} appears {n_words} time(s) but no '{censor}N' entry gives the limit")


def _number(value: float) -> int | float:
    return int(value) if float(value).is_integer() else float(value)


def _genus_of(name: str) -> str:
    return name.strip().split(" ")[0]


def _draft_taxa(doc: _Document, sheet: _Sheet, taxon_col: str | None, taxa_cols: list[str]) -> None:
    if taxon_col:
        names = [str(u) for u in sheet.distinct(taxon_col)[1] if u]
    else:
        names = [re.sub(r"\s*[(\[][^)\]]*[)\]]\s*$", "", c).strip() for c in taxa_cols]
    t = doc.table("[taxa]", "taxa", "Which taxa are cyanobacteria and which are known toxin producers "
                  "(a name matches exactly, any case, or by its genus, the first word). Drafted from "
                  "a list of cyanobacterial genera and of those commonly reported to produce toxins "
                  "(common practice, no source): confirm each.")
    by_genus: dict[str, list[str]] = {}
    for n in dict.fromkeys(names):
        by_genus.setdefault(_genus_of(n), []).append(n)
    cyano_words = re.compile(r"cyano|blue.?green", re.I)
    for genus, members in by_genus.items():
        parts = [p.strip().capitalize() for p in genus.split("/")]
        known = [p for p in parts if p in CYANOBACTERIA]
        seen = ", ".join(members[:4]) + (" ..." if len(members) > 4 else "")
        if genus.lower().startswith("total"):
            doc.guess(t, genus, {"cyanobacterium": False}, f"'{seen}' looks like a total, not a taxon",
                      "kept out of the cyanobacterial sum so it is not counted twice")
        elif known:
            toxic = any(CYANOBACTERIA[p] for p in known)
            doc.guess(t, genus, {"cyanobacterium": True, "toxin_producer": toxic},
                      f"{seen}: a cyanobacterial genus" + (", commonly reported to produce toxins"
                                                          if toxic else ""),
                      "check against your laboratory's and health authority's lists")
        elif cyano_words.search(" ".join(members)):
            doc.guess(t, genus, {"cyanobacterium": True, "toxin_producer": False},
                      f"{seen}: named as cyanobacteria", "check whether toxin producers are among them")
        else:
            doc.guess(t, genus, {"cyanobacterium": False},
                      f"{seen}: not a genus on the list of cyanobacteria", "check it is not one")


def _delay(sheet: _Sheet, roles: dict[str, str], order: str | None) -> tuple[float | None, str]:
    if "reported_date_column" not in roles or order is None:
        return None, "the sheets give no reported date; the default delay"
    days = []
    for role in ("sampled_date_column", "reported_date_column"):
        codes, uniques = sheet.distinct(roles[role])
        days.append(parse_dates(list(uniques), order).days[codes])
    gap = days[1] - days[0]
    gap = gap[~np.isnan(gap) & (gap >= 0)]
    if not len(gap):
        return None, "no row has both a sampling and a reported date; the default delay"
    median = float(np.median(gap))
    return median, (f"the median of the {len(gap)} rows with both dates, from "
                    f"'{roles['sampled_date_column']}' to '{roles['reported_date_column']}'")


# ---------------------------------------------------------------------------------------------
# The site
# ---------------------------------------------------------------------------------------------

def _file_patterns(paths: list[Path]) -> tuple[list[str], str]:
    """Absolute paths, or one glob per folder when it matches exactly the files given."""
    resolved = [p.resolve() for p in paths]
    folders = {p.parent for p in resolved}
    if len(resolved) > 1 and len(folders) == 1:
        folder = resolved[0].parent
        pattern = re.sub(r"\d+", "*", resolved[0].name)
        if {q for q in folder.glob(pattern)} == set(resolved):
            return [(folder / pattern).as_posix()], (f"the pattern matches the {len(resolved)} files "
                                                      "given, and later ones named alike")
    return [p.as_posix() for p in resolved], "the files given, by absolute path"


def _draft_top(doc: _Document) -> None:
    top = doc.table(None, "", "Where cyanorisk keeps what it makes. The input files below are named "
                              "by absolute path; the folders here are read from root.")
    doc.fixed(top, "root", ".", "this file's own folder")
    doc.fixed(top, "data_dir", "work", "clean series, rejects ledgers, the store")
    doc.fixed(top, "reports_dir", "reports", "daily reports and backtests")
    doc.fixed(top, "models_dir", "models", "fitted models")
    ingest = doc.table("[ingest]", "ingest")
    doc.fixed(ingest, "bad_rows", "reject", "unparseable rows go to the rejects ledger and the "
                                            "rest is read (\"stop\": the first one is an error)")


def _draft_site(doc: _Document, station: _Station, lab: _Lab | None, weather: list[Path],
                samples: list[Path]) -> None:
    site = doc.table("[[sites]]", "sites[0]", "The water body. Only you can give its name, zone, "
                                              "use and authority.")
    if lab and lab.site_ids:
        others = lab.site_ids[1:]
        note = f"the column '{lab.site_column}' names this site, the first of the lab sheets"
        if others:
            doc.guess(site, "id", lab.site_ids[0],
                      note + f"; it also names {', '.join(others)}",
                      f"the sheets name {len(lab.site_ids)} sites ({', '.join(lab.site_ids)}); "
                      "samples of this site are those whose site column says its id: list other "
                      "names of this same site in [sites.samples] site_aliases, and add a "
                      "[[sites]] table for each other site you need")
        elif not re.fullmatch(r"[A-Za-z0-9_.-]+", lab.site_ids[0]):
            doc.guess(site, "id", lab.site_ids[0], note + ", the only site in them",
                      "the id names the site's folders too; if it should be shorter, keep this "
                      "name in [sites.samples] site_aliases")
        else:
            doc.found(site, "id", lab.site_ids[0], note + ", the only site in them")
    else:
        site_id = _slug([p.stem for p in weather], "site")
        doc.guess(site, "id", site_id, "drafted from the weather file names",
                  "a short name for the site, used for its folders")
    doc.blank(site, "name", "the water body's name", "shown in every report")
    zone_hint = ""
    if station.offset and station.offset != "UTC" and station.offset.endswith(":00"):
        hours = int(station.offset[:3])
        etc = f"Etc/GMT{'+' if hours < 0 else '-'}{abs(hours)}"
        zone_hint = (f"; the stamps are in UTC{station.offset} all year: a zone with that standard "
                     f"offset, or {etc} for that offset all year")
    doc.blank(site, "timezone", "IANA zone, e.g. Australia/Melbourne",
              "local dates, issue times and local stamps are read in it" + zone_hint)
    doc.blank(site, "use", "drinking or recreation", "decides the health cautions and the scheme")
    if station.interval:
        doc.found(site, "interval", station.interval, station.interval_note)
    else:
        doc.blank(site, "interval", "the interval of the clean series, e.g. \"30min\"",
                  station.interval_note + ", which does not divide a day")
    doc.blank(site, "authority", "who decides advisories, e.g. the regional health unit",
              "named in every report as the one who decides")
    w = doc.table("[sites.weather]", "sites[0].weather")
    files, note = _file_patterns(weather)
    doc.fixed(w, "files", files, note)
    doc.fixed(w, "dialect", station.dialect, "the layout drafted above")
    if lab:
        s = doc.table("[sites.samples]", "sites[0].samples")
        files, note = _file_patterns(samples)
        doc.fixed(s, "files", files, note)
        doc.fixed(s, "layout", lab.layout, "the layout drafted above")
        if lab.delay_days is None:
            doc.fixed(s, "lab_delay_days", 3, f"used when a result has no reported date; {lab.delay_note}")
        else:
            doc.found(s, "lab_delay_days", _number(round(lab.delay_days, 1)),
                      f"used when a result has no reported date: {lab.delay_note}")
    a = doc.table("[sites.alerts]", "sites[0].alerts")
    by_use = {use: " or ".join(k for k, v in SCHEMES.items() if v.use == use)
              for use in dict.fromkeys(v.use for v in SCHEMES.values())}
    doc.blank(a, "scheme", "; ".join(f"{keys} for {use}" for use, keys in by_use.items()),
              "the alert levels, a preset that fits the site's use")
    m = doc.table("[sites.model]", "sites[0].model")
    doc.fixed(m, "horizon_days", 7, "the chance of reaching each level within the next 7 days")
    if station.warmest is None:
        doc.blank(m, "season_start_month", "the month bloom seasons start, 7 in the south, 1 in the "
                                           "north", "the record has no temperature over most months")
    else:
        month, mean = station.warmest
        south = month in (11, 12, 1, 2, 3)
        north = month in (5, 6, 7, 8, 9)
        if south or north:
            start = 7 if south else 1
            doc.guess(m, "season_start_month", start,
                      f"the warmest month of the record is {_MONTHS[month - 1]} (mean {mean:.1f} in "
                      f"the file's unit), so the site is in the {'south' if south else 'north'}ern "
                      f"hemisphere and bloom seasons are taken to run from {_MONTHS[start - 1]}",
                      "the month your bloom season starts")
        else:
            doc.blank(m, "season_start_month", "the month bloom seasons start, 7 in the south, 1 in "
                                               "the north",
                      f"the warmest month of the record, {_MONTHS[month - 1]}, does not say the "
                      "hemisphere")
