"""The command line: ``cyanorisk ingest``, ``check`` and ``demo`` (cyanorisk.cli).

Most tests call :func:`cyanorisk.cli.main` in-process; two run the real program in a subprocess
so that the exit status reaches the shell. Errors must be one sentence on stderr naming the file,
line and column (DESIGN.md, Command line): exit 2 for a configuration problem, 1 for a data
problem; outputs are written all at once or not at all.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.cli import main
from cyanorisk.config import embedded_demo_text, load_config
from cyanorisk.ingest import read_weather

SITE = "testlake"
GOOD_FILE = (
    "Test Lake AWS export\n"
    "Date\tTime\tAirT\tWindSpd\n"
    "01/01/2024\t00:00\t20.1\t10\n"
    "01/01/2024\t00:30\t20.3\t12\n"
    "01/01/2024\t01:00\t21..4\t11\n"  # line 5: not a number
    "01/01/2024\t01:30\t21.0\t-\n"
    "01/01/2024\t01:30\t21.0\t-\n"  # line 7: the row above again
)
"""Five data rows: three kept, one identical repeat, one rejected (line 5, column AirT)."""
GOOD_ACCOUNT = {"read": 5, "kept": 3, "duplicates_identical": 1, "duplicates_conflicting": 0,
                "off_grid": 0, "rejected": 1}
BAD_LINE, BAD_COLUMN, BAD_VALUE = 5, "AirT", "21..4"

CONFIG = """\
root = "."
data_dir = "work"

[ingest]
bad_rows = "{bad_rows}"

[dialects.aws]
separator = "\\t"
skip_lines = 1
date_column = "Date"
time_column = "Time"
date_order = "dmy"
stamp_zone = "local"
missing = ["", "-"]

[dialects.aws.columns]
AirT = {{ variable = "air_temp_c", unit = "degC" }}
WindSpd = {{ variable = "wind_speed_ms", unit = "km/h" }}
"""

SITE_TABLE = """
[[sites]]
id = "{id}"
name = "{name}"
timezone = "Australia/Melbourne"
interval = "30min"

[sites.weather]
files = ["{pattern}"]
dialect = "aws"
"""


def write_config(folder: Path, bad_rows: str = "reject", files: dict[str, str] | None = None,
                 extra: str = "") -> Path:
    """A configuration with one site per entry of ``files`` (site id -> file text)."""
    files = {SITE: GOOD_FILE} if files is None else files
    text = CONFIG.format(bad_rows=bad_rows) + extra
    for site_id, content in files.items():
        path = folder / "raw" / site_id / "aws.txt"
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(content, encoding="utf-8")
        text += SITE_TABLE.format(id=site_id, name=f"Lake {site_id}", pattern=f"raw/{site_id}/*.txt")
    config = folder / "site.toml"
    config.write_text(text, encoding="utf-8")
    return config


def outputs(folder: Path, site_id: str = SITE) -> dict[str, Path]:
    out = folder / "work" / site_id
    return {"series": out / "weather.parquet", "rejects": out / "weather_rejects.csv"}


def files_under(folder: Path, cache: bool = False) -> list[str]:
    """Every file under ``folder``, hidden temporary files included, but the site's lock file
    (``.run.lock``, taken by every command that writes for a site); parsed raw files kept in a
    site's ``cache/`` folder only with ``cache=True``."""
    if not folder.exists():
        return []
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*")
                  if p.is_file() and p.name != ".run.lock" and (cache or p.parent.name != "cache"))


CLEAN_FILES = ["ingest_summary.json", "weather.parquet", "weather_rejects.csv"]
"""What ingest writes for a site without lab files (besides its cache of parsed files)."""


def one_sentence(stderr: str) -> str:
    lines = stderr.strip().splitlines()
    assert len(lines) == 1, stderr
    assert lines[0].startswith("cyanorisk: ")
    return lines[0]


def test_ingest_writes_series_and_rejects_and_prints_a_summary(tmp_path, capsys):
    config = write_config(tmp_path)
    assert main(["ingest", "--config", str(config)]) == 0
    out = capsys.readouterr().out
    paths = outputs(tmp_path)
    assert files_under(tmp_path / "work") == [f"{SITE}/{name}" for name in CLEAN_FILES]
    # The series is what the library gives for the same files and dialect.
    cfg = load_config(config)
    want, _ = read_weather(tmp_path / "raw" / SITE / "aws.txt", cfg.dialects["aws"], "30min",
                           "Australia/Melbourne", bad_rows="reject")
    got = pd.read_parquet(paths["series"])
    pd.testing.assert_frame_equal(got, want, check_exact=True)
    # 00:00 local on 1 January 2024 is 13:00 UTC the day before (AEDT, UTC+11); four intervals.
    assert got.index[0] == pd.Timestamp("2023-12-31 13:00", tz="UTC")
    assert len(got) == 4
    rejects = pd.read_csv(paths["rejects"], keep_default_na=False)
    assert rejects[["line", "column", "reason"]].to_dict("records") == [
        {"line": BAD_LINE, "column": BAD_COLUMN, "reason": "bad_number"}]
    assert f"Lake {SITE} ({SITE})" in out
    assert ("rows read 5: kept 3, identical duplicates merged 1, conflicting duplicates 0, "
            "off-grid 0, rejected 1") in out
    assert f"wrote {paths['series']}" in out
    assert f"wrote {paths['rejects']}" in out


def test_ingest_json_is_valid_and_its_row_accounting_balances(tmp_path, capsys):
    config = write_config(tmp_path)
    assert main(["ingest", "--config", str(config), "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)  # stdout holds the JSON and nothing else
    assert [s["site_id"] for s in summary] == [SITE]
    rows = summary[0]["weather"]["rows"]
    assert rows["read"] == (rows["kept"] + rows["duplicates_identical"]
                            + rows["duplicates_conflicting"] + rows["off_grid"] + rows["rejected"])
    assert rows == GOOD_ACCOUNT
    assert summary[0]["weather"]["ledger_by_reason"] == {"bad_number": 1}
    assert summary[0]["outputs"] == [str(p) for p in outputs(tmp_path).values()]


def test_bad_row_with_stop_policy_exits_1_naming_file_line_and_column(tmp_path, capsys):
    config = write_config(tmp_path, bad_rows="stop")
    assert main(["ingest", "--config", str(config)]) == 1
    captured = capsys.readouterr()
    message = one_sentence(captured.err)
    assert str(tmp_path / "raw" / SITE / "aws.txt") in message
    assert f"line {BAD_LINE}" in message
    assert f"column '{BAD_COLUMN}'" in message
    assert f"'{BAD_VALUE}'" in message
    assert captured.out == ""
    assert files_under(tmp_path / "work") == []  # no output, half-written or temporary


def test_a_bad_row_on_one_site_stops_that_site_only(tmp_path, capsys):
    # Sites are independent: the bad site is told in one sentence and writes nothing, the
    # others are ingested, and the exit status says that a site failed.
    config = write_config(tmp_path, bad_rows="stop",
                          files={"alpha": GOOD_FILE, "beta": GOOD_FILE.replace("21..4", "21.4")})
    assert main(["ingest", "--config", str(config)]) == 1
    captured = capsys.readouterr()
    message = one_sentence(captured.err)
    assert str(tmp_path / "raw" / "alpha" / "aws.txt") in message
    assert f"line {BAD_LINE}" in message
    assert files_under(tmp_path / "work") == [f"beta/{name}" for name in CLEAN_FILES]
    assert all(name.startswith("beta/") for name in files_under(tmp_path / "work", cache=True))
    assert "Lake beta (beta)" in captured.out and "Lake alpha" not in captured.out


def test_failed_write_leaves_earlier_outputs_untouched_and_no_temporary_files(tmp_path, capsys,
                                                                             monkeypatch):
    config = write_config(tmp_path)
    assert main(["ingest", "--config", str(config)]) == 0
    paths = outputs(tmp_path)
    before = {k: p.read_bytes() for k, p in paths.items()}
    capsys.readouterr()
    # New data arrives; the disk fills while the rejects ledger is written (after the series).
    (tmp_path / "raw" / SITE / "aws.txt").write_text(
        GOOD_FILE + "01/01/2024\t02:00\t22.0\t9\n", encoding="utf-8")

    def disk_full(self, path, *args, **kwargs):
        raise OSError(28, "No space left on device", str(path))

    monkeypatch.setattr(pd.DataFrame, "to_csv", disk_full)
    assert main(["ingest", "--config", str(config)]) == 1
    message = one_sentence(capsys.readouterr().err)
    assert "No space left on device" in message
    assert files_under(tmp_path / "work") == [f"{SITE}/{name}" for name in CLEAN_FILES]
    assert {k: p.read_bytes() for k, p in paths.items()} == before


@pytest.mark.parametrize(("edit", "key"), [
    (lambda t: t.replace('timezone = "Australia/Melbourne"', 'timezone = "Europe/Atlantis"'),
     "sites[0].timezone"),
    (lambda t: t.replace('separator = "\\t"', 'seperator = "\\t"'), "dialects.aws.seperator"),
    (lambda t: t.replace('bad_rows = "reject"', 'bad_rows = "ignore"'), "ingest.bad_rows"),
    (lambda t: t.replace('interval = "30min"', 'interval = "7min"'), "sites[0].interval"),
    (lambda t: t.replace('files = ["raw/', 'files = ["nowhere/'), "sites[0].weather.files"),
    (lambda t: t.replace('dialect = "aws"', 'dialect = "logger"'), "sites[0].weather.dialect"),
])
def test_configuration_error_exits_2_naming_the_key(tmp_path, capsys, edit, key):
    config = write_config(tmp_path)
    config.write_text(edit(config.read_text(encoding="utf-8")), encoding="utf-8")
    assert main(["ingest", "--config", str(config)]) == 2
    captured = capsys.readouterr()
    message = one_sentence(captured.err)
    assert f"{config}: key '{key}'" in message
    assert captured.out == ""
    assert files_under(tmp_path / "work") == []


def test_missing_configuration_file_exits_2(tmp_path, capsys):
    missing = tmp_path / "nope.toml"
    assert main(["check", "--config", str(missing)]) == 2
    assert one_sentence(capsys.readouterr().err) == f"cyanorisk: {missing}: no such configuration file"


def test_check_validates_configuration_and_file_layout(tmp_path, capsys):
    # two hours of weather and no lab: the files are fine, but nothing can be trained yet
    config = write_config(tmp_path)
    assert main(["check", "--config", str(config)]) == 3
    out = capsys.readouterr().out
    assert f"Lake {SITE} ({SITE})\n  weather: 1 file(s), dialect 'aws', zone " \
           "Australia/Melbourne, interval 30 min" in out
    assert "aws.txt: 5 rows parsed, 1 unreadable" in out
    assert "(bad_number 1); the first, " in out and "line 5, column 'AirT'" in out
    assert "aws.txt: stamps assumed to mark the start of the interval" in out  # an assumption
    assert "verdict: ingest can run; train, backtest and the outlook cannot yet" in out
    assert out.rstrip().endswith(f"{config}: configuration is valid; some site cannot train "
                                 "yet (see above)")
    assert not (tmp_path / "work").exists()  # check writes nothing


def test_check_names_an_undeclared_column(tmp_path, capsys):
    config = write_config(tmp_path, files={SITE: GOOD_FILE.replace("WindSpd", "Gust")})
    assert main(["check", "--config", str(config)]) == 1
    out = capsys.readouterr().out
    errors = out.split("  errors:\n", 1)[1].splitlines()[0]
    assert errors.startswith(f"    - {tmp_path / 'raw' / SITE / 'aws.txt'}, line 2, column "
                             "'Gust': ")  # the header line
    assert "verdict: not ready: 1 error(s)" in out


def test_demo_runs_end_to_end(tmp_path, capsys):
    config = tmp_path / "demo.toml"
    text = embedded_demo_text()
    assert re.search(r'(?m)^root = "\.\."', text)
    config.write_text(re.sub(r'(?m)^root = "\.\."', 'root = "."', text), encoding="utf-8")
    assert main(["demo", "--config", str(config), "--years", "1"]) == 0
    out = capsys.readouterr().out
    exports = sorted((tmp_path / "demo_data" / "tallowbark" / "weather").glob("*.txt"))
    # One export per calendar year (demo.write_demo): the year before demo.END
    # (2025-01-14 06:00 local) spans two.
    assert [p.name for p in exports] == ["tallowbark_aws_2024.txt", "tallowbark_aws_2025.txt"]
    assert f"demo: wrote {len(exports)} weather export(s)" in out
    assert "Tallowbark Reservoir (tallowbark): weather from" in out
    # The summary's weather row count equals the data lines in the exports (title and header
    # excluded, blank lines are not rows).
    data_lines = sum(sum(1 for line in p.read_text("utf-8").splitlines()[2:] if line.strip())
                     for p in exports)
    read = int(re.search(r"(?m)^  rows read ([\d,]+):", out).group(1).replace(",", ""))
    assert read == data_lines
    written = re.findall(r"(?m)^  wrote (.+)$", out)
    assert str(tmp_path / "work" / "tallowbark" / "weather.parquet") in written
    assert [w for w in written if not Path(w).is_file()] == []
    series = pd.read_parquet(tmp_path / "work" / "tallowbark" / "weather.parquet")
    # One year back from 2025-01-14 06:00 AEDT (UTC+11) is 2024-01-14 06:00 AEDT: 366 days of
    # half-hours, 2024 being a leap year (demo.demo_window).
    assert series.index[0] == pd.Timestamp("2024-01-13 19:00", tz="UTC")
    assert len(series) == 366 * 48
    steps = np.diff(series.index.asi8)
    assert (steps == pd.Timedelta("30min").value).all()
    # The demo writes a few rows mangled by hand (demo.logger_export): they reach the ledger.
    rejects = pd.read_csv(tmp_path / "work" / "tallowbark" / "weather_rejects.csv")
    assert {"bad_date", "bad_time", "bad_number"} <= set(rejects["reason"])


def run_program(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "cyanorisk.cli", *args], capture_output=True,
                          text=True, timeout=120, check=False)


def test_real_program_ingests_and_exits_0(tmp_path):
    config = write_config(tmp_path)
    done = run_program("ingest", "--config", str(config), "--json")
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)[0]["weather"]["rows"] == GOOD_ACCOUNT
    assert all(p.is_file() for p in outputs(tmp_path).values())


def test_real_program_exits_1_on_a_bad_row_with_stop_policy(tmp_path):
    config = write_config(tmp_path, bad_rows="stop")
    done = run_program("ingest", "--config", str(config))
    assert done.returncode == 1
    message = one_sentence(done.stderr)
    assert f"line {BAD_LINE}, column '{BAD_COLUMN}'" in message
    assert files_under(tmp_path / "work") == []


def test_check_reads_the_lab_sheets_too(demo_site, tmp_path, capsys):
    config = demo_site.write_config(tmp_path / "site.toml")
    assert main(["check", "--config", str(config)]) == 0
    out = capsys.readouterr().out
    assert re.search(r"lab: \d+ file\(s\), layout 'merrin_lab' \(wide\)", out)
    assert re.search(r"tallowbark_lab\.csv: [\d,]+ rows parsed, \d+ unreadable, [\d,]+ record", out)
    # a layout naming a column the sheets lack is refused, naming file, header line and column
    text = config.read_text(encoding="utf-8").replace('sample_id_column = "Sample"',
                                                      'sample_id_column = "Sample No"')
    config.write_text(text, encoding="utf-8")
    assert main(["check", "--config", str(config)]) == 1
    out = capsys.readouterr().out
    assert re.search(r"(?m)^    - \S+tallowbark_lab\S*\.csv, line 2, column 'Sample No': the "
                     r"layout names column 'Sample No' but the header has .+$", out)
