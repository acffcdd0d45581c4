"""The scheduler (APScheduler 3.x): each site's daily job at its issue time, in its time zone.

Each site gets one job with a stable id (``replace_existing=True``), a ``CronTrigger`` at the
site's issue time in its zone (kept out of 02:00-03:00, where daylight-saving changes happen),
``coalesce=True`` (a backlog of missed runs is run once), ``max_instances=1`` and a misfire grace
time of hours (APScheduler's default of 1 s would silently skip a late run). Listeners record
errors and missed runs in the store. On start the days missed since the last recorded report
are caught up, each once (the daily job is idempotent).

The system clock is read here, at the service's edge, and nowhere below it.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from datetime import datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

import pandas as pd
from apscheduler.events import EVENT_JOB_ERROR, EVENT_JOB_EXECUTED, EVENT_JOB_MISSED, JobExecutionEvent
from apscheduler.schedulers.base import BaseScheduler
from apscheduler.triggers.cron import CronTrigger
from apscheduler.triggers.interval import IntervalTrigger

from cyanorisk.config import Config, Site, load_config
from cyanorisk.errors import ConfigError, StoreError
from cyanorisk.service.jobs import RunResult, run_daily, utc_clock
from cyanorisk.service.store import Store
from cyanorisk.timeofday import parse_hhmm

log = logging.getLogger("cyanorisk.service")

JOB_PREFIX = "cyanorisk-daily:"


def issue_trigger(site: Site) -> CronTrigger:
    """Every day at the site's issue time, in its zone."""
    hour, minute = parse_hhmm(site.drivers.issue_time)
    return CronTrigger(hour=hour, minute=minute, timezone=ZoneInfo(site.timezone))


def local_today(site: Site, now: datetime) -> str:
    """The site's local date at ``now``."""
    return now.astimezone(ZoneInfo(site.timezone)).date().isoformat()


SITES_JOINED = "+"
"""Joins the ids of the sites one job runs (a character no site id holds)."""


def site_groups(config: Config) -> list[list[Site]]:
    """The sites by issue time and time zone, in configuration order: the sites of a group are
    run by one job, spread over the compute engine."""
    groups: dict[tuple[str, str], list[Site]] = {}
    for site in config.sites:
        groups.setdefault((site.drivers.issue_time, site.timezone), []).append(site)
    return list(groups.values())


def daily_job(config_path: str | None, site_id: str, as_of: str | None = None,
              now: Callable[[], datetime] | None = None) -> RunResult:
    """One scheduled run: reload the configuration (new files are picked up), assess the job's
    sites (``site_id``: one id, or several joined by '+', sharing an issue time and zone) for
    their local date, log one line per site."""
    loaded = load_config(config_path)
    config = _only(loaded, site_id)
    if not config.sites:  # the configuration changed under the service: restart it
        raise ConfigError(loaded.path, "sites", f"no site {site_id.replace(SITES_JOINED, ' or ')} "
                                                "any more; restart the service to schedule the "
                                                "sites configured now")
    site = config.sites[0]
    day = as_of or local_today(site, (now or _now)())
    result = run_daily(day, config, clock=utc_clock)
    for o in result.sites:
        log.info("%s %s: %s (revision %s, %s)%s", day, o.site_id, o.action, o.revision,
                 o.level or o.status, f"; {o.reason}" if o.action != "unchanged" else "")
    return result


def _now() -> datetime:
    return datetime.now(tz=ZoneInfo("UTC"))


def _only(config: Config, site_id: str) -> Config:
    from dataclasses import replace

    wanted = site_id.split(SITES_JOINED)
    return replace(config, sites=tuple(s for s in config.sites if s.id in wanted))


def missed_days(config: Config, site: Site, now: datetime, store: Store) -> list[str]:
    """Local dates whose issue time has passed since the site's last recorded report, oldest
    first, at most ``max_catch_up_days``; none when nothing was ever recorded (a new service
    starts with today's run, not with history)."""
    last = store.latest_report(site.id)
    if last is None:
        return []
    tz = ZoneInfo(site.timezone)
    hour, minute = parse_hhmm(site.drivers.issue_time)
    local_now = now.astimezone(tz)
    day = pd.Timestamp(last.as_of).date() + timedelta(days=1)
    days = []
    while day <= local_now.date():
        issue = datetime(day.year, day.month, day.day, hour, minute, tzinfo=tz)
        if issue <= local_now:
            days.append(day.isoformat())
        day += timedelta(days=1)
    n = config.service.max_catch_up_days
    return days[-n:] if n > 0 else []


def catch_up(config_path: str | None, now: datetime) -> list[RunResult]:
    """Run, once each, the days missed while the service was down."""
    config = load_config(config_path)
    with Store(config.store_url) as store:
        missed = {site.id: missed_days(config, site, now, store) for site in config.sites}
    plan = []  # per group of sites and day, those of the group that missed it
    for group in site_groups(config):
        for day in sorted({d for site in group for d in missed[site.id]}):
            plan.append((SITES_JOINED.join(s.id for s in group if day in missed[s.id]), day))
    results = []
    for site_ids, day in plan:
        log.info("catching up %s for %s", day, site_ids)
        results.append(daily_job(config_path, site_ids, as_of=day))
    return results


def add_jobs(scheduler: BaseScheduler, config: Config, config_path: str | None,
             every_seconds: float | None = None, as_of: str | None = None) -> list[str]:
    """Add (or replace) one daily job per group of sites sharing an issue time and zone (one
    job per site when each has its own; the sites of a job are spread over the compute engine).
    ``every_seconds`` replaces the daily trigger by an interval, for trials."""
    ids = []
    grace = int(config.service.misfire_grace_hours * 3600)
    for group in site_groups(config):
        site = group[0]
        site_ids = SITES_JOINED.join(s.id for s in group)
        names = site.name if len(group) == 1 else f"{len(group)} sites ({site_ids})"
        trigger = (IntervalTrigger(seconds=every_seconds) if every_seconds else issue_trigger(site))
        job = scheduler.add_job(daily_job, trigger, args=[config_path, site_ids, as_of],
                                id=JOB_PREFIX + site_ids, name=f"daily report: {names}",
                                replace_existing=True, coalesce=True, max_instances=1,
                                misfire_grace_time=grace)
        ids.append(job.id)
    return ids


def add_listeners(scheduler: BaseScheduler, config: Config) -> None:
    """Record errors and missed runs in the store, and log every run."""
    def listen(event: JobExecutionEvent) -> None:
        if event.code == EVENT_JOB_EXECUTED:
            return
        when = utc_clock()
        what = "missed" if event.code == EVENT_JOB_MISSED else "error"
        detail = (f"scheduled for {event.scheduled_run_time}" if event.code == EVENT_JOB_MISSED
                  else f"{type(event.exception).__name__}: {event.exception}")
        for site_id in event.job_id.removeprefix(JOB_PREFIX).split(SITES_JOINED):
            log.error("%s %s: %s", site_id, what, detail)
            scheduled = event.scheduled_run_time
            try:  # the run was for the site's local date at its scheduled time
                day = local_today(config.site(site_id), scheduled)
            except KeyError:
                day = str(scheduled.date())
            with Store(config.store_url) as store:
                run_id = store.start_run(day, when, site_id=site_id)
                store.end_run(run_id, when, what, f"{site_id}: {detail}")

    scheduler.add_listener(listen, EVENT_JOB_ERROR | EVENT_JOB_MISSED | EVENT_JOB_EXECUTED)


def site_status(config: Config) -> dict:
    """Per site: its last report (day, revision, status, level, the run that issued it and the
    freshness of its data), its undelivered notices, and the last run; from the store, as a
    JSON-ready dict. Reads only: a missing store is said (``store`` is None), never created."""
    try:
        store = Store(config.store_url, create=False)
    except StoreError as exc:
        if "no store at" not in str(exc):
            raise
        return {"store": None, "store_note": f"{exc}; check data_dir if runs were expected",
                "sites": [{"site_id": s.id, "site_name": s.name, "last_report": None,
                           "pending_notices": []} for s in config.sites], "last_run": None}
    with store:
        runs = store.runs()
        sites = []
        for site in config.sites:
            last = store.latest_report(site.id)
            entry: dict = {"site_id": site.id, "site_name": site.name, "last_report": None,
                           "pending_notices": [
                               {"message_id": n.message_id, "subject": n.subject,
                                "state": n.state, "attempts": n.attempts,
                                "last_error": n.last_error}
                               for n in store.pending_notices(site.id)]}
            if last is not None:
                run = next((r for r in reversed(runs) if r["id"] == last.run_id), None)
                entry["last_report"] = {
                    "as_of": last.as_of, "revision": last.revision, "status": last.status,
                    "level": last.level, "issued_at": last.issued_at,
                    "run_id": run["id"] if run else None,
                    "run_status": run["status"] if run else None,
                    "freshness": _freshness(last.paths), "files": list(last.paths)}
            sites.append(entry)
        last_run = dict(runs[-1]) if runs else None
    return {"store": store.shown, "sites": sites, "last_run": last_run}


def status_lines(config: Config) -> list[str]:
    """Per site: last run, its status, last level, data freshness (from the store)."""
    status = site_status(config)
    lines = []
    for s in status["sites"]:
        last = s["last_report"]
        for n in s["pending_notices"]:
            lines.append(f"{s['site_name']} ({s['site_id']}): notice not delivered yet "
                         f"({n['state']}, {n['attempts']} attempt(s)"
                         + (f"; last error: {n['last_error']}" if n["last_error"] else "")
                         + f"): {n['subject']}")
        if last is None:
            lines.append(f"{s['site_name']} ({s['site_id']}): no report recorded yet")
            continue
        lines.append(f"{s['site_name']} ({s['site_id']}): last report for {last['as_of']} "
                     f"(revision {last['revision']}), status {last['status']}, level "
                     f"{last['level'] or 'none'}; run {last['run_id'] or '?'} "
                     f"{last['run_status'] or '?'} at {last['issued_at']}; {last['freshness']}")
    if status["store"] is None:
        lines.append(status["store_note"])
    r = status["last_run"]
    if r:
        lines.append(f"last run: {r['as_of']} started {r['started_at']}, status {r['status']}"
                     + (f" ({r['error']})" if r["error"] else ""))
    return lines


def _freshness(paths: list[str]) -> str:
    import json

    doc = next((p for p in paths if p.endswith(".json")), None)
    if doc is None or not Path(doc).exists():
        return "freshness unknown"
    c = json.loads(Path(doc).read_text(encoding="utf-8"))
    wx = c["freshness"]["weather_age_days"]
    age = c["observed"]["age_days"]
    if wx is None:
        weather = "no weather"
    elif wx < 2:
        weather = f"weather {wx * 24:.0f} h old"
    else:
        weather = f"weather {wx:.0f} days old"
    return f"{weather}, last sample {'n/a' if age is None else f'{age:.0f} days'} old at issue"
