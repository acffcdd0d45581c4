"""Real data through a dialect declared in configuration alone: a TMY3 file shipped by pvlib.

``723170TYA.CSV`` (Greensboro Piedmont Triad International, NC) is the hourly typical
meteorological year that pvlib ships in its data folder. Its layout has the quirks our readers
must handle without code: a station line above the header, month-first dates (MM/DD/YYYY),
hour-ending stamps from 01:00 to 24:00 in fixed local standard time (UTC-5, no daylight
saving), 71 columns of which we use six, and months drawn from different years.

Sources for the layout, named beside the checks that rest on them:
- hour-ending stamps in local standard time: Wilcox & Marion 2008, "Users Manual for TMY3 Data
  Sets", NREL/TP-581-43156, section on the data format (from memory, not verified here);
- 24:00 is the end of the day, the same instant as 00:00 of the next day: ISO 8601:2000 section
  5.3.2 (reinstated by ISO 8601-1:2019/Amd 1:2022);
- pvlib.iotools.read_tmy3 is a second, independent reader of the same file.
"""

from __future__ import annotations

import csv
import json
from collections import defaultdict
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.config import load_config
from cyanorisk.ingest import read_weather
from cyanorisk.pipeline import SitePipeline

pvlib = pytest.importorskip("pvlib")

TMY_NAME = "723170TYA.CSV"
YEAR = 1990
"""Every stamp is put into this (non-leap) year: TMY months come from different years."""
UTC_OFFSET = pd.Timedelta(hours=-5)
"""The file's fixed local standard time (its station line says -5.0)."""
COLUMNS = {
    # file column: (canonical variable, pvlib's name for it)
    "Dry-bulb (C)": ("air_temp_c", "temp_air"),
    "Wspd (m/s)": ("wind_speed_ms", "wind_speed"),
    "Wdir (degrees)": ("wind_dir_deg", "wind_direction"),
    "RHum (%)": ("rel_humidity_pct", "relative_humidity"),
    "Pressure (mbar)": ("pressure_hpa", "pressure"),
    "GHI (W/m^2)": ("solar_wm2", "ghi"),
}

CONFIG = """\
root = "."
data_dir = "work"

[ingest]
bad_rows = "reject"

[dialects.tmy3]
separator = ","
skip_lines = 1                         # the station line above the header
date_column = "Date (MM/DD/YYYY)"
time_column = "Time (HH:MM)"
date_order = "mdy"
stamp_zone = "-05:00"                  # fixed local standard time
stamp_marks = "end"                    # hour-ending stamps, 01:00 .. 24:00
coerce_year = {year}
other_columns = "ignore"

[dialects.tmy3.columns]
"Dry-bulb (C)" = {{ variable = "air_temp_c", unit = "degC" }}
"Wspd (m/s)" = {{ variable = "wind_speed_ms", unit = "m/s" }}
"Wdir (degrees)" = {{ variable = "wind_dir_deg" }}
"RHum (%)" = {{ variable = "rel_humidity_pct" }}
"Pressure (mbar)" = {{ variable = "pressure_hpa", unit = "mbar" }}
"GHI (W/m^2)" = {{ variable = "solar_wm2", unit = "W/m2" }}

[[sites]]
id = "greensboro"
name = "Greensboro Piedmont Triad International"
timezone = "Etc/GMT+5"                 # POSIX sign: Etc/GMT+5 is UTC-5 all year
interval = "1h"

[sites.weather]
files = [{path}]
dialect = "tmy3"
"""


@pytest.fixture(scope="module")
def tmy_path() -> Path:
    path = resources.files("pvlib") / "data" / TMY_NAME
    if not path.is_file():
        pytest.skip(f"this pvlib does not ship {TMY_NAME}")
    return Path(str(path))


@pytest.fixture(scope="module")
def tmy(tmy_path, tmp_path_factory):
    """The site's clean weather, read through the configuration only."""
    folder = tmp_path_factory.mktemp("tmy")
    config_path = folder / "tmy.toml"
    config_path.write_text(CONFIG.format(year=YEAR, path=json.dumps(str(tmy_path))),
                           encoding="utf-8")
    config = load_config(config_path)
    return config, SitePipeline.of(config, config.site("greensboro")).clean()


@pytest.fixture(scope="module")
def raw_rows(tmy_path) -> list[dict[str, str]]:
    """The file's rows read with the standard library alone."""
    with open(tmy_path, newline="", encoding="utf-8") as fh:
        next(fh)  # the station line
        return list(csv.DictReader(fh))


def test_file_has_the_layout_this_test_assumes(raw_rows):
    assert len(raw_rows) == 8760
    assert len(raw_rows[0]) == 71
    assert raw_rows[0]["Time (HH:MM)"] == "01:00"
    assert raw_rows[-1]["Time (HH:MM)"] == "24:00"
    years = {r["Date (MM/DD/YYYY)"][-4:] for r in raw_rows}
    assert len(years) > 1  # months from different years: hence coerce_year


def test_every_row_lands_on_an_hourly_grid_with_nothing_rejected(tmy):
    config, result = tmy
    data, summary = result.weather, result.summary["weather"]
    assert len(data) == 8760
    assert summary["rows"] == {"read": 8760, "kept": 8760, "duplicates_identical": 0,
                               "duplicates_conflicting": 0, "off_grid": 0, "rejected": 0}
    assert summary["ledger_by_reason"] == {}
    assert config.dialects["tmy3"].stamp_marks == "end"
    # The first row, 01/01 01:00 hour-ending at UTC-5 (NREL TMY3 manual, from memory), reports
    # 00:00-01:00 local = 05:00-06:00 UTC; the index labels the interval start.
    # The last row, 12/31 24:00, ends at 00:00 of the next day (ISO 8601:2000 5.3.2), so its
    # interval starts at 23:00 local on 31 December = 04:00 UTC on 1 January of the next year.
    expected = pd.date_range(f"{YEAR}-01-01 05:00", f"{YEAR + 1}-01-01 04:00", freq="1h",
                             tz="UTC", name="time_utc")
    pd.testing.assert_index_equal(data.index, pd.DatetimeIndex(expected.to_list(),
                                                               name="time_utc").as_unit("ns"))
    for variable, _ in COLUMNS.values():
        assert data[variable].notna().all(), variable
        assert (data[f"{variable}_flag"] == "ok").all(), variable


def test_daily_mean_temperature_matches_a_direct_reading_of_the_file(tmy, raw_rows):
    _, result = tmy
    data = result.weather
    # Cyanorisk: group by the local date (UTC-5) of each interval START.
    local_day = (data.index + UTC_OFFSET).strftime("%m/%d")
    ours = data["air_temp_c"].groupby(local_day).mean()
    # Direct: group the file's rows by their Date column. Hour-ending stamps mean the row
    # stamped 24:00 belongs to the day written beside it (its interval starts at 23:00).
    by_day: dict[str, list[float]] = defaultdict(list)
    for row in raw_rows:
        by_day[row["Date (MM/DD/YYYY)"][:5]].append(float(row["Dry-bulb (C)"]))
    direct = pd.Series({day: float(np.mean(v)) for day, v in by_day.items()})
    assert len(direct) == 365
    assert all(len(v) == 24 for v in by_day.values())
    assert sorted(ours.index) == sorted(direct.index)
    np.testing.assert_allclose(ours[direct.index].to_numpy(), direct.to_numpy(), rtol=0,
                               atol=1e-9)


def test_daily_mean_with_pandas_read_csv(tmy, tmy_path):
    # A second direct computation with pandas' own CSV reader.
    _, result = tmy
    raw = pd.read_csv(tmy_path, skiprows=1, usecols=["Date (MM/DD/YYYY)", "Dry-bulb (C)"])
    direct = raw.groupby(raw["Date (MM/DD/YYYY)"].str[:5])["Dry-bulb (C)"].mean()
    ours = result.weather["air_temp_c"].groupby(
        (result.weather.index + UTC_OFFSET).strftime("%m/%d")).mean()
    np.testing.assert_allclose(ours[direct.index].to_numpy(), direct.to_numpy(), rtol=0,
                               atol=1e-9)


def test_values_agree_with_pvlib_read_tmy3(tmy, tmy_path):
    # pvlib.iotools.read_tmy3 (a general-purpose reader, independent of ours) labels each row
    # with the END of its hour in UTC-5; our index labels the START in UTC.
    _, result = tmy
    ref, meta = pvlib.iotools.read_tmy3(str(tmy_path), coerce_year=YEAR, map_variables=True)
    assert meta["TZ"] == -5.0
    start_utc = (ref.index - pd.Timedelta(hours=1)).tz_convert("UTC").as_unit("ns")
    ours = result.weather.reindex(start_utc)
    assert ours.index.equals(result.weather.index)
    for variable, pvlib_name in COLUMNS.values():
        want = ref[pvlib_name].to_numpy(dtype=float)
        got = ours[variable].to_numpy()
        if variable == "wind_dir_deg":  # 360 and 0 are the same bearing; we store 0
            got, want = np.mod(got, 360.0), np.mod(want, 360.0)
        np.testing.assert_allclose(got, want, rtol=0, atol=1e-9, err_msg=variable)
    # A few values read off the file by eye: 01/01 01:00 (first row) and 12/31 24:00 (last).
    first, last = result.weather.iloc[0], result.weather.iloc[-1]
    np.testing.assert_allclose(
        [first["air_temp_c"], first["rel_humidity_pct"], first["pressure_hpa"]], [10.0, 77, 993],
        rtol=0, atol=1e-12)
    np.testing.assert_allclose(
        [last["air_temp_c"], last["wind_speed_ms"], last["wind_dir_deg"]], [2.2, 2.6, 180],
        rtol=0, atol=1e-12)


def test_read_weather_with_the_config_dialect_gives_the_same_series(tmy, tmy_path):
    config, result = tmy
    data, meta = read_weather(tmy_path, config.dialects["tmy3"], "1h", "Etc/GMT+5")
    pd.testing.assert_frame_equal(data, result.weather, check_exact=True)
    assert meta.account.as_dict() == result.summary["weather"]["rows"]
