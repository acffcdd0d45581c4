"""Tests for cyanorisk.config: the demo configuration, path handling and one-sentence errors."""

from __future__ import annotations

import dataclasses
import tomllib
from pathlib import Path

import pandas as pd
import pytest

from cyanorisk.config import (
    Config,
    ConfigError,
    DemoSettings,
    IngestSettings,
    embedded_demo_text,
    load_config,
)
from cyanorisk.ingest.dialects import ColumnSpec

REPO = Path(__file__).resolve().parents[1]
DEMO_LINK = REPO / "config" / "demo.toml"
DEMO_PACKAGED = REPO / "src" / "cyanorisk" / "data" / "demo.toml"


def site_toml(*, top: str = "", ingest: str = "", dialect: str = "", site: str = "",
              weather: str = "", files: str = '["w/*.csv"]', dialect_name: str = "logger",
              site_id: str = "lake", timezone: str = "UTC", separator: str = ",",
              more: str = "") -> str:
    """A small valid configuration; each argument adds lines to one table or sets one value."""
    return f"""{top}
[ingest]
{ingest}

[dialects.logger]
separator = "{separator}"
{dialect}

[[sites]]
id = "{site_id}"
name = "Lake"
timezone = "{timezone}"
{site}

[sites.weather]
files = {files}
dialect = "{dialect_name}"
{weather}
{more}
"""


def write(folder: Path, text: str, name: str = "site.toml") -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def assert_one_sentence(message: str, path: Path, key: str | None) -> None:
    """The error is one line that starts with the file and, where there is one, the key."""
    where = f"{path}: key '{key}': " if key else f"{path}: "
    assert message.startswith(where), message
    assert "\n" not in message
    body = message[len(where):].replace("e.g. ", "").replace("i.e. ", "")
    assert ". " not in body, message  # no second sentence


def config_error(path: Path, *, check_files: bool = False) -> ConfigError:
    with pytest.raises(ConfigError) as info:
        load_config(path, check_files=check_files)
    return info.value


# ---------------------------------------------------------------------------------------------
# The demo configuration


@pytest.fixture
def demo() -> Config:
    return load_config(DEMO_LINK, check_files=False)


def test_repository_demo_config_is_the_packaged_file():
    assert DEMO_LINK.resolve() == DEMO_PACKAGED.resolve()
    assert embedded_demo_text() == DEMO_PACKAGED.read_text("utf-8")


def test_demo_top_level_settings(demo):
    # values as written in src/cyanorisk/data/demo.toml; root = ".." from config/ is the repository
    assert demo.path == str(DEMO_LINK)
    assert demo.root == REPO
    assert demo.data_dir == REPO / "work"
    assert demo.reports_dir == REPO / "reports"
    assert demo.models_dir == REPO / "models"
    assert demo.ingest == IngestSettings(bad_rows="reject", off_grid="aggregate", duplicates="last")
    assert demo.demo == DemoSettings(out_dir=REPO / "demo_data", years=12, seed=20261202)


def test_demo_site(demo):
    # as written in src/cyanorisk/data/demo.toml
    assert len(demo.sites) == 1
    site = demo.site("tallowbark")
    assert site.id == "tallowbark"
    assert site.name == "Tallowbark Reservoir"
    assert site.timezone == "Australia/Melbourne"
    assert site.use == "drinking"
    assert site.interval == pd.Timedelta(minutes=30)
    assert site.weather.patterns == ("demo_data/tallowbark/weather/tallowbark_aws_*.txt",)
    assert site.weather.dialect == "tallowbark_logger"
    assert site.weather.period is None
    assert all(f.is_relative_to(REPO / "demo_data" / "tallowbark" / "weather") for f in site.weather.files)


def test_demo_dialect(demo):
    # as written in src/cyanorisk/data/demo.toml
    assert list(demo.dialects) == ["tallowbark_logger"]
    d = demo.dialects["tallowbark_logger"]
    assert d.separator == "\t"
    assert d.skip_lines == 1
    assert (d.date_column, d.time_column, d.timestamp_column) == ("Date", "Time", None)
    assert d.date_order == "dmy"
    assert d.stamp_zone == "local"
    assert d.stamp_marks == "end"
    assert d.missing == ("", "-")
    assert d.decimal is None  # left to sniffing
    assert d.encoding == "utf-8"
    assert d.other_columns == "error"
    assert d.coerce_year is None
    assert dict(d.columns) == {
        "AirT": ColumnSpec("air_temp_c", "degC"),
        "WaterT": ColumnSpec("water_temp_c", "degC"),
        "WindSpd": ColumnSpec("wind_speed_ms", "km/h"),
        "WindGust": ColumnSpec("wind_gust_ms", "km/h"),
        "WindDir": ColumnSpec("wind_dir_deg", "compass"),
        "Rain": ColumnSpec("rain_mm", "mm"),
        "RH": ColumnSpec("rel_humidity_pct", "%"),
        "Solar": ColumnSpec("solar_wm2", "W/m2"),
        "Baro": ColumnSpec("pressure_hpa", "hPa"),
        "Batt": ColumnSpec(None),
    }


def test_unknown_site_lists_the_sites(demo):
    with pytest.raises(KeyError, match="no site 'nowhere'; sites: tallowbark"):
        demo.site("nowhere")


def test_embedded_config_equals_file_config_except_root(demo, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    embedded = load_config(None, check_files=False)
    assert embedded.path == "<embedded demo>"
    # the embedded copy has no folder of its own: paths are read from the working directory
    assert embedded.root == tmp_path.resolve()
    assert embedded.raw == demo.raw
    assert embedded.ingest == demo.ingest
    assert embedded.dialects == demo.dialects
    for attr in ("data_dir", "reports_dir", "models_dir"):
        expected = getattr(demo, attr).relative_to(demo.root)
        assert getattr(embedded, attr).relative_to(embedded.root) == expected
    assert embedded.demo.out_dir.relative_to(embedded.root) == demo.demo.out_dir.relative_to(demo.root)
    assert (embedded.demo.years, embedded.demo.seed) == (demo.demo.years, demo.demo.seed)
    assert len(embedded.sites) == len(demo.sites)
    for e, f in zip(embedded.sites, demo.sites, strict=True):
        assert embedded.site(e.id) is e
        assert e.weather.files == ()  # nothing matches in an empty working directory
        no_files = dataclasses.replace(f.weather, files=())
        no_samples = dataclasses.replace(f.samples, files=())
        assert e == dataclasses.replace(f, weather=no_files, samples=no_samples)


def test_embedded_demo_files_are_looked_for_in_the_working_directory(tmp_path, monkeypatch):
    folder = tmp_path / "demo_data" / "tallowbark" / "weather"
    folder.mkdir(parents=True)
    for name in ("tallowbark_aws_2015.txt", "tallowbark_aws_2014.txt", "other.txt"):
        (folder / name).write_text("x\n", encoding="utf-8")
    lab = tmp_path / "demo_data" / "tallowbark" / "lab"
    lab.mkdir(parents=True)
    (lab / "sheet.csv").write_text("x\n", encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    cfg = load_config(None, check_files=True)
    assert cfg.sites[0].weather.files == (
        tmp_path.resolve() / "demo_data/tallowbark/weather/tallowbark_aws_2014.txt",
        tmp_path.resolve() / "demo_data/tallowbark/weather/tallowbark_aws_2015.txt",
    )


# ---------------------------------------------------------------------------------------------
# Paths


def test_relative_paths_resolve_against_root_relative_to_the_config_folder(tmp_path, monkeypatch):
    conf = tmp_path / "conf"
    store = tmp_path / "store"
    (store / "w").mkdir(parents=True)
    for name in ("b.csv", "a.csv", "c.txt"):
        (store / "w" / name).write_text("x\n", encoding="utf-8")
    (store / "extra").mkdir()
    (store / "extra" / "z.csv").write_text("x\n", encoding="utf-8")
    absolute = tmp_path / "elsewhere" / "models"
    path = write(conf, site_toml(
        top=f'root = "../store"\ndata_dir = "clean"\nmodels_dir = "{absolute.as_posix()}"',
        files='["w/*.csv", "extra/z.csv"]',
        more='[demo]\nout_dir = "generated"'))
    # the working directory must not matter
    monkeypatch.chdir(tmp_path / "conf")
    cfg = load_config(path, check_files=True)
    root = store.resolve()
    assert cfg.root == root
    assert cfg.data_dir == root / "clean"
    assert cfg.reports_dir == root / "reports"  # default
    assert cfg.models_dir == absolute  # absolute paths stay as written
    assert cfg.demo.out_dir == root / "generated"
    # in pattern order, sorted by name within a pattern
    assert cfg.sites[0].weather.files == (root / "w" / "a.csv", root / "w" / "b.csv",
                                          root / "extra" / "z.csv")
    assert cfg.sites[0].weather.patterns == ("w/*.csv", "extra/z.csv")


def test_root_defaults_to_the_config_folder(tmp_path, monkeypatch):
    (tmp_path / "conf" / "w").mkdir(parents=True)
    (tmp_path / "conf" / "w" / "x.csv").write_text("x\n", encoding="utf-8")
    write(tmp_path / "conf", site_toml())
    monkeypatch.chdir(tmp_path)
    cfg = load_config("conf/site.toml")  # a path relative to the working directory
    root = (tmp_path / "conf").resolve()
    assert cfg.root == root
    assert cfg.data_dir == root / "work"
    assert cfg.sites[0].weather.files == (root / "w" / "x.csv",)


def test_defaults_of_a_minimal_config(tmp_path):
    cfg = load_config(write(tmp_path, site_toml()), check_files=False)
    assert cfg.ingest == IngestSettings(bad_rows="stop", off_grid="aggregate", duplicates="last")
    assert cfg.demo is None
    site = cfg.sites[0]
    assert (site.use, site.interval) == ("drinking", pd.Timedelta(minutes=30))
    assert site.weather.files == ()


@pytest.mark.parametrize(("text", "expected"), [("1h", pd.Timedelta(hours=1)),
                                                ("10min", pd.Timedelta(minutes=10)),
                                                ("45min", pd.Timedelta(minutes=45)),
                                                ("1D", pd.Timedelta(days=1))])
def test_intervals_that_divide_a_day(tmp_path, text, expected):
    cfg = load_config(write(tmp_path, site_toml(site=f'interval = "{text}"')), check_files=False)
    assert cfg.sites[0].interval == expected


def test_plausible_dates_accept_toml_dates_and_strings(tmp_path):
    from datetime import date
    cfg = load_config(write(tmp_path, site_toml(
        ingest='earliest_date = 1990-01-01\nlatest_date = "2030-12-31"')), check_files=False)
    assert (cfg.ingest.earliest_date, cfg.ingest.latest_date) == (date(1990, 1, 1),
                                                                  date(2030, 12, 31))


def test_period_accepts_toml_dates_and_strings(tmp_path):
    path = write(tmp_path, site_toml(more='[sites.weather.period]\nstart = 2020-01-01\nend = "2021-06-30"'))
    assert load_config(path, check_files=False).sites[0].weather.period == ("2020-01-01", "2021-06-30")


# ---------------------------------------------------------------------------------------------
# Errors: one sentence naming the file and the key


@pytest.mark.parametrize(
    ("kwargs", "key", "fragment"),
    [
        pytest.param({"top": 'colour = "blue"'}, "colour",
                     "valid keys here: compute, data_dir, demo, dialects",
                     id="unknown-top-level-key"),
        pytest.param({"ingest": 'speed = "fast"'}, "ingest.speed", "valid keys here: bad_rows",
                     id="unknown-ingest-key"),
        pytest.param({"site": 'depth_m = 12'}, "sites[0].depth_m",
                     "valid keys here: alerts, authority, drivers", id="unknown-site-key"),
        pytest.param({"weather": 'format = "csv"'}, "sites[0].weather.format",
                     "valid keys here: dialect, files, period", id="unknown-weather-key"),
        pytest.param({"dialect": 'delimiter = ";"'}, "dialects.logger.delimiter",
                     "valid keys here: coerce_year, columns", id="unknown-dialect-key"),
        pytest.param({"dialect": 'columns = { T = { variable = "air_temp_c", units = "degC" } }'},
                     "dialects.logger.columns.T.units", "valid keys here: unit, variable",
                     id="unknown-column-key"),
        pytest.param({"dialect": 'skip_lines = "one"'}, "dialects.logger.skip_lines",
                     "expected int, got str 'one'", id="wrong-type-str-for-int"),
        pytest.param({"dialect": "skip_lines = true"}, "dialects.logger.skip_lines",
                     "expected int, got bool True", id="wrong-type-bool-for-int"),
        pytest.param({"top": "data_dir = 3"}, "data_dir", "expected str, got int 3", id="wrong-type-top"),
        pytest.param({"files": '"w/*.csv"'}, "sites[0].weather.files", "expected list",
                     id="files-not-a-list"),
        pytest.param({"ingest": 'earliest_date = "1900-13-01"'}, "ingest.earliest_date",
                     "'1900-13-01' is not a date in the form YYYY-MM-DD", id="bad-earliest-date"),
        pytest.param({"ingest": 'bad_rows = "maybe"'}, "ingest.bad_rows",
                     "'maybe' is not one of 'reject', 'stop'", id="invalid-choice-bad-rows"),
        pytest.param({"site": 'use = "swimming"'}, "sites[0].use",
                     "'swimming' is not one of 'drinking', 'recreation'", id="invalid-choice-use"),
        pytest.param({"dialect": 'date_order = "ydm"'}, "dialects.logger.date_order",
                     "'ydm' is not one of 'dmy', 'mdy', 'ymd'", id="invalid-choice-date-order"),
        pytest.param({"timezone": "Europe/Atlantis"}, "sites[0].timezone",
                     "'Europe/Atlantis' is not an IANA time zone", id="unknown-time-zone"),
        pytest.param({"timezone": "../etc"}, "sites[0].timezone",
                     "'../etc' is not an IANA time zone", id="time-zone-path"),
        # a region folder of the tz database is not a zone
        pytest.param({"timezone": "Europe"}, "sites[0].timezone",
                     "'Europe' is not an IANA time zone", id="time-zone-region-folder"),
        pytest.param({"site": 'interval = "7min"'}, "sites[0].interval",
                     "'7min' is not an interval of at least a minute that divides a day",
                     id="interval-7min"),
        pytest.param({"site": 'interval = "25h"'}, "sites[0].interval",
                     "'25h' is not an interval of at least a minute that divides a day",
                     id="interval-25h"),
        pytest.param({"site": 'interval = "0min"'}, "sites[0].interval",
                     "'0min' is not an interval of at least a minute that divides a day",
                     id="interval-zero"),
        pytest.param({"site": 'interval = "-30min"'}, "sites[0].interval",
                     "'-30min' is not an interval of at least a minute that divides a day",
                     id="interval-negative"),
        pytest.param({"site": 'interval = "half an hour"'}, "sites[0].interval",
                     "'half an hour' is not an interval of at least a minute that divides a day",
                     id="interval-words"),
        # pandas reads a bare number as nanoseconds; '30' almost surely means 30 minutes
        pytest.param({"site": 'interval = "30"'}, "sites[0].interval",
                     "'30' is not an interval of at least a minute that divides a day",
                     id="interval-without-unit"),
        pytest.param({"dialect_name": "nope"}, "sites[0].weather.dialect",
                     "'nope' is not defined under [dialects]; defined: logger", id="undefined-dialect"),
        pytest.param({"more": '[[sites]]\nid = "lake"\nname = "Again"\ntimezone = "UTC"\n'
                              '[sites.weather]\nfiles = []\ndialect = "logger"'},
                     "sites", "site ids must be unique; repeated: lake", id="duplicate-site-ids"),
        pytest.param({"more": "[sites.weather.period]\nstart = \"soon\""}, "sites[0].weather.period.start",
                     "'soon' is not a date", id="period-not-a-date"),
    ],
)
def test_error_names_file_and_key(tmp_path, kwargs, key, fragment):
    path = write(tmp_path, site_toml(**kwargs))
    err = config_error(path)
    assert (err.path, err.key) == (str(path), key)
    assert_one_sentence(str(err), path, key)
    assert fragment in str(err)


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        pytest.param({"dialect": 'stamp_zone = "Mars"'},
                     "stamp_zone must be 'local', 'UTC' or an offset like '+10:00', not 'Mars'",
                     id="bad-stamp-zone"),
        pytest.param({"separator": ";;"}, "separator must be one character, not ';;'", id="long-separator"),
        pytest.param({"dialect": 'timestamp_column = "When"\ndate_column = "Date"'},
                     "declare either timestamp_column or date_column/time_column", id="two-stamp-styles"),
        pytest.param({"dialect": 'columns = { T = { variable = "air_temp" } }'},
                     "column 'T': 'air_temp' is not a canonical weather variable; valid: air_temp_c",
                     id="unknown-variable"),
        pytest.param({"dialect": 'columns = { T = { variable = "air_temp_c", unit = "furlongs" } }'},
                     "unknown unit 'furlongs'; known units: m/s, km/h, knots", id="unknown-unit"),
        pytest.param({"dialect": "columns = { T = 5 }"}, 'expected "ignore" or a table',
                     id="bad-column-spec"),
    ],
)
def test_dialect_errors_name_the_dialect(tmp_path, kwargs, fragment):
    path = write(tmp_path, site_toml(**kwargs))
    err = config_error(path)
    assert err.key is not None and err.key.startswith("dialects.logger")
    assert_one_sentence(str(err), path, err.key)
    assert fragment in str(err)


def test_weather_pattern_that_matches_nothing_fails_that_site_when_used(tmp_path):
    from cyanorisk.pipeline import SitePipeline

    path = write(tmp_path, site_toml(files='["stations/lake_*.csv"]'))
    config = load_config(path)  # the other sites of the file can still run
    (err,) = config.sites[0].problems
    with pytest.raises(ConfigError) as raised:
        SitePipeline.of(config, config.sites[0]).digests()
    assert raised.value is err
    key = "sites[0].weather.files"
    assert (err.path, err.key) == (str(path), key)
    assert_one_sentence(str(err), path, key)
    assert "no file matches 'stations/lake_*.csv'" in str(err)
    assert f"(looked in {tmp_path.resolve()})" in str(err)
    # the same configuration loads when files are not checked
    assert load_config(path, check_files=False).sites[0].weather.files == ()


@pytest.mark.parametrize(
    ("text", "where"),
    [
        # positions as tomllib reports them (Python 3.11 standard library)
        ('root = "."\ndata_dir = \n', "(at line 2, column 12)"),
        ('[[sites]]\nid = "a"\nname = "x" y\n', "(at line 3, column 12)"),
    ],
)
def test_invalid_toml_carries_line_and_column(tmp_path, text, where):
    path = write(tmp_path, text)
    with pytest.raises(tomllib.TOMLDecodeError) as parsed:
        tomllib.loads(text)
    err = config_error(path)
    assert err.key is None
    assert_one_sentence(str(err), path, None)
    assert str(err) == f"{path}: not valid TOML: {parsed.value}"
    assert where in str(err)


def test_missing_config_file(tmp_path):
    path = tmp_path / "absent.toml"
    err = config_error(path)
    assert (err.path, err.key) == (str(path), None)
    assert str(err) == f"{path}: no such configuration file"


def test_a_folder_is_not_a_config_file(tmp_path):
    err = config_error(tmp_path)
    assert_one_sentence(str(err), tmp_path, None)
    assert "this is a folder, not a configuration file" in str(err)


def test_a_config_that_is_not_utf8_names_line_and_byte(tmp_path):
    # TOML v1.0.0: "A TOML file must be a valid UTF-8 encoded Unicode document."
    path = tmp_path / "site.toml"
    path.write_bytes(site_toml().replace('name = "Lake"', 'name = "Lac é"').encode("latin-1"))
    err = config_error(path)
    assert_one_sentence(str(err), path, None)
    line = site_toml().splitlines().index('name = "Lake"') + 1
    assert f"line {line}, byte 13 is not UTF-8 (byte 0xe9)" in str(err)


def test_a_config_with_nul_bytes_names_the_line_and_prints_no_nul(tmp_path):
    path = tmp_path / "site.toml"
    path.write_bytes(b'root = "."\n\x00\x00\n')
    err = config_error(path)
    assert_one_sentence(str(err), path, None)
    assert "line 2 holds a NUL byte" in str(err) and "\x00" not in str(err)


@pytest.mark.parametrize(("text", "key"), [
    pytest.param(site_toml().replace('name = "Lake"', 'name = "Lake\\nBcc: x@example.org"'),
                 "sites[0].name", id="line-break-in-name"),
    pytest.param(site_toml(site='authority = "Water\\r\\nBoard"'), "sites[0].authority",
                 id="line-break-in-authority"),
])
def test_text_that_reaches_mail_headers_is_one_line(tmp_path, text, key):
    path = write(tmp_path, text)
    err = config_error(path)
    assert_one_sentence(str(err), path, key)
    assert "must be one line of text" in str(err)


@pytest.mark.parametrize("key, line", [
    ("service.mail_to[1]", 'mail_to = ["a@example.org", "b@example.org\\nBcc: c@example.org"]'),
    ("service.mail_from", 'mail_from = "a@example.org\\n"'),
])
def test_a_mail_address_with_a_line_break_is_refused(tmp_path, key, line):
    path = write(tmp_path, site_toml(top=f"[service]\n{line}"))
    err = config_error(path)
    assert_one_sentence(str(err), path, key)
    assert "an e-mail address cannot hold a line break" in str(err)


@pytest.mark.parametrize("site_id", ["../outside", "a/b", "lake one", "lake.2", ""])
def test_site_ids_are_letters_digits_underscore_and_hyphen(tmp_path, site_id):
    path = write(tmp_path, site_toml(site_id=site_id))
    err = config_error(path)
    assert_one_sentence(str(err), path, "sites[0].id")
    assert "is not a usable site id" in str(err)


def test_a_workspace_refuses_an_id_that_would_leave_its_folders(tmp_path):
    from cyanorisk.pipeline.workspace import SiteWorkspace
    with pytest.raises(ValueError, match="not a usable site id"):
        SiteWorkspace("../x", tmp_path / "d", tmp_path / "m", tmp_path / "r", tmp_path / "o")


@pytest.mark.parametrize(
    ("text", "key", "fragment"),
    [
        ("root = '.'\n", "sites", "missing; it is required"),
        ("sites = []\n", "sites", "no site is configured"),
        ('[sites]\nid = "a"\n', "sites", "expected list, got dict"),
        ('[[sites]]\nid = "a"\nname = "A"\n', "sites[0].timezone", "missing; it is required"),
    ],
)
def test_missing_or_empty_sites(tmp_path, text, key, fragment):
    path = write(tmp_path, text)
    err = config_error(path)
    assert err.key == key
    assert_one_sentence(str(err), path, key)
    assert fragment in str(err)


def test_config_error_is_a_value_error():
    assert issubclass(ConfigError, ValueError)
