"""Dates, times and local stamps (cyanorisk.ingest.stamps)."""

import numpy as np
import pandas as pd
import pytest

from cyanorisk.ingest.stamps import (
    NAT,
    days_from_civil,
    days_in_month,
    localize,
    parse_dates,
    parse_times,
    runs_newest_first,
)

NS_PER_DAY = 86_400 * 10**9


def test_days_from_civil_matches_numpy_calendar():
    # Reference: numpy's datetime64 proleptic Gregorian calendar (a general-purpose library).
    days = pd.date_range("1600-01-01", "2400-12-31", freq="D")
    got = days_from_civil(days.year.to_numpy().astype(np.int64), days.month.to_numpy().astype(np.int64),
                          days.day.to_numpy().astype(np.int64))
    np.testing.assert_array_equal(got, days.to_numpy().astype("datetime64[D]").astype(np.int64))


def test_days_in_month_leap_rules():
    # Gregorian leap years: every 4th, except centuries, except every 400th (common knowledge of
    # the calendar; ISO 8601 uses the proleptic Gregorian calendar).
    year = np.array([1900, 2000, 2023, 2024])
    feb = np.full(4, 2)
    np.testing.assert_array_equal(days_in_month(year, feb), [28, 29, 28, 29])


@pytest.mark.parametrize("text, order, expected", [
    ("31/01/2020", "dmy", "2020-01-31"),
    ("01/31/2020", "mdy", "2020-01-31"),
    ("2020-01-31", "ymd", "2020-01-31"),
    ("29/02/2024", "dmy", "2024-02-29"),
    ("5.3.2021", "dmy", "2021-03-05"),
])
def test_parse_dates_valid(text, order, expected):
    parsed = parse_dates([text], order)
    assert parsed.days[0] == pd.Timestamp(expected).value // NS_PER_DAY


@pytest.mark.parametrize("text", ["31/02/2020", "29/02/2023", "00/01/2020", "12/13/2020", "", "soon"])
def test_parse_dates_rejects_dates_that_do_not_exist(text):
    assert np.isnan(parse_dates([text], "dmy").days[0])


def test_parse_dates_sniffs_order_and_says_so():
    parsed = parse_dates(["13/01/2020", "01/02/2020"], None)
    assert parsed.order == "dmy"
    assert "day-first" in parsed.note
    parsed = parse_dates(["01/13/2020"], None)
    assert parsed.order == "mdy"


def test_parse_times_accepts_24_00_as_end_of_day():
    # ISO 8601:2000 section 5.3.2: 24:00 is the end of a day, the same instant as 00:00 of the next.
    got = parse_times(["00:00", "09:30", "24:00", "23:59:59", "0930"])
    expected = [0, 9.5 * 3600e9, NS_PER_DAY, (86_400 - 1) * 1e9, 9.5 * 3600e9]
    np.testing.assert_array_equal(got, np.array(expected, dtype=np.int64))


@pytest.mark.parametrize("text", ["25:00", "24:30", "12:60", "noon", "", "9"])
def test_parse_times_rejects(text):
    assert parse_times([text])[0] == -1


def _naive(stamps):
    return pd.DatetimeIndex(stamps).as_unit("ns").asi8.copy()


def test_localize_fall_back_resolved_by_file_order():
    # Australia/Melbourne: daylight saving ends 2024-04-07 03:00 AEDT -> 02:00 AEST
    # (tz database, a general-purpose reference shipped with the tzdata package).
    wall = _naive(["2024-04-07 01:30", "2024-04-07 02:00", "2024-04-07 02:30",
                   "2024-04-07 02:00", "2024-04-07 02:30", "2024-04-07 03:00"])
    utc, ambiguous, nonexistent = localize(wall, "Australia/Melbourne")
    expected = pd.DatetimeIndex(["2024-04-06 14:30", "2024-04-06 15:00", "2024-04-06 15:30",
                                 "2024-04-06 16:00", "2024-04-06 16:30", "2024-04-06 17:00"])
    np.testing.assert_array_equal(utc, expected.as_unit("ns").asi8)
    assert ambiguous.sum() == 4 and not nonexistent.any()


def test_localize_fall_back_newest_first_file():
    wall = _naive(["2024-04-07 03:00", "2024-04-07 02:30", "2024-04-07 02:00",
                   "2024-04-07 02:30", "2024-04-07 02:00", "2024-04-07 01:30"])
    assert runs_newest_first(wall)
    utc, _, _ = localize(wall, "Australia/Melbourne")
    expected = pd.DatetimeIndex(["2024-04-06 17:00", "2024-04-06 16:30", "2024-04-06 16:00",
                                 "2024-04-06 15:30", "2024-04-06 15:00", "2024-04-06 14:30"])
    np.testing.assert_array_equal(utc, expected.as_unit("ns").asi8)


def test_localize_spring_forward_gap_does_not_exist():
    # Australia/Melbourne: daylight saving starts 2024-10-06 02:00 AEST -> 03:00 AEDT (tz database).
    wall = _naive(["2024-10-06 01:30", "2024-10-06 02:30", "2024-10-06 03:00"])
    utc, ambiguous, nonexistent = localize(wall, "Australia/Melbourne")
    np.testing.assert_array_equal(nonexistent, [False, True, False])
    assert utc[1] == NAT
    assert utc[2] - utc[0] == 30 * 60 * 10**9  # 01:30 AEST and 03:00 AEDT are 30 min apart
