"""The scheduler (cyanorisk.service.scheduler) and the service commands (serve, status, run).

- ``issue_trigger`` fires at the site's local issue time on consecutive days across
  daylight-saving changes in both directions, as APScheduler 3.x checks in
  tests/triggers/test_cron.py ``test_dst_change``: ``get_next_fire_time(None, now)`` with injected
  ``now`` values before, inside and after the change. Expected UTC offsets and transition instants
  are those of the tz database (read here through zoneinfo/tzdata, and checked against the table).
- The jobs carry the options STYLE.md requires (stable id, replace_existing, coalesce,
  max_instances 1, a misfire grace of hours), checked on a BackgroundScheduler that is not started.
- Runs missed while the service was down are caught up once each; listeners record missed runs
  and errors in the store.
- End to end: ``cyanorisk serve`` in a subprocess writes a report and stops cleanly on SIGTERM;
  ``status`` and ``run`` then work on the same store.
"""

from __future__ import annotations

import dataclasses
import json
import re
import signal
import subprocess
import sys
import time as clock_time
from datetime import UTC, datetime, time, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

import pytest
from apscheduler.events import EVENT_JOB_ERROR, EVENT_JOB_EXECUTED, EVENT_JOB_MISSED, JobExecutionEvent
from apscheduler.jobstores.base import ConflictingIdError
from apscheduler.schedulers.background import BackgroundScheduler
from apscheduler.schedulers.base import STATE_STOPPED
from apscheduler.triggers.cron import CronTrigger
from apscheduler.triggers.interval import IntervalTrigger

from cyanorisk.cli import main
from cyanorisk.config import load_config
from cyanorisk.service import scheduler as service
from cyanorisk.service.jobs import RunLockedError, run_daily
from cyanorisk.service.scheduler import (
    JOB_PREFIX,
    add_jobs,
    add_listeners,
    catch_up,
    daily_job,
    issue_trigger,
    local_today,
    missed_days,
)
from cyanorisk.service.store import IssuedReport, Store

SITE = "tallowbark"
MELBOURNE = ZoneInfo("Australia/Melbourne")
ALERT1 = "Vigilance"
"""The level stated on SERVE_DAY and RUN_DAY of the 8-year demo (see tests/test_jobs.py)."""
HOUR = timedelta(hours=1)


def make_config(tmp: Path, demo_site, extra: str = "", seed: bool = True) -> Path:
    """A copy of the demo configuration with data, reports and models (a copy) under ``tmp``;
    with ``seed`` its data folder starts with the session's clean tables (conftest)."""
    if seed:
        demo_site.seed(tmp / "work")
    models = tmp / "models"
    demo_site.copy_model(models, tmp / "work")
    path = demo_site.write_config(tmp / "cyanorisk.toml", data_dir=tmp / "work",
                                  reports_dir=tmp / "reports", models_dir=models)
    if extra:
        path.write_text(path.read_text(encoding="utf-8") + extra, encoding="utf-8")
    return path


def opened(config) -> Store:
    """The configuration's store, to use in a with-statement."""
    return Store(config.store_url)


def recorded(as_of: str, site_id: str = SITE) -> IssuedReport:
    """A minimal report row, as the daily job would have recorded it for ``as_of``."""
    return IssuedReport(site_id=site_id, as_of=as_of, revision=1, status="assessed", level_rank=0,
                        level="below Alert Level 1", probabilities={}, model_version=None,
                        thresholds={}, fingerprint="0" * 64, inputs={}, paths=[],
                        reason="first report for this day", issued_at=f"{as_of}T00:00:00+00:00")


# ---------------------------------------------------------------------------------------------
# The trigger across daylight-saving changes
# ---------------------------------------------------------------------------------------------

DST_CHANGES = [
    # zone, the change's instant [UTC], UTC offset before and after [h]  (tz database 2024)
    pytest.param("Australia/Melbourne", datetime(2024, 4, 6, 16, tzinfo=UTC), 11, 10,
                 id="Melbourne-AEDT-to-AEST-2024-04-07"),
    pytest.param("Australia/Melbourne", datetime(2024, 10, 5, 16, tzinfo=UTC), 10, 11,
                 id="Melbourne-AEST-to-AEDT-2024-10-06"),
    pytest.param("Europe/Berlin", datetime(2024, 3, 31, 1, tzinfo=UTC), 1, 2,
                 id="Berlin-CET-to-CEST-2024-03-31"),
    pytest.param("Europe/Berlin", datetime(2024, 10, 27, 1, tzinfo=UTC), 2, 1,
                 id="Berlin-CEST-to-CET-2024-10-27"),
]


@pytest.mark.parametrize(("zone", "change", "before", "after"), DST_CHANGES)
def test_issue_trigger_across_dst_changes(demo_site, zone, change, before, after):
    tz = ZoneInfo(zone)
    # the table agrees with the tz database (zoneinfo, tzdata)
    assert (change - timedelta(seconds=1)).astimezone(tz).utcoffset() == timedelta(hours=before)
    assert change.astimezone(tz).utcoffset() == timedelta(hours=after)
    day = change.astimezone(tz).date()  # the local day of the change (it happens overnight)

    site = dataclasses.replace(demo_site.site, timezone=zone)
    assert site.drivers.issue_time == "06:00"
    trigger = issue_trigger(site)
    assert isinstance(trigger, CronTrigger)
    assert trigger.timezone == tz
    assert str(trigger) == "cron[hour='6', minute='0']"

    # consecutive fire times from two days before the change
    now = datetime.combine(day - timedelta(days=2), time(12), tz).astimezone(UTC)
    fires, previous = [], None
    for _ in range(4):
        fire = trigger.get_next_fire_time(previous, now)
        fires.append(fire)
        previous, now = fire, fire + timedelta(seconds=1)
    days = [day + timedelta(days=k) for k in (-1, 0, 1, 2)]
    assert [f.astimezone(tz).replace(tzinfo=None) for f in fires] == \
        [datetime.combine(d, time(6)) for d in days]
    assert [f.utcoffset() for f in fires] == [timedelta(hours=h) for h in (before, after, after, after)]
    assert [f.astimezone(UTC) for f in fires] == \
        [datetime.combine(d, time(6)).replace(tzinfo=UTC) - timedelta(hours=h)
         for d, h in zip(days, (before, after, after, after), strict=True)]
    gaps = [(b.astimezone(UTC) - a.astimezone(UTC)) for a, b in zip(fires, fires[1:], strict=False)]
    assert gaps == [timedelta(hours=24 - (after - before)), timedelta(hours=24), timedelta(hours=24)]

    # any injected 'now' on the change's night gives that morning's issue time, once
    morning = datetime.combine(day, time(6), tz)
    for at in (change - 2 * HOUR, change - timedelta(minutes=30), change,
               change + timedelta(minutes=30), change + 2 * HOUR):
        fire = trigger.get_next_fire_time(None, at)
        assert fire.astimezone(UTC) == morning.astimezone(UTC)
        assert fire.utcoffset() == timedelta(hours=after)
    # just after the issue time: the next morning
    late = trigger.get_next_fire_time(None, morning.astimezone(UTC) + timedelta(seconds=1))
    assert late.astimezone(tz).replace(tzinfo=None) == datetime.combine(day + timedelta(days=1), time(6))


def test_local_today_uses_the_sites_zone(demo_site):
    site = demo_site.site
    assert local_today(site, datetime(2024, 12, 4, 19, 30, tzinfo=UTC)) == "2024-12-05"  # 06:30 AEDT
    assert local_today(site, datetime(2024, 12, 4, 12, 59, tzinfo=UTC)) == "2024-12-04"  # 23:59 AEDT


# ---------------------------------------------------------------------------------------------
# Job options
# ---------------------------------------------------------------------------------------------

def test_add_jobs_sets_the_required_options(demo_site, monkeypatch):
    config, path = demo_site.config, str(demo_site.config_path)
    scheduler = BackgroundScheduler(timezone="UTC")
    calls: list[dict] = []
    real_add_job = scheduler.add_job

    def spy(*args, **kwargs):
        calls.append(kwargs)
        return real_add_job(*args, **kwargs)

    monkeypatch.setattr(scheduler, "add_job", spy)
    ids = add_jobs(scheduler, config, path)
    assert scheduler.state == STATE_STOPPED  # never started
    assert ids == [JOB_PREFIX + SITE]
    assert [c["replace_existing"] for c in calls] == [True]
    (job,) = scheduler.get_jobs()
    assert job.id == "cyanorisk-daily:tallowbark"
    assert job.name == "daily report: Tallowbark Reservoir"
    assert job.func is daily_job
    assert job.args == (path, SITE, None)
    assert job.coalesce is True
    assert job.max_instances == 1
    assert config.service.misfire_grace_hours == 6.0
    assert job.misfire_grace_time == 6 * 3600  # hours, not APScheduler's 1 s
    assert isinstance(job.trigger, CronTrigger)
    assert job.trigger.timezone == MELBOURNE
    assert str(job.trigger) == "cron[hour='6', minute='0']"  # outside 02:00-03:00


def test_misfire_grace_follows_the_configuration(tmp_path, demo_site):
    config = load_config(make_config(tmp_path, demo_site, extra="\n[service]\nmisfire_grace_hours = 12.5\n"))
    scheduler = BackgroundScheduler(timezone="UTC")
    add_jobs(scheduler, config, None)
    (job,) = scheduler.get_jobs()
    assert job.misfire_grace_time == 45_000


def test_adding_again_replaces_the_job(demo_site):
    scheduler = BackgroundScheduler(timezone="UTC")
    scheduler.start(paused=True)
    try:
        add_jobs(scheduler, demo_site.config, None)
        add_jobs(scheduler, demo_site.config, None, every_seconds=5, as_of="2024-12-05")
        (job,) = scheduler.get_jobs()  # replaced, not added twice
        assert job.id == JOB_PREFIX + SITE
        assert isinstance(job.trigger, IntervalTrigger)
        assert job.trigger.interval == timedelta(seconds=5)
        assert job.args == (None, SITE, "2024-12-05")
        assert (job.coalesce, job.max_instances, job.misfire_grace_time) == (True, 1, 6 * 3600)
        with pytest.raises(ConflictingIdError):  # the id is stable: without replacing, it clashes
            scheduler.add_job(daily_job, "interval", seconds=5, args=[None, SITE], id=JOB_PREFIX + SITE)
    finally:
        scheduler.shutdown(wait=False)


# ---------------------------------------------------------------------------------------------
# Missed runs and catch-up
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize(("last", "now", "expected"), [
    pytest.param("2024-06-10", datetime(2024, 6, 12, 7, 0, tzinfo=MELBOURNE), ["2024-06-11", "2024-06-12"],
                 id="two-days-after"),
    pytest.param("2024-06-10", datetime(2024, 6, 11, 21, 0, tzinfo=UTC), ["2024-06-11", "2024-06-12"],
                 id="now-in-UTC-is-already-the-next-local-day"),
    pytest.param("2024-06-10", datetime(2024, 6, 12, 5, 59, tzinfo=MELBOURNE), ["2024-06-11"],
                 id="before-todays-issue-time"),
    pytest.param("2024-06-10", datetime(2024, 6, 10, 23, 0, tzinfo=MELBOURNE), [],
                 id="nothing-missed"),
    pytest.param("2024-04-05", datetime(2024, 4, 7, 6, 0, tzinfo=MELBOURNE), ["2024-04-06", "2024-04-07"],
                 id="across-DST-end"),
    pytest.param("2024-10-04", datetime(2024, 10, 6, 5, 30, tzinfo=MELBOURNE), ["2024-10-05"],
                 id="across-DST-start"),
])
def test_missed_days(tmp_path, demo_site, last, now, expected):
    store = Store(f"sqlite:///{tmp_path / 'store.db'}")
    try:
        assert missed_days(demo_site.config, demo_site.site, now, store) == []  # nothing recorded yet
        store.record_report(recorded(last))
        store.record_report(recorded("2024-12-31", site_id="other"))  # another site's days don't count
        days = missed_days(demo_site.config, demo_site.site, now, store)
        assert days == expected
        assert len(set(days)) == len(days)
    finally:
        store.close()


def test_missed_days_are_capped(tmp_path, demo_site):
    assert demo_site.config.service.max_catch_up_days == 14
    store = Store(f"sqlite:///{tmp_path / 'store.db'}")
    try:
        store.record_report(recorded("2024-05-01"))
        now = datetime(2024, 6, 1, 12, tzinfo=MELBOURNE)
        days = missed_days(demo_site.config, demo_site.site, now, store)
    finally:
        store.close()
    assert days == [f"2024-05-{d:02d}" for d in range(19, 32)] + ["2024-06-01"]  # the latest 14


def test_no_catch_up_days_allowed_means_none(tmp_path, demo_site):
    config = load_config(make_config(tmp_path, demo_site, extra="\n[service]\nmax_catch_up_days = 0\n"))
    assert config.service.max_catch_up_days == 0
    config.data_dir.mkdir(exist_ok=True)
    with opened(config) as store:
        store.record_report(recorded("2024-06-10"))
        days = missed_days(config, config.sites[0], datetime(2024, 6, 13, 7, tzinfo=MELBOURNE), store)
    assert days == []


class Counter:
    def __init__(self) -> None:
        self.i = 0

    def __call__(self) -> str:
        self.i += 1
        return f"2030-01-01T00:00:{self.i:02d}+00:00"


def test_catch_up_runs_each_missed_day_once(tmp_path, demo_site, monkeypatch):
    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    (first,) = run_daily("2024-12-03", config, clock=Counter()).sites
    assert first.action == "issued"
    calls: list[tuple] = []
    real_job = service.daily_job

    def counting(config_path, site_id, as_of=None, now=None):
        calls.append((config_path, site_id, as_of))
        return real_job(config_path, site_id, as_of, now)

    monkeypatch.setattr(service, "daily_job", counting)
    now = datetime(2024, 12, 5, 6, 30, tzinfo=MELBOURNE)  # two days later, after the issue time

    results = catch_up(str(path), now)
    assert calls == [(str(path), SITE, "2024-12-04"), (str(path), SITE, "2024-12-05")]
    assert [r.as_of for r in results] == ["2024-12-04", "2024-12-05"]
    assert [(o.site_id, o.action, o.revision) for r in results for o in r.sites] == \
        [(SITE, "issued", 1), (SITE, "issued", 1)]
    with opened(config) as store:
        reports = [(r.as_of, r.revision) for r in store.reports(SITE)]
        runs = store.runs()
    assert reports == [("2024-12-03", 1), ("2024-12-04", 1), ("2024-12-05", 1)]
    assert [(r["as_of"], r["status"]) for r in runs] == \
        [("2024-12-03", "ok"), ("2024-12-04", "ok"), ("2024-12-05", "ok")]

    # started again at the same moment: nothing left to catch up, nothing new issued
    assert catch_up(str(path), now) == []
    assert catch_up(str(path), now + 2 * HOUR) == []
    assert len(calls) == 2
    with opened(config) as store:
        assert [(r.as_of, r.revision) for r in store.reports(SITE)] == reports
        assert store.runs() == runs


# ---------------------------------------------------------------------------------------------
# Listeners
# ---------------------------------------------------------------------------------------------

def test_listeners_record_missed_runs_and_errors(tmp_path, demo_site, monkeypatch):
    config = load_config(make_config(tmp_path, demo_site))
    config.data_dir.mkdir(exist_ok=True)  # the service has run here before
    scheduler = BackgroundScheduler(timezone="UTC")
    added: list[tuple] = []
    monkeypatch.setattr(scheduler, "add_listener", lambda callback, mask: added.append((callback, mask)))
    add_listeners(scheduler, config)
    ((listen, mask),) = added
    assert mask & EVENT_JOB_ERROR == EVENT_JOB_ERROR
    assert mask & EVENT_JOB_MISSED == EVENT_JOB_MISSED

    at = datetime(2024, 12, 5, 6, 0, tzinfo=MELBOURNE)
    job_id = JOB_PREFIX + SITE
    listen(JobExecutionEvent(EVENT_JOB_MISSED, job_id, "default", at))
    listen(JobExecutionEvent(EVENT_JOB_ERROR, job_id, "default", at + timedelta(days=1),
                             exception=RunLockedError("work/.cyanorisk-run.lock: another cyanorisk run "
                                                      "holds the lock")))
    listen(JobExecutionEvent(EVENT_JOB_EXECUTED, job_id, "default", at + timedelta(days=2), retval=None))
    with opened(config) as store:
        runs = store.runs()
    assert [(r["as_of"], r["status"], r["error"]) for r in runs] == [
        ("2024-12-05", "missed", "tallowbark: scheduled for 2024-12-05 06:00:00+11:00"),
        ("2024-12-06", "error", "tallowbark: RunLockedError: work/.cyanorisk-run.lock: another "
                                "cyanorisk run holds the lock"),
    ]
    assert all(r["started_at"] == r["ended_at"] and r["ended_at"].endswith("+00:00") for r in runs)


def test_listeners_on_a_running_scheduler(tmp_path, demo_site):
    config = load_config(make_config(tmp_path, demo_site))
    config.data_dir.mkdir(exist_ok=True)  # the service has run here before
    Store(config.store_url).close()  # created before the scheduler's threads use it
    scheduler = BackgroundScheduler(timezone="UTC")
    add_listeners(scheduler, config)

    def failing():
        raise ValueError("injected failure")

    past = datetime.now(UTC) - HOUR  # the test's own clock, at the edge
    scheduler.add_job(failing, "date", id=JOB_PREFIX + SITE)  # due now: runs and fails
    scheduler.add_job(print, "date", run_date=past, id=JOB_PREFIX + "other", misfire_grace_time=1)
    runs: list[dict] = []
    scheduler.start()
    try:
        deadline = clock_time.monotonic() + 15
        while clock_time.monotonic() < deadline:
            with opened(config) as store:
                runs = store.runs()
            if len(runs) >= 2:
                break
            clock_time.sleep(0.05)
    finally:
        scheduler.shutdown(wait=True)
    by_status = {r["status"]: r for r in runs}
    assert sorted(by_status) == ["error", "missed"]
    assert len(runs) == 2
    assert by_status["error"]["error"] == "tallowbark: ValueError: injected failure"
    assert by_status["missed"]["error"].startswith("other: scheduled for " + past.date().isoformat())
    assert by_status["missed"]["as_of"] == past.date().isoformat()


# ---------------------------------------------------------------------------------------------
# End to end: serve, status, run
# ---------------------------------------------------------------------------------------------

SERVE_DAY, RUN_DAY = "2024-11-30", "2024-12-01"


def test_serve_then_status_then_run(tmp_path, demo_site, capsys):
    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    report = config.reports_dir / SITE / f"{SITE}_{SERVE_DAY}.json"
    log = tmp_path / "serve.log"
    with open(log, "wb") as out:
        proc = subprocess.Popen(
            [sys.executable, "-m", "cyanorisk.cli", "serve", "--config", str(path), "--every", "1",
             "--as-of", SERVE_DAY, "--no-catch-up"],
            stdout=out, stderr=subprocess.STDOUT, cwd=tmp_path)
    try:
        rows: list[IssuedReport] = []
        deadline = clock_time.monotonic() + 60
        while clock_time.monotonic() < deadline and not rows:
            assert proc.poll() is None, log.read_text(encoding="utf-8")
            if report.exists():
                with opened(config) as store:
                    rows = store.reports(SITE, SERVE_DAY)
            if not rows:
                clock_time.sleep(0.2)
        assert rows, f"no report recorded within 60 s:\n{log.read_text(encoding='utf-8')}"
        proc.send_signal(signal.SIGTERM)
        code = proc.wait(timeout=15)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=10)
    output = log.read_text(encoding="utf-8")
    assert code == 0, output
    assert "stopping (signal 15)" in output
    assert "Traceback" not in output
    (rec,) = rows
    assert (rec.revision, rec.status, rec.level) == (1, "assessed", ALERT1)

    # status: the site's last report, its run, status, level and freshness
    assert main(["status", "--config", str(path)]) == 0
    lines = capsys.readouterr().out.splitlines()
    with opened(config) as store:
        runs = store.runs()
        (rec,) = store.reports(SITE, SERVE_DAY)  # served every second, still one revision
    issuing = next(r for r in runs if r["id"] == rec.run_id)
    assert issuing["status"] == "ok"
    doc = json.loads(next(p for p in rec.paths if p.endswith(".json")) and
                     Path(next(p for p in rec.paths if p.endswith(".json"))).read_text("utf-8"))
    age = doc["observed"]["age_days"]
    assert lines[0] == (f"Tallowbark Reservoir (tallowbark): last report for {SERVE_DAY} (revision 1), "
                        f"status assessed, level {ALERT1}; run {rec.run_id} ok at {rec.issued_at}; "
                        f"weather 0 h old, last sample {age:.0f} days old at issue")
    assert re.fullmatch(rf"last run: {SERVE_DAY} started \S+, status ok", lines[1])
    assert len(lines) == 2

    # run: one more day, recorded
    assert main(["run", "--config", str(path), "--as-of", RUN_DAY]) == 0
    assert capsys.readouterr().out.splitlines() == [
        f"{RUN_DAY} {SITE}: issued (revision 1, {ALERT1}); first report for this day"]
    with opened(config) as store:
        after = store.runs()
        (new,) = store.reports(SITE, RUN_DAY)
    assert len(after) == len(runs) + 1
    assert (after[-1]["as_of"], after[-1]["status"], after[-1]["error"]) == (RUN_DAY, "ok", None)
    assert new.run_id == after[-1]["id"]
    assert main(["status", "--config", str(path)]) == 0
    assert f"last report for {RUN_DAY} (revision 1)" in capsys.readouterr().out
    # the same day again: recorded as a run, nothing new issued
    assert main(["run", "--config", str(path), "--as-of", RUN_DAY]) == 0
    assert capsys.readouterr().out.startswith(f"{RUN_DAY} {SITE}: unchanged (revision 1, {ALERT1})")
    with opened(config) as store:
        assert len(store.runs()) == len(after) + 1
        assert len(store.reports(SITE, RUN_DAY)) == 1


def test_status_before_any_run(tmp_path, demo_site, capsys):
    path = make_config(tmp_path, demo_site, seed=False)
    store = load_config(path).data_dir / "cyanorisk.db"
    assert not store.exists()  # a new installation: nothing has run yet
    assert main(["status", "--config", str(path)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "Tallowbark Reservoir (tallowbark): no report recorded yet"
    assert f"no store at {store}" in lines[1] and "check data_dir" in lines[1]
    assert not store.exists()  # status reads only: a mistyped data_dir creates nothing


def test_a_missed_first_run_is_recorded(tmp_path, demo_site, monkeypatch):
    config = load_config(make_config(tmp_path, demo_site))
    scheduler = BackgroundScheduler(timezone="UTC")
    added: list[tuple] = []
    monkeypatch.setattr(scheduler, "add_listener", lambda callback, mask: added.append((callback, mask)))
    add_listeners(scheduler, config)
    ((listen, _),) = added
    at = datetime(2024, 12, 5, 6, 0, tzinfo=MELBOURNE)
    listen(JobExecutionEvent(EVENT_JOB_MISSED, JOB_PREFIX + SITE, "default", at))
    with opened(config) as store:
        assert [(r["as_of"], r["status"]) for r in store.runs()] == [("2024-12-05", "missed")]


def test_status_after_a_failed_day(tmp_path, demo_site, capsys):
    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    (config.models_dir / f"{SITE}.json").unlink()  # no model: no assessment
    assert main(["run", "--config", str(path), "--as-of", RUN_DAY]) == 1
    capsys.readouterr()
    assert main(["status", "--config", str(path)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert re.fullmatch(rf"Tallowbark Reservoir \(tallowbark\): last report for {RUN_DAY} \(revision 1\), "
                        r"status no assessment today, level below Vigilance; run 1 failed at \S+; "
                        r"no weather, last sample n/a old at issue", lines[0])
    assert re.fullmatch(rf"last run: {RUN_DAY} started \S+, status failed \(tallowbark: .+\)", lines[1])



def test_sites_sharing_an_issue_time_run_in_one_job(tmp_path, two_sites, monkeypatch):
    """Sites with the same issue time and zone are one job, so that their daily run is spread
    over the compute engine; a missed job is recorded for each of its sites."""
    from conftest import SISTER

    path = two_sites.write_config(tmp_path)
    config = load_config(path)
    scheduler = BackgroundScheduler(timezone="UTC")
    ids = add_jobs(scheduler, config, str(path), as_of="2024-11-30")
    assert ids == [f"{JOB_PREFIX}{SITE}+{SISTER}"]
    (job,) = scheduler.get_jobs()
    assert job.args == (str(path), f"{SITE}+{SISTER}", "2024-11-30")
    assert job.name == f"daily report: 2 sites ({SITE}+{SISTER})"
    result = daily_job(*job.args)
    assert [(o.site_id, o.action) for o in result.sites] == [(SITE, "issued"), (SISTER, "issued")]

    added: list[tuple] = []
    monkeypatch.setattr(scheduler, "add_listener", lambda callback, mask: added.append((callback, mask)))
    add_listeners(scheduler, config)
    ((listen, _),) = added
    listen(JobExecutionEvent(EVENT_JOB_MISSED, job.id, "default",
                             datetime(2024, 12, 5, 6, 0, tzinfo=MELBOURNE)))
    with opened(config) as store:
        missed = [(r["site_id"], r["status"]) for r in store.runs() if r["status"] == "missed"]
    assert missed == [(SITE, "missed"), (SISTER, "missed")]


def test_a_job_whose_sites_left_the_configuration_says_so(demo_site):
    from cyanorisk.errors import ConfigError

    with pytest.raises(ConfigError, match="no site gone or away any more; restart the service"):
        daily_job(str(demo_site.config_path), "gone+away", as_of="2024-11-30")
