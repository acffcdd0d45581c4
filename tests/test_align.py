"""Tests for cyanorisk.align: when a lab result becomes known, the as-of join of the last known
count, and the outcome labels.

Sample tables are built by hand, shaped like ``sample_totals``: ``site_id``, ``sample_id``,
``sampled_at`` (UTC), ``reported_at`` (UTC start of the local reporting day, or NaT),
``cyano_cells_per_ml`` and ``cyano_censor``. The site is in Melbourne; issue time 06:00 local.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cyanorisk.align import (
    HORIZONS_DAYS,
    known_from,
    last_known,
    level_slug,
    outcome_labels,
    training_table,
)
from cyanorisk.config import SampleSource
from cyanorisk.features import FeatureBuilder, FeatureSettings, issue_instants
from cyanorisk.ingest.quality import FLAG_NAMES
from cyanorisk.levels import scheme

TZ = "Australia/Melbourne"
UTC_NS = "datetime64[ns, UTC]"
WHO1999 = dataclasses.replace(scheme("who1999_drinking"),
                              levels=scheme("who1999_drinking").levels[1:])
"""The 1999 alert levels (Alert Level 1 at 2,000 and 2 at 100,000 cells/mL, REFERENCES.md)
without the Vigilance detection rule: what these tests check does not depend on the levels."""
LAST_COLUMNS = ["last_count_cells_per_ml", "last_count_censor", "last_count_age_days", "last_level",
                "last_sampled_at", "last_known_at", "prev_count_cells_per_ml", "prev_count_censor",
                "prev_sampled_at", "season_first_level_at"]


def local(stamp: str) -> pd.Timestamp:
    """A Melbourne wall-clock time as a UTC instant."""
    return pd.Timestamp(stamp, tz=TZ).tz_convert("UTC")


def start_of_local_day(stamp: str) -> pd.Timestamp:
    """A reported date as ingest stores it: the UTC instant of the start of that local day."""
    return local(pd.Timestamp(stamp).strftime("%Y-%m-%d"))


def totals(rows: list[tuple]) -> pd.DataFrame:
    """(site, sampled local time, cells, censor, reported local date or None) per sample."""
    return pd.DataFrame({
        "site_id": [r[0] for r in rows],
        "sample_id": [f"s{i}" for i in range(len(rows))],
        "sampled_at": pd.Series([local(r[1]) for r in rows], dtype=UTC_NS),
        "reported_at": pd.Series([start_of_local_day(r[4]) if r[4] else pd.NaT for r in rows],
                                 dtype=UTC_NS),
        "cyano_cells_per_ml": [float(r[2]) for r in rows],
        "cyano_censor": [r[3] for r in rows],
    })


def issues(site: str, days: list[str]) -> pd.DataFrame:
    return pd.DataFrame({"site_id": site,
                         "issue_time_utc": issue_instants(pd.DatetimeIndex(days), TZ, "06:00")})


def shift(day: str, days: int) -> str:
    return (pd.Timestamp(day) + pd.Timedelta(days=days)).strftime("%Y-%m-%d")


# ---------------------------------------------------------------------------------------------
# When a result is known: reported date, else the lab delay
# ---------------------------------------------------------------------------------------------

# Sampling days: a plain summer day, and one whose d+3 falls after Melbourne's daylight-saving
# start (2024-10-06 02:00 local).
SAMPLING_DAYS = ["2024-01-15", "2024-10-04"]


@pytest.mark.parametrize("d", SAMPLING_DAYS)
def test_reported_date_decides_when_known(d):
    old = ("a", f"{shift(d, -10)} 10:00", 100, "=", shift(d, -8))
    new = ("a", f"{d} 10:00", 5_000, "=", shift(d, 3))
    t = totals([old, new])
    known = known_from(t, lab_delay_days=10.0, timezone=TZ)  # the delay is not used
    assert known.iloc[1] == start_of_local_day(shift(d, 3))
    got = last_known(issues("a", [shift(d, 2), shift(d, 3)]), t, WHO1999, 10.0, TZ)
    # at 06:00 on d+2 the new result is not yet known: the last count is the old one
    assert got["last_count_cells_per_ml"].tolist() == [100.0, 5_000.0]
    assert got["last_known_at"].iloc[1] == start_of_local_day(shift(d, 3))
    assert got["last_level"].tolist() == [0.0, 1.0]


def test_default_lab_delay_is_three_days():
    # the configured delay when a site gives none (DESIGN: lab delay; config.SampleSource)
    assert SampleSource((), (), "layout").lab_delay_days == 3.0


@pytest.mark.parametrize("d", SAMPLING_DAYS)
@pytest.mark.parametrize("delay", [3, 5])
def test_lab_delay_without_reported_date(d, delay):
    old = ("a", f"{shift(d, -10)} 10:00", 100, "=", None)
    new = ("a", f"{d} 10:00", 5_000, "=", None)
    t = totals([old, new])
    known = known_from(t, lab_delay_days=float(delay), timezone=TZ)
    assert known.iloc[1] == start_of_local_day(shift(d, delay))
    got = last_known(issues("a", [shift(d, delay - 1), shift(d, delay)]), t, WHO1999, float(delay), TZ)
    assert got["last_count_cells_per_ml"].tolist() == [100.0, 5_000.0]


def test_reported_date_and_delay_mixed():
    t = totals([("a", "2024-01-10 09:00", 1_000, "=", "2024-01-11"),
                ("a", "2024-01-10 09:30", 2_000, "=", None)])
    known = known_from(t, 3.0, TZ)
    assert known.tolist() == [start_of_local_day("2024-01-11"), start_of_local_day("2024-01-13")]


def test_lab_delay_without_reported_column():
    t = totals([("a", "2024-01-15 10:00", 5_000, "=", None)]).drop(columns="reported_at")
    known = known_from(t, 3.0, TZ)
    assert known.iloc[0] == start_of_local_day("2024-01-18")


@pytest.mark.parametrize(("reported", "delay"), [("2024-01-15", 3.0), (None, 0.0)])
def test_result_never_known_before_it_is_taken(reported, delay):
    t = totals([("a", "2024-01-10 10:00", 100, "=", None),
                ("a", "2024-01-15 10:00", 5_000, "=", reported)])
    got = last_known(issues("a", ["2024-01-15"]), t, WHO1999, delay, TZ)  # issue 06:00 local
    assert got["last_count_cells_per_ml"].iloc[0] == 100.0
    assert got["last_count_age_days"].iloc[0] > 0


# ---------------------------------------------------------------------------------------------
# last_known
# ---------------------------------------------------------------------------------------------

def test_last_known_columns():
    t = totals([("a", "2024-01-02 12:00", 300, "=", "2024-01-04"),
                ("a", "2024-01-05 12:00", 5_000, "<", "2024-01-07"),
                ("a", "2024-01-06 12:00", np.nan, None, "2024-01-08")])  # no count: not a count
    got = last_known(issues("a", ["2024-01-03", "2024-01-04", "2024-01-10"]), t, WHO1999, 3.0, TZ)
    assert list(got.columns) == LAST_COLUMNS
    assert np.isnan(got["last_count_cells_per_ml"].iloc[0])  # nothing known yet
    assert pd.isna(got["last_sampled_at"].iloc[0])
    assert got["last_count_cells_per_ml"].tolist()[1:] == [300.0, 5_000.0]
    assert got["last_count_censor"].tolist()[1:] == ["=", "<"]
    # age from sampling to issue [d]: 2024-01-02 12:00 -> 2024-01-04 06:00 is 1.75 days
    np.testing.assert_allclose(got["last_count_age_days"].to_numpy()[1:], [1.75, 4.75], rtol=1e-12)
    # '<5000' cannot decide Alert Level 1 (2,000 cells/mL, WHO 1999): level unknown
    assert got["last_level"].iloc[1] == 0.0
    assert np.isnan(got["last_level"].iloc[2])
    assert got["last_sampled_at"].iloc[2] == local("2024-01-05 12:00")
    # the sample before the last one known (the trend of the counts)
    assert np.isnan(got["prev_count_cells_per_ml"].iloc[1])
    assert got["prev_count_cells_per_ml"].iloc[2] == 300.0
    assert got["prev_sampled_at"].iloc[2] == local("2024-01-02 12:00")
    assert got["last_known_at"].iloc[2] == start_of_local_day("2024-01-07")
    # neither 300 nor '<5000' is known to meet Alert Level 1 (2,000 cells/mL)
    assert got["season_first_level_at"].isna().all()


def test_season_first_level_is_the_first_known_sample_meeting_the_lowest_level():
    # levels of WHO 1999 without Vigilance: Alert Level 1 at 2,000 cells/mL (REFERENCES.md)
    t = totals([("a", "2024-01-02 12:00", 3_000, "=", "2024-01-09"),   # known late
                ("a", "2024-01-05 12:00", 2_500, "=", "2024-01-06"),
                ("a", "2024-01-08 12:00", 100, "=", "2024-01-10"),
                ("a", "2025-01-03 12:00", 150, "=", "2025-01-05")])
    got = last_known(issues("a", ["2024-01-05", "2024-01-07", "2024-01-09", "2024-01-11",
                                  "2025-01-06"]), t, WHO1999, 3.0, TZ, season_start_month=1)
    first = got["season_first_level_at"]
    assert pd.isna(first.iloc[0])                               # nothing known yet
    assert first.iloc[1] == local("2024-01-05 12:00")           # the first known to meet it
    assert first.iloc[2] == local("2024-01-02 12:00")           # an earlier one became known
    assert first.iloc[3] == local("2024-01-02 12:00")           # a count below does not undo it
    assert pd.isna(first.iloc[4])                               # a new season starts afresh


def test_last_known_is_per_site_and_keeps_issue_order():
    t = totals([("a", "2024-01-02 12:00", 300, "=", "2024-01-03"),
                ("b", "2024-01-04 12:00", 90_000, "=", "2024-01-05"),
                ("a", "2024-01-06 12:00", 150_000, "=", "2024-01-07")])
    rows = pd.concat([issues("b", ["2024-01-08"]), issues("a", ["2024-01-08", "2024-01-05"])])
    rows.index = [30, 10, 20]
    got = last_known(rows, t, WHO1999, 3.0, TZ)
    assert list(got.index) == [30, 10, 20]
    assert got["last_count_cells_per_ml"].tolist() == [90_000.0, 150_000.0, 300.0]
    assert got["last_level"].tolist() == [1.0, 2.0, 0.0]


def test_last_known_timestamps_stay_utc():
    t = totals([("a", "2024-01-10 10:00", 100, "=", None)])
    for days in (["2024-01-20"], ["2024-01-05", "2024-01-20"], ["2024-01-05"]):
        got = last_known(issues("a", days), t, WHO1999, 3.0, TZ)
        assert str(got["last_sampled_at"].dtype) == UTC_NS, days
        assert str(got["last_known_at"].dtype) == UTC_NS, days


def test_last_known_never_goes_back_to_an_older_sample():
    # the newer sample's result comes back first; once the older one arrives, the newest known
    # sample is still the newer one
    t = totals([("a", "2024-01-01 10:00", 100, "=", "2024-01-10"),
                ("a", "2024-01-05 10:00", 5_000, "=", "2024-01-07")])
    got = last_known(issues("a", ["2024-01-08", "2024-01-10"]), t, WHO1999, 3.0, TZ)
    assert got["last_count_cells_per_ml"].tolist() == [5_000.0, 5_000.0]
    assert got["last_sampled_at"].iloc[1] == local("2024-01-05 10:00")


# ---------------------------------------------------------------------------------------------
# No look-ahead in the last known count
# ---------------------------------------------------------------------------------------------

SAMPLE = st.tuples(
    st.sampled_from(["a", "b"]),
    st.integers(0, 50 * 24 * 60),  # minutes after 2024-09-01 00:00 UTC (across the DST start)
    st.floats(0.0, 3e5, allow_nan=False),
    st.sampled_from(["=", "=", "<", ">"]),
    st.one_of(st.none(), st.integers(1, 6)),  # reported that many local days after sampling
)


def sample_table(rows: list[tuple]) -> pd.DataFrame:
    sampled = pd.Series([pd.Timestamp("2024-09-01", tz="UTC") + pd.Timedelta(minutes=r[1])
                         for r in rows], dtype=UTC_NS)
    local_day = sampled.dt.tz_convert(TZ).dt.tz_localize(None).dt.normalize()
    lag = pd.to_timedelta([r[4] if r[4] is not None else np.nan for r in rows], unit="D")
    reported = (local_day + lag).dt.tz_localize(TZ).dt.tz_convert("UTC")
    return pd.DataFrame({
        "site_id": [r[0] for r in rows], "sample_id": [f"s{i}" for i in range(len(rows))],
        "sampled_at": sampled, "reported_at": reported.astype(UTC_NS),
        "cyano_cells_per_ml": [r[2] for r in rows], "cyano_censor": [r[3] for r in rows],
    })


@settings(max_examples=60, deadline=None)
@given(rows=st.lists(SAMPLE, min_size=1, max_size=25), day=st.integers(0, 52),
       delay=st.sampled_from([1.0, 2.0, 3.0, 4.0]), new_cells=st.floats(0.0, 1e6, allow_nan=False),
       new_censor=st.sampled_from(["=", "<", ">"]), drop=st.booleans())
def test_last_known_has_no_look_ahead(rows, day, delay, new_cells, new_censor, drop):
    # DESIGN.md: only data available at issue time. Changing or dropping every sample taken at or
    # after the issue instant, or known after it, changes nothing in the last-known columns.
    # (Same-day reports and a zero delay are covered by test_result_never_known_before_it_is_taken.)
    t = sample_table(rows)
    issue_day = (pd.Timestamp("2024-09-01") + pd.Timedelta(days=day)).strftime("%Y-%m-%d")
    at = pd.concat([issues("a", [issue_day]), issues("b", [issue_day])], ignore_index=True)
    issue = at["issue_time_utc"].iloc[0]
    future = ((t["sampled_at"] >= issue) | (known_from(t, delay, TZ) > issue)).to_numpy()
    if drop:
        changed = t[~future]
    else:
        changed = t.copy()
        changed.loc[future, "cyano_cells_per_ml"] = new_cells
        changed.loc[future, "cyano_censor"] = new_censor
    before = last_known(at, t, WHO1999, delay, TZ)
    after = last_known(at, changed, WHO1999, delay, TZ)
    pd.testing.assert_frame_equal(after, before, check_exact=True)
    # nothing in the result was taken or known after the issue instant (the timestamp columns
    # lose their zone when nothing is known: see test_last_known_timestamps_stay_utc)
    known = before.dropna(subset=["last_known_at"])
    if len(known):
        assert (known["last_known_at"] <= issue).all()
        assert (known["last_sampled_at"] < issue).all()


# ---------------------------------------------------------------------------------------------
# Outcome labels
# ---------------------------------------------------------------------------------------------

ISSUE_DAY = "2024-01-15"  # no daylight-saving change in Melbourne within the 14 days after it


def label_samples() -> pd.DataFrame:
    """Samples of site 'a' at 06:00 local k days after the issue, and one of site 'b'."""
    at = lambda k: f"{shift(ISSUE_DAY, k)} 06:00"  # noqa: E731
    return totals([
        ("a", at(0), 1_000_000, "=", None),  # at the issue instant: not after it
        ("a", at(2), 500, "=", None),  # below Alert Level 1
        ("a", at(5), 1_000, "<", None),  # '<1000': decided below both levels
        ("a", at(8), 3_000, "=", None),  # Alert Level 1
        ("a", at(11), 200_000, "<", None),  # '<200000': Level 1 and 2 undecided
        ("a", at(13), 150_000, "=", None),  # Alert Level 2
        ("b", at(1), 1_000_000, "=", None),  # another site
    ])


# Expected labels for site 'a' by horizon 1..14 (window (issue, issue + h days]); the thresholds
# are WHO 1999 Alert Level 1 = 2,000 and Level 2 = 100,000 cells/mL (Chorus & Bartram 1999).
NAN = np.nan
EXPECTED_LEVEL_1 = [NAN] + [0.0] * 6 + [1.0] * 7  # 1: no sample; 2-7: 500, <1000; 8+: 3000
EXPECTED_LEVEL_2 = [NAN] + [0.0] * 9 + [NAN] * 2 + [1.0] * 2  # 11-12: '<200000' decides nothing


def test_outcome_labels_by_horizon_and_level():
    got = outcome_labels(issues("a", [ISSUE_DAY]), label_samples(), WHO1999)
    names = [f"reach_alert_level_{k}_{h}d" for k in (1, 2) for h in HORIZONS_DAYS]
    assert sorted(got.columns) == sorted(names)
    assert list(HORIZONS_DAYS) == list(range(1, 15))
    level_1 = [got[f"reach_alert_level_1_{h}d"].iloc[0] for h in HORIZONS_DAYS]
    level_2 = [got[f"reach_alert_level_2_{h}d"].iloc[0] for h in HORIZONS_DAYS]
    np.testing.assert_array_equal(level_1, EXPECTED_LEVEL_1)
    np.testing.assert_array_equal(level_2, EXPECTED_LEVEL_2)


def test_outcome_labels_merge_by_site():
    at = pd.concat([issues("b", [ISSUE_DAY]), issues("a", [ISSUE_DAY]), issues("c", [ISSUE_DAY])],
                   ignore_index=True)
    got = outcome_labels(at, label_samples(), WHO1999)
    b = [got[f"reach_alert_level_2_{h}d"].iloc[0] for h in HORIZONS_DAYS]
    a = [got[f"reach_alert_level_2_{h}d"].iloc[1] for h in HORIZONS_DAYS]
    c = [got[f"reach_alert_level_2_{h}d"].iloc[2] for h in HORIZONS_DAYS]
    np.testing.assert_array_equal(b, [1.0] * 14)  # site b's own sample, a day after the issue
    np.testing.assert_array_equal(a, EXPECTED_LEVEL_2)  # site b's sample is not site a's
    np.testing.assert_array_equal(c, [NAN] * 14)  # no samples at all


def test_outcome_labels_several_issue_days():
    days = [shift(ISSUE_DAY, k) for k in (0, 7, 12)]
    got = outcome_labels(issues("a", days), label_samples(), WHO1999, horizons=(1, 4))
    assert sorted(got.columns) == sorted(f"reach_alert_level_{k}_{h}d" for k in (1, 2) for h in (1, 4))
    # day +7: (d7, d8] holds 3000 -> level 1 met, level 2 not; day +12: (d12, d13] 150000
    np.testing.assert_array_equal(got["reach_alert_level_1_1d"], [NAN, 1.0, 1.0])
    np.testing.assert_array_equal(got["reach_alert_level_2_1d"], [NAN, 0.0, 1.0])
    # 4 days: day 0 sees 500 (d2); day +7 sees 3000 and '<200000' (d11): level 2 undecided
    np.testing.assert_array_equal(got["reach_alert_level_1_4d"], [0.0, 1.0, 1.0])
    np.testing.assert_array_equal(got["reach_alert_level_2_4d"], [0.0, NAN, 1.0])


def test_level_slug():
    assert level_slug("Alert Level 1") == "alert_level_1"
    assert level_slug("Green (surveillance)") == "green_surveillance"
    got = outcome_labels(issues("a", [ISSUE_DAY]), label_samples(), scheme("nhmrc2008_recreation"),
                         horizons=(7,))
    assert list(got.columns) == ["reach_green_surveillance_7d", "reach_amber_alert_7d",
                                 "reach_red_action_7d"]


# ---------------------------------------------------------------------------------------------
# The training table
# ---------------------------------------------------------------------------------------------

def test_training_table_joins_drivers_last_count_and_labels():
    index = pd.date_range("2024-01-10", periods=48 * 8, freq="30min", tz="UTC")
    weather = pd.DataFrame({"rain_mm": 0.5}, index=index)
    weather["rain_mm_flag"] = pd.Categorical(["ok"] * len(index), categories=FLAG_NAMES)
    drivers = FeatureBuilder(FeatureSettings(rain_windows=(1,)), TZ).transform(weather)
    samples = totals([("a", "2024-01-11 10:00", 3_000, "=", "2024-01-12"),
                      ("a", "2024-01-14 10:00", 150_000, "=", None),
                      ("b", "2024-01-12 10:00", 1e6, "=", "2024-01-13")])
    table = training_table(drivers, samples, WHO1999, "a", 3.0, TZ, horizons=(1, 3))
    assert len(table) == len(drivers)
    assert table["site_id"].eq("a").all()
    np.testing.assert_array_equal(table["rain_mm_1d"], drivers["rain_mm_1d"])
    own = samples[samples["site_id"] == "a"]
    expected_last = last_known(table, own, WHO1999, 3.0, TZ)
    expected_labels = outcome_labels(table, own, WHO1999, (1, 3))
    pd.testing.assert_frame_equal(table[LAST_COLUMNS], expected_last, check_exact=True)
    pd.testing.assert_frame_equal(table[list(expected_labels.columns)], expected_labels,
                                  check_exact=True)
    by_day = table.set_index("issue_date")
    # site b's result (known 2024-01-13) never appears; site a's first is known 2024-01-12
    assert by_day.loc[pd.Timestamp("2024-01-13").date(), "last_count_cells_per_ml"] == 3_000.0
    assert by_day.loc[pd.Timestamp("2024-01-17").date(), "last_count_cells_per_ml"] == 150_000.0
    # the 150,000 sample (2024-01-14 10:00) is within 1 day of the 2024-01-14 06:00 issue
    assert by_day.loc[pd.Timestamp("2024-01-14").date(), "reach_alert_level_2_1d"] == 1.0
