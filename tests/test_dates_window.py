"""Dates outside the plausible window go to the rejects ledger with their reason.

Year 0001 must not be read as 2001 (a two-digit year is recognised by its width, not its value),
and 2999 must not overflow nanosecond time stamps (numpy and pandas hold 1677-09-21 to
2262-04-11: pandas documentation, "Timestamp limitations") into another year.
"""

from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.ingest import IngestError, read_weather
from cyanorisk.ingest.samples import SampleLayout, read_samples
from cyanorisk.ingest.stamps import parse_dates, to_ns

DATA = Path(__file__).parent / "data"
LONG = SampleLayout(shape="long", separator=",", date_order="dmy", sample_id_column="SampleID",
                    site_column="Site", sampled_date_column="Date", sampled_time_column="Time",
                    taxon_column="Taxon", count_column="Count", unit_column="Unit",
                    comment_column="Comment", detection_limit_cells_per_ml=100)


def test_two_digit_years_by_width_not_value():
    # '24' is 2024 and '99' 1999 (the common pivot of two-digit years at 70, as in POSIX
    # strptime %y: 69-99 -> 19xx, 00-68 -> 20xx; our pivot 70 keeps 69 in 2069); '0001' is
    # the year 1.
    days = parse_dates(["24-01-02", "99-01-02", "0001-01-02", "2024-01-02"], "ymd").days
    expected = [date(2024, 1, 2), date(1999, 1, 2), date(1, 1, 2), date(2024, 1, 2)]
    assert list(days) == [(d - date(1970, 1, 1)).days for d in expected]


def test_to_ns_never_overflows_into_another_year():
    days = np.array([(date(2999, 1, 1) - date(1970, 1, 1)).days, 0.0])
    ns = to_ns(days, np.array([0, 0]))
    assert ns[0] == np.iinfo(np.int64).min  # not a stamp, never 1829
    assert ns[1] == 0


@pytest.mark.parametrize("name", ["implausible_years.csv", "implausible_years_stamps.csv"])
def test_weather_years_0001_and_2999_go_to_the_ledger(name):
    data, meta = read_weather(DATA / "weather" / name, None, "30min", "UTC", bad_rows="reject")
    assert list(data.index) == list(pd.date_range("2024-01-13", periods=5, freq="30min",
                                                  tz="UTC"))
    # The refused rows' slots are short gaps, filled between their neighbours (never read).
    assert data["air_temp_c_flag"].tolist() == ["ok", "filled", "ok", "filled", "ok"]
    assert data["air_temp_c"].iloc[[0, 2, 4]].tolist() == [7.5, 6.5, 5.5]
    rejects = meta.rejects.set_index("line")
    assert rejects.loc[[3, 5], "reason"].tolist() == ["implausible_date"] * 2
    assert "before 1900-01-01" in rejects.loc[3, "message"]
    assert "after 2261-12-31" in rejects.loc[5, "message"]
    assert meta.account.rejected == 2 and meta.account.kept == 3


def test_weather_implausible_year_stops_when_bad_rows_stop():
    with pytest.raises(IngestError) as info:
        read_weather(DATA / "weather" / "implausible_years.csv", None, "30min", "UTC")
    assert info.value.line == 3 and "not a plausible date" in str(info.value)


def test_weather_after_the_latest_date_goes_to_the_ledger():
    data, meta = read_weather(DATA / "weather" / "dates_iso.csv", None, "30min", "UTC",
                              latest=date(2024, 1, 12))
    assert len(data.dropna(how="all", subset=["air_temp_c"])) == 1  # 12 January 23:30 only
    assert set(meta.rejects["reason"]) == {"implausible_date"}
    assert meta.account.rejected == 2


def test_a_run_day_before_every_reading_is_one_sentence_not_an_empty_grid():
    # Every reading dated after the latest plausible day: nothing is left to put on the grid.
    with pytest.raises(IngestError) as info:
        read_weather(DATA / "weather" / "dates_iso.csv", None, "30min", "UTC",
                     latest=date(2020, 1, 1))
    assert "no reading is left: every one of the 3 rows was rejected" in str(info.value)
    assert "dated after 2020-01-01" in str(info.value)


def test_earliest_date_is_configurable():
    _, meta = read_weather(DATA / "weather" / "dates_iso.csv", None, "30min", "UTC",
                           bad_rows="reject", earliest=date(2024, 1, 13))
    assert meta.rejects["line"].tolist() == [2]
    assert meta.rejects["reason"].tolist() == ["implausible_date"]


def test_samples_years_0001_and_2999_go_to_the_ledger():
    records, meta = read_samples(DATA / "samples" / "implausible_years.csv", LONG, "UTC",
                                 bad_rows="reject", latest=date(2024, 1, 1))
    assert records["sample_id"].tolist() == ["H1", "H4"]
    rejects = meta.rejects.set_index("line")
    assert rejects.loc[[3, 4], "reason"].tolist() == ["implausible_date"] * 2
    assert meta.account.read == 4 and meta.account.rejected == 2


def test_sample_after_the_run_goes_to_the_ledger():
    records, meta = read_samples(DATA / "samples" / "implausible_years.csv", LONG, "UTC",
                                 bad_rows="reject", latest=date(2023, 7, 10))
    assert records["sample_id"].tolist() == ["H1"]
    late = meta.rejects[meta.rejects["line"] == 5]
    assert late["reason"].tolist() == ["implausible_date"]
    assert "the latest plausible date" in late["message"].iloc[0]


def test_result_reported_before_its_sample_is_flagged(tmp_path):
    path = tmp_path / "lab.csv"
    path.write_text("SampleID,Site,Date,Time,Reported,Taxon,Count,Unit\n"
                    "H1,hollin,03/07/2023,09:30,06/07/2023,Microcystis,1200,cells/mL\n"
                    "H2,hollin,10/07/2023,09:30,01/07/2023,Microcystis,1300,cells/mL\n",
                    encoding="utf-8")
    layout = SampleLayout(shape="long", separator=",", date_order="dmy",
                          sample_id_column="SampleID", site_column="Site",
                          sampled_date_column="Date", sampled_time_column="Time",
                          reported_date_column="Reported", taxon_column="Taxon",
                          count_column="Count", unit_column="Unit")
    records, _ = read_samples(path, layout, "UTC")
    flags = dict(zip(records["sample_id"], records["flag"], strict=True))
    assert "reported_before_sampled" not in flags["H1"]
    assert "reported_before_sampled" in flags["H2"]


# ---------------------------------------------------------------------------------------------
# Count limits in the lab's own unit


@pytest.mark.parametrize("text, cells_per_ml", [
    ("100 cells/mL", 100.0), ("100000 cells/L", 100.0), ("1e5 cells/L", 100.0),
    ("2,000 cells/mL", 2000.0), ("0.5 cells/mL", 0.5)])
def test_limits_in_the_labs_unit(text, cells_per_ml):
    # 1 L = 1000 mL (SI): 100 000 cells/L is 100 cells/mL.
    from cyanorisk.ingest.samples import limit_cells_per_ml
    assert limit_cells_per_ml(text) == cells_per_ml
    layout = SampleLayout(shape="long", taxon_column="T", count_column="C", detection_limit=text)
    assert layout.detection_limit_cells_per_ml == cells_per_ml


@pytest.mark.parametrize("text", ["100", "100 cells", "-5 cells/mL", "many cells/L"])
def test_a_limit_without_its_unit_is_refused(text):
    with pytest.raises(ValueError, match="detection_limit .* is not a count with its unit"):
        SampleLayout(shape="long", taxon_column="T", count_column="C", detection_limit=text)


def test_old_and_new_limit_keys_must_agree():
    ok = SampleLayout(shape="long", taxon_column="T", count_column="C",
                      detection_limit="100000 cells/L", detection_limit_cells_per_ml=100)
    assert ok.detection_limit_cells_per_ml == 100
    with pytest.raises(ValueError, match="give one of them"):
        SampleLayout(shape="long", taxon_column="T", count_column="C",
                     detection_limit="100 cells/L", detection_limit_cells_per_ml=100)
