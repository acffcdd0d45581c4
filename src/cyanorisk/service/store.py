"""The embedded store: what the service ingested, ran and issued.

SQLite by default (one file under the data directory; nothing to install), through SQLAlchemy so
that a PostgreSQL URL in the configuration works too. Tables:

- ``meta``: the schema version; a store written by a newer cyanorisk is refused;
- ``ingested_files``: path, content hash, row accounting, when;
- ``runs``: as_of, start, end, status, error;
- ``reports``: site, as_of, revision, status, level, probabilities, model version, thresholds,
  fingerprints of the inputs, report paths, why the revision was issued.

Times are given by the caller (the service reads the clock at its edge), stored as ISO 8601 text.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlalchemy import (
    Column,
    Integer,
    MetaData,
    String,
    Table,
    Text,
    UniqueConstraint,
    create_engine,
    insert,
    select,
    update,
)
from sqlalchemy.engine import Engine, make_url
from sqlalchemy.exc import SQLAlchemyError

SCHEMA_VERSION = 1

metadata = MetaData()

meta_table = Table("meta", metadata, Column("key", String(64), primary_key=True),
                   Column("value", Text, nullable=False))

files_table = Table(
    "ingested_files", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("site_id", String(128), nullable=False),
    Column("path", Text, nullable=False),
    Column("sha256", String(64), nullable=False),
    Column("rows", Text, nullable=False),
    Column("ingested_at", String(40), nullable=False),
    UniqueConstraint("site_id", "path", "sha256"),
)

runs_table = Table(
    "runs", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("as_of", String(10), nullable=False),
    Column("started_at", String(40), nullable=False),
    Column("ended_at", String(40)),
    Column("status", String(32), nullable=False),
    Column("error", Text),
)

reports_table = Table(
    "reports", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("site_id", String(128), nullable=False),
    Column("as_of", String(10), nullable=False),
    Column("revision", Integer, nullable=False),
    Column("status", String(32), nullable=False),
    Column("level_rank", Integer),
    Column("level", Text),
    Column("probabilities", Text, nullable=False),
    Column("model_version", Text),
    Column("thresholds", Text, nullable=False),
    Column("fingerprint", String(64), nullable=False),
    Column("inputs", Text, nullable=False),
    Column("paths", Text, nullable=False),
    Column("reason", Text, nullable=False),
    Column("issued_at", String(40), nullable=False),
    Column("run_id", Integer),
    UniqueConstraint("site_id", "as_of", "revision"),
)


class StoreError(RuntimeError):
    """The store cannot be used (newer schema, unreachable database)."""


@dataclass
class IssuedReport:
    """One issued report as recorded."""

    site_id: str
    as_of: str
    revision: int
    status: str
    level_rank: int | None
    level: str | None
    probabilities: dict[str, float]
    model_version: str | None
    thresholds: dict[str, Any]
    fingerprint: str
    inputs: dict[str, Any]
    paths: list[str]
    reason: str
    issued_at: str
    run_id: int | None = None


class Store:
    """Access to the store. ``url`` is an SQLAlchemy URL, e.g. ``sqlite:///work/cyanorisk.db``."""

    def __init__(self, url: str) -> None:
        self.url = url
        parsed = make_url(url)
        if parsed.get_backend_name() == "sqlite" and parsed.database not in (None, "", ":memory:"):
            Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
        self.engine: Engine = create_engine(url, future=True)
        try:
            self._prepare()
        except SQLAlchemyError as exc:
            raise StoreError(f"{url}: cannot open the store ({str(exc).splitlines()[0]})") from None

    def _prepare(self) -> None:
        metadata.create_all(self.engine)
        with self.engine.begin() as conn:
            row = conn.execute(select(meta_table.c.value).where(meta_table.c.key == "schema_version")).first()
            if row is None:
                conn.execute(insert(meta_table).values(key="schema_version", value=str(SCHEMA_VERSION)))
            elif int(row[0]) > SCHEMA_VERSION:
                raise StoreError(f"{self.url}: the store has schema version {row[0]}, written by a "
                                 f"newer cyanorisk; this one reads version {SCHEMA_VERSION}. Upgrade "
                                 "cyanorisk or point the configuration at another store")

    def close(self) -> None:
        self.engine.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # files -------------------------------------------------------------------------------------

    def file_known(self, site_id: str, path: str, sha256: str) -> bool:
        with self.engine.connect() as conn:
            q = select(files_table.c.id).where(files_table.c.site_id == site_id,
                                               files_table.c.path == path,
                                               files_table.c.sha256 == sha256)
            return conn.execute(q).first() is not None

    def record_file(self, site_id: str, path: str, sha256: str, rows: dict[str, int],
                    when: str) -> None:
        if self.file_known(site_id, path, sha256):
            return
        with self.engine.begin() as conn:
            conn.execute(insert(files_table).values(site_id=site_id, path=path, sha256=sha256,
                                                    rows=json.dumps(rows), ingested_at=when))

    def files(self, site_id: str | None = None) -> list[dict[str, Any]]:
        q = select(files_table)
        if site_id is not None:
            q = q.where(files_table.c.site_id == site_id)
        with self.engine.connect() as conn:
            return [dict(r._mapping) | {"rows": json.loads(r.rows)} for r in conn.execute(q)]

    # runs --------------------------------------------------------------------------------------

    def start_run(self, as_of: str, when: str) -> int:
        with self.engine.begin() as conn:
            res = conn.execute(insert(runs_table).values(as_of=as_of, started_at=when,
                                                         status="running"))
            return int(res.inserted_primary_key[0])

    def end_run(self, run_id: int, when: str, status: str, error: str | None = None) -> None:
        with self.engine.begin() as conn:
            conn.execute(update(runs_table).where(runs_table.c.id == run_id)
                         .values(ended_at=when, status=status, error=error))

    def close_interrupted_runs(self, when: str) -> int:
        """Mark runs left 'running' (their process died) as 'interrupted'; how many."""
        with self.engine.begin() as conn:
            res = conn.execute(update(runs_table).where(runs_table.c.status == "running")
                               .values(ended_at=when, status="interrupted",
                                       error="the run did not finish (the process stopped)"))
            return int(res.rowcount or 0)

    def runs(self) -> list[dict[str, Any]]:
        with self.engine.connect() as conn:
            return [dict(r._mapping) for r in conn.execute(select(runs_table).order_by(runs_table.c.id))]

    def last_run(self) -> dict[str, Any] | None:
        runs = self.runs()
        return runs[-1] if runs else None

    # reports -----------------------------------------------------------------------------------

    def record_report(self, report: IssuedReport) -> IssuedReport:
        with self.engine.begin() as conn:
            conn.execute(insert(reports_table).values(
                site_id=report.site_id, as_of=report.as_of, revision=report.revision,
                status=report.status, level_rank=report.level_rank, level=report.level,
                probabilities=json.dumps(report.probabilities), model_version=report.model_version,
                thresholds=json.dumps(report.thresholds), fingerprint=report.fingerprint,
                inputs=json.dumps(report.inputs), paths=json.dumps(report.paths),
                reason=report.reason, issued_at=report.issued_at, run_id=report.run_id))
        return report

    def reports(self, site_id: str | None = None, as_of: str | None = None) -> list[IssuedReport]:
        q = select(reports_table).order_by(reports_table.c.as_of, reports_table.c.revision)
        if site_id is not None:
            q = q.where(reports_table.c.site_id == site_id)
        if as_of is not None:
            q = q.where(reports_table.c.as_of == as_of)
        with self.engine.connect() as conn:
            return [_report(r) for r in conn.execute(q)]

    def latest_report(self, site_id: str, as_of: str | None = None,
                      before: str | None = None) -> IssuedReport | None:
        """The newest revision for a site (for one as_of, or the latest day before ``before``)."""
        rows = self.reports(site_id, as_of)
        if before is not None:
            rows = [r for r in rows if r.as_of < before]
        return rows[-1] if rows else None


def _report(r: Any) -> IssuedReport:
    m = r._mapping
    return IssuedReport(
        site_id=m["site_id"], as_of=m["as_of"], revision=m["revision"], status=m["status"],
        level_rank=m["level_rank"], level=m["level"], probabilities=json.loads(m["probabilities"]),
        model_version=m["model_version"], thresholds=json.loads(m["thresholds"]),
        fingerprint=m["fingerprint"], inputs=json.loads(m["inputs"]), paths=json.loads(m["paths"]),
        reason=m["reason"], issued_at=m["issued_at"], run_id=m["run_id"])
