"""The daily job (cyanorisk.service.jobs.run_daily): idempotent, incremental, one failing site
does not stop another, crash-safe between the report files and the store, locked, clock-free,
and a level rise notifies once (to the outbox, and by e-mail to a local test SMTP server).

Every test runs on a copy of the demo configuration (tests/conftest.py ``demo_site``) with its own
data, reports and models folders in ``tmp_path``; tests that change input files also copy the demo
exports there. Time is injected: ``Clock`` hands out ISO 8601 instants from a counter.

Demo days used (8-year demo, seed of the demo configuration; each test asserts the levels it
relies on): on 2024-11-29 the level stated is below Vigilance; on 2024-11-30 and 2024-12-01 the
outlook raises it to Vigilance (WHO 1999 drinking-water scheme, cyanobacteria detected).
"""

from __future__ import annotations

import ast
import email
import email.policy
import inspect
import itertools
import json
import re
import shutil
import socket
import threading
from pathlib import Path

import pandas as pd
import pytest
from aiosmtpd.controller import Controller

from cyanorisk.config import load_config
from cyanorisk.forecast import STATUS_NONE
from cyanorisk.pipeline import site as site_module
from cyanorisk.service import jobs
from cyanorisk.service.jobs import RunLockedError, run_daily, sha256_of, site_lock
from cyanorisk.service.store import Store

SITE = "tallowbark"
LOW_DAY, RISE_DAY, NEXT_DAY = "2024-11-29", "2024-11-30", "2024-12-01"
LOW, ALERT1 = "below Vigilance", "Vigilance"
"""The level stated on LOW_DAY, and the level it rises to on RISE_DAY (the first level of the
scheme: the name ALERT1 is kept for what it does in these tests)."""
LAST_WEATHER_FILE = "tallowbark_aws_2025.txt"

SECOND_SITE = """
[[sites]]
id = "second"
name = "Second Pond"
timezone = "Australia/Melbourne"
use = "drinking"
interval = "30min"

[sites.weather]
files = ["{pattern}"]
dialect = "tallowbark_logger"
"""

THRESHOLDS = """\
seasons = "2018-2023"
rule = "test"

[warn_at]
"Vigilance" = 0.9
"""


class Clock:
    """An injected clock: one ISO 8601 instant per call, one second apart; remembers them."""

    def __init__(self) -> None:
        self.ticks = itertools.count()
        self.given: list[str] = []

    def __call__(self) -> str:
        i = next(self.ticks)
        stamp = f"2030-01-01T{i // 3600:02d}:{i // 60 % 60:02d}:{i % 60:02d}+00:00"
        self.given.append(stamp)
        return stamp


def make_config(tmp: Path, demo_site, *, copy_data: bool = False, extra: str = "") -> Path:
    """A copy of the demo configuration with data, reports and models (a copy of the fixture's
    model) under ``tmp``; with ``copy_data`` it reads a copy of the demo exports, too."""
    if not copy_data:  # the same raw files as the session's: start with its clean tables
        demo_site.seed(tmp / "work")
    models = tmp / "models"
    demo_site.copy_model(models, tmp / "work")
    path = demo_site.write_config(tmp / "cyanorisk.toml", data_dir=tmp / "work",
                                  reports_dir=tmp / "reports", models_dir=models)
    text = path.read_text(encoding="utf-8")
    if copy_data:
        out = demo_site.config.demo.out_dir
        shutil.copytree(out, tmp / out.relative_to(demo_site.root))
        text, n = re.subn(r'(?m)^root = "[^"]*"', f'root = "{tmp.as_posix()}"', text)
        assert n == 1
    path.write_text(text + extra, encoding="utf-8")
    return path


def weather_dir(tmp: Path) -> Path:
    return tmp / "demo_data" / SITE / "weather"


OVERVIEW_FILES = {"latest.html", "latest.json", "history.html", "history.csv"}
"""The pages every run rewrites beside the dated reports (see tests/test_overview.py)."""


def reports_of(config, site_id: str = SITE) -> dict[str, bytes]:
    """The dated reports of a site, by file name."""
    folder = config.reports_dir / site_id
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())
            if p.name not in OVERVIEW_FILES} if folder.exists() else {}


def report_path(paths: list[str], ext: str) -> str:
    (found,) = [p for p in paths if p.endswith("." + ext)]
    return found


def corrupt(path: Path) -> None:
    """Bytes that are not a logger export (what a failed download or a disk error leaves)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(b"\x00\xff\xfe garbage \x00\n" * 5)


def opened(config) -> Store:
    """The configuration's store, to use in a with-statement."""
    return Store(config.store_url)


@pytest.fixture
def count_ingests(monkeypatch) -> list[str]:
    """Site ids of the fresh ingests the site pipeline made (clean tables not reused)."""
    calls: list[str] = []
    real = site_module.clean_site

    def counting(site, workspace, digests, **kwargs):
        clean = real(site, workspace, digests, **kwargs)
        if not clean.reused:
            calls.append(site.id)
        return clean

    monkeypatch.setattr(site_module, "clean_site", counting)
    return calls


# ---------------------------------------------------------------------------------------------
# Idempotence and revisions
# ---------------------------------------------------------------------------------------------

def test_same_day_twice_issues_nothing_new(tmp_path, demo_site):
    config = load_config(make_config(tmp_path, demo_site))
    clock = Clock()
    first = run_daily(RISE_DAY, config, clock=clock)
    (o1,) = first.sites
    assert (first.status, o1.action, o1.revision, o1.level) == ("ok", "issued", 1, ALERT1)
    assert o1.reason == "first report for this day"
    files = reports_of(config)
    assert sorted(files) == [f"{SITE}_{RISE_DAY}.{ext}" for ext in ("html", "json", "txt")]
    stamps = {p: Path(p).stat().st_mtime_ns for p in o1.paths}
    outbox = sorted(p.name for p in config.outbox.iterdir())

    second = run_daily(RISE_DAY, config, clock=clock)
    (o2,) = second.sites
    assert (second.status, o2.action, o2.revision, o2.level) == ("ok", "unchanged", 1, ALERT1)
    assert o2.reason == "same inputs as the last revision"
    assert o2.notification is None
    assert o2.paths == o1.paths
    assert reports_of(config) == files  # byte for byte
    assert {p: Path(p).stat().st_mtime_ns for p in o1.paths} == stamps  # not even rewritten
    assert sorted(p.name for p in config.outbox.iterdir()) == outbox
    with opened(config) as store:
        assert [(r.as_of, r.revision) for r in store.reports(SITE)] == [(RISE_DAY, 1)]
        assert [(r["id"], r["as_of"], r["status"]) for r in store.runs()] == \
            [(first.run_id, RISE_DAY, "ok"), (second.run_id, RISE_DAY, "ok")]


def test_changed_weather_file_issues_revision_2(tmp_path, demo_site, count_ingests):
    path = make_config(tmp_path, demo_site, copy_data=True)
    config = load_config(path)
    clock = Clock()
    (o1,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o1.action, o1.revision) == ("issued", 1)
    assert count_ingests == [SITE]
    last = weather_dir(tmp_path) / LAST_WEATHER_FILE
    before = sha256_of(last)
    text = last.read_text(encoding="utf-8")
    assert text.endswith("\n")
    last.write_text(text + text.splitlines(keepends=True)[-1], encoding="utf-8")  # a repeated row

    config = load_config(path)
    (o2,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o2.action, o2.revision) == ("issued", 2)
    assert o2.reason == f"inputs changed: changed file {LAST_WEATHER_FILE}"
    assert count_ingests == [SITE, SITE]  # the changed file was ingested again
    with opened(config) as store:
        r1, r2 = store.reports(SITE, RISE_DAY)
    assert (r1.revision, r2.revision) == (1, 2)
    assert r2.reason == o2.reason
    assert r1.inputs["files"][str(last)] == before
    assert r2.inputs["files"][str(last)] == sha256_of(last)
    assert sha256_of(last) != before
    assert r1.fingerprint != r2.fingerprint


def test_changed_thresholds_issue_revision_2(tmp_path, demo_site, count_ingests):
    config = load_config(make_config(tmp_path, demo_site))
    clock = Clock()
    (o1,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o1.action, o1.revision, o1.level) == ("issued", 1, ALERT1)
    tuned = config.models_dir / f"{SITE}.thresholds.toml"
    tuned.write_text(THRESHOLDS, encoding="utf-8")

    (o2,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o2.action, o2.revision) == ("issued", 2)
    assert o2.reason == "inputs changed: thresholds changed"
    assert count_ingests == []  # no data file changed: the clean tables served both runs
    with opened(config) as store:
        r1, r2 = store.reports(SITE, RISE_DAY)
    assert r1.thresholds["warn_at"][ALERT1] == 0.5
    assert r2.thresholds["warn_at"][ALERT1] == 0.9
    assert str(tuned) in r2.thresholds["source"]
    assert r1.inputs["thresholds"] is None
    assert r2.inputs["thresholds"] == sha256_of(tuned)
    # the day's probability did not change, the level it raises did
    assert r2.probabilities == r1.probabilities
    assert (r1.level, r2.level, o2.level) == (ALERT1, LOW, LOW)
    doc = json.loads(Path(report_path(o2.paths, "json")).read_text(encoding="utf-8"))
    assert doc["forecast"]["level"] == LOW
    # the probability that raises warnings: within the warning horizon (14 days)
    f = doc["forecast"]
    assert 0.5 <= f["outlook"]["by_level"][ALERT1][f["warn_horizon_days"] - 1] < 0.9


def test_a_changed_authority_in_the_configuration_issues_revision_2(tmp_path, demo_site,
                                                                   count_ingests):
    # What a report says depends on the configuration too: a new authority must be re-issued.
    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    clock = Clock()
    (o1,) = run_daily(RISE_DAY, config, clock=clock).sites
    text = path.read_text(encoding="utf-8")
    old = config.sites[0].authority
    path.write_text(text.replace(f'authority = "{old}"', 'authority = "Merrin Falls Shire"'),
                    encoding="utf-8")
    config = load_config(path)
    assert config.sites[0].authority == "Merrin Falls Shire"
    (o2,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o1.revision, o2.action, o2.revision) == (1, "issued", 2)
    assert o2.reason == "inputs changed: site settings changed"
    assert count_ingests == []  # the clean tables do not depend on the authority
    assert "Merrin Falls Shire" in Path(report_path(o2.paths, "txt")).read_text(encoding="utf-8")


# ---------------------------------------------------------------------------------------------
# One failing site does not stop another
# ---------------------------------------------------------------------------------------------

def second_site(tmp_path: Path, problem: str) -> tuple[str, str]:
    """The second site's configuration table and the words its failure must name."""
    if problem == "missing model":  # the demo's exports, but no model was trained for it
        return SECOND_SITE.format(pattern="demo_data/tallowbark/weather/tallowbark_aws_*.txt"), \
            "no model for site 'second'"
    bad = tmp_path / "raw" / "second" / "second_aws.txt"
    corrupt(bad)
    return SECOND_SITE.format(pattern=bad.as_posix()), "second_aws.txt"


@pytest.mark.parametrize("problem", ["missing model", "corrupt file"])
def test_a_failing_site_does_not_stop_another(tmp_path, demo_site, problem):
    extra, cause = second_site(tmp_path, problem)
    config = load_config(make_config(tmp_path, demo_site, extra=extra))
    assert [s.id for s in config.sites] == [SITE, "second"]
    clock = Clock()
    result = run_daily(RISE_DAY, config, clock=clock)
    good, bad = result.sites
    assert result.status == "partial"
    assert (good.site_id, good.action, good.revision, good.status, good.level) == \
        (SITE, "issued", 1, "assessed", ALERT1)
    assert (bad.site_id, bad.action, bad.revision, bad.status, bad.level) == \
        ("second", "failed", 1, STATUS_NONE, None)
    assert bad.notification is None
    # the failing site's report says so, with the reason
    doc = json.loads(Path(report_path(bad.paths, "json")).read_text(encoding="utf-8"))
    assert doc["status"] == STATUS_NONE
    assert doc["forecast"]["level"] is None
    assert cause in doc["status_reasons"][0]
    assert doc["headline"].startswith(f"No assessment today: {doc['status_reasons'][0]}. ")
    # what is known of the level in force is said: the second site has no lab files, and with
    # a corrupt weather file its data cannot be read at all
    assert doc["level"] is None
    assert ("No lab result is known for this site" if problem == "missing model"
            else "could not be read either") in doc["headline"]
    assert doc["headline"] in Path(report_path(bad.paths, "txt")).read_text(encoding="utf-8")
    good_doc = json.loads(Path(report_path(good.paths, "json")).read_text(encoding="utf-8"))
    assert (good_doc["status"], good_doc["forecast"]["level"]) == ("assessed", ALERT1)
    # the store records the failure
    with opened(config) as store:
        (run,) = store.runs()
        assert (run["id"], run["status"]) == (result.run_id, "partial")
        assert run["error"].startswith("second: ")
        assert SITE + ":" not in run["error"]
        (rec,) = store.reports("second")
        assert (rec.as_of, rec.revision, rec.status, rec.level, rec.run_id) == \
            (RISE_DAY, 1, STATUS_NONE, None, result.run_id)
        assert [(r.status, r.level) for r in store.reports(SITE)] == [("assessed", ALERT1)]

    # the same failure on the same day is not issued again
    again = run_daily(RISE_DAY, config, clock=clock)
    assert [(o.site_id, o.action, o.revision) for o in again.sites] == \
        [(SITE, "unchanged", 1), ("second", "failed", 1)]
    with opened(config) as store:
        assert len(store.reports()) == 2
        assert [r["status"] for r in store.runs()] == ["partial", "partial"]


def test_a_site_whose_files_match_nothing_fails_alone(tmp_path, demo_site):
    extra = SECOND_SITE.format(pattern="nowhere/*.txt")
    config = load_config(make_config(tmp_path, demo_site, extra=extra))
    good, bad = run_daily(RISE_DAY, config, clock=Clock()).sites
    assert (good.site_id, good.action, good.level) == (SITE, "issued", ALERT1)
    assert (bad.site_id, bad.action) == ("second", "failed")
    assert "key 'sites[1].weather.files'" in bad.reason and "no file matches" in bad.reason


def test_the_store_records_why_a_site_failed(tmp_path, demo_site):
    extra, cause = second_site(tmp_path, "missing model")
    config = load_config(make_config(tmp_path, demo_site, extra=extra))
    result = run_daily(RISE_DAY, config, clock=Clock())
    bad = result.sites[1]
    assert (bad.site_id, bad.action) == ("second", "failed")
    with opened(config) as store:
        error = store.runs()[-1]["error"]
    assert cause in error
    assert cause in bad.reason


def test_a_failed_rerun_keeps_the_days_report_and_names_what_changed(tmp_path, demo_site):
    path = make_config(tmp_path, demo_site, copy_data=True)
    clock = Clock()
    (o1,) = run_daily(RISE_DAY, load_config(path), clock=clock).sites
    assert (o1.action, o1.status, o1.level) == ("issued", "assessed", ALERT1)
    issued = {p: Path(p).read_bytes() for p in o1.paths}
    corrupt(weather_dir(tmp_path) / LAST_WEATHER_FILE)
    config = load_config(path)
    (o2,) = run_daily(RISE_DAY, config, clock=clock).sites
    # the rerun failed: the Vigilance report issued for the day stays, never downgraded
    assert (o2.action, o2.revision, o2.status, o2.level) == ("failed", 1, "assessed", ALERT1)
    assert "revision 1, stays" in o2.reason
    assert "file gone" not in o2.reason  # every file is still there
    assert f"changed file {LAST_WEATHER_FILE}" in o2.reason
    assert {p: Path(p).read_bytes() for p in o1.paths} == issued
    with opened(config) as store:
        assert [r.revision for r in store.reports(SITE, RISE_DAY)] == [1]
        run = store.runs()[-1]
        assert run["status"] == "failed" and run["error"].startswith(f"{SITE}: ")
    # a day without a report of its own gets 'no assessment today', with the reason
    (o3,) = run_daily(NEXT_DAY, config, clock=clock).sites
    assert (o3.action, o3.revision, o3.status) == ("failed", 1, STATUS_NONE)


# ---------------------------------------------------------------------------------------------
# Crash between the report files and the store; the lock
# ---------------------------------------------------------------------------------------------

class Killed(BaseException):
    """The process killed: not an error any handler may catch and go on from."""


class CrashingRecord:
    """Store.record_report that dies once each time it is armed, as a kill would."""

    def __init__(self) -> None:
        self.real = Store.record_report
        self.armed = False
        self.lost: list = []

    def __call__(self, store: Store, report):
        if self.armed:
            self.armed = False
            self.lost.append(report)
            raise Killed("injected crash before the store was written")
        return self.real(store, report)


def assert_whole(config, paths: list[str], day: str) -> dict:
    """The report files of a day are all there, of one assessment, with no temporary left over."""
    assert sorted(Path(p).name for p in paths) == [f"{SITE}_{day}.{ext}" for ext in ("html", "json", "txt")]
    doc = json.loads(Path(report_path(paths, "json")).read_text(encoding="utf-8"))
    assert doc["as_of"] == day
    assert doc["headline"] in Path(report_path(paths, "txt")).read_text(encoding="utf-8")
    assert day in Path(report_path(paths, "html")).read_text(encoding="utf-8")
    assert [p.name for p in (config.reports_dir / SITE).iterdir() if p.name.endswith(".tmp")] == []
    return doc


def test_a_crash_between_files_and_store_is_repaired(tmp_path, demo_site, monkeypatch):
    config = load_config(make_config(tmp_path, demo_site))
    clock = Clock()
    crash = CrashingRecord()
    monkeypatch.setattr(Store, "record_report", lambda store, report: crash(store, report))
    (low,) = run_daily(LOW_DAY, config, clock=clock).sites
    assert (low.action, low.level) == ("issued", LOW)
    low_files = {p: Path(p).read_bytes() for p in low.paths}

    # 1. a crash on the first report of a day
    crash.armed = True
    with pytest.raises(Killed, match="injected crash"):
        run_daily(RISE_DAY, config, clock=clock)
    (lost,) = crash.lost
    assert lost.as_of == RISE_DAY
    assert {p: Path(p).read_bytes() for p in low.paths} == low_files  # the previous report: intact
    assert_whole(config, lost.paths, RISE_DAY)
    with opened(config) as store:
        assert store.reports(SITE, RISE_DAY) == []
        assert store.latest_report(SITE).as_of == LOW_DAY
    # the next run (the lock was released) repairs the record
    (o,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o.action, o.revision, o.level) == ("issued", 1, ALERT1)
    with opened(config) as store:
        (rec,) = store.reports(SITE, RISE_DAY)
    assert rec.paths == lost.paths
    assert assert_whole(config, rec.paths, RISE_DAY)["forecast"]["level"] == rec.level == ALERT1
    (eml,) = config.outbox.iterdir()  # one notice, though its report was issued twice
    assert eml.name.startswith(f"{SITE}_{RISE_DAY}_") and eml.suffix == ".eml"

    # 2. a crash on a new revision of the same day
    (config.models_dir / f"{SITE}.thresholds.toml").write_text(THRESHOLDS, encoding="utf-8")
    crash.armed = True
    with pytest.raises(Killed, match="injected crash"):
        run_daily(RISE_DAY, config, clock=clock)
    assert [r.as_of for r in crash.lost] == [RISE_DAY, RISE_DAY]
    assert_whole(config, rec.paths, RISE_DAY)
    with opened(config) as store:
        assert [r.revision for r in store.reports(SITE, RISE_DAY)] == [1]
    (o2,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o2.action, o2.revision, o2.reason) == ("issued", 2, "inputs changed: thresholds changed")
    with opened(config) as store:
        r1, r2 = store.reports(SITE, RISE_DAY)
    assert assert_whole(config, r2.paths, RISE_DAY)["forecast"]["level"] == r2.level == LOW
    assert {p: Path(p).read_bytes() for p in low.paths} == low_files


def test_a_site_held_by_another_run_is_locked_and_the_others_go_on(tmp_path, demo_site):
    extra, _ = second_site(tmp_path, "missing model")
    config = load_config(make_config(tmp_path, demo_site, extra=extra))
    first = config.sites[0]
    with site_lock(config, first) as lock:
        assert lock.path == config.data_dir / SITE / ".run.lock"
        result = run_daily(RISE_DAY, config, clock=Clock())
    outcomes = {o.site_id: o for o in result.sites}
    assert outcomes[SITE].action == "locked"
    assert "another cyanorisk run holds the lock" in outcomes[SITE].reason
    # the other site was tried (and failed for a reason of its own: it has no model)
    assert outcomes["second"].action == "failed" and "no model" in outcomes["second"].reason
    assert result.status == "failed"
    assert not (config.reports_dir / SITE).exists()  # nothing written for the held site
    with site_lock(config, first):  # and released with the holder
        pass


def test_ingest_respects_the_lock_a_run_takes(tmp_path, demo_site, capsys):
    from cyanorisk.cli import main

    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    with site_lock(config, config.sites[0]):
        assert main(["ingest", "--config", str(path)]) == 4
    (line,) = capsys.readouterr().err.strip().splitlines()
    assert line.startswith("cyanorisk: ") and "another cyanorisk run holds the lock" in line
    assert main(["ingest", "--config", str(path)]) == 0  # free again


def test_the_site_lock_holds_across_threads(tmp_path, demo_site):
    config = load_config(make_config(tmp_path, demo_site))
    site = config.sites[0]
    held, release, errors = threading.Event(), threading.Event(), []

    def holder():
        with site_lock(config, site):
            held.set()
            release.wait(10)

    thread = threading.Thread(target=holder)
    thread.start()
    try:
        assert held.wait(10)
        with pytest.raises(RunLockedError, match="another cyanorisk run holds the lock"):
            with site_lock(config, site):
                errors.append("entered")
    finally:
        release.set()
        thread.join(10)
    assert errors == []
    assert not thread.is_alive()


# ---------------------------------------------------------------------------------------------
# Incremental ingest
# ---------------------------------------------------------------------------------------------

NEW_FILE_ROWS = ("14/01/2025\t06:00\t21.0\t23.5\t5\t9\tS\t0.0\t61\t120\t1006.0\t12.6\n"
                 "14/01/2025\t06:30\t21.6\t23.5\t6\t10\tSSE\t0.0\t60\t180\t1006.1\t12.6\n")
"""Two readings after the demo record's last (2025-01-14 05:30 local), in the logger's layout."""


def test_unchanged_files_are_not_ingested_again(tmp_path, demo_site, count_ingests):
    path = make_config(tmp_path, demo_site, copy_data=True)
    config = load_config(path)
    clock = Clock()
    run_daily(RISE_DAY, config, clock=clock)
    assert count_ingests == [SITE]
    with opened(config) as store:
        known = store.files(SITE)
    assert sorted(Path(f["path"]).name for f in known) == sorted(p.name for p in config.sites[0].weather.files
                                                                 + config.sites[0].samples.files)

    (o,) = run_daily(NEXT_DAY, config, clock=clock).sites
    assert (o.action, o.revision, o.level) == ("issued", 1, ALERT1)
    assert count_ingests == [SITE]  # another day, the same files: no ingest
    with opened(config) as store:
        assert store.files(SITE) == known

    header = "".join((weather_dir(tmp_path) / LAST_WEATHER_FILE).read_text(encoding="utf-8")
                     .splitlines(keepends=True)[:2])
    new = weather_dir(tmp_path) / "tallowbark_aws_2026.txt"
    new.write_text(header + NEW_FILE_ROWS, encoding="utf-8")
    config = load_config(path)
    (o2,) = run_daily(NEXT_DAY, config, clock=clock).sites
    assert count_ingests == [SITE, SITE]  # a new file: ingested
    assert (o2.action, o2.revision) == ("issued", 2)
    assert o2.reason == "inputs changed: new file tallowbark_aws_2026.txt"
    with opened(config) as store:
        files = store.files(SITE)
    assert [f for f in files if f["path"] == str(new)] == [
        {"id": len(known) + 1, "site_id": SITE, "path": str(new), "sha256": sha256_of(new),
         "rows": files[-1]["rows"], "ingested_at": files[-1]["ingested_at"]}]
    assert files[-1]["ingested_at"] in clock.given
    (old,) = [f for f in known if f["path"] == str(weather_dir(tmp_path) / LAST_WEATHER_FILE)]
    assert files[-1]["rows"]["read"] == old["rows"]["read"] + 2  # the site's rows, with the new two
    weather = pd.read_parquet(config.data_dir / SITE / "weather.parquet")
    assert weather.index[-1] == pd.Timestamp("2025-01-13T19:00", tz="UTC")  # the half hour ending 06:30 AEDT


def test_a_removed_file_is_ingested_away(tmp_path, demo_site, count_ingests):
    path = make_config(tmp_path, demo_site, copy_data=True)
    day = "2025-01-10"
    clock = Clock()
    (o1,) = run_daily(day, load_config(path), clock=clock).sites
    assert o1.status == "assessed"
    (weather_dir(tmp_path) / LAST_WEATHER_FILE).unlink()  # the readings of January 2025 are gone
    config = load_config(path)
    (o2,) = run_daily(day, config, clock=clock).sites
    assert (o2.action, o2.revision) == ("issued", 2)
    assert o2.reason == f"inputs changed: file gone: {LAST_WEATHER_FILE}"
    assert count_ingests == [SITE, SITE]
    weather = pd.read_parquet(config.data_dir / SITE / "weather.parquet")
    assert weather.index[-1] < pd.Timestamp("2025-01-01", tz="UTC")
    assert o2.status == "insufficient data"  # the last weather is 9 days old at issue


# ---------------------------------------------------------------------------------------------
# Time is injected
# ---------------------------------------------------------------------------------------------

CLOCK_CALLS = {"now", "utcnow", "today", "time", "time_ns", "monotonic", "perf_counter", "localtime",
               "gmtime"}


def test_only_utc_clock_reads_the_system_clock_in_jobs():
    tree = ast.parse(inspect.getsource(jobs))
    readers = set()
    for func in (n for n in ast.walk(tree) if isinstance(n, ast.FunctionDef)):
        for call in (n for n in ast.walk(func) if isinstance(n, ast.Call)):
            name = call.func.attr if isinstance(call.func, ast.Attribute) else getattr(call.func, "id", "")
            if name in CLOCK_CALLS:
                readers.add(func.name)
    assert readers == {"utc_clock"}
    assert inspect.signature(run_daily).parameters["clock"].default is inspect.Parameter.empty


def test_run_daily_reads_no_system_clock(tmp_path, demo_site, monkeypatch):
    config = load_config(make_config(tmp_path, demo_site))

    def no_clock(*args, **kwargs):
        raise AssertionError("the daily job read the system clock")

    for name in ("now", "utcnow", "today"):
        monkeypatch.setattr(pd.Timestamp, name, staticmethod(no_clock))
    monkeypatch.setattr(jobs, "utc_clock", no_clock)
    with pytest.raises(AssertionError, match="system clock"):
        pd.Timestamp.now(tz="UTC")  # the trap is set
    clock = Clock()
    result = run_daily(RISE_DAY, config, clock=clock)
    assert [(o.action, o.status) for o in result.sites] == [("issued", "assessed")]
    with opened(config) as store:
        stamps = ([r["started_at"] for r in store.runs()] + [r["ended_at"] for r in store.runs()]
                  + [r.issued_at for r in store.reports()] + [f["ingested_at"] for f in store.files()])
    assert len(stamps) == 2 + 1 + len(config.sites[0].weather.files) + len(config.sites[0].samples.files)
    assert set(stamps) <= set(clock.given)
    assert clock.given[0] == "2030-01-01T00:00:00+00:00"


# ---------------------------------------------------------------------------------------------
# Notifications
# ---------------------------------------------------------------------------------------------

def outbox_files(config) -> list[str]:
    return sorted(p.name for p in config.outbox.iterdir()) if config.outbox.exists() else []


def test_a_level_rise_notifies_once(tmp_path, demo_site):
    config = load_config(make_config(tmp_path, demo_site))
    clock = Clock()
    (low,) = run_daily(LOW_DAY, config, clock=clock).sites
    assert (low.level, low.notification) == (LOW, None)
    assert outbox_files(config) == []

    (rise,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (rise.action, rise.level) == ("issued", ALERT1)
    eml = Path(rise.notification)
    assert eml.parent == config.outbox and eml.name.startswith(f"{SITE}_{RISE_DAY}_")
    assert outbox_files(config) == [eml.name]
    msg = email.message_from_bytes(eml.read_bytes(), policy=email.policy.default)
    assert msg["Subject"] == f"cyanorisk: Tallowbark Reservoir rose to {ALERT1} ({RISE_DAY})"
    assert msg["Message-ID"].startswith(f"<{SITE}.{RISE_DAY}.")  # a stable id to spot repeats
    with opened(config) as store:
        (notice,) = store.notices(SITE)
    assert (notice.state, notice.attempts, notice.path) == ("sent", 1, str(eml))
    body = msg.get_content()
    assert f"Previous report: {LOW}." in body
    assert "Merrin Falls Water and the regional health unit" in body  # who decides
    sent = eml.read_bytes()

    (again,) = run_daily(RISE_DAY, config, clock=clock).sites  # the same day again
    assert (again.action, again.notification) == ("unchanged", None)
    (same,) = run_daily(NEXT_DAY, config, clock=clock).sites  # the next day, the same level
    assert (same.action, same.level, same.notification) == ("issued", ALERT1, None)
    assert outbox_files(config) == [eml.name]
    assert eml.read_bytes() == sent


def test_losing_the_outlook_notifies_and_status_says_so(tmp_path, demo_site, capsys):
    from cyanorisk.cli import main

    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    clock = Clock()
    (first,) = run_daily("2025-01-14", config, clock=clock).sites  # the record's last day
    assert first.status == "assessed"
    stale = "2025-01-25"  # eleven days after the last weather reading: no outlook
    (late,) = run_daily(stale, config, clock=clock).sites
    assert late.status == "insufficient data"
    doc = json.loads(Path(report_path(late.paths, "json")).read_text(encoding="utf-8"))
    assert (doc["level"], doc["level_basis"]) == (doc["in_force"]["level"], "lab")
    assert doc["level"] is not None  # the lab's level still stands
    msg = email.message_from_bytes(Path(late.notification).read_bytes(),
                                   policy=email.policy.default)
    # a long subject is folded onto the next line (RFC 5322, 2.2.3): compare it unfolded
    assert msg["Subject"].strip() == ("cyanorisk: Tallowbark Reservoir: insufficient data, no "
                                      f"outlook ({stale})")
    assert "Level in force from the lab" in msg.get_content()
    assert main(["run", "--config", str(path), "--as-of", stale]) == 3  # documented exit status
    capsys.readouterr()
    assert main(["status", "--config", str(path)]) == 0
    assert "status insufficient data" in capsys.readouterr().out


class Collector:
    """aiosmtpd handler that keeps every envelope it receives."""

    def __init__(self) -> None:
        self.envelopes: list = []

    async def handle_DATA(self, server, session, envelope):
        self.envelopes.append(envelope)
        return "250 Message accepted for delivery"


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def smtp_server():
    """A local SMTP server on 127.0.0.1 that collects what it is sent."""
    handler = Collector()
    controller = Controller(handler, hostname="127.0.0.1", port=free_port(), ready_timeout=10)
    controller.start()
    try:
        yield controller, handler
    finally:
        controller.stop()


def test_a_rise_is_mailed_to_the_configured_server(tmp_path, demo_site, smtp_server, monkeypatch):
    controller, handler = smtp_server
    service = (f'\n[service]\nsmtp_host = "127.0.0.1"\nsmtp_port = {controller.port}\n'
               'mail_from = "cyanorisk@example.org"\n'
               'mail_to = ["officer@example.org", "duty@example.org"]\n')
    config = load_config(make_config(tmp_path, demo_site, extra=service))
    assert (config.service.smtp_host, config.service.smtp_port) == ("127.0.0.1", controller.port)
    connections: list[tuple] = []
    real_connect = socket.create_connection

    def loopback_only(address, *args, **kwargs):
        connections.append(tuple(address))
        if address[0] != "127.0.0.1":
            raise OSError(f"the test refuses a connection to {address}")
        return real_connect(address, *args, **kwargs)

    monkeypatch.setattr(socket, "create_connection", loopback_only)  # what smtplib connects with
    clock = Clock()
    (o,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (o.action, o.level) == ("issued", ALERT1)
    assert o.notification is not None

    assert connections == [("127.0.0.1", controller.port)]
    (envelope,) = handler.envelopes
    assert envelope.mail_from == "cyanorisk@example.org"
    assert envelope.rcpt_tos == ["officer@example.org", "duty@example.org"]
    got = email.message_from_bytes(envelope.original_content, policy=email.policy.default)
    kept = email.message_from_bytes(Path(o.notification).read_bytes(), policy=email.policy.default)
    assert got["Subject"] == kept["Subject"]
    assert got["Subject"] == f"cyanorisk: Tallowbark Reservoir rose to {ALERT1} ({RISE_DAY})"
    assert got["To"] == "officer@example.org, duty@example.org"
    assert got.get_content().splitlines() == kept.get_content().splitlines()  # CRLF on the wire

    (again,) = run_daily(RISE_DAY, config, clock=clock).sites
    assert (again.action, again.notification) == ("unchanged", None)
    assert len(handler.envelopes) == 1
    assert len(connections) == 1



def test_an_undelivered_notice_is_shown_by_status_and_sent_by_the_next_run(
        tmp_path, demo_site, smtp_server, capsys):
    from cyanorisk.cli import main

    controller, handler = smtp_server
    closed = free_port()  # nothing listens here: the first delivery fails
    service = (f'\n[service]\nsmtp_host = "127.0.0.1"\nsmtp_port = {closed}\n'
               'mail_from = "cyanorisk@example.org"\nmail_to = ["officer@example.org"]\n')
    path = make_config(tmp_path, demo_site, extra=service)
    config = load_config(path)
    (o,) = run_daily(RISE_DAY, config, clock=Clock()).sites
    assert (o.action, o.level) == ("issued", ALERT1)  # the report stands though the mail failed
    with opened(config) as store:
        (notice,) = store.pending_notices(SITE)
    assert (notice.state, notice.attempts) == ("failed", 1)
    capsys.readouterr()
    assert main(["status", "--config", str(path)]) == 0
    out = capsys.readouterr().out
    assert "notice not delivered yet (failed, 1 attempt(s); last error:" in out
    assert f"rose to {ALERT1}" in out

    path.write_text(path.read_text(encoding="utf-8").replace(
        f"smtp_port = {closed}", f"smtp_port = {controller.port}"), encoding="utf-8")
    config = load_config(path)
    run_daily(NEXT_DAY, config, clock=Clock())  # the next run retries the outbox first
    (envelope,) = handler.envelopes
    got = email.message_from_bytes(envelope.original_content, policy=email.policy.default)
    kept = email.message_from_bytes(Path(notice.path).read_bytes(), policy=email.policy.default)
    assert got["Message-ID"] == kept["Message-ID"]  # the same message, not a new one
    with opened(config) as store:
        assert store.pending_notices(SITE) == []
