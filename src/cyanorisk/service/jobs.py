"""The daily job: ``run_daily(as_of, config)`` assesses every site and records what it issued.

- Incremental: a site whose files are all known to the store with the same content hash (and
  whose clean tables exist) is not ingested again; new or changed files trigger a fresh ingest.
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
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import pandas as pd

import cyanorisk
from cyanorisk.atomic import write_group
from cyanorisk.config import Config, Site
from cyanorisk.evaluation import thresholds_path
from cyanorisk.forecast import STATUS_NONE, Assessment, no_assessment
from cyanorisk.ingest.sites import (
    ingest_site_samples,
    ingest_site_weather,
    site_paths,
    write_site_ingest,
)
from cyanorisk.reporting import assess_site, model_path, thresholds_for, write_report
from cyanorisk.service.store import IssuedReport, Store

Clock = Callable[[], str]
"""Gives the current instant as ISO 8601 text (injected; the service passes the real clock)."""


class RunLockedError(RuntimeError):
    """Another daily run holds the lock."""


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


def sha256_of(path: Path) -> str:
    """Hex SHA-256 of a file's bytes, read in chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


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


def site_inputs(config: Config, site: Site) -> dict[str, Any]:
    """Content hashes of everything a site's report depends on."""
    files = {str(p): sha256_of(p) for p in site.weather.files}
    if site.samples is not None:
        files.update({str(p): sha256_of(p) for p in site.samples.files})
    model = model_path(config, site.id)
    tuned = thresholds_path(config, site.id)
    return {"files": files,
            "model": sha256_of(model) if model.exists() else None,
            "thresholds": sha256_of(tuned) if tuned.exists() else None,
            "cyanorisk_version": cyanorisk.__version__}


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


def _site_data(config: Config, site: Site, store: Store, inputs: dict[str, Any],
               when: str) -> tuple[pd.DataFrame, pd.DataFrame | None, dict]:
    """The site's clean weather and sample totals: from the last ingest when no file changed."""
    paths = site_paths(config, site.id)
    summary = config.data_dir / site.id / "ingest_rows.json"
    needed = [paths["weather"], summary] + ([paths["sample_totals"]] if site.samples else [])
    if all(p.exists() for p in needed):
        cached = json.loads(summary.read_text(encoding="utf-8"))
        # the clean tables serve only while the files behind them are exactly the current ones
        if cached.get("files") == inputs["files"]:
            totals = pd.read_parquet(paths["sample_totals"]) if site.samples else None
            return pd.read_parquet(paths["weather"]), totals, cached
    weather = ingest_site_weather(config, site)
    samples = ingest_site_samples(config, site, weather.meta)
    rows = {"weather": weather.meta.account.as_dict(),
            "samples": samples.meta.account.as_dict() if samples else None,
            "files": inputs["files"]}
    write_site_ingest(config, weather, samples)
    write_group({summary: lambda tmp: tmp.write_text(json.dumps(rows), encoding="utf-8")})
    for path, digest in inputs["files"].items():
        store.record_file(site.id, path, digest, rows["weather"] if path in map(str, site.weather.files)
                          else rows["samples"] or {}, when)
    return weather.data, (samples.totals if samples else None), rows


def notify(config: Config, assessment: Assessment, previous: IssuedReport | None,
           revision: int) -> str | None:
    """Write (and mail, when configured) a notification when the level rose; the outbox path."""
    c = assessment.content
    rank = c["forecast"]["level_rank"]
    before = previous.level_rank if previous is not None else None
    if rank is None or rank <= (before or 0):
        return None
    msg = EmailMessage()
    msg["Subject"] = (f"cyanorisk: {c['site']['name']} rose to {c['forecast']['level']} "
                      f"({c['as_of']})")
    msg["From"] = config.service.mail_from
    msg["To"] = ", ".join(config.service.mail_to) or "water-quality team"
    was = previous.level if previous is not None else "no earlier report"
    msg.set_content(f"{c['headline']}\n\nPrevious report: {was}.\n\n" + "\n".join(
        f"- {x}" for x in c["cautions"]) + f"\n\n{c['deferral']}\n")
    path = config.outbox / f"{c['site']['id']}_{c['as_of']}_r{revision}.eml"
    write_group({path: lambda tmp: tmp.write_bytes(bytes(msg))})
    if config.service.smtp_host and config.service.mail_to:
        with smtplib.SMTP(config.service.smtp_host, config.service.smtp_port, timeout=30) as smtp:
            smtp.send_message(msg)
    return str(path)


def _issue(config: Config, site: Site, store: Store, as_of: str, run_id: int, when: str,
           assessment: Assessment, inputs: dict[str, Any], fp: str,
           previous_same_day: IssuedReport | None, failure: str | None = None) -> SiteOutcome:
    paths = [str(p) for p in write_report(config, assessment)]
    c = assessment.content
    revision = previous_same_day.revision + 1 if previous_same_day else 1
    reason = ("first report for this day" if previous_same_day is None else
              "inputs changed: " + ", ".join(_changes(previous_same_day.inputs, inputs) or
                                             ["status changed"]))
    if failure is not None:
        reason = f"no assessment: {failure}; {reason}"
    previous = store.latest_report(site.id, as_of) or store.latest_report(site.id, before=as_of)
    note = notify(config, assessment, previous, revision) if c["status"] != STATUS_NONE else None
    thresholds = {"warn_at": c["forecast"]["warn_at"], "source": c["forecast"]["thresholds_source"]}
    store.record_report(IssuedReport(
        site_id=site.id, as_of=as_of, revision=revision, status=c["status"],
        level_rank=c["forecast"]["level_rank"], level=c["forecast"]["level"],
        probabilities=c["forecast"]["probabilities"], model_version=c["model"]["trained_with"],
        thresholds=thresholds, fingerprint=fp, inputs=inputs, paths=paths, reason=reason,
        issued_at=when, run_id=run_id))
    return SiteOutcome(site.id, "issued", revision, c["status"], c["forecast"]["level"], reason,
                       paths, note)


def run_site(config: Config, site: Site, store: Store, as_of: str, run_id: int,
             clock: Clock) -> SiteOutcome:
    """Assess one site for one day, unless the same inputs were already reported."""
    previous = store.latest_report(site.id, as_of)
    inputs: dict[str, Any] = {}
    try:
        inputs = site_inputs(config, site)
        fp = fingerprint(as_of, inputs)
        if previous is not None and previous.fingerprint == fp and previous.status != STATUS_NONE \
                and all(Path(p).exists() for p in previous.paths):
            return SiteOutcome(site.id, "unchanged", previous.revision, previous.status,
                               previous.level, "same inputs as the last revision", previous.paths)
        weather, totals, rows = _site_data(config, site, store, inputs, clock())
        thresholds_for(config, site)  # a broken thresholds file fails here, for this site only
        assessment = assess_site(config, site, weather, totals, rows, pd.Timestamp(as_of))
    except Exception as exc:  # the service must not fall over on one site: record and go on
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        inputs = {**inputs, "error": reason}
        fp = fingerprint(as_of, inputs)
        if previous is not None and previous.fingerprint == fp:
            return SiteOutcome(site.id, "failed", previous.revision, STATUS_NONE, None, reason,
                               previous.paths)
        outcome = _issue(config, site, store, as_of, run_id, clock(),
                         no_assessment(site, pd.Timestamp(as_of), reason), inputs, fp, previous,
                         failure=reason)
        outcome.action = "failed"
        outcome.reason = reason
        return outcome
    return _issue(config, site, store, as_of, run_id, clock(), assessment, inputs, fp, previous)


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
            outcomes = [run_site(config, site, store, day, run_id, clock) for site in config.sites]
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

