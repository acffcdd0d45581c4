"""Drafting a configuration from a new user's own files (cyanorisk.draft).

The drafts are checked against things outside the drafter: the hand-written TMY3 dialect of
tests/test_weather_tmy.py (itself checked against pvlib.iotools.read_tmy3), the worked example
src/cyanorisk/data/demo.toml and the generator of the demo's exports (cyanorisk.demo), the
configuration loader (cyanorisk.config.load_config) and the readers (cyanorisk.ingest).
"""

from __future__ import annotations

import re
import tomllib
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.config import load_config
from cyanorisk.demo import write_demo
from cyanorisk.draft import CONFIRM, TYPICAL_YEAR, Draft, draft_config, write_draft
from cyanorisk.errors import ConfigError
from cyanorisk.ingest import ColumnSpec, WeatherDialect, read_weather
from cyanorisk.ingest.samples import read_samples

pytest.importorskip("pvlib")

DATA = Path(__file__).parent / "data" / "draft"
TMY_NAME = "723170TYA.CSV"

HAND_TMY3 = WeatherDialect(
    # The dialect written by hand in tests/test_weather_tmy.py for pvlib's 723170TYA.CSV.
    separator=",", skip_lines=1, date_column="Date (MM/DD/YYYY)", time_column="Time (HH:MM)",
    date_order="mdy", stamp_zone="-05:00", stamp_marks="end", coerce_year=1990,
    other_columns="ignore",
    columns={
        "Dry-bulb (C)": ColumnSpec("air_temp_c", "degC"),
        "Wspd (m/s)": ColumnSpec("wind_speed_ms", "m/s"),
        "Wdir (degrees)": ColumnSpec("wind_dir_deg"),
        "RHum (%)": ColumnSpec("rel_humidity_pct"),
        "Pressure (mbar)": ColumnSpec("pressure_hpa", "mbar"),
        "GHI (W/m^2)": ColumnSpec("solar_wm2", "W/m2"),
    },
)

LAB_SHEET = """\
Site,Sample ID,Date Collected,Time Collected,Date Reported,Depth (m),Taxon,Count,Units,Comments
GSO-1,S0612,06/12/1990,09:40,06/15/1990,0.5,Microcystis aeruginosa,1200000,cells/L,
GSO-1,S0612,06/12/1990,09:40,06/15/1990,0.5,Dolichospermum circinale,<100000,cells/L,
GSO-1,S0612,06/12/1990,09:40,06/15/1990,0.5,Aulacoseira granulata,350000,cells/L,
GSO-1,S0619,06/19/1990,10:05,06/22/1990,0.5,Microcystis aeruginosa,4500000,cells/L,green tinge
GSO-1,S0619,06/19/1990,10:05,06/22/1990,0.5,Dolichospermum circinale,300000,cells/L,
GSO-1,S0619,06/19/1990,10:05,06/22/1990,0.5,Cryptomonas sp.,<100000,cells/L,
GSO-1,S0703,07/03/1990,,07/09/1990,0.5,Microcystis aeruginosa,9800000,cells/L,
GSO-1,S0703,07/03/1990,,07/09/1990,0.5,Aulacoseira granulata,ND,cells/L,
GSO-1,S0717,07/17/1990,09:50,07/20/1990,0.5,Microcystis aeruginosa,<100000,cells/L,after rain
"""
"""A long-layout lab sheet in cells per litre, month-first dates as in the weather file."""


@pytest.fixture(scope="module")
def tmy_path() -> Path:
    path = resources.files("pvlib") / "data" / TMY_NAME
    if not path.is_file():
        pytest.skip(f"this pvlib does not ship {TMY_NAME}")
    return Path(str(path))


@pytest.fixture(scope="module")
def lab_path(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("lab") / "gso_phytoplankton.csv"
    path.write_text(LAB_SHEET, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def tmy_draft(tmy_path, lab_path) -> Draft:
    return draft_config([tmy_path], [lab_path])


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    files = write_demo(tmp_path_factory.mktemp("demo"), 2, 20261202)
    return files, draft_config(files.weather, files.samples)


def fill(text: str, **values: str) -> str:
    """Replace the blank of each key (a line `key = "FILL IN..."`) with a TOML value."""
    for key, value in values.items():
        line = f"{key} = {value}"
        text, n = re.subn(rf'(?m)^{key} = "FILL IN(?:[^"\\\n]|\\.)*"', lambda _, line=line: line, text)
        assert n == 1, f"no blank for {key}"
    return text


TMY_FILLS = dict(name='"Greensboro test pond"', timezone='"Etc/GMT+5"', use='"recreation"',
                 authority='"the county health department"', scheme='"who2003_recreation"')


def test_newcomer_tmy3_draft_reads_the_same_series_as_the_hand_written_dialect(tmy_draft, tmy_path,
                                                                                 tmp_path):
    # Outside check: the hand-written dialect of tests/test_weather_tmy.py, whose series that
    # module checks against pvlib.iotools.read_tmy3.
    text = fill(tmy_draft.text, **TMY_FILLS)
    assert not re.search(r'= "FILL IN', text)
    path = tmp_path / "site.toml"
    path.write_text(text, encoding="utf-8")
    config = load_config(path)
    site = config.sites[0]
    assert site.interval == pd.Timedelta("1h")
    dialect = config.dialects[site.weather.dialect]
    assert (dialect.stamp_marks, dialect.stamp_zone, dialect.coerce_year, dialect.date_order) == (
        "end", "-05:00", TYPICAL_YEAR, "mdy")
    drafted, meta = read_weather(tmy_path, dialect, site.interval, site.timezone)
    hand, hand_meta = read_weather(tmy_path, HAND_TMY3, "1h", "Etc/GMT+5")
    pd.testing.assert_frame_equal(drafted[hand.columns], hand, check_exact=True)
    # The draft also reads the TMY3 rain column, which the hand-written dialect leaves out.
    assert set(drafted.columns) - set(hand.columns) == {"rain_mm", "rain_mm_flag"}
    assert meta.account.as_dict() == hand_meta.account.as_dict()
    assert meta.account.rejected == 0


def test_newcomer_lab_sheet_in_cells_per_litre(tmy_draft, lab_path, tmp_path):
    # Outside check: 1 L = 1000 mL (SI), so 1,200,000 cells/L is 1200 cells/mL and the
    # '<100000' entries are below 100 cells/mL (read back by cyanorisk.ingest.samples).
    raw = tomllib.loads(fill(tmy_draft.text, **TMY_FILLS))
    layout = next(iter(raw["sample_layouts"].values()))
    assert layout["shape"] == "long"
    assert {k: layout[k] for k in ("site_column", "sample_id_column", "sampled_date_column",
                                   "sampled_time_column", "reported_date_column", "depth_column",
                                   "taxon_column", "count_column", "unit_column", "comment_column",
                                   "count_unit", "date_order")} == {
        "site_column": "Site", "sample_id_column": "Sample ID",
        "sampled_date_column": "Date Collected", "sampled_time_column": "Time Collected",
        "reported_date_column": "Date Reported", "depth_column": "Depth (m)", "taxon_column": "Taxon",
        "count_column": "Count", "unit_column": "Units", "comment_column": "Comments",
        "count_unit": "cells/L", "date_order": "mdy"}
    assert layout["detection_limit"] == "100000 cells/L"
    assert raw["sites"][0]["id"] == "GSO-1"
    assert raw["taxa"] == {
        "Microcystis": {"cyanobacterium": True, "toxin_producer": True},
        "Dolichospermum": {"cyanobacterium": True, "toxin_producer": True},
        "Aulacoseira": {"cyanobacterium": False},
        "Cryptomonas": {"cyanobacterium": False},
    }
    assert raw["sites"][0]["samples"]["lab_delay_days"] == 3  # 3, 3, 6 and 3 days
    path = tmp_path / "site.toml"
    path.write_text(fill(tmy_draft.text, **TMY_FILLS), encoding="utf-8")
    config = load_config(path)
    site = config.sites[0]
    assert site.samples.parsing.detection_limit_cells_per_ml == pytest.approx(100.0, rel=1e-12)
    records, meta = read_samples(site.samples.files, site.samples.parsing, site.timezone)
    assert meta.account.rejected == 0
    first = records[records["sample_id"] == "S0612"].set_index("taxon")
    assert first.loc["Microcystis aeruginosa", "cells_per_ml"] == pytest.approx(1200.0, rel=1e-12)
    assert first.loc["Dolichospermum circinale", ["cells_per_ml", "censor"]].tolist() == [100.0, "<"]
    nd = records[(records["sample_id"] == "S0703") & (records["taxon"] == "Aulacoseira granulata")]
    assert nd[["cells_per_ml", "censor"]].values.tolist() == [[100.0, "<"]]


def test_evidence_sentences_of_the_tmy3_draft(tmy_draft):
    # Outside check: the file itself (its station line, header and rows as pvlib ships them).
    def said(key: str) -> str:
        found = [e for e in tmy_draft.evidence if e.startswith(key + " = ")]
        assert len(found) == 1, (key, tmy_draft.evidence)
        return found[0]

    assert "71 fields on commas" in said("dialects.723170tya.separator")
    marks = said("dialects.723170tya.stamp_marks")
    assert "24:00" in marks and "01:00" in marks and "no row has 00:00" in marks
    zone = said("dialects.723170tya.stamp_zone")
    assert "4th field" in zone and "-5.0" in zone and "TMY3 station line" in zone
    assert "unit, C" in said('dialects.723170tya.columns."Dry-bulb (C)"')
    assert "unit, mbar" in said('dialects.723170tya.columns."Pressure (mbar)"')
    assert "1988" in said("dialects.723170tya.coerce_year") and "typical-year" in said(
        "dialects.723170tya.coerce_year")
    # Settled from the file: not among the guesses. Guessed: the typical year, the taxa.
    confirm = "\n".join(tmy_draft.to_confirm)
    assert "stamp_marks" not in confirm and "stamp_zone" not in confirm
    assert "coerce_year = 1990" in confirm and "taxa.Microcystis" in confirm
    assert f"{CONFIRM}: the 12 months come from 10 different years" in tmy_draft.text


DEMO_NOT_INFERRED = {
    "upper_limit": "no 'TNTC' or '>N' entry in the demo's sheets says the limit",
}


def test_demo_exports_reproduce_the_worked_example_layouts(demo):
    # Outside check: src/cyanorisk/data/demo.toml, the worked example written for the demo's
    # generator (cyanorisk.demo).
    _, draft = demo
    example = tomllib.loads(resources.files("cyanorisk").joinpath("data", "demo.toml")
                            .read_text("utf-8"))
    raw = tomllib.loads(draft.text)
    (want,), (got,) = example["dialects"].values(), raw["dialects"].values()
    for key, value in want.items():
        if key in DEMO_NOT_INFERRED:  # a guess, listed for the user to confirm
            assert any(c.startswith("dialects.") and f".{key} = " in c for c in draft.to_confirm), key
            continue
        assert got[key] == value, key
    (want_lab,), (got_lab,) = example["sample_layouts"].values(), raw["sample_layouts"].values()
    for key, value in want_lab.items():
        if key in DEMO_NOT_INFERRED:
            assert key not in got_lab, key
            continue
        assert got_lab[key] == value, key
    assert raw["taxa"] == example["taxa"]
    site, want_site = raw["sites"][0], example["sites"][0]
    assert (site["id"], site["interval"]) == (want_site["id"], want_site["interval"])
    assert raw["sites"][0]["model"]["season_start_month"] == want_site["model"]["season_start_month"]


def test_demo_draft_sees_daylight_saving(demo):
    # Outside check: Australia/Melbourne's clock changes (IANA tz database): 2:00 standard time
    # to 3:00 on the first Sunday of October, back from 3:00 to 2:00 on the first Sunday of April.
    _, draft = demo
    zone = next(e for e in draft.evidence if ".stamp_zone = " in e)
    for day in ("2023-10-01", "2024-10-06", "2023-04-02", "2024-04-07"):
        assert day in zone
    assert "from 02:00 is missing" in zone and "written twice" in zone


def test_demo_draft_loads_and_reads_once_filled(demo, tmp_path):
    # Outside check: the configuration loader and the weather reader accept the drafted layout.
    files, draft = demo
    text = fill(draft.text, name='"Tallowbark Reservoir"', timezone='"Australia/Melbourne"',
                use='"drinking"', authority='"Merrin Falls Water"', scheme='"who1999_drinking"')
    path = tmp_path / "site.toml"
    path.write_text(text, encoding="utf-8")
    config = load_config(path)
    site = config.sites[0]
    assert site.weather.files == tuple(files.weather)
    _, meta = read_weather(files.weather[-1], config.dialects[site.weather.dialect], site.interval,
                           site.timezone, bad_rows="reject")
    assert meta.account.kept > 0.95 * meta.account.read


BLANK_KEYS = {
    "name": "sites[0].name", "timezone": "sites[0].timezone", "use": "sites[0].use",
    "authority": "sites[0].authority", "scheme": "sites[0].alerts.scheme",
}


def test_unfilled_draft_is_refused_naming_a_blank(tmy_draft, tmp_path):
    # Outside check: the configuration loader (cyanorisk.config.load_config).
    path = tmp_path / "site.toml"
    path.write_text(tmy_draft.text, encoding="utf-8")
    with pytest.raises(ConfigError, match="still to be filled in") as caught:
        load_config(path)
    assert caught.value.key in tmy_draft.blanks
    assert sorted(tmy_draft.blanks) == sorted(BLANK_KEYS.values())


@pytest.mark.parametrize("left", sorted(BLANK_KEYS))
def test_each_blank_is_refused_on_its_own(tmy_draft, tmp_path, left):
    # Outside check: the loader names the key still blank, also for `use` (a choice of two)
    # and `scheme` (a choice among the presets).
    path = tmp_path / "site.toml"
    path.write_text(fill(tmy_draft.text, **{k: v for k, v in TMY_FILLS.items() if k != left}),
                    encoding="utf-8")
    with pytest.raises(ConfigError, match="still to be filled in") as caught:
        load_config(path)
    assert caught.value.key == BLANK_KEYS[left]


def _standard_time_year(path: Path) -> Path:
    """A year of hourly readings in standard time: no clock change, no temperature."""
    stamps = pd.date_range("2021-01-01 00:00", periods=8760, freq="1h")
    rng = np.random.default_rng(7)
    wind = rng.gamma(2.0, 4.0, len(stamps)).round(1).astype(str).astype(object)
    rain = np.where(rng.random(len(stamps)) < 0.05, "0.02", "0.00").astype(object)
    wind[[10, 500, 900, 4000, 8000]] = "M"
    rain[[20, 3000, 7000]] = "-9999"
    body = "\n".join(f"{t:%Y-%m-%d %H:%M},{w},{r}" for t, w, r in zip(stamps, wind, rain, strict=True))
    path.write_text("Timestamp,Wind (knots),Rain (in)\n" + body + "\n", encoding="utf-8")
    return path


def test_year_in_standard_time_leaves_the_offset_blank(tmp_path):
    # Outside check: the loader refuses the blank offset first (dialects are read before sites),
    # and a season start cannot be told without a temperature.
    draft = draft_config([_standard_time_year(tmp_path / "pond_2021.csv")])
    raw = tomllib.loads(draft.text)
    (dialect,) = raw["dialects"].values()
    assert dialect["stamp_zone"].startswith("FILL IN: the logger's fixed UTC offset")
    assert dialect["timestamp_column"] == "Timestamp"
    assert dialect["stamp_marks"] == "start"
    assert dialect["missing"] == ["", "M", "-9999"]
    assert dialect["columns"] == {"Wind (knots)": {"variable": "wind_speed_ms", "unit": "knots"},
                                  "Rain (in)": {"variable": "rain_mm", "unit": "in"}}
    assert raw["sites"][0]["model"]["season_start_month"].startswith("FILL IN")
    assert "samples" not in raw["sites"][0]
    path = tmp_path / "site.toml"
    path.write_text(draft.text, encoding="utf-8")
    with pytest.raises(ConfigError, match="still to be filled in") as caught:
        load_config(path)
    assert caught.value.key == "dialects.pond.stamp_zone"
    path.write_text(fill(draft.text, stamp_zone='"+10:00"', **TMY_FILLS), encoding="utf-8")
    with pytest.raises(ConfigError, match="still to be filled in") as caught:
        load_config(path)
    assert caught.value.key == "sites[0].model.season_start_month"  # an integer key


def test_latin1_semicolon_file_with_units_in_the_header(tmp_path):
    # Outside check: the degree Fahrenheit, (F - 32) * 5/9 (NIST SP 811, 2008, B.9), and the
    # km/h, 1/3.6 m/s (SI), applied by the reader to values typed with a decimal comma.
    source = DATA / "latin1_semicolon_decimal_comma.csv"
    draft = draft_config([source])
    raw = tomllib.loads(draft.text)
    (dialect,) = raw["dialects"].values()
    assert (dialect["separator"], dialect["decimal"], dialect["encoding"], dialect["skip_lines"]) == (
        ";", ",", "latin-1", 1)
    assert (dialect["date_order"], dialect["stamp_marks"], dialect["stamp_zone"]) == ("dmy", "start",
                                                                                    "+01:00")
    assert dialect["columns"] == {
        "Temp (°F)": {"variable": "air_temp_c", "unit": "degF"},
        "WSpd km/h": {"variable": "wind_speed_ms", "unit": "km/h"},
        "Wind dir": {"variable": "wind_dir_deg", "unit": "compass"},
        "Rain (in)": {"variable": "rain_mm", "unit": "in"},
        "Sensor T": "ignore",
    }
    assert dialect["missing"] == ["", "M", "-9999"]
    assert any("0xfc on line 1 is not UTF-8" in e for e in draft.evidence)
    assert any("Sensor T" in c for c in draft.to_confirm)  # could not tell what it holds
    assert any(".stamp_zone = " in c for c in draft.to_confirm)  # said above the header only
    path = tmp_path / "site.toml"
    path.write_text(fill(draft.text, **{**TMY_FILLS, "timezone": '"Europe/Zurich"'},
                         season_start_month="1"), encoding="utf-8")
    config = load_config(path)
    site = config.sites[0]
    data, _ = read_weather(source, config.dialects[site.weather.dialect], site.interval,
                           site.timezone)
    first = data.loc[pd.Timestamp("2023-07-12 23:00", tz="UTC")]
    assert first["air_temp_c"] == pytest.approx((52.6 - 32) * 5 / 9, abs=1e-9)
    assert first["wind_speed_ms"] == pytest.approx(8.0 / 3.6, abs=1e-9)


def test_write_draft_refuses_an_existing_file(tmy_draft, tmp_path):
    # Outside check: the file system: the existing file keeps its bytes and no temporary file
    # is left beside it.
    out = tmp_path / "site.toml"
    out.write_text("# mine\n", encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        write_draft(tmy_draft, out)
    message = str(caught.value)
    assert message.startswith(str(out)) and "already there" in message
    assert message.count(". ") == 0 and "\n" not in message  # one sentence
    assert out.read_text(encoding="utf-8") == "# mine\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site.toml"]


def test_write_draft_writes_the_text_once(tmy_draft, tmp_path):
    # Outside check: tomllib reads back what was written.
    out = write_draft(tmy_draft, tmp_path / "new" / "site.toml")
    assert out.read_text(encoding="utf-8") == tmy_draft.text
    assert tomllib.loads(out.read_text(encoding="utf-8"))["ingest"] == {"bad_rows": "reject"}
    assert sorted(p.name for p in out.parent.iterdir()) == ["site.toml"]


def test_every_key_carries_a_comment(tmy_draft, demo):
    # Outside check: the TOML text itself; a key line ends in a comment or follows one.
    for text in (tmy_draft.text, demo[1].text):
        lines = text.splitlines()
        for k, line in enumerate(lines):
            if re.match(r'^[A-Za-z0-9_"-].* = ', line):
                assert "  # " in line or lines[k - 1].startswith("# "), line


HEADERS = {
    # header as a logger writes it: what the draft maps it to
    "AirT": {"variable": "air_temp_c", "unit": "degC"},
    "Temp (degF)": "skip",  # a second air temperature: the first one is read
    "Wind (knots)": {"variable": "wind_speed_ms", "unit": "knots"},
    "Gust (mph)": {"variable": "wind_gust_ms", "unit": "mph"},
    "Wind Direction": {"variable": "wind_dir_deg", "unit": "deg"},
    "GHI (W/m^2)": {"variable": "solar_wm2", "unit": "W/m2"},
    "GH illum (lx)": "ignore",
    "Rain (in)": {"variable": "rain_mm", "unit": "in"},
    "Pressure (inHg)": {"variable": "pressure_hpa", "unit": "inHg"},
    "RH (%)": {"variable": "rel_humidity_pct", "unit": "%"},
    "Batt (V)": "ignore",
    "Dew-point (C)": "ignore",
}


def test_header_words_and_units(tmp_path):
    # Outside check: the units the README lists as understood (cyanorisk.units.CONVERSIONS),
    # written in the headers as loggers write them.
    stamps = pd.date_range("2024-01-13 00:00", periods=48, freq="1h")
    values = ["12.5", "54.5", "7.2", "11.0", "270", "350", "9000", "0.01", "29.9", "80", "12.6", "5.1"]
    rows = [",".join([f"{t:%Y-%m-%d %H:%M}", *values]) for t in stamps]
    path = tmp_path / "aws.csv"
    path.write_text("Timestamp," + ",".join(HEADERS) + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    raw = tomllib.loads(draft_config([path]).text)
    (dialect,) = raw["dialects"].values()
    for header, want in HEADERS.items():
        got = dialect["columns"][header]
        assert got == ("ignore" if want == "skip" else want), header
