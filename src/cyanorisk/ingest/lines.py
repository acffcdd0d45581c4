"""Reading delimited text into columns, keeping each row's physical line number.

Fast path: pyarrow's multi-threaded CSV reader splits the body; stamp columns stay strings,
value columns are parsed as numbers where every value in them is a number or a missing marker
(anything else leaves the column as strings, parsed later with its line known). When the body has
blank lines, quoted fields or rows with the wrong number of fields, an exact path finds every
line and field count with numpy first, sends bad rows to the ledger and keeps the line numbers
of the others.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from cyanorisk.ingest.quality import IngestError

NEWLINE = 0x0A
_NOT_SPACE = re.compile(rb"\S")


@dataclass
class TextFile:
    """A decoded text file as UTF-8 bytes with ``\\n`` line ends."""

    path: Path
    data: bytes

    @cached_property
    def starts(self) -> np.ndarray:
        """Byte offset where each line starts."""
        return np.concatenate(([0], self.ends[:-1] + 1)).astype(np.int64)

    @cached_property
    def ends(self) -> np.ndarray:
        """Byte offset where each line ends (exclusive, before the newline)."""
        ends = np.flatnonzero(np.frombuffer(self.data, dtype=np.uint8) == NEWLINE)
        if self.data and not self.data.endswith(b"\n"):
            ends = np.append(ends, len(self.data))
        return ends.astype(np.int64)

    def line(self, number: int) -> str:
        """Text of physical line ``number`` (1-based)."""
        i = number - 1
        return self.data[self.starts[i]:self.ends[i]].decode("utf-8")

    def head(self, count: int) -> list[str]:
        """The first ``count`` lines (fewer if the file is shorter)."""
        chunk = self.data[:1 << 16]
        lines = chunk.decode("utf-8", "replace").split("\n")
        if len(chunk) == 1 << 16:
            lines = lines[:-1]
        if len(lines) < count and len(chunk) == 1 << 16:
            return [self.line(k) for k in range(1, min(count, len(self.starts)) + 1)]
        return lines[:count]

    def offset_of_line(self, index: int) -> int:
        """Byte offset where the line with 0-based ``index`` starts."""
        pos = 0
        for _ in range(index):
            pos = self.data.find(b"\n", pos) + 1
            if pos == 0:
                return len(self.data)
        return pos


@dataclass
class RawTable:
    """Columns of a delimited file and the physical line of every row."""

    path: Path
    header: list[str]
    header_line: int
    columns: dict[str, pa.ChunkedArray]
    """Dictionary-encoded text for stamp columns; float64 or text for value columns."""
    line_numbers: np.ndarray
    bad_lines: np.ndarray
    """Lines whose field count differs from the header's."""
    bad_counts: np.ndarray
    """How many fields each of those lines has."""
    text: TextFile

    @property
    def n_rows(self) -> int:
        return len(self.line_numbers)


def read_text(path: Path, encoding: str = "utf-8", declared_in: str = "the dialect") -> TextFile:
    """Read a file as text, refusing binary files and undeclared encodings with a clear error.

    Raises
    ------
    IngestError
        Empty file, binary content, UTF-16 without a declaration, bytes that are not valid in
        the declared encoding (with line and column of the first one).
    """
    raw = path.read_bytes()
    if _blank(raw):
        raise IngestError(path, "the file is empty")
    head = raw[:8192]
    enc = encoding.lower().replace("_", "-")
    if enc in ("utf-8", "utf8"):
        if head.startswith((b"\xff\xfe", b"\xfe\xff")) or (
                b"\x00" in head and not head.startswith(_BINARY_SIGNATURES) and _looks_utf16(head)):
            raise IngestError(path, "the file is UTF-16 encoded text; save it as UTF-8 or "
                                    f"declare encoding = 'utf-16' in {declared_in}")
        if _binary(head):
            raise IngestError(path, "this is a binary file, not delimited text")
        raw = _mark_nul_bytes(raw)
        if raw.startswith(b"\xef\xbb\xbf"):
            raw = raw[3:]
        try:
            if not raw.isascii():  # ASCII is valid UTF-8; checking it allocates nothing
                raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            line, col = line_and_byte(raw, exc.start)
            raise IngestError(
                path, f"byte 0x{raw[exc.start]:02x} at character {col} is not UTF-8; the file is "
                      f"in another encoding: declare it in {declared_in}, e.g. encoding = 'latin-1'",
                line=line, byte_in_line=col) from None
    else:
        try:
            raw = raw.decode(encoding).lstrip("\ufeff").encode("utf-8")
        except (UnicodeDecodeError, LookupError) as exc:
            raise IngestError(path, f"cannot be read as {encoding}: {exc}") from None
        if _binary(raw[:8192]):
            raise IngestError(path, "this is a binary file, not delimited text")
        raw = _mark_nul_bytes(raw)
    if b"\r" in raw:
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    return TextFile(path, raw)


_BINARY_SIGNATURES = (b"PK\x03\x04", b"\xd0\xcf\x11\xe0", b"%PDF", b"\x89PNG", b"\x1f\x8b")
"""Zip (xlsx), OLE (xls), PDF, PNG and gzip files: exports saved in the wrong format."""
REPLACEMENT = "\ufffd".encode()


def _binary(head: bytes) -> bool:
    """A binary file: a known signature, or more NUL bytes than 16 and than 1% of its first
    bytes (a text log with a few NUL bytes, as a logger losing power writes, is still text)."""
    return head.startswith(_BINARY_SIGNATURES) or head.count(0) > max(16, len(head) // 100)


def _mark_nul_bytes(raw: bytes) -> bytes:
    """Stray NUL bytes become U+FFFD, so the values they damage fail to parse and their rows
    reach the rejects ledger with line and column, and no message prints a raw NUL."""
    return raw.replace(b"\x00", REPLACEMENT) if b"\x00" in raw else raw


def line_and_byte(raw: bytes, offset: int) -> tuple[int, int]:
    """The 1-based line of byte ``offset`` in ``raw`` and its 1-based position in that line."""
    return raw.count(b"\n", 0, offset) + 1, offset - (raw.rfind(b"\n", 0, offset) + 1) + 1


def _blank(data: bytes) -> bool:
    """True when ``data`` holds only white space (stops at the first other byte)."""
    return _NOT_SPACE.search(data) is None


def _looks_utf16(head: bytes) -> bool:
    """True when every other byte is NUL, as in UTF-16 text of ASCII characters."""
    even, odd = head[0::2], head[1::2]
    return even.count(0) > 0.4 * len(even) or odd.count(0) > 0.4 * len(odd)


def split_header(line: str, separator: str) -> list[str]:
    """Column names of a header line, quotes and surrounding space removed."""
    return [name.strip().strip('"').strip() for name in next(csv.reader([line], delimiter=separator))]


@dataclass(frozen=True)
class Parsing:
    """How value columns are split and parsed."""

    separator: str
    decimal: str = "."
    missing: tuple[str, ...] = ()
    string_columns: tuple[str, ...] = ()
    """Columns always kept as strings (stamps, directions)."""
    keep: tuple[str, ...] | None = None
    """Columns to read; None reads all. Skipping unused columns saves parsing them."""


def read_table(text: TextFile, header_index: int, how: Parsing) -> RawTable:
    """Split the lines after the header (0-based line ``header_index``) into columns.

    Blank lines are skipped and not counted as rows. Rows whose number of fields differs from
    the header's are returned in ``bad_lines`` for the ledger.

    Raises
    ------
    IngestError
        No header line, repeated column names, or a header and no data rows.
    """
    path = text.path
    body_start = text.offset_of_line(header_index)
    if body_start >= len(text.data):
        raise IngestError(path, "no header line: the file has fewer lines than the preamble")
    header_end = text.data.find(b"\n", body_start)
    header_end = len(text.data) if header_end < 0 else header_end
    header = split_header(text.data[body_start:header_end].decode("utf-8"), how.separator)
    if len(set(header)) != len(header):
        dup = sorted({h for h in header if header.count(h) > 1})
        raise IngestError(path, f"column name repeated in the header: {', '.join(dup)}",
                          line=header_index + 1, column=dup[0])
    body = memoryview(text.data)[header_end + 1:]
    first_line = header_index + 2
    if _NOT_SPACE.search(text.data, header_end + 1) is None:
        raise IngestError(path, "the file has a header but no data rows", line=header_index + 1)
    data, at = text.data, header_end + 1
    if data.find(b'"', at) < 0:
        # Strict: a blank line or a wrong field count makes the split give up, so that every
        # line is a row and the line numbers follow.
        columns = _arrow_split(body, header, how, strict=True)
        if columns is not None:
            n_rows = len(next(iter(columns.values())))
            lines = np.arange(first_line, first_line + n_rows, dtype=np.int64)
            columns, lines = _drop_blank_rows(columns, lines, text, how.separator)
            empty = np.zeros(0, np.int64)
            return RawTable(path, header, header_index + 1, columns, lines, empty, empty, text)
    return _read_exact(text, header, header_index, how)


def blank_lines(text: TextFile, separator: str, first: int = 0) -> np.ndarray:
    """Which lines (from 0-based index ``first``) hold nothing but white space and separators.

    Such lines are not rows: they are skipped and not counted.
    """
    arr = np.frombuffer(text.data, dtype=np.uint8)
    filler = np.zeros(256, dtype=bool)
    filler[[ord(c) for c in " \t\r\n\f\v"] + [ord(separator)]] = True
    content = np.concatenate(([0], np.cumsum(~filler[arr], dtype=np.int64)))
    starts, ends = text.starts[first:], text.ends[first:]
    return (content[ends] - content[starts]) == 0


def _drop_blank_rows(columns: dict[str, pa.ChunkedArray], lines: np.ndarray, text: TextFile,
                     separator: str) -> tuple[dict[str, pa.ChunkedArray], np.ndarray]:
    """Remove rows read from blank lines (see :func:`blank_lines`).

    Rows whose fields are all empty are the candidates; each is confirmed against its line.
    """
    candidate = None
    for col in columns.values():
        empty = is_empty(col)
        candidate = empty if candidate is None else pc.and_(candidate, empty)
        if not pc.any(candidate).as_py():
            return columns, lines
    rows = np.flatnonzero(candidate.to_numpy(zero_copy_only=False))
    filler = set(" \t\r\f\v" + separator)
    blank = [r for r in rows if set(text.line(int(lines[r]))) <= filler]
    if not blank:
        return columns, lines
    keep = np.ones(len(lines), dtype=bool)
    keep[blank] = False
    mask = pa.array(keep)
    return {h: c.filter(mask) for h, c in columns.items()}, lines[keep]


def _read_exact(text: TextFile, header: list[str], header_index: int, how: Parsing) -> RawTable:
    """Line-by-line path: blank lines, quoted fields and rows with the wrong field count."""
    first = header_index + 1
    starts, ends = text.starts[first:], text.ends[first:]
    line_no = np.arange(first + 1, first + 1 + len(starts), dtype=np.int64)
    blank = blank_lines(text, how.separator, first)
    if len(starts) and text.data.find(b'"', int(starts[0])) >= 0:
        return _read_quoted(text, header, header_index, line_no, blank, how)
    arr = np.frombuffer(text.data, dtype=np.uint8)
    sep_pos = np.flatnonzero(arr == ord(how.separator))
    counts = np.searchsorted(sep_pos, ends) - np.searchsorted(sep_pos, starts) + 1
    good = (counts == len(header)) & ~blank
    bad = ~good & ~blank
    keep = np.zeros(len(arr) + 1, dtype=np.int32)
    np.add.at(keep, starts[good], 1)
    np.add.at(keep, np.minimum(ends[good] + 1, len(arr)), -1)
    body = arr[np.cumsum(keep[:-1]).astype(bool)].tobytes()
    if body and not body.endswith(b"\n"):
        body += b"\n"
    columns = _arrow_split(body, header, how, strict=False) if good.any() else {
        h: pa.chunked_array([], TEXT) for h in header if how.keep is None or h in how.keep}
    return RawTable(text.path, header, header_index + 1, columns, line_no[good], line_no[bad],
                    counts[bad], text)


TEXT = pa.dictionary(pa.int32(), pa.string())
"""Arrow type of text columns: dictionary-encoded while parsing, as station logs repeat a few
distinct dates, times and directions many times over."""


def _arrow_split(body: bytes | memoryview, header: list[str], how: Parsing,
                 strict: bool) -> dict[str, pa.ChunkedArray] | None:
    """Split ``body`` with pyarrow: text columns as dictionaries, value columns as float64.

    A value column that holds anything other than numbers and missing markers is read as text
    (to be parsed value by value later). Returns None (strict) when a line has another number
    of fields than the header.
    """
    names = [f"c{i}" for i in range(len(header))]
    text_cols = {n for n, h in zip(names, header, strict=True) if h in how.string_columns}
    wanted = [(h, n) for h, n in zip(header, names, strict=True) if how.keep is None or h in how.keep]

    def read(types: dict) -> pa.Table:
        return pacsv.read_csv(
            pa.BufferReader(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 22),
            parse_options=pacsv.ParseOptions(
                delimiter=how.separator, quote_char=False, ignore_empty_lines=not strict,
                invalid_row_handler=(lambda row: "error") if strict else None),
            convert_options=pacsv.ConvertOptions(
                column_types=types, strings_can_be_null=False, quoted_strings_can_be_null=False,
                null_values=list(how.missing), decimal_point=how.decimal,
                include_columns=[n for _, n in wanted]),
        )

    try:
        table = read({n: TEXT if n in text_cols else pa.float64() for _, n in wanted})
    except pa.ArrowInvalid as exc:
        if "Expected" in str(exc) and "columns" in str(exc):
            if strict:
                return None
            raise
        table = read({n: TEXT for _, n in wanted})  # a value column holds text somewhere
    return {h: table.column(n) for h, n in wanted}


def is_empty(col: pa.ChunkedArray) -> pa.ChunkedArray:
    """Boolean mask of empty cells (empty text, or null for numbers)."""
    if pa.types.is_dictionary(col.type):
        return pa.chunked_array([pc.equal(c.dictionary, "").take(c.indices) for c in col.chunks],
                                pa.bool_())
    return pc.is_null(col)


def _read_quoted(text: TextFile, header: list[str], header_index: int, line_no: np.ndarray,
                 blank: np.ndarray, how: Parsing) -> RawTable:
    """Slow path for files with quoted fields (no newlines inside quotes)."""
    rows: list[list[str]] = []
    good_lines, bad_lines, bad_counts = [], [], []
    for k in np.flatnonzero(~blank):
        fields = next(csv.reader([text.line(int(line_no[k]))], delimiter=how.separator))
        if len(fields) == len(header):
            rows.append(fields)
            good_lines.append(line_no[k])
        else:
            bad_lines.append(line_no[k])
            bad_counts.append(len(fields))
    columns = {h: pa.chunked_array([pa.array([r[i] for r in rows], pa.string()).dictionary_encode()])
               for i, h in enumerate(header) if how.keep is None or h in how.keep}
    return RawTable(text.path, header, header_index + 1, columns,
                    np.asarray(good_lines, np.int64), np.asarray(bad_lines, np.int64),
                    np.asarray(bad_counts, np.int64), text)
