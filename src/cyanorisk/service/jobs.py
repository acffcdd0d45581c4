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
- Spread over workers: a site's work (clean, assess, render: :func:`assess_site`) runs on the
  compute engine of ``[compute]``; this process takes the locks, decides what needs doing,
  and alone writes the store, the report files, the notices and the overview pages.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import smtplib
from collections.abc import Callable, Iterator
from contextlib import ExitStack
from dataclasses import dataclass, field
from datetime import date
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.compute import Done, Engine, Progress, SerialEngine, Task, open_engine, run_all
from cyanorisk.config import Config, ServiceSettings, Site
from cyanorisk.errors import (
    ComputeError,
    CyanoriskError,
    RunLockedError,
    SiteLockedError,
    StoreError,
    WorkerLostError,
)
from cyanorisk.forecast import (
    STATUS_ASSESSED,
    STATUS_NONE,
    Assessment,
    Previous,
    changes_since,
    no_assessment,
)
from cyanorisk.pipeline import SitePipeline, SiteWorkspace
from cyanorisk.pipeline.clean import file_digest
from cyanorisk.pipeline.site import RenderedReport, render_report
from cyanorisk.report.document import report_summary
from cyanorisk.service.history import as_previous
from cyanorisk.service.locks import RunLock
from cyanorisk.service.locks import site_lock as lock_of_site
from cyanorisk.service.store import IssuedReport, Store
from cyanorisk.version import __version__

Clock = Callable[[], str]
"""Gives the current instant as ISO 8601 text (injected; the service passes the real clock)."""

__all__ = ["Assessed", "RunLockedError", "RunResult", "SiteOutcome", "assess_site",
           "deliver_notices", "run_daily", "site_lock", "utc_clock"]

ACTIONS = ("issued", "unchanged", "failed", "locked", "interrupted")


@dataclass
class SiteOutcome:
    """What a run did for one site."""

    site_id: str
    action: str
    """'issued' (a new revision), 'unchanged' (same inputs as the last revision), 'failed' (the
    cause in ``reason``; a report already issued for the day stays), 'locked' (another run
    holds the site) or 'interrupted' (a worker was lost before the site was done; the next run
    does it)."""
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
    """'ok'; 'partial' when some sites failed or were locked; 'failed' when every site did;
    'interrupted' when a worker was lost mid-run (the next run completes it)."""
    sites: list[SiteOutcome]

    @property
    def failed(self) -> list[SiteOutcome]:
        return [o for o in self.sites if o.action in ("failed", "locked", "interrupted")]


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


def _clean(store: Store, site_id: str, files: list[tuple[str, str, dict[str, int]]],
           when: str) -> None:
    """Record the raw files behind a site's clean data (path, content hash, row accounts)."""
    for path, digest, rows in files:
        store.record_file(site_id, path, digest, rows, when)


def _file_rows(pipeline: SitePipeline) -> list[tuple[str, str, dict[str, int]]]:
    """Clean data for the site (shared with the command line); the files behind it."""
    clean = pipeline.clean()
    weather_files = {str(p) for p in pipeline.site.weather.files}
    return [(path, digest, clean.rows["weather"] if path in weather_files
             else clean.rows["samples"] or {}) for path, digest in pipeline.digests().items()]


# notices -----------------------------------------------------------------------------------------

def notice_for(service: ServiceSettings, assessment: Assessment, previous: IssuedReport | None,
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
    msg["From"] = service.mail_from
    msg["To"] = ", ".join(service.mail_to) or "water-quality team"
    msg["Message-ID"] = f"<{spec.site_id}.{day}.{key}@cyanorisk>"  # the same for a repeat
    was = previous.level if previous is not None else "no earlier report"
    msg.set_content(f"{assessment.headline}\n\nPrevious report: {was}.\n\n" + "\n".join(
        f"- {x}" for x in assessment.cautions) + f"\n\n{assessment.deferral}\n")
    return msg


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


# one site: the task, in whichever process runs it ---------------------------------------------

@dataclass
class Assessed:
    """What the work of one site gave, as its task returns it to the coordinating process."""

    site_id: str
    fingerprint: str
    inputs: dict[str, Any]
    failure: str | None = None
    """Why the site could not be assessed (None: it was)."""
    rendered: RenderedReport | None = None
    """The report to issue; None when a failure leaves the day's report as it is."""
    record: dict[str, Any] = field(default_factory=dict)
    """status, level_rank, level, probabilities, model_version and thresholds of the report."""
    notice: bytes | None = None
    """The notification of the report (an e-mail message), when one is due."""
    notice_subject: str = ""
    notice_body: str = ""
    files: list[tuple[str, str, dict[str, int]]] = field(default_factory=list)
    """The raw files behind the clean data: path, content hash, row accounts."""


def assess_site(site: Site, workspace: SiteWorkspace, config_path: str, service: ServiceSettings,
                as_of: str, run_day: date, inputs: dict[str, Any], failure: str | None,
                same_day: IssuedReport | None, previous: IssuedReport | None,
                changes_from: Previous | None) -> Assessed:
    """Clean one site's data, assess the day and render its report and notice. Runs wherever
    the compute engine puts it; writes only the site's clean tables (its own cache) and returns
    the rest for the coordinating process to write and record. Never raises for the site's own
    problems: they come back in :attr:`Assessed.failure` with a 'no assessment' report (unless
    a report issued earlier for the day stays, or the same failure was reported already).

    ``failure`` is a problem found before (reading the inputs); ``same_day`` the report issued
    for the day already, ``previous`` the one a rise is measured from, ``changes_from`` the one
    'what changed' compares with."""
    pipeline = SitePipeline(site, workspace, config_path, run_day)
    files: list[tuple[str, str, dict[str, int]]] = []
    assessment = None
    if failure is None:
        try:
            files = _file_rows(pipeline)
            assessment = pipeline.assess(pd.Timestamp(as_of))
        except Exception as exc:  # one site's problem: a 'no assessment' report says it
            failure = _reason(exc)
    if failure is not None:
        inputs = {**inputs, "error": failure}
    fp = fingerprint(as_of, inputs)
    out = Assessed(site.id, fp, inputs, failure, files=files)
    if failure is not None:
        if same_day is not None and (same_day.status != STATUS_NONE or same_day.fingerprint == fp):
            return out
        assessment = no_assessment(pipeline.spec, pd.Timestamp(as_of), failure,
                                   pipeline.lab_level_or_none(as_of))
    assert assessment is not None
    assessment.changes = changes_since(assessment, changes_from)
    out.rendered = render_report(assessment)
    f = assessment.forecast
    out.record = {"status": assessment.status, "level_rank": assessment.level_rank,
                  "level": assessment.level, "probabilities": dict(f.probabilities or {}),
                  "model_version": assessment.model.trained_with,
                  "thresholds": {"warn_at": dict(f.thresholds.warn_at) if f.thresholds else {},
                                 "source": f.thresholds.source if f.thresholds else "not applied"}}
    msg = notice_for(service, assessment, previous, fp[:16])
    if msg is not None:
        out.notice, out.notice_subject, out.notice_body = (bytes(msg), str(msg["Subject"]),
                                                           msg.get_content())
    return out


def _reason(exc: BaseException) -> str:
    text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    return text if isinstance(exc, CyanoriskError) else f"{type(exc).__name__}: {text}"


# one site: the coordinator's part -------------------------------------------------------------

@dataclass
class _Claim:
    """A site whose locks the coordinator holds while its task runs."""

    pipeline: SitePipeline
    locks: ExitStack
    same_day: IssuedReport | None


def _start(config: Config, site: Site, store: Store, day: str, clock: Clock,
           run_day: date) -> tuple[SiteOutcome | None, _Claim | None, tuple]:
    """Take a site's locks, then settle it here (locked, or the same inputs as the day's
    report: an outcome) or hand back its claim and the arguments of its task."""
    locks = ExitStack()
    try:
        locks.enter_context(site_lock(config, site))
        locks.enter_context(store.site_day_lock(site.id, day, when=clock()))
    except (RunLockedError, SiteLockedError) as exc:
        locks.close()
        return SiteOutcome(site.id, "locked", reason=_reason(exc)), None, ()
    except BaseException:
        locks.close()
        raise
    try:
        pipeline = SitePipeline.of(config, site, run_day)
        same_day = store.latest_report(site.id, day)
        inputs: dict[str, Any] = {}
        failure = None
        try:
            inputs = site_inputs(pipeline)
        except Exception as exc:  # e.g. a file pattern that matches nothing: this site only
            failure = _reason(exc)
        if failure is None:
            fp = fingerprint(day, inputs)
            if same_day is not None and same_day.fingerprint == fp \
                    and same_day.status != STATUS_NONE and all(Path(p).exists() for p in same_day.paths):
                locks.close()
                return SiteOutcome(site.id, "unchanged", same_day.revision, same_day.status,
                                   same_day.level, "same inputs as the last revision",
                                   same_day.paths), None, ()
        before = store.latest_report(site.id, before=day)  # what 'what changed' compares with
        args = (site, pipeline.workspace, config.path, config.service, day, run_day, inputs, failure,
                same_day, same_day or before, as_previous(before))
        return None, _Claim(pipeline, locks, same_day), args
    except BaseException:
        locks.close()
        raise


def _finish(store: Store, claim: _Claim, done: Done, day: str, run_id: int,
            clock: Clock) -> SiteOutcome:
    """File a site's result: record its files, write its report, queue its notice, record the
    report; then release its locks."""
    site_id = claim.pipeline.spec.site_id
    try:
        if done.error is not None:  # the task fell over (e.g. a page that cannot be drawn)
            return SiteOutcome(site_id, "failed", reason=_reason(done.error))
        result: Assessed = done.value
        if result.files:
            _clean(store, site_id, result.files, clock())
        same_day = claim.same_day
        if result.rendered is None:  # a failure, and the report issued earlier stays
            assert result.failure is not None and same_day is not None
            if same_day.status == STATUS_NONE:
                return SiteOutcome(site_id, "failed", same_day.revision, STATUS_NONE, None,
                                   result.failure, same_day.paths)
            since = _changes(same_day.inputs, result.inputs)
            after = f", after: {', '.join(since)}" if since else ""
            return SiteOutcome(site_id, "failed", same_day.revision, same_day.status,
                               same_day.level, f"{result.failure} (the report issued earlier for "
                               f"this day, revision {same_day.revision}, stays{after})",
                               same_day.paths)
        outcome = _issue(claim.pipeline, store, day, run_id, clock, result, same_day)
        if result.failure is not None:
            outcome.action, outcome.reason = "failed", result.failure
        return outcome
    except StoreError:
        raise
    except Exception as exc:  # e.g. the report folder cannot be written: this site only
        return SiteOutcome(site_id, "failed", reason=_reason(exc))
    finally:
        claim.locks.close()


def _issue(pipeline: SitePipeline, store: Store, as_of: str, run_id: int, clock: Clock,
           result: Assessed, same_day: IssuedReport | None) -> SiteOutcome:
    """Write the report's files, queue its notice, record it: in this order (crash-safe)."""
    assert result.rendered is not None
    site_id = pipeline.spec.site_id
    paths = [str(p) for p in pipeline.write_rendered(result.rendered)]
    reason = ("first report for this day" if same_day is None else
              "inputs changed: " + ", ".join(_changes(same_day.inputs, result.inputs) or
                                             ["status changed"]))
    if result.failure is not None:
        reason = f"no assessment: {result.failure}; {reason}"
    when = clock()
    note = _queue_notice(pipeline, store, result, as_of, when)
    r = result.record
    recorded = store.record_report(IssuedReport(
        site_id=site_id, as_of=as_of, revision=0, status=r["status"], level_rank=r["level_rank"],
        level=r["level"], probabilities=r["probabilities"], model_version=r["model_version"],
        thresholds=r["thresholds"], fingerprint=result.fingerprint, inputs=result.inputs,
        paths=paths, reason=reason, issued_at=when, run_id=run_id,
        summary=report_summary(result.rendered.document)))
    return SiteOutcome(site_id, "issued", recorded.revision, r["status"], r["level"], reason,
                       paths, note)


def _queue_notice(pipeline: SitePipeline, store: Store, result: Assessed, day: str,
                  when: str) -> str | None:
    """Write the notice to the outbox folder and record it as pending; its file, or None."""
    if result.notice is None:
        return None
    key = result.fingerprint[:16]
    site_id = pipeline.spec.site_id
    path = pipeline.workspace.notice_file(f"{site_id}_{day}_{key}.eml")
    if not path.exists():
        data = result.notice
        write_group({path: lambda tmp: tmp.write_bytes(data)})
    store.record_notice(site_id, day, f"{site_id}/{day}/{key}", result.notice_subject,
                        result.notice_body, when, str(path))
    return str(path)


# the run --------------------------------------------------------------------------------------

def run_daily(as_of: str | pd.Timestamp, config: Config, *, clock: Clock,
              store: Store | None = None, engine: Engine | None = None,
              progress: Progress | None = None) -> RunResult:
    """Run the daily job for local date ``as_of`` over every site of ``config``, each under its
    own locks, then deliver the outbox's pending notices (those of earlier runs included), then
    rewrite the overview pages.

    The sites' work is spread over ``engine`` (default: the one ``[compute]`` configures;
    'serial' when it cannot start, said in the run's record); this process alone writes the
    store, the reports and the notices, filing each site as its result comes. A worker lost
    mid-run leaves the run 'interrupted', with the sites it had not finished; the next run
    completes them (what was recorded is not done again).

    Raises
    ------
    StoreError
        When the store cannot be used (nothing is assessed then).
    """
    day = str(pd.Timestamp(as_of).date())
    own_store, own_engine = store is None, engine is None
    store = store or Store(config.store_url)
    claims: dict[str, _Claim] = {}
    try:
        now = clock()
        store.close_interrupted_runs(now)  # owner-aware: only runs whose process is gone
        single = config.sites[0].id if len(config.sites) == 1 else None
        run_id = store.start_run(day, now, site_id=single)
        today = pd.Timestamp(now).date()
        notes: list[str] = []
        if engine is None and len(config.sites) == 1:
            engine = SerialEngine()  # one site: nothing to spread, no cluster to start
        elif engine is None:
            try:
                engine = open_engine(config.compute)
            except ComputeError as exc:  # the reports matter more than the speed
                notes.append(f"{exc}; the sites ran one after another in this process")
                engine = SerialEngine()
        outcomes: dict[str, SiteOutcome] = {}

        def settle(outcome: SiteOutcome) -> None:
            outcomes[outcome.site_id] = outcome
            if progress is not None:
                progress.step(outcome.site_id, outcome.action)

        def tasks() -> Iterator[Task]:
            for site in config.sites:
                outcome, claim, args = _start(config, site, store, day, clock, today)
                if outcome is not None:
                    settle(outcome)
                    continue
                assert claim is not None
                claims[site.id] = claim
                yield site.id, assess_site, args

        lost = None
        try:
            for done in run_all(engine, tasks()):
                settle(_finish(store, claims.pop(done.key), done, day, run_id, clock))
        except StoreError:
            raise
        except Exception as exc:  # a worker or the cluster lost, or the engine itself failed
            lost = str(exc) if isinstance(exc, WorkerLostError) else \
                f"the compute engine failed: {_reason(exc)}"
            for site in config.sites:
                if site.id not in outcomes:
                    settle(SiteOutcome(site.id, "interrupted", reason=f"{lost}; the next run "
                                                                       "completes this site"))
        ordered = [outcomes[s.id] for s in config.sites]
        problems = deliver_notices(config, store, clock, [s.id for s in config.sites])
        for site_id, text in problems:  # the report stands; the notice is retried next run
            o = outcomes[site_id]
            o.reason = f"{o.reason}; {text}" if o.reason else text
        bad = [o for o in ordered if o.action in ("failed", "locked", "interrupted")]
        status = "interrupted" if lost else "ok" if not bad and not problems else (
            "failed" if len(bad) == len(ordered) else "partial")
        notes += overview_problems(config, store, day)
        errors = "; ".join(([lost] if lost else []) + notes
                           + [f"{o.site_id}: {o.reason}" for o in bad if o.action != "interrupted"]
                           + [f"{site_id}: {text}" for site_id, text in problems])
        store.end_run(run_id, clock(), status, errors or None)
        return RunResult(day, run_id, status, ordered)
    finally:
        for claim in claims.values():
            claim.locks.close()
        if own_engine and engine is not None:
            engine.close()
        if own_store:
            store.close()


def overview_problems(config: Config, store: Store, day: str) -> list[str]:
    """Rewrite the overview, the sites' latest pages and histories from the store; what could
    not be written, in sentences (the run's reports stand either way)."""
    from cyanorisk.report.overview import write_overview

    try:
        write_overview(config, store)
        return []
    except StoreError:
        raise
    except Exception as exc:
        return [f"the overview pages could not be written: {_reason(exc)}"]


def utc_clock() -> str:
    """The real clock, for the service's edge only."""
    return pd.Timestamp.now(tz="UTC").isoformat()
