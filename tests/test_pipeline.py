"""The site pipeline and the package's shape: layers that import one way, commands that answer
at once, the clean-data cache per raw file, and the public API.

Import checks run in a fresh interpreter (``subprocess``), since this test process has long
imported everything.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import cyanorisk
from cyanorisk.config import load_config
from cyanorisk.pipeline import SitePipeline
from cyanorisk.pipeline import clean as clean_module

CORE = ["cyanorisk.variables", "cyanorisk.units", "cyanorisk.compass", "cyanorisk.drivers",
        "cyanorisk.features", "cyanorisk.align", "cyanorisk.levels", "cyanorisk.model",
        "cyanorisk.spec", "cyanorisk.training", "cyanorisk.forecast", "cyanorisk.verify",
        "cyanorisk.backtest", "cyanorisk.tuning"]
"""The core: pure computation that knows no configuration file (DESIGN.md, Package layout)."""
HEAVY = ["pandas", "numpy", "statsmodels", "scipy", "matplotlib", "sqlalchemy", "apscheduler",
         "pyarrow"]


def imported_by(code: str) -> set[str]:
    """Modules a fresh interpreter has imported after running ``code`` (from -X importtime)."""
    done = subprocess.run([sys.executable, "-X", "importtime", "-c", code], capture_output=True,
                          text=True, timeout=120, check=True)
    names = set()
    for line in done.stderr.splitlines():
        if line.startswith("import time:") and "|" in line:
            names.add(line.rsplit("|", 1)[1].strip())
    assert names, done.stderr[:500]  # importtime did report
    return names


def test_the_core_imports_no_configuration_and_no_orchestrator():
    names = imported_by("import " + ", ".join(CORE))
    assert set(CORE) <= names
    outside = sorted(n for n in names if n.split(".")[:2] in (["cyanorisk", "config"],
                                                              ["cyanorisk", "pipeline"],
                                                              ["cyanorisk", "service"],
                                                              ["cyanorisk", "report"],
                                                              ["cyanorisk", "cli"]))
    assert outside == []


def test_the_core_reads_no_clock_and_touches_no_file_by_itself():
    # no orchestration library below the pipeline: no scheduler, no store, no plotting
    names = imported_by("import " + ", ".join(CORE))
    assert not {"apscheduler", "sqlalchemy", "matplotlib", "statsmodels"} & names


@pytest.mark.parametrize("argv", [["--version"], ["--help"], ["report", "--help"]])
def test_version_and_help_import_nothing_heavy(argv):
    code = ("import sys\nfrom cyanorisk.cli import main\n"
            f"try:\n    main({argv!r})\nexcept SystemExit:\n    pass\n")
    names = imported_by(code)
    assert "cyanorisk.cli" in names
    assert sorted(set(HEAVY) & names) == []


def test_python_dash_m_cyanorisk_answers_with_the_version():
    done = subprocess.run([sys.executable, "-m", "cyanorisk", "--version"], capture_output=True,
                          text=True, timeout=60, check=False)
    assert (done.returncode, done.stdout) == (0, f"cyanorisk {cyanorisk.__version__}\n")


def test_every_public_name_resolves():
    for name in cyanorisk.__all__:
        assert getattr(cyanorisk, name) is not None, name
    assert (Path(cyanorisk.__file__).parent / "py.typed").is_file()
    with pytest.raises(AttributeError, match="no attribute 'nothing_here'"):
        cyanorisk.nothing_here  # noqa: B018


# ---------------------------------------------------------------------------------------------
# The clean-data cache: per raw file, by content hash
# ---------------------------------------------------------------------------------------------

@pytest.fixture
def own_copy(demo_site, tmp_path):
    """A configuration reading a copy of the demo's raw files, with its own data folder."""
    out = demo_site.config.demo.out_dir
    shutil.copytree(out, tmp_path / out.relative_to(demo_site.root))
    path = demo_site.write_config(tmp_path / "site.toml", data_dir=tmp_path / "work")
    text = path.read_text(encoding="utf-8")
    path.write_text(text.replace(f'root = "{demo_site.root.as_posix()}"',
                                 f'root = "{tmp_path.as_posix()}"'), encoding="utf-8")
    return path


@pytest.fixture
def parses(monkeypatch) -> list[str]:
    """Names of the raw files the pipeline parsed (weather and lab), in order."""
    calls: list[str] = []
    for name in ("parse_weather_file", "parse_sample_file"):
        real = getattr(clean_module, name)

        def counting(path, *args, _real=real, **kwargs):
            calls.append(Path(path).name)
            return _real(path, *args, **kwargs)

        monkeypatch.setattr(clean_module, name, counting)
    return calls


def pipeline_of(path: Path) -> SitePipeline:
    config = load_config(path)
    return SitePipeline.of(config, config.sites[0])


def test_unchanged_raw_files_reuse_the_clean_tables(own_copy, parses, demo_site):
    first = pipeline_of(own_copy).clean()
    n_files = len(demo_site.site.weather.files) + len(demo_site.site.samples.files)
    assert (first.reused, len(parses)) == (False, n_files)
    again = pipeline_of(own_copy).clean()
    assert again.reused and len(parses) == n_files  # nothing parsed a second time
    pd.testing.assert_frame_equal(again.weather, first.weather, check_exact=True)
    pd.testing.assert_frame_equal(again.totals, first.totals, check_exact=True)
    assert again.summary["weather"] == first.summary["weather"]
    # the clean tables equal those of the session, made from the same bytes elsewhere
    pd.testing.assert_frame_equal(first.weather, demo_site.weather, check_exact=True)


def test_an_appended_logger_file_is_the_only_one_parsed_again(own_copy, parses):
    first = pipeline_of(own_copy).clean()
    weather = pipeline_of(own_copy).site.weather.files
    last = weather[-1]
    text = last.read_text(encoding="utf-8")
    last.write_text(text + text.splitlines(keepends=True)[-1], encoding="utf-8")  # a repeat
    parses.clear()
    second = pipeline_of(own_copy).clean()
    assert parses == [last.name]
    assert not second.reused
    rows = second.summary["weather"]["rows"]
    assert rows["read"] == first.summary["weather"]["rows"]["read"] + 1
    assert rows["duplicates_identical"] == first.summary["weather"]["rows"]["duplicates_identical"] + 1
    pd.testing.assert_frame_equal(second.weather, first.weather, check_exact=True)
    # the cache keeps only the parses of the files as they are now
    cache = pipeline_of(own_copy).workspace.cache
    assert len(list(cache.glob("weather-*.parquet"))) == len(weather)


def test_a_changed_setting_parses_every_file_again(own_copy, parses, demo_site):
    pipeline_of(own_copy).clean()
    text = own_copy.read_text(encoding="utf-8")
    own_copy.write_text(text.replace('missing = ["", "-"]', 'missing = ["", "-", "--"]'),
                        encoding="utf-8")
    parses.clear()
    again = pipeline_of(own_copy).clean()
    assert not again.reused
    assert sorted(parses) == sorted(p.name for p in demo_site.site.weather.files)  # lab files kept


def test_a_changed_unit_in_the_configuration_makes_new_clean_tables(own_copy, demo_site):
    # The clean tables depend on the settings that shaped them: a wind unit corrected from
    # km/h to m/s must not leave tables made under the old one.
    first = pipeline_of(own_copy).clean()
    text = own_copy.read_text(encoding="utf-8")
    own_copy.write_text(text.replace('WindSpd = { variable = "wind_speed_ms", unit = "km/h" }',
                                     'WindSpd = { variable = "wind_speed_ms", unit = "m/s" }'),
                        encoding="utf-8")
    again = pipeline_of(own_copy).clean()
    assert not again.reused
    # 1 km/h = 1000 m / 3600 s (SI): read as m/s, every speed is 3.6 times what it was
    ratio = (again.weather["wind_speed_ms"] / first.weather["wind_speed_ms"]).dropna()
    ratio = ratio[first.weather["wind_speed_ms"].reindex(ratio.index) > 0]
    assert len(ratio) > 1000
    np.testing.assert_allclose(ratio.to_numpy(), 3.6, rtol=1e-9)


def test_the_ingest_summary_is_kept_beside_the_clean_tables(demo_site):
    summary = json.loads(demo_site.pipeline.workspace.ingest_summary.read_text(encoding="utf-8"))
    assert summary == {k: v for k, v in demo_site.clean.summary.items() if k != "reused"}
    rows = summary["weather"]["rows"]
    assert rows["read"] == sum(v for k, v in rows.items() if k != "read")  # the account balances


def test_the_next_days_run_reuses_the_clean_tables_when_nothing_was_late(own_copy, parses):
    config = load_config(own_copy)
    site = config.sites[0]
    first = SitePipeline.of(config, site, run_day=pd.Timestamp("2031-05-01").date()).clean()
    assert first.summary["dates"] == {"earliest": "1900-01-01", "latest": "2031-05-02",
                                      "after_latest": 0}
    parses.clear()
    later = SitePipeline.of(config, site, run_day=pd.Timestamp("2031-05-02").date()).clean()
    assert later.reused and parses == []


def test_a_run_day_inside_the_record_refuses_what_comes_after_it(own_copy):
    config = load_config(own_copy)
    site = config.sites[0]
    full = SitePipeline.of(config, site, run_day=pd.Timestamp("2031-05-01").date()).clean()
    end = pd.Timestamp(full.summary["weather"]["end_utc"])
    day = (end - pd.Timedelta(days=10)).date()
    cut = SitePipeline.of(config, site, run_day=day).clean()
    assert not cut.reused and cut.summary["dates"]["after_latest"] > 0
    rejects = pd.read_csv(SitePipeline.of(config, site).workspace.weather_rejects)
    late = rejects[rejects["reason"] == "implausible_date"]
    assert len(late) and late["message"].str.contains("the latest plausible date").all()
    assert cut.weather.index.max() < pd.Timestamp(day, tz="UTC") + pd.Timedelta(days=2)
    # back to today: the refused rows come back (the tables of the later day are rebuilt)
    again = SitePipeline.of(config, site, run_day=pd.Timestamp("2031-05-01").date()).clean()
    assert not again.reused and again.summary["dates"]["after_latest"] == 0
    pd.testing.assert_frame_equal(again.weather, full.weather, check_exact=True)


def test_lab_sheets_that_never_name_the_site_are_refused_with_the_alias_fix(own_copy):
    from cyanorisk.errors import IngestError

    text = own_copy.read_text(encoding="utf-8")
    renamed = text.replace('id = "tallowbark"', 'id = "tallow"')
    own_copy.write_text(renamed, encoding="utf-8")
    with pytest.raises(IngestError) as info:
        pipeline_of(own_copy).clean()
    message = str(info.value)
    assert "column 'Site'" in message and "no sample names site 'tallow'" in message
    assert "'tallowbark'" in message and 'site_aliases = ["tallowbark"]' in message
    own_copy.write_text(renamed.replace('layout = "merrin_lab"',
                                        'layout = "merrin_lab"\nsite_aliases = ["tallowbark"]'),
                        encoding="utf-8")
    clean = pipeline_of(own_copy).clean()
    assert len(clean.totals) and set(clean.totals["site_id"]) == {"tallow"}


def test_the_ingest_summary_dates_samples_by_the_sites_local_day(demo_site):
    # A sample taken at 10:00 in Melbourne is 23:00 UTC the day before: the summary says the
    # day the lab wrote, converted by pandas (IANA tz database) as the reference.
    from cyanorisk.report.ingest_summary import summary_text

    tz = demo_site.site.timezone
    first = demo_site.totals["sampled_at"].min().tz_convert(tz).date()
    last = demo_site.totals["sampled_at"].max().tz_convert(tz).date()
    assert f"samples, {first} to {last} (local)" in summary_text(demo_site.clean.summary)
