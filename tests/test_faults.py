"""Fault injection: the daily job killed at four points (after ingest, after writing the report,
after sending its notice, before recording it). The next run repairs: the store stays
consistent, the killed run is marked interrupted, the day's report is recorded once and whole,
the earlier report is untouched and the notice is one (one Message-ID, one outbox file)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from cyanorisk.config import load_config
from cyanorisk.service.jobs import run_daily, utc_clock
from cyanorisk.service.store import Store
from faults import KILLED
from test_jobs import ALERT1, LOW_DAY, RISE_DAY, SITE, make_config

FAULTS = Path(__file__).parent / "faults.py"


@pytest.mark.parametrize("point", ["after_ingest", "after_writing", "after_sending",
                                   "before_recording"])
def test_a_killed_daily_job_is_repaired_by_the_next_run(point, tmp_path, demo_site):
    path = make_config(tmp_path, demo_site)
    config = load_config(path)
    (low,) = run_daily(LOW_DAY, config, clock=utc_clock).sites
    low_files = {p: Path(p).read_bytes() for p in low.paths}

    killed = subprocess.run([sys.executable, str(FAULTS), point, "run", "--config", str(path),
                             "--as-of", RISE_DAY], capture_output=True, text=True, timeout=300)
    assert killed.returncode == KILLED, killed.stderr
    assert "Traceback" not in killed.stderr

    with Store(config.store_url) as store:  # the store opens after the kill
        assert store.runs()[-1]["status"] == "running"  # nobody closed it
    (o,) = run_daily(RISE_DAY, config, clock=utc_clock).sites
    # killed after sending, the report was already recorded: the rerun finds it and delivers
    # the notice still marked pending; at every other point it issues the day's report
    action = "unchanged" if point == "after_sending" else "issued"
    assert (o.action, o.revision, o.level) == (action, 1, ALERT1)

    with Store(config.store_url) as store:
        statuses = [r["status"] for r in store.runs()]
        (rec,) = store.reports(SITE, RISE_DAY)
        notices = store.notices(SITE)
    assert statuses == ["ok", "interrupted", "ok"]
    assert {p: Path(p).read_bytes() for p in low.paths} == low_files  # the earlier report
    doc = json.loads(Path(next(p for p in rec.paths if p.endswith(".json"))).read_text("utf-8"))
    assert (doc["as_of"], doc["level"]) == (RISE_DAY, ALERT1)
    assert [p.name for p in (config.reports_dir / SITE).iterdir() if ".tmp" in p.name] == []
    (notice,) = [n for n in notices if n.as_of == RISE_DAY]
    assert notice.state == "sent"
    (eml,) = [p for p in config.outbox.iterdir() if RISE_DAY in p.name]
    assert f"Message-ID: <{SITE}.{RISE_DAY}." in eml.read_text(encoding="utf-8")
