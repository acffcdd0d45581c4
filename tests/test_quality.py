"""Row accounting, the rejects ledger and the error sentence (cyanorisk.ingest.quality)."""

import numpy as np
import pytest

from cyanorisk.ingest.quality import (
    FLAG_NAMES,
    AccountingError,
    Flag,
    IngestError,
    Ledger,
    RowAccount,
    flag_column,
)


def test_balanced_account_passes_and_unbalanced_fails():
    ok = RowAccount(read=10, kept=6, duplicates_identical=1, duplicates_conflicting=1, off_grid=1,
                    rejected=1)
    assert ok.check() is ok
    with pytest.raises(AccountingError, match="read 10, placed 9"):
        RowAccount(read=10, kept=6, duplicates_identical=1, off_grid=1, rejected=1).check()


def test_accounts_add():
    a = RowAccount(read=3, kept=3) + RowAccount(read=2, kept=1, rejected=1)
    assert a.as_dict() == {"read": 5, "kept": 4, "duplicates_identical": 0,
                           "duplicates_conflicting": 0, "off_grid": 0, "rejected": 1}


def test_error_sentence_names_file_line_and_column():
    err = IngestError("station.csv", "'25:00' is not a time of day", line=4181, column="time")
    assert str(err) == "station.csv, line 4181, column 'time': '25:00' is not a time of day"
    assert str(IngestError("x.csv", "the file is empty")) == "x.csv: the file is empty"


def test_ledger_sorted_by_file_and_line():
    led = Ledger()
    led.add("b.csv", np.array([7]), "t", ["raw b"], "bad_time", "m")
    led.add("a.csv", np.array([9, 3]), "", ["x", "y"], "field_count", ["m1", "m2"])
    frame = led.frame()
    assert list(frame.columns) == ["file", "line", "column", "raw", "reason", "message"]
    assert list(zip(frame["file"], frame["line"], strict=True)) == [("a.csv", 3), ("a.csv", 9), ("b.csv", 7)]
    assert Ledger().frame().empty


def test_flag_column_uses_the_documented_names():
    col = flag_column(np.array([Flag.OK, Flag.FILLED, Flag.OUT_OF_RANGE], dtype=np.int8))
    assert list(col) == ["ok", "filled", "out_of_range"]
    assert list(col.categories) == FLAG_NAMES
