"""``cyanorisk check``: every file tried, problems found with their fix, nothing written.

The files here are a few days long, written by each test; the outside facts they rest on are
named beside each check.
"""

from __future__ import annotations

import json
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pytest

from cyanorisk.cli import main

CONFIG = """
root = "."
data_dir = "work"

[dialects.aws]
separator = ","
date_column = "Date"
time_column = "Time"
date_order = "ymd"
stamp_zone = "{stamp_zone}"
stamp_marks = "start"
[dialects.aws.columns]
AirT = {{ variable = "air_temp_c", unit = "degC" }}
Wind = {{ variable = "wind_speed_ms", unit = "m/s" }}

[sample_layouts.lab]
shape = "long"
separator = ","
date_order = "ymd"
sample_id_column = "SampleID"
site_column = "Site"
sampled_date_column = "Date"
taxon_column = "Taxon"
count_column = "Count"
count_unit = "cells/L"
{limit}

[taxa]
"Microcystis" = {{ cyanobacterium = true, toxin_producer = true }}

[[sites]]
id = "lake"
name = "Test Lake"
timezone = "Australia/Melbourne"
interval = "1h"
[sites.weather]
files = ["weather.csv"]
dialect = "aws"
[sites.samples]
files = ["lab.csv"]
layout = "lab"
{aliases}
"""


def standard_time_rows(first: str, hours: int) -> str:
    """Hourly rows stamped in AEST (UTC+10:00) all year, as a logger on standard time writes
    them: through 6 October 2024, when Melbourne's clocks skip 02:00-03:00 (IANA tz database:
    daylight saving starts on the first Sunday of October at 02:00 local standard time)."""
    start = datetime.fromisoformat(first).replace(tzinfo=timezone(timedelta(hours=10)))
    rows = ["Date,Time,AirT,Wind"]
    for k in range(hours):
        t = start + timedelta(hours=k)
        rows.append(f"{t:%Y-%m-%d},{t:%H:%M},{12 + k % 7},{1 + k % 3}")
    return "\n".join(rows) + "\n"


LAB = ("SampleID,Site,Date,Taxon,Count\n"
       "S1,{site},2024-10-05,Microcystis,150000\n"
       "S2,{site},2024-10-06,Microcystis,<100000\n")


def write(folder: Path, *, stamp_zone: str = "local", lab_site: str = "lake",
          limit: str = 'detection_limit = "100000 cells/L"', aliases: str = "",
          weather: str | None = None) -> Path:
    (folder / "weather.csv").write_text(weather or standard_time_rows("2024-10-04T00:00", 96),
                                        encoding="utf-8")
    (folder / "lab.csv").write_text(LAB.format(site=lab_site), encoding="utf-8")
    path = folder / "site.toml"
    path.write_text(CONFIG.format(stamp_zone=stamp_zone, limit=limit, aliases=aliases),
                    encoding="utf-8")
    return path


def check_json(config: Path, capsys) -> tuple[int, dict]:
    status = main(["check", "--config", str(config), "--json"])
    out = capsys.readouterr().out
    (site,) = json.loads(out)["sites"]
    return status, site


def texts(site: dict, kind: str) -> list[str]:
    return [f["text"] + " | " + f["fix"] for f in site[kind]]


def test_a_standard_time_logger_read_as_local_time_is_found_with_its_fix(tmp_path, capsys):
    status, site = check_json(write(tmp_path), capsys)
    assert status == 1 and not site["ready"]
    (error,) = [e for e in texts(site, "errors") if "standard time" in e]
    # 02:00 and 02:30 do not exist in Melbourne on 6 October 2024; hourly: one stamp, 02:00,
    # the 51st row (line 52 with the header): 4 Oct 00:00 + 50 h
    assert "1 stamp(s) fall in the hour clocks skip" in error and "first at line 52" in error
    assert 'set stamp_zone = "+10:00" (standard time of Australia/Melbourne)' in error
    assert not (tmp_path / "work").exists()  # check writes nothing


def test_the_suggested_fix_clears_the_error(tmp_path, capsys):
    status, site = check_json(write(tmp_path, stamp_zone="+10:00"), capsys)
    assert not [e for e in texts(site, "errors") if "standard time" in e]
    assert status in (0, 3)  # a few days cannot train, but nothing is wrong


def test_lab_sheets_naming_no_configured_site_list_the_ids_and_the_alias_fix(tmp_path, capsys):
    status, site = check_json(write(tmp_path, stamp_zone="+10:00", lab_site="TL-01"), capsys)
    assert status == 1
    (error,) = [e for e in texts(site, "errors") if "names site" in e]
    assert "ids found: TL-01; id expected: lake" in error
    assert 'site_aliases = ["TL-01"]' in error
    fixed = write(tmp_path, stamp_zone="+10:00", lab_site="TL-01",
                  aliases='site_aliases = ["TL-01"]')
    _, site = check_json(fixed, capsys)
    assert not [e for e in texts(site, "errors") if "names site" in e]


def test_a_limit_in_cells_per_litre_given_as_cells_per_ml_is_caught(tmp_path, capsys):
    # 100 000 cells/L = 100 cells/mL (1 L = 1000 mL); given as 100 000 cells/mL it is 1000 times
    # the '<100000' of a cells/L sheet (100 cells/mL) and far above usual detection limits.
    config = write(tmp_path, stamp_zone="+10:00", limit="detection_limit_cells_per_ml = 100000")
    _, site = check_json(config, capsys)
    warnings = texts(site, "warnings")
    assert any("outside the usual 1 to 5,000 cells/mL" in w
               and 'detection_limit = "100000 cells/L"' in w for w in warnings)
    assert any("1,000 times apart" in w or "1000 times apart" in w for w in warnings)
    _, site = check_json(write(tmp_path, stamp_zone="+10:00"), capsys)
    assert not [w for w in texts(site, "warnings") if "detection limit" in w]


def test_a_station_without_water_temperature_is_told_what_is_estimated(tmp_path, capsys):
    _, site = check_json(write(tmp_path, stamp_zone="+10:00"), capsys)
    assert site["drivers"]["substituted"] == {"water_temp_mean_c_7d": "water_temp_est_mean_c_7d"}
    assert site["drivers"]["not_recorded"]["solar_mj_m2_7d"] == "solar_wm2"
    notes = texts(site, "notes")
    assert any("estimated from air temperature" in n for n in notes)
    assert any("left out, the station records no global horizontal irradiance" in n
               for n in notes)


def test_check_text_ends_with_assumptions_and_a_verdict(tmp_path, capsys):
    config = write(tmp_path, stamp_zone="+10:00")
    status = main(["check", "--config", str(config)])
    out = capsys.readouterr().out
    lines = out.rstrip().splitlines()
    assert lines[-2].startswith("  verdict: ")
    assert "  assumptions:" in out
    assert status == 0 and "backtest has no season to replay yet" in lines[-2]
    assert lines[-1] == f"{config}: configuration is valid; every site is ready"


def test_the_demo_is_ready(demo_site, tmp_path, capsys):
    status, site = check_json(demo_site.write_config(tmp_path / "site.toml"), capsys)
    assert status == 0 and site["ready"] and site["can_train"]
    assert site["seasons"]["replayable"]  # the demo replays seasons
    assert site["drivers"]["used"] == list(demo_site.models.card["drivers_asked"])


@pytest.mark.parametrize("argv, option", [
    (["report", "--as-of", "2025-13-01"], "--as-of"),
    (["report", "--as-of", "yesterday"], "--as-of"),
    (["run", "--as-of", "0001-01-01"], "--as-of"),
    (["backtest", "--seasons", "20x"], "--seasons"),
    (["backtest", "--seasons", "2024-2018"], "--seasons"),
    (["tune", "--miss-cost", "lots"], "--miss-cost"),
    (["tune", "--target-hit-rate", "2"], "--target-hit-rate"),
    (["serve", "--every", "-5"], "--every"),
    (["demo", "--years", "0"], "--years"),
    (["status", "--site", "nowhere"], "--site"),
])
def test_every_bad_option_value_is_one_sentence_with_status_2(tmp_path, capsys, argv, option):
    config = write(tmp_path, stamp_zone="+10:00")
    status = main([argv[0], "--config", str(config), *argv[1:]])
    err = capsys.readouterr().err
    assert status == 2
    (line,) = err.strip().splitlines()
    assert line.startswith(f"cyanorisk: option {option}: ")
    assert "Traceback" not in err


def test_site_selects_one_site(tmp_path, capsys):
    config = write(tmp_path, stamp_zone="+10:00")
    assert main(["status", "--config", str(config), "--site", "lake", "--json"]) == 0
    status = json.loads(capsys.readouterr().out)
    assert [s["site_id"] for s in status["sites"]] == ["lake"]
