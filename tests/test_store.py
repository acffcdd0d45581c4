"""The embedded store (cyanorisk.service.store): every table round-trips with all its fields, a
store written by a newer cyanorisk is refused, and opening a store again keeps what it holds.

Each test uses its own SQLite file in ``tmp_path``; times are given by the test (the store never
reads the clock).
"""

from __future__ import annotations

import dataclasses
import re

import pytest
from sqlalchemy import select, update
from sqlalchemy.exc import IntegrityError

from cyanorisk.service import store as store_module
from cyanorisk.service.store import IssuedReport, Store, StoreError, meta_table


@pytest.fixture
def url(tmp_path) -> str:
    return f"sqlite:///{tmp_path / 'cyanorisk.db'}"


def issued(as_of: str = "2024-12-05", revision: int = 1, **changes) -> IssuedReport:
    """An issued report with every field set to a value that is not a default."""
    report = IssuedReport(
        site_id="tallowbark", as_of=as_of, revision=revision, status="assessed", level_rank=1,
        level="Alert Level 1", probabilities={"Alert Level 1": 0.625, "Alert Level 2": 0.03125},
        model_version="0.3.0", thresholds={"warn_at": {"Alert Level 1": 0.5, "Alert Level 2": 0.4},
                                           "source": "tuned (models/tallowbark.thresholds.toml)"},
        fingerprint="ab" * 32,
        inputs={"files": {"/data/aws_2024.txt": "cd" * 32}, "model": "ef" * 32, "thresholds": None,
                "cyanorisk_version": "0.3.0"},
        paths=["/reports/tallowbark/tallowbark_2024-12-05.html",
               "/reports/tallowbark/tallowbark_2024-12-05.json"],
        reason="first report for this day", issued_at="2024-12-04T19:00:05+00:00", run_id=7)
    return dataclasses.replace(report, **changes)


def test_ingested_files_round_trip(url):
    store = Store(url)
    rows = {"read": 17_520, "kept": 17_500, "duplicates_identical": 12, "rejected": 8}
    assert store.file_known("tallowbark", "/data/aws_2024.txt", "cd" * 32) is False
    store.record_file("tallowbark", "/data/aws_2024.txt", "cd" * 32, rows, "2024-12-04T19:00:01+00:00")
    store.record_file("other", "/data/other.txt", "12" * 32, {"read": 3}, "2024-12-04T19:00:02+00:00")
    assert store.file_known("tallowbark", "/data/aws_2024.txt", "cd" * 32) is True
    assert store.file_known("tallowbark", "/data/aws_2024.txt", "00" * 32) is False  # other content
    assert store.file_known("other", "/data/aws_2024.txt", "cd" * 32) is False  # other site
    got = store.files("tallowbark")
    assert got == [{"id": 1, "site_id": "tallowbark", "path": "/data/aws_2024.txt", "sha256": "cd" * 32,
                    "rows": rows, "ingested_at": "2024-12-04T19:00:01+00:00"}]
    assert [f["site_id"] for f in store.files()] == ["tallowbark", "other"]
    # recording the same (site, path, content) again adds nothing
    store.record_file("tallowbark", "/data/aws_2024.txt", "cd" * 32, {"read": 1}, "2030-01-01T00:00:00+00:00")
    assert store.files("tallowbark") == got
    store.close()


def test_runs_round_trip(url):
    store = Store(url)
    assert store.last_run() is None
    first = store.start_run("2024-12-05", "2024-12-04T19:00:00+00:00")
    second = store.start_run("2024-12-06", "2024-12-05T19:00:00+00:00")
    assert second == first + 1
    assert store.runs()[0] == {"id": first, "as_of": "2024-12-05", "started_at": "2024-12-04T19:00:00+00:00",
                               "ended_at": None, "status": "running", "error": None}
    store.end_run(first, "2024-12-04T19:00:09+00:00", "ok")
    store.end_run(second, "2024-12-05T19:00:04+00:00", "partial", "other: no model for site 'other'")
    assert store.runs() == [
        {"id": first, "as_of": "2024-12-05", "started_at": "2024-12-04T19:00:00+00:00",
         "ended_at": "2024-12-04T19:00:09+00:00", "status": "ok", "error": None},
        {"id": second, "as_of": "2024-12-06", "started_at": "2024-12-05T19:00:00+00:00",
         "ended_at": "2024-12-05T19:00:04+00:00", "status": "partial",
         "error": "other: no model for site 'other'"},
    ]
    assert store.last_run()["id"] == second
    store.close()


def test_reports_round_trip_every_field(url):
    store = Store(url)
    report = issued()
    assert store.record_report(report) is report
    (back,) = store.reports()
    assert back == report  # dataclass equality: every field, JSON ones included
    assert {f.name: getattr(back, f.name) for f in dataclasses.fields(IssuedReport)} == \
        {f.name: getattr(report, f.name) for f in dataclasses.fields(IssuedReport)}
    # fields left empty come back empty, not as text
    bare = issued(as_of="2024-12-06", status="no assessment today", level_rank=None, level=None,
                  probabilities={}, model_version=None, thresholds={}, run_id=None)
    store.record_report(bare)
    assert store.reports(as_of="2024-12-06") == [bare]
    store.close()


def test_reports_order_and_latest(url):
    store = Store(url)
    day2_r1 = store.record_report(issued("2024-12-06", 1))
    day1 = store.record_report(issued("2024-12-05", 1))
    day2_r2 = store.record_report(issued("2024-12-06", 2, reason="inputs changed: thresholds changed"))
    other = store.record_report(issued("2024-12-07", 1, site_id="other"))
    assert store.reports("tallowbark") == [day1, day2_r1, day2_r2]
    assert store.reports(as_of="2024-12-06") == [day2_r1, day2_r2]
    assert store.latest_report("tallowbark") == day2_r2
    assert store.latest_report("tallowbark", "2024-12-05") == day1
    assert store.latest_report("tallowbark", before="2024-12-06") == day1
    assert store.latest_report("tallowbark", before="2024-12-05") is None
    assert store.latest_report("other") == other
    assert store.latest_report("nobody") is None
    store.close()


def test_a_revision_is_recorded_once(url):
    store = Store(url)
    store.record_report(issued())
    with pytest.raises(IntegrityError, match="UNIQUE"):
        store.record_report(issued(reason="again"))
    assert [r.reason for r in store.reports()] == ["first report for this day"]
    store.close()


def test_new_store_records_its_schema_version(url):
    store = Store(url)
    with store.engine.connect() as conn:
        value = conn.execute(select(meta_table.c.value).where(meta_table.c.key == "schema_version")).scalar()
    assert value == str(store_module.SCHEMA_VERSION)
    store.close()


def test_newer_schema_is_refused_naming_the_url(url):
    store = Store(url)
    store.record_report(issued())
    with store.engine.begin() as conn:
        conn.execute(update(meta_table).where(meta_table.c.key == "schema_version")
                     .values(value=str(store_module.SCHEMA_VERSION + 1)))
    store.close()
    with pytest.raises(StoreError, match=re.escape(url)) as info:
        Store(url)
    assert f"schema version {store_module.SCHEMA_VERSION + 1}" in str(info.value)
    assert f"reads version {store_module.SCHEMA_VERSION}" in str(info.value)


def test_older_or_same_schema_is_accepted(url, monkeypatch):
    Store(url).close()  # written as version SCHEMA_VERSION
    monkeypatch.setattr(store_module, "SCHEMA_VERSION", store_module.SCHEMA_VERSION + 1)
    store = Store(url)  # a newer cyanorisk opens an older store
    with store.engine.connect() as conn:
        value = conn.execute(select(meta_table.c.value).where(meta_table.c.key == "schema_version")).scalar()
    assert value == str(store_module.SCHEMA_VERSION - 1)  # left as it was
    store.close()


def test_reopening_keeps_the_rows(url):
    store = Store(url)
    store.record_file("tallowbark", "/data/aws_2024.txt", "cd" * 32, {"read": 5}, "2024-12-04T19:00:01+00:00")
    run_id = store.start_run("2024-12-05", "2024-12-04T19:00:00+00:00")
    store.end_run(run_id, "2024-12-04T19:00:09+00:00", "ok")
    report = store.record_report(issued(run_id=run_id))
    files, runs = store.files(), store.runs()
    store.close()

    again = Store(url)
    assert again.files() == files
    assert again.runs() == runs
    assert again.reports() == [report]
    assert len(files) == 1 and len(runs) == 1
    # and it keeps counting where it was
    assert again.start_run("2024-12-06", "2024-12-05T19:00:00+00:00") == run_id + 1
    again.close()
