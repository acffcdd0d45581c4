"""Odd real-world weather files, one tiny fixture each (cyanorisk.ingest.read_weather).

pvlib style (tests/iotools/test_crn.py::test_read_crn_problems): every file layout that broke,
or could break, the weather reader is a fixture under tests/data/weather/ named after its problem,
and a test here is named after it. The output index labels the start of each interval, in UTC.
"""

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.ingest import ColumnSpec, IngestError, WeatherDialect, read_weather

DATA = Path(__file__).parent / "data" / "weather"
ATOL = 1e-9
"""Values go through text parsing and at most one affine unit conversion: float round-off only."""

FILE_LEVEL = pytest.mark.parametrize("bad_rows", ["stop", "reject"])
"""A file that cannot be read as a whole is an error whatever the bad-row policy."""


# ------------------------------------------------------------------------------------- helpers

def _read(name, dialect=None, interval="30min", timezone="UTC", **kwargs):
    """read_weather of a fixture; bad rows go to the ledger unless a test says otherwise."""
    kwargs.setdefault("bad_rows", "reject")
    return read_weather(DATA / name, dialect, interval, timezone, **kwargs)


def _error(name, dialect=None, bad_rows="stop", **kwargs) -> IngestError:
    with pytest.raises(IngestError) as info:
        _read(name, dialect, bad_rows=bad_rows, **kwargs)
    return info.value


def _assert_sentence(err, name, line=None, column=None, mentions=()):
    """The error is one sentence that starts with the file, the line and the column.

    DESIGN.md: errors are one clear sentence naming the file, line and column.
    """
    path = str(DATA / name)
    where = path
    if line is not None:
        where += f", line {line}"
    if column is not None:
        where += f", column '{column}'"
    text = str(err)
    assert (err.path, err.line, err.column) == (path, line, column)
    assert text.startswith(where + ": ")
    assert "\n" not in text
    assert re.search(r"[.!?]\s+[A-Z]", text) is None, f"more than one sentence: {text}"
    for part in mentions:
        assert part in err.reason  # the reason, not the path: 'empty' is in 'empty.csv'


def _assert_account(meta, **counts):
    """The row account is exactly ``counts`` (zeros elsewhere) and balances."""
    expected = dict(read=0, kept=0, duplicates_identical=0, duplicates_conflicting=0, off_grid=0,
                    rejected=0)
    expected.update(counts)
    a = meta.account
    assert a.as_dict() == expected
    assert a.check() is a
    assert a.read == (a.kept + a.duplicates_identical + a.duplicates_conflicting + a.off_grid
                      + a.rejected)


def _ledger(meta, columns=("file", "line", "column", "raw", "reason")):
    return meta.rejects[list(columns)].to_dict("records")


def _entry(name, line, column, raw, reason):
    return {"file": str(DATA / name), "line": line, "column": column, "raw": raw, "reason": reason}


def _utc(*stamps):
    return pd.DatetimeIndex(list(stamps), tz="UTC", name="time_utc").as_unit("ns")


def _flags(data, variable):
    return data[f"{variable}_flag"].astype(str).tolist()


def _assert_values(data, variable, expected):
    np.testing.assert_allclose(data[variable].to_numpy(), expected, rtol=0, atol=ATOL)


# ------------------------------------------------------------- files that cannot be read at all

@FILE_LEVEL
def test_read_weather_empty(bad_rows):
    err = _error("empty.csv", bad_rows=bad_rows)
    _assert_sentence(err, "empty.csv", mentions=("empty",))


@FILE_LEVEL
def test_read_weather_header_only(bad_rows):
    err = _error("header_only.csv", bad_rows=bad_rows)
    _assert_sentence(err, "header_only.csv", line=1, mentions=("no data rows",))


@FILE_LEVEL
def test_read_weather_binary(bad_rows):
    # A spreadsheet (zip container) saved where a CSV export was expected.
    err = _error("binary.bin", bad_rows=bad_rows)
    _assert_sentence(err, "binary.bin", mentions=("binary",))


def test_a_text_log_with_a_few_nul_bytes_rejects_their_row_naming_line_and_column():
    # A logger losing power writes NUL bytes into a value: that row goes to the ledger, the rest
    # of the log is read, and no message prints a raw NUL (common practice, no source).
    name = "nul_bytes_in_a_value.csv"
    data, meta = _read(name)
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7])
    assert _flags(data, "air_temp_c") == ["ok", "filled", "ok"]
    (entry,) = meta.rejects.to_dict("records")
    assert (entry["line"], entry["column"], entry["reason"]) == (3, "air_temp_c", "bad_number")
    assert "NUL bytes" in entry["message"] and "\x00" not in entry["message"] + entry["raw"]
    err = _error(name)
    _assert_sentence(err, name, line=3, column="air_temp_c", mentions=("NUL bytes",))
    assert "\x00" not in str(err)


@FILE_LEVEL
def test_read_weather_wrong_separator(bad_rows):
    # Semicolon-separated file, comma declared: no line splits into two fields.
    err = _error("wrong_separator.csv", WeatherDialect(separator=","), bad_rows=bad_rows)
    _assert_sentence(err, "wrong_separator.csv", line=1, mentions=("separator comma",))


def test_read_weather_wrong_separator_decimal_comma():
    # The common European export (';' and decimal comma) read with the default ','.
    name = "wrong_separator_decimal_comma.csv"
    err = _error(name, WeatherDialect(separator=","))
    assert (err.path, err.line) == (str(DATA / name), 1)
    assert str(err).startswith(f"{DATA / name}, line 1")
    assert "separator" in err.reason


@FILE_LEVEL
def test_read_weather_unknown_column(bad_rows):
    err = _error("unknown_column.csv", bad_rows=bad_rows)
    _assert_sentence(err, "unknown_column.csv", line=1, column="wind_chill_c",
                     mentions=("unknown column 'wind_chill_c'",))


def test_read_weather_unknown_column_ignored():
    data, meta = _read("unknown_column.csv", WeatherDialect(other_columns="ignore"))
    assert list(data.columns) == ["air_temp_c", "air_temp_c_flag"]
    assert meta.files[0].ignored_columns == ["wind_chill_c"]
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7])


def test_a_declared_column_absent_from_the_file_is_a_warning_in_the_summary():
    # The dialect maps 'Water T' but this export has no such column: said, not silently dropped.
    dialect = WeatherDialect(other_columns="ignore",
                             columns={"Water T": ColumnSpec("water_temp_c", "degC")})
    data, meta = _read("unknown_column.csv", dialect)
    assert "water_temp_c" not in data.columns
    assert meta.summary()["warnings"] == [
        "unknown_column.csv: the dialect declares column 'Water T' (water_temp_c) but this file "
        "has no such column: water_temp_c is missing for its rows"]


def test_a_declared_column_absent_from_the_file_is_an_error_under_stop():
    dialect = WeatherDialect(other_columns="ignore",
                             columns={"Water T": ColumnSpec("water_temp_c", "degC")})
    err = _error("unknown_column.csv", dialect, bad_rows="stop")
    _assert_sentence(err, "unknown_column.csv", line=1, column="Water T",
                     mentions=("declares column 'Water T'",))


def test_read_weather_no_stamp_column():
    err = _error("no_stamp_column.csv")
    _assert_sentence(err, "no_stamp_column.csv", line=1, mentions=("no date or timestamp column",))


@FILE_LEVEL
def test_read_weather_latin1_encoded(bad_rows):
    # Byte 0xF6 is 'o' with diaeresis in ISO 8859-1 and never valid alone in UTF-8 (RFC 3629,
    # section 3: 0xF5 to 0xFF never appear; 0xF6 in particular; from memory, not in REFERENCES.md).
    err = _error("latin1_encoded.csv", bad_rows=bad_rows)
    path = str(DATA / "latin1_encoded.csv")
    assert (err.path, err.line) == (path, 4)
    assert str(err).startswith(f"{path}, line 4")
    assert "byte 0xf6 at character 35" in err.reason
    assert "latin-1" in err.reason
    assert re.search(r"[.!?]\s+[A-Z]", str(err)) is None


def test_read_weather_latin1_encoded_names_column():
    err = _error("latin1_encoded.csv")
    assert (err.line, err.column) == (4, "note")


def test_read_weather_latin1_encoded_declared():
    dialect = WeatherDialect(encoding="latin-1", columns={"note": ColumnSpec(None)})
    data, meta = _read("latin1_encoded.csv", dialect)
    assert meta.files[0].ignored_columns == ["note"]
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8])
    _assert_account(meta, read=4, kept=4)


@FILE_LEVEL
def test_read_weather_utf16(bad_rows):
    err = _error("utf16.csv", bad_rows=bad_rows)
    _assert_sentence(err, "utf16.csv", mentions=("UTF-16", "encoding = 'utf-16'"))


def test_read_weather_utf16_declared():
    # UTF-16 with a byte-order mark and CRLF line ends, as spreadsheet "Unicode text" exports.
    data, meta = _read("utf16.csv", WeatherDialect(encoding="utf-16"))
    pd.testing.assert_index_equal(data.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                   "2024-01-15 01:00"))
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7])
    _assert_account(meta, read=3, kept=3)


def test_read_weather_utf8_bom():
    # A UTF-8 byte-order mark before the header must not become part of the first column name.
    data, meta = _read("utf8_bom.csv")
    assert "timestamp column: 'timestamp' (sniffed)" in meta.files[0].assumptions
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7])


@FILE_LEVEL
def test_read_weather_outside_period(bad_rows):
    err = _error("outside_period.csv", bad_rows=bad_rows, period=("2025-01-01", "2025-01-31"))
    _assert_sentence(err, "outside_period.csv",
                     mentions=("all 3 stamps fall outside the requested period",))


def test_read_weather_outside_period_partly():
    data, meta = _read("outside_period.csv", period=("2024-01-15 00:30", None))
    pd.testing.assert_index_equal(data.index, _utc("2024-01-15 00:30", "2024-01-15 01:00"))
    assert _ledger(meta, ("file", "line", "reason")) == [
        {"file": str(DATA / "outside_period.csv"), "line": 2, "reason": "outside_period"}]
    _assert_account(meta, read=3, kept=2, rejected=1)


# ------------------------------------------------------------------- bad rows: stop or reject

def test_read_weather_date_31_feb():
    err = _error("date_31_feb.csv")
    _assert_sentence(err, "date_31_feb.csv", line=4, column="date", mentions=("'31/02/2024'",))


def test_read_weather_date_31_feb_rejected():
    data, meta = _read("date_31_feb.csv")
    assert _ledger(meta) == [_entry("date_31_feb.csv", 4, "date", "31/02/2024,00:00,15.0",
                                    "bad_date")]
    _assert_account(meta, read=4, kept=3, rejected=1)
    pd.testing.assert_index_equal(data.index, _utc("2024-02-29 23:00", "2024-02-29 23:30",
                                                   "2024-03-01 00:00", "2024-03-01 00:30"))
    # The rejected reading (15.0) is not used; the cell is filled between 12.4 and 12.2.
    _assert_values(data, "air_temp_c", [12.5, 12.4, 12.3, 12.2])
    assert _flags(data, "air_temp_c") == ["ok", "ok", "filled", "ok"]


def test_read_weather_time_25_00():
    err = _error("time_25_00.csv")
    _assert_sentence(err, "time_25_00.csv", line=4, column="time", mentions=("'25:00'",))


def test_read_weather_time_25_00_rejected():
    data, meta = _read("time_25_00.csv")
    assert _ledger(meta) == [_entry("time_25_00.csv", 4, "time", "15/01/2024,25:00,15.0",
                                    "bad_time")]
    _assert_account(meta, read=4, kept=3, rejected=1)
    pd.testing.assert_index_equal(data.index, _utc("2024-01-15 23:00", "2024-01-15 23:30",
                                                   "2024-01-16 00:00", "2024-01-16 00:30"))
    _assert_values(data, "air_temp_c", [12.5, 12.4, 12.3, 12.2])


def test_read_weather_text_in_number():
    # '1O.8': the letter O typed for a zero.
    err = _error("text_in_number.csv")
    _assert_sentence(err, "text_in_number.csv", line=5, column="air_temp_c", mentions=("'1O.8'",))


def test_read_weather_text_in_number_rejected():
    data, meta = _read("text_in_number.csv")
    assert _ledger(meta) == [_entry("text_in_number.csv", 5, "air_temp_c",
                                    "2024-01-15 01:30,1O.8,0.0", "bad_number")]
    _assert_account(meta, read=5, kept=4, rejected=1)
    # The whole row goes: its rain reading too, and rain is never filled.
    assert np.isnan(data["rain_mm"].iloc[3])
    assert _flags(data, "rain_mm") == ["ok", "ok", "ok", "missing", "ok"]
    assert _flags(data, "air_temp_c") == ["ok", "ok", "ok", "filled", "ok"]


def test_read_weather_wrong_field_count():
    # '12,7': a decimal comma in a comma-separated file gives the row one field too many.
    err = _error("wrong_field_count.csv")
    _assert_sentence(err, "wrong_field_count.csv", line=4,
                     mentions=("expected 2 comma-separated fields", "found 3"))


def test_read_weather_wrong_field_count_rejected():
    data, meta = _read("wrong_field_count.csv")
    assert _ledger(meta) == [_entry("wrong_field_count.csv", 4, "", "2024-01-15 01:00,12,7",
                                    "field_count")]
    _assert_account(meta, read=6, kept=5, rejected=1)
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8, 12.9, 13.0])
    assert _flags(data, "air_temp_c") == ["ok", "ok", "filled", "ok", "ok", "ok"]


def test_read_weather_short_file_extra_field():
    # Four data rows, the third with an extra field: the header must stay on line 1.
    data, meta = _read("short_file_extra_field.csv")
    assert _ledger(meta) == [_entry("short_file_extra_field.csv", 4, "", "2024-01-15 01:00,12,7",
                                    "field_count")]
    _assert_account(meta, read=4, kept=3, rejected=1)
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8])


def test_read_weather_crlf_line_ends():
    data, meta = _read("crlf_line_ends.csv")
    assert _ledger(meta) == [_entry("crlf_line_ends.csv", 4, "air_temp_c", "2024-01-15 01:00,1x.7",
                                    "bad_number")]
    _assert_account(meta, read=4, kept=3, rejected=1)
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8])


def test_read_weather_blank_lines():
    # Blank lines are not rows (not counted) but line numbers stay physical.
    err = _error("blank_lines.csv")
    _assert_sentence(err, "blank_lines.csv", line=6, column="air_temp_c", mentions=("'1x'",))
    data, meta = _read("blank_lines.csv")
    assert _ledger(meta) == [_entry("blank_lines.csv", 6, "air_temp_c", "2024-01-15 01:00,1x",
                                    "bad_number")]
    _assert_account(meta, read=4, kept=3, rejected=1)
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8])


def test_read_weather_quoted_fields():
    data, meta = _read("quoted_fields.csv")
    assert _ledger(meta) == [_entry("quoted_fields.csv", 4, "air_temp_c",
                                    '"2024-01-15 01:00","abc"', "bad_number")]
    _assert_account(meta, read=4, kept=3, rejected=1)
    pd.testing.assert_index_equal(data.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                   "2024-01-15 01:00", "2024-01-15 01:30"))
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8])


# --------------------------------------------------------------------------- dialect features

def test_read_weather_tab_separated():
    sniffed, meta_s = _read("tab_separated.tsv")
    declared, meta_d = _read("tab_separated.tsv", WeatherDialect(separator="\t"))
    assert "separator: tab (sniffed)" in meta_s.files[0].assumptions
    assert not any(a.startswith("separator") for a in meta_d.files[0].assumptions)
    pd.testing.assert_frame_equal(sniffed, declared)
    _assert_values(sniffed, "air_temp_c", [12.5, 12.6, 12.7])
    _assert_values(sniffed, "rain_mm", [0.0, 0.2, 0.0])


def test_read_weather_comma_separated():
    sniffed, meta_s = _read("comma_separated.csv")
    declared, meta_d = _read("comma_separated.csv", WeatherDialect(separator=","))
    assert "separator: comma (sniffed)" in meta_s.files[0].assumptions
    assert not any(a.startswith("separator") for a in meta_d.files[0].assumptions)
    pd.testing.assert_frame_equal(sniffed, declared)
    pd.testing.assert_index_equal(sniffed.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                      "2024-01-15 01:00"))
    _assert_values(sniffed, "air_temp_c", [12.5, 12.6, 12.7])


def test_read_weather_decimal_comma_semicolon():
    stamps = dict(date_column="Datum", time_column="Zeit")
    sniffed, meta_s = _read("decimal_comma_semicolon.csv", WeatherDialect(**stamps))
    declared, meta_d = _read("decimal_comma_semicolon.csv",
                             WeatherDialect(separator=";", decimal=",", **stamps))
    said = meta_s.files[0].assumptions
    assert "separator: semicolon (sniffed)" in said
    assert "decimal comma (sniffed)" in said
    assert (meta_s.files[0].dialect["separator"], meta_s.files[0].dialect["decimal"]) == (";", ",")
    assert not any(a.startswith(("separator", "decimal")) for a in meta_d.files[0].assumptions)
    pd.testing.assert_frame_equal(sniffed, declared)
    # '15.01.2024' day-first with dots, the German convention (common practice, no source).
    pd.testing.assert_index_equal(sniffed.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                      "2024-01-15 01:00"))
    _assert_values(sniffed, "air_temp_c", [12.5, 12.6, -1.5])
    _assert_values(sniffed, "rain_mm", [0.0, 0.2, 1.4])


def test_read_weather_preamble_lines():
    # Three station lines above the header; one bad row on physical line 7 (preamble counted).
    sniffed, meta_s = _read("preamble_lines.csv")
    declared, meta_d = _read("preamble_lines.csv", WeatherDialect(skip_lines=3))
    assert "3 preamble line(s) above the header (sniffed)" in meta_s.files[0].assumptions
    assert not any("preamble" in a for a in meta_d.files[0].assumptions)
    pd.testing.assert_frame_equal(sniffed, declared)
    for meta in (meta_s, meta_d):
        assert _ledger(meta) == [_entry("preamble_lines.csv", 7, "air_temp_c",
                                        "2024-01-15 01:00,12.x,0.0", "bad_number")]
        _assert_account(meta, read=4, kept=3, rejected=1)
    _assert_values(sniffed, "air_temp_c", [12.5, 12.6, 12.7, 12.8])
    err = _error("preamble_lines.csv")
    _assert_sentence(err, "preamble_lines.csv", line=7, column="air_temp_c", mentions=("'12.x'",))


def test_read_weather_date_time_columns():
    # A date column and a time column give the same series as one timestamp column.
    split, meta_split = _read("date_time_columns.csv")
    joined, meta_joined = _read("timestamp_column.csv")
    assert "date column 'date', time column 'time' (sniffed)" in meta_split.files[0].assumptions
    assert "timestamp column: 'timestamp' (sniffed)" in meta_joined.files[0].assumptions
    pd.testing.assert_frame_equal(split, joined)
    pd.testing.assert_index_equal(split.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                    "2024-01-15 01:00"))
    _assert_values(split, "air_temp_c", [12.5, 12.6, 12.7])


@pytest.mark.parametrize("name, note", [
    ("dates_day_first.csv", "dates are day-first: a first field above 12 (sniffed)"),
    ("dates_month_first.csv", "dates are month-first: a second field above 12 (sniffed)"),
    ("dates_iso.csv", "dates are year-first (sniffed)"),
])
def test_read_weather_date_orders(name, note):
    # 12/13 January written day-first, month-first and ISO 8601 (YYYY-MM-DD).
    data, meta = _read(name)
    assert note in meta.files[0].assumptions
    pd.testing.assert_index_equal(data.index, _utc("2024-01-12 23:30", "2024-01-13 00:00",
                                                   "2024-01-13 00:30"))
    _assert_values(data, "air_temp_c", [8.0, 7.5, 7.0])


def test_read_weather_dates_ambiguous_order():
    # '05/01/2024' is 5 January day-first and 1 May month-first; the guess is said, and a
    # declared order wins.
    data, meta = _read("dates_ambiguous_order.csv")
    assert "date order ambiguous (no field above 12); assumed day-first" in meta.files[0].assumptions
    pd.testing.assert_index_equal(data.index, _utc("2024-01-05 00:00", "2024-01-05 00:30"))
    data, meta = _read("dates_ambiguous_order.csv", WeatherDialect(date_order="mdy"))
    assert not any("date" in a and "order" in a for a in meta.files[0].assumptions)
    pd.testing.assert_index_equal(data.index, _utc("2024-05-01 00:00", "2024-05-01 00:30"))


def test_read_weather_iso_offsets():
    # ISO 8601 UTC designator 'Z' and offsets '+hh:mm' (RFC 3339 section 4.2; from memory, not in
    # REFERENCES.md): 10:00+10:00 and 00:00Z are one instant, so the two identical rows merge.
    # Stamps with an offset ignore the site zone (Melbourne, +11:00 in January).
    data, meta = _read("iso_offsets.csv", timezone="Australia/Melbourne")
    pd.testing.assert_index_equal(data.index, _utc("2024-01-14 23:30", "2024-01-15 00:00",
                                                   "2024-01-15 00:30", "2024-01-15 01:00"))
    _assert_values(data, "air_temp_c", [12.0, 12.5, 12.6, 12.7])
    assert _flags(data, "air_temp_c") == ["ok"] * 4
    _assert_account(meta, read=5, kept=4, duplicates_identical=1)
    assert meta.rejects.empty


@pytest.mark.parametrize("name", ["end_of_day_2400.csv", "end_of_day_2400_iso.csv"])
def test_read_weather_end_of_day_2400(name):
    # 24:00 ends a day and is the same instant as 00:00 of the next (ISO 8601:2000 section 5.3.2;
    # ISO 8601-1:2019/Amd 1:2022). '31/12/2023 24:00' is 2024-01-01 00:00, across the year end;
    # the file also has that instant as '01/01/2024 00:00' with the same value: one merged row.
    # Declared start-of-interval here, to test the instant alone (24:00 alone means 'end').
    data, meta = _read(name, WeatherDialect(stamp_marks="start"))
    pd.testing.assert_index_equal(data.index, _utc("2023-12-31 23:00", "2023-12-31 23:30",
                                                   "2024-01-01 00:00", "2024-01-01 00:30"))
    _assert_values(data, "air_temp_c", [10.0, 10.5, 11.0, 11.5])
    assert _flags(data, "air_temp_c") == ["ok"] * 4
    _assert_account(meta, read=5, kept=4, duplicates_identical=1)


@pytest.mark.parametrize("header, marks, said", [
    ("date,hour ending,air_temp_c", "end", "line 1 says 'hour ending'"),
    ("date,Hour Beginning,air_temp_c", "start", "line 1 says 'Hour Beginning'"),
    ("date,time,air_temp_c", "start", "stamps assumed to mark the start of the interval"),
])
def test_interval_marks_are_sniffed_or_said_to_be_assumed(tmp_path, header, marks, said):
    # Words above the data settle the marks; with no 24:00 and no words, the start is assumed
    # and said (common practice, no source: most loggers label an average by its start).
    path = tmp_path / "w.csv"
    path.write_text(f"{header}\n2024-01-31,10:00,5.0\n2024-01-31,11:00,4.0\n", encoding="utf-8")
    dialect = WeatherDialect(date_column="date", time_column=header.split(",")[1])
    data, meta = read_weather(path, dialect, "1h", "UTC")
    first = pd.Timestamp("2024-01-31 10:00", tz="UTC") - (pd.Timedelta("1h") if marks == "end"
                                                           else pd.Timedelta(0))
    assert data.index[0] == first
    assert any(said in a for a in meta.files[0].assumptions)


def test_read_weather_hour_ending_stamps():
    # Hour-ending stamps with 24:00, as in TMY files (REFERENCES.md, pvlib 723170TYA.CSV):
    # stamp_marks='end' labels each hour by its start, one interval earlier; 24:00 on 31 Jan
    # reports 23:00-24:00 of 31 Jan (ISO 8601:2000 section 5.3.2).
    start, _ = _read("hour_ending_stamps.csv", WeatherDialect(stamp_marks="start"), interval="1h")
    end, meta = _read("hour_ending_stamps.csv", WeatherDialect(stamp_marks="end"), interval="1h")
    sniffed, sniffed_meta = _read("hour_ending_stamps.csv", interval="1h")
    pd.testing.assert_frame_equal(sniffed, end)  # 24:00 seen: the end of the interval
    assert any("has 24:00: stamps mark the end of the interval (sniffed)" in a
               for a in sniffed_meta.files[0].assumptions)
    pd.testing.assert_index_equal(start.index, _utc("2024-01-31 22:00", "2024-01-31 23:00",
                                                    "2024-02-01 00:00", "2024-02-01 01:00"))
    pd.testing.assert_index_equal(end.index, _utc("2024-01-31 21:00", "2024-01-31 22:00",
                                                  "2024-01-31 23:00", "2024-02-01 00:00"))
    _assert_values(end, "air_temp_c", [5.0, 4.0, 3.0, 2.0])
    assert "dates are month-first: a second field above 12 (sniffed)" in meta.files[0].assumptions
    _assert_account(meta, read=4, kept=4)


# Australia/Melbourne in 2024 (IANA tz database, the tzdata package): daylight time (AEDT, UTC+11)
# ends at 03:00 local on Sunday 7 April, when clocks go back to 02:00 (AEST, UTC+10), so 02:00-02:59
# happens twice; it starts at 02:00 local on Sunday 6 October, when clocks go forward to 03:00,
# so 02:00-02:59 does not happen.
MELBOURNE = "Australia/Melbourne"
FALL_BACK_UTC = ("2024-04-06 14:30", "2024-04-06 15:00", "2024-04-06 15:30", "2024-04-06 16:00",
                 "2024-04-06 16:30", "2024-04-06 17:00")


def test_read_weather_dst_fall_back_local():
    # Oldest first: the first 02:00 and 02:30 are daylight time, the repeats standard time (the
    # order a logger writes in; common practice, no source).
    data, meta = _read("dst_fall_back_local.csv", WeatherDialect(date_order="dmy"),
                       timezone=MELBOURNE)
    pd.testing.assert_index_equal(data.index, _utc(*FALL_BACK_UTC))
    _assert_values(data, "air_temp_c", [15.0, 14.8, 14.6, 14.4, 14.2, 14.0])
    assert meta.ambiguous_resolved == 4
    assert meta.nonexistent_rejected == 0
    _assert_account(meta, read=6, kept=6)
    assert meta.rejects.empty


def test_read_weather_dst_fall_back_newest_first():
    # The same readings listed newest first: the first 02:30 met is standard time.
    data, meta = _read("dst_fall_back_newest_first.csv", WeatherDialect(date_order="dmy"),
                       timezone=MELBOURNE)
    pd.testing.assert_index_equal(data.index, _utc(*FALL_BACK_UTC))
    _assert_values(data, "air_temp_c", [15.0, 14.8, 14.6, 14.4, 14.2, 14.0])
    assert meta.ambiguous_resolved == 4
    _assert_account(meta, read=6, kept=6)


def test_read_weather_dst_spring_forward_local():
    data, meta = _read("dst_spring_forward_local.csv", WeatherDialect(date_order="dmy"),
                       timezone=MELBOURNE)
    assert _ledger(meta) == [_entry("dst_spring_forward_local.csv", 4, "time",
                                    "06/10/2024,02:30,9.4", "nonexistent_local_time")]
    assert meta.nonexistent_rejected == 1
    assert meta.ambiguous_resolved == 0
    _assert_account(meta, read=5, kept=4, rejected=1)
    # 01:00 and 01:30 AEST (UTC+10), then 03:00 and 03:30 AEDT (UTC+11): no gap in UTC.
    pd.testing.assert_index_equal(data.index, _utc("2024-10-05 15:00", "2024-10-05 15:30",
                                                   "2024-10-05 16:00", "2024-10-05 16:30"))
    _assert_values(data, "air_temp_c", [9.0, 9.2, 9.6, 9.8])


def test_read_weather_dst_spring_forward_local_stop():
    err = _error("dst_spring_forward_local.csv", WeatherDialect(date_order="dmy"),
                 timezone=MELBOURNE)
    _assert_sentence(err, "dst_spring_forward_local.csv", line=4, column="time",
                     mentions=("does not exist",))


def test_read_weather_fixed_offset_stamps():
    # A logger kept on standard time all year (+10:00) at a site whose zone has daylight saving
    # (common practice, no source): 10:00+10:00 is 00:00 UTC; read as Melbourne local time in
    # January (AEDT, UTC+11, tz database) it would be 23:00 UTC the day before.
    fixed, meta = _read("fixed_offset_stamps.csv", WeatherDialect(stamp_zone="+10:00"),
                        timezone=MELBOURNE)
    local, _ = _read("fixed_offset_stamps.csv", timezone=MELBOURNE)
    pd.testing.assert_index_equal(fixed.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                    "2024-01-15 01:00"))
    pd.testing.assert_index_equal(local.index, _utc("2024-01-14 23:00", "2024-01-14 23:30",
                                                    "2024-01-15 00:00"))
    _assert_values(fixed, "air_temp_c", [20.0, 20.5, 21.0])
    assert meta.ambiguous_resolved == 0
    _assert_account(meta, read=3, kept=3)


def test_read_weather_missing_markers():
    # '-', '' (empty field), 'M', 'NA' and '///' mean "no reading" in station exports (common
    # practice, no source; '///' is the synop code for a missing group, from memory).
    data, meta = _read("missing_markers.csv")
    expected = np.array([0.0, np.nan, np.nan, np.nan, np.nan, np.nan, 0.4])
    np.testing.assert_allclose(data["rain_mm"].to_numpy(), expected, rtol=0, atol=ATOL)
    assert _flags(data, "rain_mm") == ["ok"] + ["missing"] * 5 + ["ok"]
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7, 12.8, 12.9, 13.0, 13.1])
    assert meta.rejects.empty
    _assert_account(meta, read=7, kept=7)


def test_read_weather_units_knots_degf_kpa():
    dialect = WeatherDialect(columns={
        "Wind kn": ColumnSpec("wind_speed_ms", "knots"),
        "Temp F": ColumnSpec("air_temp_c", "degF"),
        "Press kPa": ColumnSpec("pressure_hpa", "kPa"),
    })
    data, meta = _read("units_knots_degf_kpa.csv", dialect)
    # 1 knot = 1852/3600 m/s exactly (international nautical mile of 1852 m; REFERENCES.md).
    knot = 1852.0 / 3600.0
    np.testing.assert_allclose(data["wind_speed_ms"].to_numpy(), [10 * knot, 0.0, 20 * knot],
                               rtol=1e-12, atol=0)
    np.testing.assert_allclose(data["wind_speed_ms"].iloc[0], 5.144444444, rtol=0, atol=1e-9)
    # degC = (degF - 32) * 5/9 (definition of the Fahrenheit scale, NIST SP 811 (2008) appendix
    # B; from memory, not in REFERENCES.md): 50 F = 10 C, 32 F = 0 C, 98.6 F = 37 C.
    _assert_values(data, "air_temp_c", [10.0, 0.0, 37.0])
    # 1 kPa = 1000 Pa = 10 hPa (SI prefixes, SI Brochure 9th ed. 2019; not in REFERENCES.md).
    _assert_values(data, "pressure_hpa", [1013.25, 1000.0, 955.0])
    assert meta.rejects.empty
    _assert_account(meta, read=3, kept=3)


def test_read_weather_units_kmh_mph():
    dialect = WeatherDialect(columns={
        "Wind km/h": ColumnSpec("wind_speed_ms", "km/h"),
        "Gust mph": ColumnSpec("wind_gust_ms", "mph"),
    })
    data, meta = _read("units_kmh_mph.csv", dialect)
    # 1 km/h = 1/3.6 m/s (SI; REFERENCES.md): 36 km/h = 10 m/s.
    _assert_values(data, "wind_speed_ms", [10.0, 5.0])
    # 1 mph = 0.44704 m/s exactly (international yard of 0.9144 m, 1959 agreement, so a mile is
    # 1609.344 m; not in REFERENCES.md).
    _assert_values(data, "wind_gust_ms", [50 * 0.44704, 25 * 0.44704])
    _assert_values(data, "wind_gust_ms", [22.352, 11.176])
    _assert_account(meta, read=2, kept=2)


def test_read_weather_compass_calm_vrb():
    # 16-point compass, direction the wind blows from, clockwise from true north: NNE 22.5,
    # SW 225, NNW 337.5 deg (WMO-No. 8 convention; REFERENCES.md). 'CALM' and 'VRB' (the METAR
    # code for a variable direction, WMO-No. 306; from memory) have no direction: NaN and a flag,
    # never filled across. Names are read case-insensitively ('sw'); '-' is missing, not a reject.
    data, meta = _read("compass_calm_vrb.csv")
    expected = np.array([22.5, np.nan, np.nan, 225.0, 270.0, 337.5, np.nan])
    np.testing.assert_allclose(data["wind_dir_deg"].to_numpy(), expected, rtol=0, atol=ATOL)
    assert _flags(data, "wind_dir_deg") == ["ok", "calm", "variable", "ok", "ok", "ok", "missing"]
    _assert_values(data, "wind_speed_ms", [3.1, 0.0, 1.2, 4.0, 5.2, 4.4, 4.1])
    assert meta.flag_counts["wind_dir_deg"] == {"ok": 4, "calm": 1, "variable": 1, "missing": 1}
    assert meta.rejects.empty
    _assert_account(meta, read=7, kept=7)


# ----------------------------------------------------------------------------- cleaning steps

def test_read_weather_out_of_range():
    # 999 degC and -1 mm of rain are outside the plausible ranges of the glossary (variables.py;
    # common practice, no source): value to NaN, flag 'out_of_range', the row is kept and the
    # value is not filled across.
    data, meta = _read("out_of_range.csv")
    np.testing.assert_allclose(data["air_temp_c"].to_numpy(), [12.5, np.nan, 12.7, 12.8],
                               rtol=0, atol=ATOL)
    np.testing.assert_allclose(data["rain_mm"].to_numpy(), [0.0, 0.2, np.nan, 0.0],
                               rtol=0, atol=ATOL)
    assert _flags(data, "air_temp_c") == ["ok", "out_of_range", "ok", "ok"]
    assert _flags(data, "rain_mm") == ["ok", "ok", "out_of_range", "ok"]
    assert meta.flag_counts == {"air_temp_c": {"ok": 3, "out_of_range": 1},
                                "rain_mm": {"ok": 3, "out_of_range": 1}}
    assert meta.rejects.empty
    _assert_account(meta, read=4, kept=4)


def test_read_weather_duplicate_identical_rows():
    data, meta = _read("duplicate_identical_rows.csv")
    _assert_values(data, "air_temp_c", [12.5, 12.6, 12.7])
    assert _flags(data, "air_temp_c") == ["ok"] * 3
    assert meta.rejects.empty
    _assert_account(meta, read=4, kept=3, duplicates_identical=1)


@pytest.mark.parametrize("policy, kept_value, loser_line", [("last", 13.6, 3), ("first", 12.6, 5)])
def test_read_weather_duplicate_conflicting_rows(policy, kept_value, loser_line):
    # 00:30 appears on line 3 (12.6) and, out of order, on line 5 (13.6); rain agrees.
    data, meta = _read("duplicate_conflicting_rows.csv", duplicates=policy)
    _assert_values(data, "air_temp_c", [12.5, kept_value, 12.7])
    assert _flags(data, "air_temp_c") == ["ok", "duplicate_conflict", "ok"]
    assert _flags(data, "rain_mm") == ["ok", "ok", "ok"]
    assert _ledger(meta, ("file", "line", "reason")) == [
        {"file": str(DATA / "duplicate_conflicting_rows.csv"), "line": loser_line,
         "reason": "duplicate_conflict"}]
    _assert_account(meta, read=4, kept=3, duplicates_conflicting=1)


def test_read_weather_duplicate_conflicting_rows_default_is_last():
    default, _ = _read("duplicate_conflicting_rows.csv")
    last, _ = _read("duplicate_conflicting_rows.csv", duplicates="last")
    pd.testing.assert_frame_equal(default, last)


def test_read_weather_off_grid_readings():
    # 00:15 falls inside the interval starting 00:00 (30-min grid): combined with the 00:00
    # reading by each variable's rule (variables.py; common practice, no source): mean for
    # temperature, sum for rain, max for gusts, and for directions the mean of unit vectors
    # (DESIGN.md: directions are circular), so 350 and 10 deg give 0 deg, never 180.
    data, meta = _read("off_grid_readings.csv")
    pd.testing.assert_index_equal(data.index, _utc("2024-01-15 00:00", "2024-01-15 00:30",
                                                   "2024-01-15 01:00"))
    _assert_values(data, "air_temp_c", [11.0, 11.0, 11.5])
    _assert_values(data, "rain_mm", [0.6, 0.0, 0.0])
    _assert_values(data, "wind_gust_ms", [8.0, 4.0, 3.0])
    _assert_values(data, "wind_dir_deg", [0.0, 90.0, 100.0])
    for variable in ("air_temp_c", "rain_mm", "wind_gust_ms", "wind_dir_deg"):
        assert _flags(data, variable) == ["aggregated", "ok", "ok"]
    assert meta.rejects.empty
    _assert_account(meta, read=4, kept=3, off_grid=1)


def test_read_weather_off_grid_readings_dropped():
    data, meta = _read("off_grid_readings.csv", off_grid="drop")
    _assert_values(data, "air_temp_c", [10.0, 11.0, 11.5])
    _assert_values(data, "rain_mm", [0.2, 0.0, 0.0])
    _assert_values(data, "wind_gust_ms", [5.0, 4.0, 3.0])
    _assert_values(data, "wind_dir_deg", [350.0, 90.0, 100.0])
    assert _flags(data, "air_temp_c") == ["ok", "ok", "ok"]
    assert _ledger(meta, ("file", "line", "reason")) == [
        {"file": str(DATA / "off_grid_readings.csv"), "line": 3, "reason": "off_grid_dropped"}]
    _assert_account(meta, read=4, kept=3, off_grid=1)


def test_read_weather_gaps_temperature_rain():
    # 30-min grid. Temperature: a 1-hour gap (two missing values) is filled linearly in time and
    # flagged; a 2.5-hour gap (five missing values) is longer than the 2-hour limit of the
    # glossary (variables.py; common practice, no source) and stays NaN, flagged missing.
    # Rain is an accumulation: never interpolated, a gap stays unknown (DESIGN.md, rules of the
    # domain; common practice, no source).
    data, meta = _read("gaps_temperature_rain.csv")
    pd.testing.assert_index_equal(data.index, _utc(*pd.date_range("2024-01-15 00:00",
                                                                  "2024-01-15 04:30",
                                                                  freq="30min")))
    nan5 = [np.nan] * 5
    np.testing.assert_allclose(data["air_temp_c"].to_numpy(),
                               [10.0, 11.0, 12.0, 13.0, *nan5, 16.0], rtol=0, atol=ATOL)
    assert _flags(data, "air_temp_c") == ["ok", "filled", "filled", "ok", *["missing"] * 5, "ok"]
    np.testing.assert_allclose(data["rain_mm"].to_numpy(),
                               [0.0, np.nan, np.nan, 0.2, *nan5, 0.0], rtol=0, atol=ATOL)
    assert _flags(data, "rain_mm") == ["ok", "missing", "missing", "ok", *["missing"] * 5, "ok"]
    assert meta.flag_counts == {"air_temp_c": {"ok": 3, "filled": 2, "missing": 5},
                                "rain_mm": {"ok": 3, "missing": 7}}
    _assert_account(meta, read=3, kept=3)


def test_read_weather_gap_direction_across_north():
    # 350 deg, a gap, 10 deg: interpolated through the sine and cosine components, the gap is
    # 0 deg (north), never 180 (DESIGN.md: directions are circular; common practice, no source).
    data, meta = _read("gap_direction_across_north.csv")
    _assert_values(data, "wind_dir_deg", [350.0, 0.0, 10.0])
    assert _flags(data, "wind_dir_deg") == ["ok", "filled", "ok"]
    _assert_account(meta, read=2, kept=2)


def test_a_numeric_missing_marker_is_missing_in_text_columns_too(tmp_path):
    # -9999 is a common sensor-fault code (common practice, no source). In a column of compass
    # names, or written as -9999.0, it is the declared marker all the same: missing, not an
    # out-of-range reading.
    path = tmp_path / "w.csv"
    path.write_text("timestamp,wind_speed_ms,wind_dir_deg\n"
                    "2024-01-01T00:00,3.0,NNE\n"
                    "2024-01-01T00:30,-9999.0,-9999\n"
                    "2024-01-01T01:00,oops,SW\n", encoding="utf-8")
    data, meta = read_weather(path, WeatherDialect(missing=("", "-9999")), "30min", "UTC",
                              bad_rows="reject")
    assert data["wind_dir_deg_flag"].tolist()[:2] == ["ok", "missing"]
    assert data["wind_speed_ms_flag"].tolist()[1] == "missing"
    assert meta.rejects["reason"].tolist() == ["bad_number"]  # 'oops' only
