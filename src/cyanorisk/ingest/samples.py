"""Laboratory phytoplankton results in, tidy samples out (censoring kept), plus a rejects ledger.

Two shapes of file are read, declared by a :class:`SampleLayout`:

- long: one row per taxon per sample (sample id, dates, taxon, count, unit ...);
- wide: one row per sample, one column per taxon.

Counts are read as typed (:func:`cyanorisk.ingest.counts.parse_count`); cells per litre are
converted to cells per millilitre (1 L = 1000 mL, SI). Each raw row ends in the tidy output or in
the rejects ledger with its line, column, text and reason; repeated records of one sample and
taxon are merged when identical and resolved by policy (and flagged) when they conflict.

Per-sample totals of cyanobacteria come from :func:`sample_totals` with the configured taxon table.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

from cyanorisk.ingest.counts import CENSOR_ABOVE, CENSOR_BELOW, EXACT, parse_count
from cyanorisk.ingest.dialects import DATE_ORDERS, Table, read_text_naming_column, sniff_table
from cyanorisk.ingest.lines import Parsing, TextFile, read_table, read_text
from cyanorisk.ingest.quality import (
    AFTER_LATEST,
    DEFAULT_BAD_ROWS,
    DEFAULT_DUPLICATES,
    DUPLICATE_POLICIES,
    IngestError,
    Ledger,
    RowAccount,
)
from cyanorisk.ingest.stamps import (
    EARLIEST_DATE,
    LAST_REPRESENTABLE,
    day_number,
    distinct,
    localize,
    parse_dates,
    parse_times,
    to_ns,
)
from cyanorisk.timeofday import minutes_after_midnight, parse_hhmm

CELLS_PER_L_IN_ML = 1000.0
"""Cells per litre per cell per millilitre: 1 L = 1000 mL (SI)."""
_UNIT_IN_HEADER = re.compile(r"\s*[\(\[]\s*(cells\s*/\s*m?l|cells\s*per\s*m?l)\s*[\)\]]\s*$", re.I)


@dataclass(frozen=True)
class SampleLayout:
    """How a lab file is laid out. Column names as in the file's header."""

    shape: str = "long"
    """'long' (a row per taxon per sample) or 'wide' (a row per sample, a column per taxon)."""
    separator: str | None = None
    """Field separator, one character."""
    decimal: str | None = None
    """Decimal mark, '.' or ','."""
    encoding: str = "utf-8"
    """Text encoding of the file."""
    skip_lines: int | None = None
    """Preamble lines above the header."""
    date_order: str | None = None
    """'dmy', 'mdy' or 'ymd'."""
    sample_id_column: str | None = None
    """Without it, a sample is identified by its site and sampling time."""
    site_column: str | None = None
    """The column naming the site of each sample; without it every sample belongs to the site
    that reads the sheet."""
    sampled_date_column: str = "sampled"
    """The column of sampling dates."""
    sampled_time_column: str | None = None
    """The column of sampling times (HH:MM); blank or missing: default_sample_time."""
    default_sample_time: str = "10:00"
    """Local time assumed when no sampling time is given (flagged 'time_assumed')."""
    reported_date_column: str | None = None
    """The column of the dates results were reported; without it a result counts as known
    lab_delay_days after sampling."""
    depth_column: str | None = None
    """The column of sampling depths [m]."""
    taxon_column: str | None = None
    """Long: the column naming the taxon."""
    count_column: str | None = None
    """Long: the column of counts (numbers, '<100', '>200000', 'ND', 'TNTC')."""
    unit_column: str | None = None
    """Long: the column of count units ('cells/mL', 'cells/L')."""
    count_unit: str | None = None
    """Unit of counts when neither the header nor a unit column says: 'cells/mL' or 'cells/L'.
    Unset, a count column whose header names no unit refuses the sheet (no unit is assumed)."""
    taxa_columns: tuple[str, ...] | None = None
    """Wide: the taxon columns; None takes every column not named elsewhere."""
    biovolume_column: str | None = None
    """The column of cyanobacterial biovolume [mm3 L-1]."""
    chl_a_column: str | None = None
    """The column of chlorophyll-a [ug L-1]."""
    microcystin_column: str | None = None
    """The column of total microcystins [ug L-1]."""
    comment_column: str | None = None
    """The column of comments, kept with each record."""
    detection_limit: str | None = None
    """What 'ND' (not detected) means, in the lab's own unit: '100 cells/mL' or
    '100000 cells/L'."""
    upper_limit: str | None = None
    """What 'TNTC' (too numerous to count) means, with its unit as for ``detection_limit``."""
    detection_limit_cells_per_ml: float | None = None
    """What 'ND' means [cells mL-1] (the earlier key; ``detection_limit`` names its unit)."""
    upper_limit_cells_per_ml: float | None = None
    """What 'TNTC' means [cells mL-1] (the earlier key; see ``upper_limit``)."""
    duplicates: str = DEFAULT_DUPLICATES
    """Conflicting records of one sample and taxon: keep the 'last' in file order, or 'first'."""

    def __post_init__(self) -> None:
        if self.shape not in ("long", "wide"):
            raise ValueError("shape must be 'long' or 'wide'")
        if self.shape == "long" and not (self.taxon_column and self.count_column):
            raise ValueError("a long layout needs taxon_column and count_column")
        if self.date_order not in (None, *DATE_ORDERS):
            raise ValueError(f"date_order must be one of {', '.join(DATE_ORDERS)}")
        if self.count_unit is not None and _unit_factor(self.count_unit) is None:
            raise ValueError(f"count_unit must be 'cells/mL' or 'cells/L', not {self.count_unit!r}")
        if self.duplicates not in DUPLICATE_POLICIES:
            raise ValueError("duplicates must be 'last' or 'first'")
        parse_hhmm(self.default_sample_time)
        for text_key, number_key in (("detection_limit", "detection_limit_cells_per_ml"),
                                     ("upper_limit", "upper_limit_cells_per_ml")):
            text = getattr(self, text_key)
            if text is None:
                continue
            value = limit_cells_per_ml(text, text_key)
            given = getattr(self, number_key)
            if given is not None and not np.isclose(given, value, rtol=1e-9):
                raise ValueError(f"{text_key} {text!r} is {value:g} cells/mL but {number_key} "
                                 f"says {given:g}; give one of them")
            object.__setattr__(self, number_key, value)

    def named_columns(self) -> set[str]:
        return {c for c in (self.sample_id_column, self.site_column, self.sampled_date_column,
                            self.sampled_time_column, self.reported_date_column, self.depth_column,
                            self.taxon_column, self.count_column, self.unit_column,
                            self.biovolume_column, self.chl_a_column, self.microcystin_column,
                            self.comment_column) if c}


_QUANTITY = re.compile(r"^\s*(?P<number>(?:\d[\d_,]*)?\.?\d+(?:[eE][+-]?\d+)?)\s*(?P<unit>\S.*?)\s*$")


def limit_cells_per_ml(text: str, key: str = "detection_limit") -> float:
    """A count limit written with its unit ('100 cells/mL', '100000 cells/L', '1e5 cells/L')
    in cells per millilitre (1 L = 1000 mL).

    Raises
    ------
    ValueError
        Naming ``key`` when the text is not a number followed by cells/mL or cells/L.
    """
    found = _QUANTITY.match(str(text))
    value = factor = None
    if found:
        factor = _unit_factor(found.group("unit"))
        value = float(found.group("number").replace("_", "").replace(",", ""))
    if value is None or factor is None or not value > 0:
        raise ValueError(f"{key} {text!r} is not a count with its unit, e.g. '100 cells/mL' or "
                         "'100000 cells/L'")
    return value / factor


def _unit_factor(unit: str) -> float | None:
    """Divisor that takes a count in ``unit`` to cells per millilitre; None if unknown."""
    u = re.sub(r"\s+", "", unit.lower()).replace("per", "/")
    return {"cells/ml": 1.0, "cells/l": CELLS_PER_L_IN_ML, "ml": 1.0, "l": CELLS_PER_L_IN_ML,
            "cells/ml-1": 1.0, "cellsml-1": 1.0, "cellsl-1": CELLS_PER_L_IN_ML}.get(u)


@dataclass
class SamplesMeta:
    """What :func:`read_samples` read and did."""

    files: list[str]
    account: RowAccount
    rejects: pd.DataFrame
    assumptions: list[str]
    flag_counts: dict[str, int] = field(default_factory=dict)

    def summary(self) -> dict:
        reasons = self.rejects["reason"].value_counts().sort_index()
        return {"files": self.files, "assumptions": self.assumptions,
                "rows": self.account.as_dict(),
                "ledger_by_reason": {str(k): int(v) for k, v in reasons.items()},
                "flags": self.flag_counts}


RECORD_COLUMNS = ["site_id", "sample_id", "sampled_at", "reported_at", "depth_m", "taxon",
                  "cells_per_ml", "censor", "flag", "biovolume_mm3_per_l", "chl_a_ug_per_l",
                  "microcystin_ug_per_l", "microcystin_censor", "comment", "file", "line"]
"""Columns of the tidy records: one per sample and taxon (times in UTC)."""


def read_samples(paths: str | Path | Sequence[str | Path], layout: SampleLayout, timezone: str, *,
                 site_id: str | None = None, bad_rows: str = DEFAULT_BAD_ROWS,
                 earliest: date = EARLIEST_DATE,
                 latest: date | None = None) -> tuple[pd.DataFrame, SamplesMeta]:
    """Read lab result files into tidy records, one per sample and taxon.

    Parameters
    ----------
    paths : path or sequence of paths
    layout : SampleLayout
    timezone : str
        IANA zone of the dates and times in the files.
    site_id : str, optional
        Site of every sample when the layout has no site column.
    bad_rows : {'reject', 'stop'}
        Unreadable rows go to the ledger, or the first one raises.
    earliest, latest : datetime.date, optional
        Plausible sampling dates: a sample dated before ``earliest`` or after ``latest`` (the
        day after the run, in the pipeline) goes to the ledger as ``implausible_date``. A result
        reported before its sample was taken is kept with the flag ``reported_before_sampled``.

    Returns
    -------
    data : pandas.DataFrame
        Columns :data:`RECORD_COLUMNS`; counts in [cells mL-1] with their censor ('=', '<', '>').
    meta : SamplesMeta
        Row accounting (balanced), the rejects ledger, assumptions and flag counts.
    """
    paths = [Path(p) for p in ([paths] if isinstance(paths, (str, Path)) else paths)]
    files = [parse_sample_file(p, layout, timezone, site_id=site_id, bad_rows=bad_rows,
                               earliest=earliest) for p in paths]
    return assemble_samples(files, layout, latest=latest, timezone=timezone)


@dataclass
class SampleFile:
    """One lab file parsed: its records before they meet the other files' records."""

    path: Path
    records: pd.DataFrame
    """Columns :data:`RECORD_COLUMNS` and ``_row`` (the row's index in the file)."""
    rows_read: int
    rejects: pd.DataFrame
    """Rows of this file that could not be read (the ledger's columns)."""
    notes: list[str]


def parse_sample_file(path: str | Path, layout: SampleLayout, timezone: str, *,
                      site_id: str | None = None, bad_rows: str = DEFAULT_BAD_ROWS,
                      earliest: date = EARLIEST_DATE,
                      site_aliases: Sequence[str] = ()) -> SampleFile:
    """Read one lab file into records (see :func:`read_samples`); dates before ``earliest`` go
    to the ledger; a site column value among ``site_aliases`` is read as ``site_id``."""
    ledger = Ledger()
    path = Path(path)
    window = (day_number(earliest), day_number(LAST_REPRESENTABLE))
    records, n_rows, said = _read_file(path, layout, timezone, site_id, bad_rows, ledger, window)
    if site_aliases and site_id is not None and len(records):
        records.loc[records["site_id"].isin(list(site_aliases)), "site_id"] = site_id
    return SampleFile(path, records, n_rows, ledger.frame(), [f"{path.name}: {s}" for s in said])


def assemble_samples(files: Sequence[SampleFile], layout: SampleLayout, *,
                     latest: date | None = None,
                     timezone: str = "UTC") -> tuple[pd.DataFrame, SamplesMeta]:
    """Put parsed lab files together: samples dated after ``latest`` (a local date in
    ``timezone``) to the ledger, repeated records merged or resolved by policy, the row account
    proved. See :func:`read_samples`."""
    ledger = Ledger([f.rejects for f in files if len(f.rejects)])
    parts = [f.records for f in files]
    data = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=RECORD_COLUMNS)
    data = _keep_before(data, latest, timezone, ledger, layout.encoding)
    rejected = sum(len(p) for p in ledger.parts)
    before = _raw_rows(data)
    data, conflicting = _deduplicate(data, layout.duplicates, ledger, layout.encoding)
    kept = _raw_rows(data)
    gone = before - kept  # rows all of whose records were merged into or superseded by others
    account = RowAccount(read=sum(f.rows_read for f in files), rejected=rejected, kept=len(kept),
                         duplicates_conflicting=len(gone & conflicting),
                         duplicates_identical=len(gone - conflicting))
    account.check()
    flags = data["flag"].str.split(",").explode()
    counts = flags[flags.astype(bool)].value_counts()
    meta = SamplesMeta([str(f.path) for f in files], account, ledger.frame(),
                       [n for f in files for n in f.notes],
                       {str(k): int(v) for k, v in counts.items()})
    return data.drop(columns=["_row"]).reset_index(drop=True), meta


def _raw_rows(data: pd.DataFrame) -> set[tuple[str, int]]:
    """The raw rows behind records (a wide row makes one record per taxon)."""
    return set(zip(data["file"], data["_row"], strict=True))


def _read_file(path: Path, layout: SampleLayout, timezone: str, site_id: str | None, bad_rows: str,
               ledger: Ledger, window: tuple[int, int]) -> tuple[pd.DataFrame, int, list[str]]:
    text = read_text_naming_column(path, layout.encoding, layout.separator, layout.skip_lines,
                                   layout.decimal, "the sample layout")
    table = sniff_sheet(text, layout)
    header = table.header
    raw = read_table(text, table.skip_lines, Parsing(table.separator, table.decimal, (),
                                                     string_columns=tuple(header)))
    cols = {h: _strings(raw.columns[h]) for h in header}
    n = raw.n_rows
    problems: list[tuple[int, str, str, str]] = []  # (row, column, reason, message)
    for line, count in zip(raw.bad_lines, raw.bad_counts, strict=True):
        ledger.add(str(path), np.array([line]), "", [text.line(int(line))], "field_count",
                   f"expected {len(header)} fields as in the header, found {count}")
    sampled, reported, said = _sample_times(cols, layout, timezone, n, problems, window)
    if layout.shape == "long":
        records = _long_records(cols, layout, table.decimal, header, n, problems)
    else:
        records = _wide_records(cols, layout, table.decimal, header, n, problems)
    bad_rows_idx = sorted({p[0] for p in problems})
    if bad_rows == "stop" and (problems or len(raw.bad_lines)):
        first = min(problems, key=lambda p: p[0]) if problems else None
        if first is None or (len(raw.bad_lines) and raw.bad_lines[0] < raw.line_numbers[first[0]]):
            line = int(raw.bad_lines[0])
            raise IngestError(path, "the number of fields differs from the header's", line=line)
        raise IngestError(path, first[3], line=int(raw.line_numbers[first[0]]), column=first[1])
    seen: set[int] = set()
    for row, column, reason, message in sorted(problems):
        if row in seen:
            continue
        seen.add(row)
        line = int(raw.line_numbers[row])
        ledger.add(str(path), np.array([line]), column, [text.line(line)], reason, message)
    keep_rows = np.setdiff1d(np.arange(n), bad_rows_idx)
    records = records[records["_row"].isin(keep_rows)].copy()
    r = records["_row"].to_numpy()
    site_values = cols[layout.site_column] if layout.site_column else None
    records["site_id"] = site_values[r] if site_values is not None else site_id
    if records["site_id"].isna().any():
        raise IngestError(path, "no site for the samples: the layout has no site_column and no "
                                "site was given")
    if layout.sample_id_column:
        records["sample_id"] = cols[layout.sample_id_column][r]
    else:
        records["sample_id"] = [f"{t:%Y-%m-%dT%H:%M}Z" for t in sampled[r]]
    records["sampled_at"] = sampled[r]
    records["reported_at"] = reported[r]
    records["depth_m"] = (_floats(cols[layout.depth_column], table.decimal)[r]
                          if layout.depth_column else np.nan)
    records["comment"] = cols[layout.comment_column][r] if layout.comment_column else ""
    records["file"] = str(path)
    records["line"] = raw.line_numbers[r]
    for flag in ("time_assumed", "reported_before_sampled"):
        if said.get(flag) is not None:
            marked = said.pop(flag)[r]
            records.loc[marked, "flag"] = _join_flag(records.loc[marked, "flag"], flag)
    return records[RECORD_COLUMNS + ["_row"]], n + len(raw.bad_lines), list(said.values())


def sniff_sheet(text: TextFile, layout: SampleLayout) -> Table:
    """Separator, preamble and header of a lab sheet; every column the layout names must be
    in the header.

    Raises
    ------
    IngestError
        Naming the file, the header line and the missing column.
    """
    table = sniff_table(text, layout.separator, layout.skip_lines, layout.decimal)
    for name in sorted(layout.named_columns()):
        if name not in table.header:
            raise IngestError(text.path, f"the layout names column '{name}' but the header has "
                                         f"{', '.join(table.header)}", line=table.skip_lines + 1,
                              column=name)
    if layout.count_unit is None:
        unitless = [c for c in _count_columns(layout, table.header) if _header_unit(c) is None]
        if unitless and not (layout.shape == "long" and layout.unit_column):
            raise IngestError(text.path, "the header names no count unit for this column and the "
                                         "layout declares none; write the unit in the header, "
                                         f"e.g. '{unitless[0]} (cells/mL)', or set count_unit = "
                                         "\"cells/mL\" (or \"cells/L\") in the sample layout",
                              line=table.skip_lines + 1, column=unitless[0])
    return table


def _count_columns(layout: SampleLayout, header: list[str]) -> list[str]:
    """The columns holding counts: the long layout's count column, or the wide one's taxa."""
    if layout.shape == "long":
        return [layout.count_column]
    named = layout.named_columns()
    return list(layout.taxa_columns) if layout.taxa_columns else [h for h in header
                                                                  if h not in named]


def _day_text(day: int) -> str:
    return str(date(1970, 1, 1) + timedelta(days=int(day)))


def _strings(col) -> np.ndarray:
    codes, uniques = distinct(col)
    return np.asarray(uniques, dtype=object)[codes] if len(codes) else np.array([], dtype=object)


def _floats(values: np.ndarray, decimal: str) -> np.ndarray:
    text = pd.Series(values, dtype=object).str.strip()
    if decimal == ",":
        text = text.str.replace(",", ".", regex=False)
    return pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)


def _join_flag(flags: pd.Series, new: str) -> pd.Series:
    return flags.where(flags == "", flags + ",").astype(object) + new


def _sample_times(cols: dict, layout: SampleLayout, timezone: str, n: int, problems: list,
                  window: tuple[int, int]) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex, dict]:
    """Sampling and reporting instants in UTC; problems appended per row. Days outside
    ``window`` (first and last plausible day numbers) are problems, never read as instants."""
    said: dict = {}
    date_text = cols[layout.sampled_date_column]
    codes, uniques = np.unique(date_text.astype(str), return_inverse=True)
    parsed = parse_dates(list(codes), layout.date_order)
    if parsed.note:
        said["order"] = parsed.note
    days = parsed.days[uniques]
    for i in np.flatnonzero(np.isnan(days)):
        problems.append((int(i), layout.sampled_date_column, "bad_date",
                         f"'{date_text[i]}' is not a date ({parsed.order})"))
    far = ~np.isnan(days) & ((days < window[0]) | (days > window[1]))
    for i in np.flatnonzero(far):
        problems.append((int(i), layout.sampled_date_column, "implausible_date",
                         f"'{date_text[i]}' is not a plausible sampling date: outside "
                         f"{_day_text(window[0])} to {_day_text(window[1])} ([ingest] "
                         "earliest_date, and the day after the run)"))
    days = np.where(far, np.nan, days)
    if layout.sampled_time_column:
        t_text = cols[layout.sampled_time_column]
        blank = np.array([not str(x).strip() for x in t_text])
        tod = parse_times([str(x) for x in t_text])
        default = minutes_after_midnight(layout.default_sample_time) * 60 * 10**9
        for i in np.flatnonzero((tod < 0) & ~blank):
            problems.append((int(i), layout.sampled_time_column, "bad_time",
                             f"'{t_text[i]}' is not a time of day; expected HH:MM"))
        assumed = blank
        tod = np.where(blank, default, tod)
    else:
        assumed = np.ones(n, dtype=bool)
        tod = np.full(n, minutes_after_midnight(layout.default_sample_time) * 60 * 10**9)
    said["time_assumed"] = assumed
    utc, _, nonexistent = localize(to_ns(days, tod), timezone)
    for i in np.flatnonzero(nonexistent):
        problems.append((int(i), layout.sampled_time_column or layout.sampled_date_column,
                         "nonexistent_local_time", f"this local time does not exist in {timezone}"))
    sampled = pd.DatetimeIndex(utc.view("datetime64[ns]")).tz_localize("UTC")
    reported = pd.DatetimeIndex(np.full(n, np.datetime64("NaT"), "datetime64[ns]")).tz_localize("UTC")
    if layout.reported_date_column:
        r_text = cols[layout.reported_date_column]
        blank = np.array([not str(x).strip() for x in r_text])
        r_days = parse_dates([str(x) for x in r_text], parsed.order).days
        for i in np.flatnonzero(np.isnan(r_days) & ~blank):
            problems.append((int(i), layout.reported_date_column, "bad_date",
                             f"'{r_text[i]}' is not a date ({parsed.order})"))
        r_far = ~np.isnan(r_days) & ((r_days < window[0]) | (r_days > window[1]))
        for i in np.flatnonzero(r_far):
            problems.append((int(i), layout.reported_date_column, "implausible_date",
                             f"'{r_text[i]}' is not a plausible reporting date: outside "
                             f"{_day_text(window[0])} to {_day_text(window[1])}"))
        r_days = np.where(r_far, np.nan, r_days)
        said["reported_before_sampled"] = r_days < np.floor(days)
        midnight = np.zeros(n, dtype=np.int64)  # a result counts from the start of its day
        r_utc, _, _ = localize(to_ns(r_days, midnight), timezone)
        reported = pd.DatetimeIndex(r_utc.view("datetime64[ns]")).tz_localize("UTC")
    return sampled, reported, said


def _count_cells(values: np.ndarray, factors: np.ndarray, layout: SampleLayout, decimal: str,
                 column: str | np.ndarray, problems: list, rows: np.ndarray) -> dict[str, list]:
    out = {"cells_per_ml": [], "censor": [], "flag": []}
    limits = (layout.detection_limit_cells_per_ml, layout.upper_limit_cells_per_ml)
    for k, (text, factor, row) in enumerate(zip(values, factors, rows, strict=True)):
        # limits are in cells/mL; scale them into the column's unit before parsing
        c = parse_count(text, decimal, *(None if x is None else x * factor for x in limits))
        col = column if isinstance(column, str) else column[k]
        if c.reason:
            problems.append((int(row), col, "bad_count", c.reason))
        flag = c.flag
        if factor != 1.0 and c.censor is not None:
            flag = f"{flag},converted_from_cells_per_l" if flag else "converted_from_cells_per_l"
        out["cells_per_ml"].append(c.value / factor)
        out["censor"].append(c.censor)
        out["flag"].append(flag)
    return out


def _sample_values(cols: dict, layout: SampleLayout, decimal: str, rows: np.ndarray,
                   problems: list) -> dict[str, np.ndarray]:
    """Biovolume, chlorophyll-a and microcystin of each row (censoring kept for the toxin)."""
    out: dict[str, np.ndarray] = {}
    for key, name in (("biovolume_mm3_per_l", layout.biovolume_column),
                      ("chl_a_ug_per_l", layout.chl_a_column),
                      ("microcystin_ug_per_l", layout.microcystin_column)):
        values = np.full(len(rows), np.nan)
        censor = np.full(len(rows), None, dtype=object)
        if name:
            for k, row in enumerate(rows):
                c = parse_count(cols[name][row], decimal)
                if c.reason:
                    problems.append((int(row), name, "bad_number", c.reason.replace("count", "value")))
                values[k], censor[k] = c.value, c.censor
        out[key] = values
        if key == "microcystin_ug_per_l":
            out["microcystin_censor"] = censor
    return out


def _long_records(cols: dict, layout: SampleLayout, decimal: str, header: list[str], n: int,
                  problems: list) -> pd.DataFrame:
    rows = np.arange(n)
    declared = _header_unit(layout.count_column) or layout.count_unit
    factors = np.full(n, np.nan if declared is None else _unit_factor(declared))
    if layout.unit_column:
        for i, u in enumerate(cols[layout.unit_column]):
            if not str(u).strip() and declared is None:
                problems.append((i, layout.unit_column, "no_unit",
                                 "the unit is blank and the layout declares no count_unit"))
            elif str(u).strip():
                f = _unit_factor(str(u))
                if f is None:
                    problems.append((i, layout.unit_column, "bad_unit",
                                     f"'{u}' is not a count unit; expected cells/mL or cells/L"))
                else:
                    factors[i] = f
    factors[np.isnan(factors)] = 1.0  # rows without a unit are rejected above
    counts = _count_cells(cols[layout.count_column], factors, layout, decimal, layout.count_column,
                          problems, rows)
    taxa = np.array([str(t).strip() for t in cols[layout.taxon_column]], dtype=object)
    for i in np.flatnonzero(taxa == ""):
        problems.append((int(i), layout.taxon_column, "no_taxon", "the taxon is blank"))
    return pd.DataFrame({"_row": rows, "taxon": taxa, **counts,
                         **_sample_values(cols, layout, decimal, rows, problems)})


def _header_unit(name: str | None) -> str | None:
    m = _UNIT_IN_HEADER.search(name or "")
    return m.group(1) if m else None


def _wide_records(cols: dict, layout: SampleLayout, decimal: str, header: list[str], n: int,
                  problems: list) -> pd.DataFrame:
    taxa_cols = _count_columns(layout, header)
    if not taxa_cols:
        raise IngestError("<layout>", "a wide layout needs at least one taxon column")
    rows = np.repeat(np.arange(n), len(taxa_cols))
    column_of = np.tile(np.array(taxa_cols, dtype=object), n)
    values = np.array([cols[c][r] for r, c in zip(rows, column_of, strict=True)], dtype=object)
    factor_of = {c: _unit_factor(_header_unit(c) or layout.count_unit) for c in taxa_cols}
    factors = np.array([factor_of[c] for c in column_of])
    counts = _count_cells(values, factors, layout, decimal, column_of, problems, rows)
    taxon = np.array([_UNIT_IN_HEADER.sub("", c).strip() for c in column_of], dtype=object)
    frame = pd.DataFrame({"_row": rows, "taxon": taxon, **counts})
    per_row = pd.DataFrame(_sample_values(cols, layout, decimal, np.arange(n), problems))
    frame = frame.join(per_row, on="_row")
    # A blank taxon cell in a wide sheet means the taxon was not reported: no record. A row with
    # no count at all keeps one record without a taxon, so its other results are not lost.
    reported = frame["censor"].notna() | frame["_row"].isin([p[0] for p in problems])
    first_of_row = ~frame["_row"].duplicated()
    empty_row = ~reported.groupby(frame["_row"]).transform("any")
    frame.loc[empty_row & first_of_row, "taxon"] = ""
    return frame[reported | (empty_row & first_of_row)]


def _keep_before(data: pd.DataFrame, latest: date | None, timezone: str, ledger: Ledger,
                 encoding: str) -> pd.DataFrame:
    """Records sampled after the local day ``latest`` go to the ledger, one entry per raw row:
    a sample cannot have been taken after the run (a typing error, often the year)."""
    if latest is None or data.empty:
        return data
    limit = pd.Timestamp(latest + timedelta(days=1)).tz_localize(timezone).tz_convert("UTC")
    late = (data["sampled_at"] >= limit).to_numpy()
    if not late.any():
        return data
    rows = data.loc[late, ["file", "line"]].drop_duplicates()
    texts: dict[str, TextFile] = {}
    for file, line in rows.itertuples(index=False):
        text = texts.setdefault(file, read_text(Path(file), encoding))
        ledger.add(file, np.array([line]), "", [text.line(int(line))], "implausible_date",
                   f"sampled after {latest}, {AFTER_LATEST} (by default the day after the run): "
                   "a typing error, often in the year")
    return data[~late]


def _deduplicate(data: pd.DataFrame, policy: str, ledger: Ledger,
                 encoding: str) -> tuple[pd.DataFrame, set[tuple[str, int]]]:
    """Merge identical records of one sample and taxon; resolve conflicting ones by policy.

    Returns the kept records and the raw rows of the superseded conflicting ones.
    """
    key = ["site_id", "sample_id", "taxon"]
    same_key = data.duplicated(key, keep=False)
    if data.empty or not same_key.any():
        return data, set()
    compare = ["sampled_at", "cells_per_ml", "censor", "biovolume_mm3_per_l", "chl_a_ug_per_l",
               "microcystin_ug_per_l"]
    keep = "last" if policy == "last" else "first"
    winners = data[same_key].drop_duplicates(key, keep=keep)
    merged = data[same_key].merge(winners[key + compare + ["file", "line"]], on=key,
                                  suffixes=("", "_kept"), how="left")
    merged.index = data.index[same_key]
    identical = np.ones(len(merged), dtype=bool)
    for c in compare:
        a, b = merged[c], merged[f"{c}_kept"]
        identical &= ((a == b) | (a.isna() & b.isna())).to_numpy()
    is_winner = merged.index.isin(winners.index)
    losers = merged[~is_winner]
    conflicting = losers[~identical[~is_winner]]
    texts: dict[str, TextFile] = {}
    for _, row in conflicting.iterrows():
        text = texts.setdefault(row["file"], read_text(Path(row["file"]), encoding))
        ledger.add(row["file"], np.array([row["line"]]), "", [text.line(int(row["line"]))],
                   "duplicate_conflict",
                   f"same sample and taxon as {Path(row['file_kept']).name} line "
                   f"{row['line_kept']} with other values; that record was kept")
    out = data.drop(index=losers.index)
    conflicted_keys = conflicting[key].drop_duplicates()
    if len(conflicted_keys):
        hit = out.merge(conflicted_keys, on=key, how="left", indicator=True)["_merge"] == "both"
        out.loc[hit.to_numpy(), "flag"] = _join_flag(out.loc[hit.to_numpy(), "flag"],
                                                    "duplicate_conflict")
    return out, _raw_rows(conflicting)


def _censored_sum(out: pd.DataFrame, group: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Total, censor and upper bound of a group of taxa per sample (rules in sample_totals)."""
    n_exact, n_below, n_above = (out[f"{group}_n_{k}"] for k in ("exact", "below", "above"))
    exact, limit, above = (out[f"{group}_{k}"] for k in ("exact", "limit", "above"))
    all_below = (n_below > 0) & (n_exact == 0) & (n_above == 0)
    any_above = n_above > 0
    value = np.where(all_below, limit, exact + above)
    censor = np.where(any_above, CENSOR_ABOVE, np.where(all_below, CENSOR_BELOW, EXACT))
    upper = np.where(any_above, np.inf, exact + limit)
    return value, censor, upper


@dataclass(frozen=True)
class Taxon:
    """What the taxon table says of one taxon."""

    cyanobacterium: bool
    toxin_producer: bool = False


def lookup_taxon(name: str, table: Mapping[str, Taxon]) -> Taxon | None:
    """The table's entry for a taxon: exact name (case-insensitive), else its genus (first word)."""
    lower = {k.lower(): v for k, v in table.items()}
    key = name.strip().lower()
    if key in lower:
        return lower[key]
    genus = key.split(" ")[0] if key else ""
    return lower.get(genus)


def sample_totals(records: pd.DataFrame, taxa: Mapping[str, Taxon]) -> pd.DataFrame:
    """One row per sample: the total count of cyanobacteria and the sample-level results.

    Censoring of the total (documented rule):

    - the total is the sum of the cyanobacterial taxa counted exactly ('=');
    - if every cyanobacterial part is censored below ('<'), the total is censored below at the
      sum of their limits (the true total is less than that);
    - if some parts are exact and others censored below, the censored parts count as zero and
      the total stays exact: the true total lies between the sum and the sum plus the limits,
      which ``cyano_upper_cells_per_ml`` records;
    - if any part is censored above ('>'), the total is censored above at the sum of the exact
      and the censored-above parts (a lower bound: the true total is at least that);
    - a sample with no cyanobacterial taxon reported has a total of 0, exact, only when the
      sample lists some taxon; taxa missing from the table are not counted and are flagged.

    The count of known toxin producers (``toxic_cells_per_ml``, ``toxic_censor``) follows the same
    rules over the taxa the table marks as toxin producers.

    Returns columns: site_id, sample_id, sampled_at, reported_at, cyano_cells_per_ml,
    cyano_censor, cyano_upper_cells_per_ml, toxic_cells_per_ml, toxic_censor, biovolume_mm3_per_l,
    chl_a_ug_per_l, microcystin_ug_per_l, microcystin_censor, n_taxa, unknown_taxa.
    """
    if records.empty:
        return pd.DataFrame(columns=["site_id", "sample_id", "sampled_at", "reported_at",
                                     "cyano_cells_per_ml", "cyano_censor"])
    info = {t: lookup_taxon(t, taxa) for t in records["taxon"].unique()}
    r = records.assign(
        _cyano=records["taxon"].map(lambda t: bool(info[t] and info[t].cyanobacterium)),
        _toxic=records["taxon"].map(lambda t: bool(info[t] and info[t].toxin_producer)),
        _unknown=records["taxon"].map(lambda t: bool(t) and info[t] is None),
        _counted=records["censor"].notna(),
    )
    exact = r["censor"] == EXACT
    below = r["censor"] == CENSOR_BELOW
    above = r["censor"] == CENSOR_ABOVE
    v = r["cells_per_ml"].fillna(0.0)
    parts = {}
    for group in ("_cyano", "_toxic"):
        sel = r[group]
        parts.update({f"{group}_exact": np.where(sel & exact, v, 0.0),
                      f"{group}_limit": np.where(sel & below, v, 0.0),
                      f"{group}_above": np.where(sel & above, v, 0.0),
                      f"{group}_n_exact": (sel & exact).astype(int),
                      f"{group}_n_below": (sel & below).astype(int),
                      f"{group}_n_above": (sel & above).astype(int)})
    r = r.assign(**parts, _unknown_name=np.where(r["_unknown"], r["taxon"], ""))
    g = r.groupby(["site_id", "sample_id"], sort=False)
    out = g.agg(sampled_at=("sampled_at", "first"), reported_at=("reported_at", "first"),
                **{k: (k, "sum") for k in parts},
                biovolume_mm3_per_l=("biovolume_mm3_per_l", "max"),
                chl_a_ug_per_l=("chl_a_ug_per_l", "max"),
                microcystin_ug_per_l=("microcystin_ug_per_l", "max"),
                microcystin_censor=("microcystin_censor", "first"),
                n_counted=("_counted", "sum"),
                n_taxa=("taxon", lambda s: int((s != "").sum())),
                unknown_taxa=("_unknown_name", lambda s: ", ".join(sorted({x for x in s if x}))),
                ).reset_index()
    nothing = out["n_counted"] == 0  # no count at all: the total is unknown, not zero
    for group, name in (("_cyano", "cyano"), ("_toxic", "toxic")):
        value, censor, upper = _censored_sum(out, group)
        out[f"{name}_cells_per_ml"] = np.where(nothing, np.nan, value)
        out[f"{name}_censor"] = np.where(nothing, None, censor)
        out[f"{name}_upper_cells_per_ml"] = np.where(nothing, np.nan, upper)
    out = out.drop(columns=list(parts) + ["n_counted", "toxic_upper_cells_per_ml"])
    return out.sort_values(
        ["site_id", "sampled_at"], ignore_index=True)


def empty_totals() -> pd.DataFrame:
    """A per-sample table with no rows but the right column types (a site without lab files)."""
    utc = "datetime64[ns, UTC]"
    return pd.DataFrame({"site_id": pd.Series(dtype=object), "sample_id": pd.Series(dtype=object),
                         "sampled_at": pd.Series(dtype=utc), "reported_at": pd.Series(dtype=utc),
                         "cyano_cells_per_ml": pd.Series(dtype=float),
                         "cyano_censor": pd.Series(dtype=object),
                         "toxic_cells_per_ml": pd.Series(dtype=float),
                         "toxic_censor": pd.Series(dtype=object)})
