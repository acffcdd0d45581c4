"""The daily job: ``run_daily(as_of, config)`` assesses each site and records what it issued.

- Sites are independent: each runs under its own locks (a lock file in its data folder for this
  installation, and the store's site-day lock across installations sharing a store). A site's
  configuration or data problem, a report that cannot be written, or a notice that cannot be
  sent fails that site only, recorded with its cause; the run finishes for the others.
- Incremental: the site pipeline reuses a site's clean tables while its raw files and settings
  are unchanged (the same cache as the command line's).
- Idempotent: a report is issued for (site, as_of) only when its inputs (file hashes, model,
  thresholds, the site's settings, the version) differ from those of the last revision issued;
  the new revision records why.
- A failed rerun never replaces a report already issued for the day: the failure is recorded
  with the run and the issued report stays. A day without any report gets a 'no assessment
  today' report that gives the reason.
- Time is injected: ``as_of`` is the local date assessed and ``clock`` gives the instants
  stamped in the store; nothing here reads the system clock.
- Crash-safe order: report files are written atomically, then the notice is put in the outbox
  (with a message id derived from the report's inputs, so a repeat is the same notice), then
  the report is recorded, then pending notices are delivered and marked sent. A run killed at
  any point is repaired by the next: unrecorded reports are issued again, undelivered notices
  are sent again (at least once; their Message-ID lets a mail reader spot a repeat).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import smtplib
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import date
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.config import Config, Site
from cyanorisk.errors import CyanoriskError, RunLockedError, SiteLockedError, StoreError
from cyanorisk.forecast import STATUS_ASSESSED, STATUS_NONE, Assessment, changes_since, no_assessment
from cyanorisk.pipeline import SitePipeline
from cyanorisk.pipeline.clean import file_digest
from cyanorisk.service.history import previous_report
from cyanorisk.service.locks import RunLock
from cyanorisk.service.locks import site_lock as lock_of_site
from cyanorisk.service.store import IssuedReport, Store
from cyanorisk.version import __version__

Clock = Callable[[], str]
"""Gives the current instant as ISO 8601 text (injected; the service passes the real clock)."""

__all__ = ["RunLockedError", "RunResult", "SiteOutcome", "deliver_notices", "run_daily",
           "run_site", "site_lock", "utc_clock"]

ACTIONS = ("issued", "unchanged", "failed", "locked")


@dataclass
class SiteOutcome:
    """What a run did for one site."""

    site_id: str
    action: str
    """'issued' (a new revision), 'unchanged' (same inputs as the last revision), 'failed' (the
    cause in ``reason``; a report already issued for the day stays) or 'locked' (another run
    holds the site)."""
    revision: int | None = None
    status: str | None = None
    level: str | None = None
    reason: str = ""
    paths: list[str] = field(default_factory=list)
    notification: str | None = None


@dataclass
class RunResult:
    """What one daily run did."""

    as_of: str
    run_id: int
    status: str
    """'ok'; 'partial' when some sites failed or were locked; 'failed' when every site did."""
    sites: list[SiteOutcome]

    @property
    def failed(self) -> list[SiteOutcome]:
        return [o for o in self.sites if o.action in ("failed", "locked")]


sha256_of = file_digest


def site_lock(config: Config, site: Site) -> RunLock:
    """This installation's lock of one site (see :func:`cyanorisk.service.locks.site_lock`)."""
    return lock_of_site(config.data_dir, site.id)


def settings_digest(site: Site) -> str:
    """SHA-256 of a site's settings as loaded: everything in the configuration that changes what
    is computed or said (units, thresholds, drivers, authority, staleness limits, ...)."""
    settings = dataclasses.asdict(site)
    for source in ("weather", "samples"):  # the files matched are inputs of their own
        if settings.get(source):
            settings[source].pop("files", None)
    text = json.dumps(settings, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def site_inputs(pipeline: SitePipeline) -> dict[str, Any]:
    """Content hashes of everything a site's report depends on."""
    ws = pipeline.workspace
    return {"files": dict(pipeline.digests()),
            "model": file_digest(ws.model_file) if ws.model_file.exists() else None,
            "thresholds": file_digest(ws.thresholds_file) if ws.thresholds_file.exists() else None,
            "settings": settings_digest(pipeline.site),
            "cyanorisk_version": __version__}


def fingerprint(as_of: str, inputs: dict[str, Any]) -> str:
    return hashlib.sha256(json.dumps({"as_of": as_of, **inputs}, sort_keys=True).encode()).hexdigest()


def _changes(old: dict[str, Any], new: dict[str, Any]) -> list[str]:
    """What differs between the inputs of two revisions (keys missing on either side, as after
    a failure to read the inputs, are not compared)."""
    said = []
    if "files" in old and "files" in new:
        old_files, new_files = old["files"], new["files"]
        for path in sorted(set(old_files) | set(new_files)):
            if path not in old_files:
                said.append(f"new file {Path(path).name}")
            elif path not in new_files:
                said.append(f"file gone: {Path(path).name}")
            elif old_files[path] != new_files[path]:
                said.append(f"changed file {Path(path).name}")
    for key, words in (("model", "model changed"), ("thresholds", "thresholds changed"),
                       ("settings", "site settings changed"),
                       ("cyanorisk_version", "cyanorisk version changed")):
        if key in old and key in new and old[key] != new[key]:
            said.append(words)
    if "error" in old and "error" not in new:
        said.append("the earlier failure is resolved")
    return said


def _clean(pipeline: SitePipeline, store: Store, when: str) -> None:
    """Clean data for the site (shared with the command line); record the files behind it."""
    clean = pipeline.clean()
    weather_files = {str(p) for p in pipeline.site.weather.files}
    for path, digest in pipeline.digests().items():
        rows = clean.rows["weather"] if path in weather_files else clean.rows["samples"] or {}
        store.record_file(pipeline.spec.site_id, path, digest, rows, when)


# notices -----------------------------------------------------------------------------------------

def notice_for(config: Config, assessment: Assessment, previous: IssuedReport | None,
               key: str) -> EmailMessage | None:
    """The notification of an assessment, when the level stated rose above the previous
    report's, or a site that had an outlook has none (insufficient data, no assessment). Levels
    are compared by name in the site's scheme (ranks change when a scheme gains a level).
    ``key`` makes the Message-ID: the same report gives the same id."""
    spec = assessment.spec
    rank = assessment.level_rank
    before = spec.scheme.rank_of(previous.level) if previous is not None else None
    rose = rank is not None and rank > (before or 0)
    lost = (previous is not None and previous.status == STATUS_ASSESSED
            and assessment.status != STATUS_ASSESSED)
    if not (rose or lost):
        return None
    day = str(assessment.as_of.date())
    msg = EmailMessage()
    msg["Subject"] = (f"cyanorisk: {spec.name} rose to {assessment.level} ({day})" if rose else
                      f"cyanorisk: {spec.name}: {assessment.status}, no outlook ({day})")
    msg["From"] = config.service.mail_from
    msg["To"] = ", ".join(config.service.mail_to) or "water-quality team"
    msg["Message-ID"] = f"<{spec.site_id}.{day}.{key}@cyanorisk>"  # the same for a repeat
    was = previous.level if previous is not None else "no earlier report"
    msg.set_content(f"{assessment.headline}\n\nPrevious report: {was}.\n\n" + "\n".join(
        f"- {x}" for x in assessment.cautions) + f"\n\n{assessment.deferral}\n")
    return msg


def _queue_notice(config: Config, pipeline: SitePipeline, store: Store, assessment: Assessment,
                  previous: IssuedReport | None, fp: str, when: str) -> str | None:
    """Write the notice to the outbox folder and record it as pending; its file, or None."""
    key = fp[:16]
    msg = notice_for(config, assessment, previous, key)
    if msg is None:
        return None
    day = str(assessment.as_of.date())
    site_id = pipeline.spec.site_id
    path = pipeline.workspace.notice_file(f"{site_id}_{day}_{key}.eml")
    if not path.exists():
        write_group({path: lambda tmp: tmp.write_bytes(bytes(msg))})
    store.record_notice(site_id, day, f"{site_id}/{day}/{key}", str(msg["Subject"]),
                        msg.get_content(), when, str(path))
    return str(path)


def deliver_notices(config: Config, store: Store, clock: Clock,
                    site_ids: list[str] | None = None) -> list[tuple[str, str]]:
    """Deliver the outbox's pending notices (of ``site_ids``, or all): by e-mail when an SMTP
    server is configured, else the outbox file is the delivery. A failed send is recorded and
    tried again by the next run. Returns (site id, sentence) per failed delivery."""
    problems = []
    for notice in store.pending_notices():
        if site_ids is not None and notice.site_id not in site_ids:
            continue
        try:
            if config.service.smtp_host and config.service.mail_to:
                _send(config, notice.path)
            store.mark_notice_sent(notice.id, clock())
        except (OSError, smtplib.SMTPException) as exc:
            reason = f"notice {notice.message_id} not sent: {exc}".splitlines()[0]
            store.mark_notice_failed(notice.id, clock(), reason)
            problems.append((notice.site_id, reason))
    return problems


def _send(config: Config, path: str | None) -> None:
    import email
    import email.policy

    if path is None or not Path(path).exists():
        raise OSError(f"the notice file {path} is gone")
    msg = email.message_from_bytes(Path(path).read_bytes(), policy=email.policy.default)
    with smtplib.SMTP(config.service.smtp_host, config.service.smtp_port, timeout=30) as smtp:
        smtp.send_message(msg)


# one site ----------------------------------------------------------------------------------------

def _issue(config: Config, pipeline: SitePipeline, store: Store, as_of: str, run_id: int,
           clock: Clock, assessment: Assessment, inputs: dict[str, Any], fp: str,
           previous_same_day: IssuedReport | None, failure: str | None = None) -> SiteOutcome:
    site_id = pipeline.spec.site_id
    previous = store.latest_report(site_id, as_of) or store.latest_report(site_id, before=as_of)
    assessment.changes = changes_since(assessment, previous_report(store, site_id, as_of))
    paths = [str(p) for p in pipeline.write_report(assessment)]
    f = assessment.forecast
    reason = ("first report for this day" if previous_same_day is None else
              "inputs changed: " + ", ".join(_changes(previous_same_day.inputs, inputs) or
                                             ["status changed"]))
    if failure is not None:
        reason = f"no assessment: {failure}; {reason}"
    when = clock()
    note = _queue_notice(config, pipeline, store, assessment, previous, fp, when)
    thresholds = {"warn_at": dict(f.thresholds.warn_at) if f.thresholds else {},
                  "source": f.thresholds.source if f.thresholds else "not applied"}
    recorded = store.record_report(IssuedReport(
        site_id=site_id, as_of=as_of, revision=0, status=assessment.status,
        level_rank=assessment.level_rank, level=assessment.level,
        probabilities=dict(f.probabilities or {}),
        model_version=assessment.model.trained_with, thresholds=thresholds, fingerprint=fp,
        inputs=inputs, paths=paths, reason=reason, issued_at=when, run_id=run_id))
    return SiteOutcome(site_id, "issued", recorded.revision, assessment.status, assessment.level,
                       reason, paths, note)


def _reason(exc: BaseException) -> str:
    text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    return text if isinstance(exc, CyanoriskError) else f"{type(exc).__name__}: {text}"


def run_site(config: Config, site: Site, store: Store, as_of: str, run_id: int,
             clock: Clock, run_day: date | None = None) -> SiteOutcome:
    """Assess one site for one day, unless the same inputs were already reported. ``run_day``
    is the day of the run by the service's clock (see :class:`SitePipeline`). Never raises for
    the site's own problems: they come back as a 'failed' outcome with their cause."""
    pipeline = SitePipeline.of(config, site, run_day)
    previous = store.latest_report(site.id, as_of)
    inputs: dict[str, Any] = {}
    try:
        inputs = site_inputs(pipeline)
        fp = fingerprint(as_of, inputs)
        if previous is not None and previous.fingerprint == fp and previous.status != STATUS_NONE \
                and all(Path(p).exists() for p in previous.paths):
            return SiteOutcome(site.id, "unchanged", previous.revision, previous.status,
                               previous.level, "same inputs as the last revision", previous.paths)
        _clean(pipeline, store, clock())
        assessment = pipeline.assess(pd.Timestamp(as_of))
    except StoreError:
        raise
    except Exception as exc:  # the service must not fall over on one site: record and go on
        return _failed(config, pipeline, store, as_of, run_id, clock, previous, inputs,
                       _reason(exc))
    return _issue(config, pipeline, store, as_of, run_id, clock, assessment, inputs, fp, previous)


def _failed(config: Config, pipeline: SitePipeline, store: Store, as_of: str, run_id: int,
            clock: Clock, previous: IssuedReport | None, inputs: dict[str, Any],
            reason: str) -> SiteOutcome:
    """A site that could not be assessed: the report already issued for the day stays (the
    failure is the run's record); a day without one gets a 'no assessment' report."""
    site_id = pipeline.spec.site_id
    if previous is not None and previous.status != STATUS_NONE:
        since = _changes(previous.inputs, inputs) if inputs else []
        after = f", after: {', '.join(since)}" if since else ""
        return SiteOutcome(site_id, "failed", previous.revision, previous.status, previous.level,
                           f"{reason} (the report issued earlier for this day, revision "
                           f"{previous.revision}, stays{after})", previous.paths)
    inputs = {**inputs, "error": reason}
    fp = fingerprint(as_of, inputs)
    if previous is not None and previous.fingerprint == fp:
        return SiteOutcome(site_id, "failed", previous.revision, STATUS_NONE, None, reason,
                           previous.paths)
    assessment = no_assessment(pipeline.spec, pd.Timestamp(as_of), reason,
                               pipeline.lab_level_or_none(as_of))
    outcome = _issue(config, pipeline, store, as_of, run_id, clock, assessment, inputs, fp,
                     previous, failure=reason)
    outcome.action, outcome.reason = "failed", reason
    return outcome


def _locked_run_site(config: Config, site: Site, store: Store, day: str, run_id: int,
                     clock: Clock, run_day: date) -> SiteOutcome:
    """One site under its locks; a held lock is a 'locked' outcome, a site that cannot even be
    written for (its report folder, its notice) a 'failed' one."""
    try:
        with site_lock(config, site), store.site_day_lock(site.id, day, when=clock()):
            return run_site(config, site, store, day, run_id, clock, run_day)
    except (RunLockedError, SiteLockedError) as exc:
        return SiteOutcome(site.id, "locked", reason=_reason(exc))
    except StoreError:
        raise
    except Exception as exc:  # e.g. the report folder cannot be written: this site only
        return SiteOutcome(site.id, "failed", reason=_reason(exc))


def run_daily(as_of: str | pd.Timestamp, config: Config, *, clock: Clock,
              store: Store | None = None) -> RunResult:
    """Run the daily job for local date ``as_of`` over every site of ``config``, each under its
    own locks, then deliver the outbox's pending notices (those of earlier runs included).

    Raises
    ------
    StoreError
        When the store cannot be used (nothing is assessed then).
    """
    day = str(pd.Timestamp(as_of).date())
    own = store is None
    store = store or Store(config.store_url)
    try:
        now = clock()
        store.close_interrupted_runs(now)  # owner-aware: only runs whose process is gone
        single = config.sites[0].id if len(config.sites) == 1 else None
        run_id = store.start_run(day, now, site_id=single)
        today = pd.Timestamp(now).date()
        outcomes = [_locked_run_site(config, site, store, day, run_id, clock, today)
                    for site in config.sites]
        problems = deliver_notices(config, store, clock, [s.id for s in config.sites])
        for site_id, text in problems:  # the report stands; the notice is retried next run
            for o in outcomes:
                if o.site_id == site_id:
                    o.reason = f"{o.reason}; {text}" if o.reason else text
        bad = [o for o in outcomes if o.action in ("failed", "locked")]
        status = "ok" if not bad and not problems else (
            "failed" if len(bad) == len(outcomes) else "partial")
        errors = "; ".join([f"{o.site_id}: {o.reason}" for o in bad]
                           + [f"{site_id}: {text}" for site_id, text in problems])
        store.end_run(run_id, clock(), status, errors or None)
        return RunResult(day, run_id, status, outcomes)
    finally:
        if own:
            store.close()


def utc_clock() -> str:
    """The real clock, for the service's edge only."""
    return pd.Timestamp.now(tz="UTC").isoformat()
