"""The daily job: ``run_daily(as_of, config)`` assesses every site and records what it issued.

- Incremental: the site pipeline reuses a site's clean tables while its raw files are unchanged
  (the same cache as the command line's), and parses again only the files that changed.
- Idempotent: a report is issued for (site, as_of) only when its inputs (file hashes, model,
  thresholds) differ from those of the last revision issued; the new revision records why.
- One site failing (a corrupt file, a missing model) does not stop the others: the failure is
  recorded and the site's report says 'no assessment today' with the reason.
- Time is injected: ``as_of`` is the local date assessed and ``clock`` gives the instants
  stamped in the store; nothing here reads the system clock.
- Writes are atomic (temporary file, then rename) and the store is written after the files, so
  a crash in between leaves the last good report in place and the next run repairs the record.
  A lock file prevents two runs at once.
- When a site's level rises compared with its last issued report, a notification goes to the
  outbox folder, and by e-mail when an SMTP server is configured.
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import smtplib
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import date
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.config import Config, Site
from cyanorisk.errors import RunLockedError
from cyanorisk.forecast import STATUS_ASSESSED, STATUS_NONE, Assessment, changes_since, no_assessment
from cyanorisk.pipeline import SitePipeline
from cyanorisk.pipeline.clean import file_digest
from cyanorisk.service.history import previous_report
from cyanorisk.service.store import IssuedReport, Store
from cyanorisk.version import __version__

Clock = Callable[[], str]
"""Gives the current instant as ISO 8601 text (injected; the service passes the real clock)."""

__all__ = ["RunLockedError", "RunResult", "SiteOutcome", "run_daily", "run_site", "utc_clock"]


@dataclass
class SiteOutcome:
    """What a run did for one site."""

    site_id: str
    action: str
    """'issued' (a new revision), 'unchanged' (same inputs as the last revision) or 'failed'."""
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
    """'ok', or 'partial' when some site failed."""
    sites: list[SiteOutcome]


sha256_of = file_digest


@contextmanager
def run_lock(config: Config) -> Iterator[Path]:
    """Hold the data folder's lock for the duration of a run; refuse when it is held."""
    config.data_dir.mkdir(parents=True, exist_ok=True)
    path = config.data_dir / ".cyanorisk-run.lock"
    fh = open(path, "a+")
    try:
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise RunLockedError(f"{path}: another cyanorisk run holds the lock; try again when "
                                 "it has finished") from None
        yield path
    finally:
        fh.close()


def site_inputs(pipeline: SitePipeline) -> dict[str, Any]:
    """Content hashes of everything a site's report depends on."""
    ws = pipeline.workspace
    return {"files": dict(pipeline.digests()),
            "model": file_digest(ws.model_file) if ws.model_file.exists() else None,
            "thresholds": file_digest(ws.thresholds_file) if ws.thresholds_file.exists() else None,
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
    for key in ("model", "thresholds", "cyanorisk_version"):
        if key in old and key in new and old[key] != new[key]:
            said.append(f"{key.replace('_', ' ')} changed")
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


def notify(config: Config, pipeline: SitePipeline, assessment: Assessment,
           previous: IssuedReport | None, revision: int) -> str | None:
    """Write (and mail, when configured) a notification when the level stated rose, or when a
    site that had an outlook has none (insufficient data, no assessment); the outbox path.
    Levels are compared by name in the site's scheme (ranks change when a scheme gains a
    level)."""
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
    was = previous.level if previous is not None else "no earlier report"
    msg.set_content(f"{assessment.headline}\n\nPrevious report: {was}.\n\n" + "\n".join(
        f"- {x}" for x in assessment.cautions) + f"\n\n{assessment.deferral}\n")
    path = pipeline.workspace.notice_file(f"{spec.site_id}_{day}_r{revision}.eml")
    write_group({path: lambda tmp: tmp.write_bytes(bytes(msg))})
    if config.service.smtp_host and config.service.mail_to:
        with smtplib.SMTP(config.service.smtp_host, config.service.smtp_port, timeout=30) as smtp:
            smtp.send_message(msg)
    return str(path)


def _issue(config: Config, pipeline: SitePipeline, store: Store, as_of: str, run_id: int,
           when: str, assessment: Assessment, inputs: dict[str, Any], fp: str,
           previous_same_day: IssuedReport | None, failure: str | None = None) -> SiteOutcome:
    site_id = pipeline.spec.site_id
    previous = store.latest_report(site_id, as_of) or store.latest_report(site_id, before=as_of)
    assessment.changes = changes_since(assessment, previous_report(store, site_id, as_of))
    paths = [str(p) for p in pipeline.write_report(assessment)]
    f = assessment.forecast
    revision = previous_same_day.revision + 1 if previous_same_day else 1
    reason = ("first report for this day" if previous_same_day is None else
              "inputs changed: " + ", ".join(_changes(previous_same_day.inputs, inputs) or
                                             ["status changed"]))
    if failure is not None:
        reason = f"no assessment: {failure}; {reason}"
    note = notify(config, pipeline, assessment, previous, revision)
    thresholds = {"warn_at": dict(f.thresholds.warn_at) if f.thresholds else {},
                  "source": f.thresholds.source if f.thresholds else "not applied"}
    store.record_report(IssuedReport(
        site_id=site_id, as_of=as_of, revision=revision, status=assessment.status,
        level_rank=assessment.level_rank, level=assessment.level,
        probabilities=dict(f.probabilities or {}),
        model_version=assessment.model.trained_with, thresholds=thresholds, fingerprint=fp,
        inputs=inputs, paths=paths, reason=reason, issued_at=when, run_id=run_id))
    return SiteOutcome(site_id, "issued", revision, assessment.status, assessment.level, reason,
                       paths, note)


def run_site(config: Config, site: Site, store: Store, as_of: str, run_id: int,
             clock: Clock, run_day: date | None = None) -> SiteOutcome:
    """Assess one site for one day, unless the same inputs were already reported.
    ``run_day`` is the day of the run by the service's clock (see :class:`SitePipeline`)."""
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
    except Exception as exc:  # the service must not fall over on one site: record and go on
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        inputs = {**inputs, "error": reason}
        fp = fingerprint(as_of, inputs)
        if previous is not None and previous.fingerprint == fp:
            return SiteOutcome(site.id, "failed", previous.revision, STATUS_NONE, None, reason,
                               previous.paths)
        outcome = _issue(config, pipeline, store, as_of, run_id, clock(),
                         no_assessment(site.spec, pd.Timestamp(as_of), reason,
                                       pipeline.lab_level_or_none(as_of)), inputs, fp,
                         previous, failure=reason)
        outcome.action = "failed"
        outcome.reason = reason
        return outcome
    return _issue(config, pipeline, store, as_of, run_id, clock(), assessment, inputs, fp, previous)


def run_daily(as_of: str | pd.Timestamp, config: Config, *, clock: Clock,
              store: Store | None = None) -> RunResult:
    """Run the daily job for local date ``as_of`` over every site of ``config``.

    Raises
    ------
    RunLockedError
        When another run holds the lock.
    """
    day = str(pd.Timestamp(as_of).date())
    with run_lock(config):
        own = store is None
        store = store or Store(config.store_url)
        try:
            now = clock()
            store.close_interrupted_runs(now)  # we hold the lock: a run still 'running' crashed
            run_id = store.start_run(day, now)
            today = pd.Timestamp(now).date()
            outcomes = [run_site(config, site, store, day, run_id, clock, today)
                        for site in config.sites]
            status = "partial" if any(o.action == "failed" for o in outcomes) else "ok"
            errors = "; ".join(f"{o.site_id}: {o.reason}" for o in outcomes if o.action == "failed")
            store.end_run(run_id, clock(), status, errors or None)
            return RunResult(day, run_id, status, outcomes)
        finally:
            if own:
                store.close()


def utc_clock() -> str:
    """The real clock, for the service's edge only."""
    return pd.Timestamp.now(tz="UTC").isoformat()
