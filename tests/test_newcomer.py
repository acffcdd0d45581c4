"""A newcomer's path on real weather, from raw files to a first report, as the README tells it:
``init`` drafts a configuration, only its marked blanks are filled in, then ``check``,
``ingest``, ``train``, ``backtest`` and ``report`` succeed, and the clean series matches a direct
reading of the file.

The weather is the hourly typical meteorological year that pvlib ships, ``723170TYA.CSV``
(Greensboro, NC): a station line above the header, month-first dates, hour-ending stamps from
01:00 to 24:00 in fixed local standard time (UTC-5; its station line says -5.0), no water
temperature. A backtest needs seasons before the one it replays, so the test writes the same
year three times as three calendar years' exports (2021-2023), each a copy of the file with
only the year of its dates changed. The lab sheet, long layout in cells per litre, is written
for the test from the file's temperatures (invented data, as the rules allow for evaluation
scenarios); everything checked against it is computed here, not stored.

Outside sources: the file itself (read with the standard library), and its format as pvlib's
``read_tmy3`` reads it (hour-ending local standard time; Wilcox & Marion 2008, NREL/TP-581-43156,
from memory); 1 L = 1000 mL (SI); 24:00 ends a day (ISO 8601:2000 section 5.3.2).
"""

from __future__ import annotations

import csv
import json
import re
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.cli import main
from cyanorisk.config import load_config
from cyanorisk.pipeline import SitePipeline

pytest.importorskip("pvlib")

YEARS = (2021, 2022, 2023)
FILLS = {"name": '"Greensboro test pond"', "timezone": '"Etc/GMT+5"', "use": '"drinking"',
         "authority": '"the county health department"', "scheme": '"who1999_drinking"'}
"""The only edits a newcomer makes: the site details the files cannot give."""


@pytest.fixture(scope="module")
def raw_rows() -> tuple[str, list[str], list[list[str]]]:
    path = Path(str(resources.files("pvlib") / "data" / "723170TYA.CSV"))
    if not path.is_file():
        pytest.skip("this pvlib does not ship 723170TYA.CSV")
    with open(path, newline="", encoding="utf-8") as fh:
        station = fh.readline()
        reader = csv.reader(fh)
        header = next(reader)
        return station, header, list(reader)


def _exports(folder: Path, raw) -> list[Path]:
    station, header, rows = raw
    paths = []
    for year in YEARS:
        path = folder / f"723170TYA_{year}.CSV"
        with open(path, "w", newline="", encoding="utf-8") as fh:
            fh.write(station)
            writer = csv.writer(fh, lineterminator="\r\n")
            writer.writerow(header)
            for r in rows:
                writer.writerow([r[0][:6] + str(year)] + r[1:])
        paths.append(path)
    return paths


def _hourly_air(raw) -> pd.Series:
    """Air temperature [degC] from the file, labelled by the start of each hour in UTC: the row
    stamped h:00 local standard time (UTC-5) reports the hour before it."""
    _, header, rows = raw
    k_date, k_time = header.index("Date (MM/DD/YYYY)"), header.index("Time (HH:MM)")
    k_air = header.index("Dry-bulb (C)")
    parts = []
    for year in YEARS:
        ends = [pd.Timestamp(f"{year}-{r[k_date][:2]}-{r[k_date][3:5]}")
                + pd.Timedelta(hours=int(r[k_time][:2])) for r in rows]
        start_utc = pd.DatetimeIndex(ends) - pd.Timedelta(hours=1) + pd.Timedelta(hours=5)
        parts.append(pd.Series([float(r[k_air]) for r in rows],
                               index=start_utc.tz_localize("UTC")))
    return pd.concat(parts)


def _lab_sheet(path: Path, air: pd.Series) -> None:
    """Weekly samples at 10:00 local, long layout, counts in cells/L, driven by the warmth of
    the week before (invented for the test)."""
    rng = np.random.default_rng(7)
    daily = air.resample("1D").mean()
    week = daily.rolling(7, min_periods=5).mean()
    days = pd.date_range(f"{YEARS[0]}-01-08", f"{YEARS[-1]}-12-29", freq="7D")
    lines = ["Sample ID,Site,Sampled,Time,Taxon,Count,Units"]
    for k, day in enumerate(days):
        warmth = float(week.asof(day.tz_localize("UTC")))
        log10_per_ml = 1.2 + 0.17 * (warmth - 5.0) + rng.normal(0, 0.35)
        per_l = 10 ** log10_per_ml * 1000
        count = "<100000" if per_l < 100_000 else f"{per_l:.0f}"
        sample = f"GP{k:04d}"
        lines.append(f"{sample},GP-1,{day:%Y-%m-%d},10:00,Microcystis aeruginosa,{count},cells/L")
        lines.append(f"{sample},GP-1,{day:%Y-%m-%d},10:00,Cryptomonas ovata,"
                     f"{rng.integers(200, 900) * 1000},cells/L")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def fill(text: str) -> str:
    for key, value in FILLS.items():
        text, n = re.subn(rf'(?m)^{key} = "FILL IN[^"\n]*"', f"{key} = {value}", text)
        assert n == 1, key
    return text


@pytest.fixture(scope="module")
def newcomer(raw_rows, tmp_path_factory):
    folder = tmp_path_factory.mktemp("newcomer")
    weather = _exports(folder, raw_rows)
    air = _hourly_air(raw_rows)
    lab = folder / "lab_results.csv"
    _lab_sheet(lab, air)
    config = folder / "site.toml"
    status = main(["init", "--weather", *map(str, weather), "--samples", str(lab),
                   "--out", str(config)])
    assert status == 0
    drafted = config.read_text(encoding="utf-8")
    config.write_text(fill(drafted), encoding="utf-8")
    return folder, config, drafted, air


COMMANDS = (["check"], ["ingest"], ["train", "--no-cv"], ["backtest"], ["report"])


@pytest.fixture(scope="module")
def ran(newcomer):
    """Each command of the README's order, run once: (command, status, stdout, stderr)."""
    import contextlib
    import io

    _, config, _, _ = newcomer
    out = []
    for command in COMMANDS:
        stdout, stderr = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
            status = main([command[0], "--config", str(config), *command[1:]])
        out.append((command[0], status, stdout.getvalue(), stderr.getvalue()))
    return out


def test_init_leaves_only_site_details_to_fill_in(newcomer):
    _, _, drafted, _ = newcomer
    blanks = re.findall(r'(?m)^(\w+) = "FILL IN', drafted)
    assert sorted(blanks) == sorted(FILLS)
    raw = __import__("tomllib").loads(fill(drafted))
    (dialect,) = raw["dialects"].values()
    # read from the files, not told: month-first, hour-ending, UTC-5 standard time
    assert (dialect["date_order"], dialect["stamp_marks"], dialect["stamp_zone"]) == (
        "mdy", "end", "-05:00")
    (layout,) = raw["sample_layouts"].values()
    assert layout["shape"] == "long"
    assert layout["detection_limit"] == "100000 cells/L"  # the sheet's own '<100000', in its unit


def test_the_commands_succeed_in_order(newcomer, ran):
    folder = newcomer[0]
    for command, status, out, err in ran:
        assert status == 0, (command, out[-2000:], err)
        # off a terminal the only thing on stderr is a progress line per site (or site-season)
        assert all(re.fullmatch(r"(backtest|run \S+): \S+ \w+ \(\d+/\d+\)", line)
                   for line in err.splitlines()), (command, err)
    backtest_err = ran[3][3]
    assert backtest_err.splitlines()[-1].endswith("(2/2)")  # two seasons of one site
    check_out = ran[0][2]
    assert "verdict: ready" in check_out and "can be replayed (2022 to 2023)" in check_out
    assert "backtest of seasons 2022-2023" in ran[3][2]
    assert list((folder / "reports").rglob("*.html"))


def test_the_station_without_water_temperature_is_estimated_and_said(newcomer, ran):
    _, config, _, _ = newcomer
    card = json.loads(next((config.parent / "models").glob("*.json")).read_text("utf-8"))
    card = card["body"]["card"]  # the model file: a checksummed body holding the model card
    assert card["substituted"] == {"water_temp_mean_c_7d": "water_temp_est_mean_c_7d"}
    report = json.loads(next((config.parent / "reports").rglob("*.json")).read_text("utf-8"))
    assert any("estimated from air temperature" in n for n in report["model"]["driver_notes"])


def test_the_clean_series_matches_the_file(newcomer, ran):
    _, config, _, air = newcomer
    cfg = load_config(config)
    clean = SitePipeline.of(cfg, cfg.sites[0]).clean()
    got = clean.weather["air_temp_c"]
    assert len(got) == len(air) == 3 * 8760
    np.testing.assert_allclose(got.reindex(air.index).to_numpy(), air.to_numpy(), atol=1e-9)
    assert clean.summary["weather"]["rows"]["rejected"] == 0


def test_init_never_writes_over_a_file_and_names_a_missing_one(newcomer, tmp_path, capsys):
    folder, config, _, _ = newcomer
    before = config.read_text(encoding="utf-8")
    weather = sorted(folder.glob("723170TYA_*.CSV"))
    assert main(["init", "--weather", str(weather[0]), "--out", str(config)]) == 2
    (line,) = capsys.readouterr().err.strip().splitlines()
    assert line.startswith(f"cyanorisk: {config}: a file is already there")
    assert config.read_text(encoding="utf-8") == before
    missing = tmp_path / "nowhere.csv"
    assert main(["init", "--weather", str(missing), "--out", str(tmp_path / "x.toml")]) == 1
    (line,) = capsys.readouterr().err.strip().splitlines()
    assert line.startswith(f"cyanorisk: {missing}") and not (tmp_path / "x.toml").exists()
