"""Reading delimited text with line numbers (cyanorisk.ingest.lines)."""

import numpy as np
import pytest

from cyanorisk.ingest.lines import Parsing, read_table, read_text
from cyanorisk.ingest.quality import IngestError


def _write(tmp_path, data: bytes, name="f.csv"):
    p = tmp_path / name
    p.write_bytes(data)
    return p


def test_crlf_and_bom_are_normalised(tmp_path):
    text = read_text(_write(tmp_path, b"\xef\xbb\xbfa,b\r\n1,2\r\n"))
    assert text.data == b"a,b\n1,2\n"


def test_non_utf8_byte_names_line_and_character(tmp_path):
    p = _write(tmp_path, b"a,b\n1,2\nM\xfcnster,3\n")
    with pytest.raises(IngestError) as info:
        read_text(p)
    assert info.value.line == 3
    assert "character 2" in str(info.value) and "latin-1" in str(info.value)
    assert read_text(p, "latin-1").data.decode() == "a,b\n1,2\nMünster,3\n"


def test_fast_path_line_numbers_and_types(tmp_path):
    p = _write(tmp_path, b"title line\nt,x\n2020-01-01,1.5\n2020-01-02,-\n2020-01-03,2\n")
    raw = read_table(read_text(p), 1, Parsing(",", ".", ("-",), ("t",)))
    np.testing.assert_array_equal(raw.line_numbers, [3, 4, 5])
    np.testing.assert_array_equal(raw.columns["x"].to_numpy(), [1.5, np.nan, 2.0])


def test_blank_and_short_lines_keep_physical_line_numbers(tmp_path):
    p = _write(tmp_path, b"t,x\n2020-01-01,1\n\n2020-01-02\n   \n2020-01-03,3\n")
    raw = read_table(read_text(p), 0, Parsing(",", ".", (), ("t",)))
    np.testing.assert_array_equal(raw.line_numbers, [2, 6])
    np.testing.assert_array_equal(raw.bad_lines, [4])
    np.testing.assert_array_equal(raw.bad_counts, [1])


def test_quoted_fields_take_the_exact_path(tmp_path):
    p = _write(tmp_path, b't,x\n"2020-01-01","1,5"\n2020-01-02,2\n')
    raw = read_table(read_text(p), 0, Parsing(",", ".", (), ("t",)))
    np.testing.assert_array_equal(raw.line_numbers, [2, 3])
    assert raw.columns["x"].to_pylist() == ["1,5", "2"]


def test_text_in_a_value_column_stays_text(tmp_path):
    p = _write(tmp_path, b"t,x\n2020-01-01,1\n2020-01-02,abc\n")
    raw = read_table(read_text(p), 0, Parsing(",", ".", (), ("t",)))
    assert raw.columns["x"].to_pylist() == ["1", "abc"]


def test_repeated_header_name_is_an_error(tmp_path):
    p = _write(tmp_path, b"t,x,x\n1,2,3\n")
    with pytest.raises(IngestError, match="repeated"):
        read_table(read_text(p), 0, Parsing(","))
