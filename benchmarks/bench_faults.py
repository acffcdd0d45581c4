"""Fault benchmark: the malformed-input corpus, then the daily job killed at random moments.

1. Runs every input of tests/data/corpus/ (cases.toml) as tests/test_corpus.py does, counting
   tracebacks and silent misreadings (rows kept, spans or values that should not be).
2. Generates the demo reservoir (``cyanorisk demo``) in a temporary folder and, for 20 days in a
   row, starts ``cyanorisk run --as-of DAY``, kills it (SIGKILL) at a random moment of a run's
   usual duration, then checks that the reports of earlier days are intact, that the store
   opens, and that a rerun completes and records the day once. ``lost_reports`` counts earlier
   reports changed or missing and days left unrecorded; ``duplicates`` counts extra revisions of
   a day and extra notices (Message-IDs or outbox files) for one event.

The last line is machine-readable. Not part of the test suite (it takes a few minutes).

Usage: python benchmarks/bench_faults.py [--kills 20] [--seed 7]
"""

from __future__ import annotations

import argparse
import hashlib
import random
import re
import signal
import subprocess
import sys
import tempfile
import time
from datetime import date, timedelta
from pathlib import Path

from cyanorisk.config import embedded_demo_text, load_config
from cyanorisk.service.store import Store

TESTS = Path(__file__).resolve().parents[1] / "tests"
sys.path.insert(0, str(TESTS))
from corpus import cases, run_case  # noqa: E402
from installation import DemoInstall  # noqa: E402

DEMO_LAST_DAY = date(2025, 1, 14)


def corpus(install: DemoInstall, work: Path) -> tuple[int, int, int, list[str]]:
    """(inputs, tracebacks, misread, other differences) over the whole corpus."""
    tracebacks = misread = 0
    wrong = []
    every = cases()
    for k, case in enumerate(every):
        outcome = run_case(case, work / f"case{k}", install)
        tracebacks += outcome.traceback
        misread += bool(outcome.misread)
        wrong += [f"{case.id}: {w}" for w in outcome.wrong + outcome.misread]
    return len(every), tracebacks, misread, wrong


def digest(path: str) -> str | None:
    p = Path(path)
    return hashlib.sha256(p.read_bytes()).hexdigest() if p.exists() else None


def kills(root: Path, config_path: Path, n: int, rng: random.Random) -> dict[str, int]:
    cyanorisk = str(Path(sys.executable).parent / "cyanorisk")
    config = load_config(config_path)
    site = config.sites[0].id
    first = DEMO_LAST_DAY - timedelta(days=n + 1)

    def run(day: date) -> subprocess.CompletedProcess:
        return subprocess.run([cyanorisk, "run", "--config", str(config_path), "--as-of",
                               str(day)], cwd=root, capture_output=True, text=True)

    start = time.perf_counter()
    done = run(first)
    usual = time.perf_counter() - start
    if done.returncode not in (0, 3):
        raise SystemExit(f"the first run failed: {done.stderr.strip()}")
    kept: dict[str, str | None] = {}  # every recorded report file and its digest
    counts = dict(kills=0, mid_run=0, survived=0, lost_reports=0, duplicates=0, tracebacks=0)

    def remember() -> None:
        with Store(config.store_url, create=False) as store:
            for report in store.reports(site):
                for p in report.paths:
                    kept[p] = digest(p)

    remember()
    for i in range(1, n + 1):
        day = first + timedelta(days=i)
        proc = subprocess.Popen([cyanorisk, "run", "--config", str(config_path), "--as-of",
                                 str(day)], cwd=root, stdout=subprocess.DEVNULL,
                                stderr=subprocess.DEVNULL)
        time.sleep(rng.uniform(0.02, 0.95) * usual)
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
            counts["mid_run"] += 1
        proc.wait()
        counts["kills"] += 1
        ok = all(digest(p) == d for p, d in kept.items())
        counts["lost_reports"] += sum(digest(p) != d for p, d in kept.items())
        try:
            with Store(config.store_url, create=False) as store:
                store.reports(site)
        except Exception as exc:
            print(f"  day {day}: the store does not open: {exc}")
            ok = False
        again = run(day)
        counts["tracebacks"] += "Traceback" in again.stderr
        with Store(config.store_url, create=False) as store:
            recorded = store.reports(site, str(day))
        if again.returncode not in (0, 3) or not recorded:
            print(f"  day {day}: the rerun failed ({again.returncode}): {again.stderr.strip()}")
            counts["lost_reports"] += not recorded
            ok = False
        counts["survived"] += ok
        remember()
    with Store(config.store_url, create=False) as store:
        by_day: dict[str, int] = {}
        for report in store.reports(site):
            by_day[report.as_of] = by_day.get(report.as_of, 0) + 1
        counts["duplicates"] += sum(v - 1 for v in by_day.values())
        events: dict[str, set[str]] = {}
        for notice in store.notices(site):
            events.setdefault(notice.as_of, set()).add(notice.message_id)
        counts["duplicates"] += sum(len(v) - 1 for v in events.values())
    files: dict[str, int] = {}
    for eml in config.outbox.glob("*.eml"):
        day_of = eml.name.split("_")[1]
        files[day_of] = files.get(day_of, 0) + 1
    counts["duplicates"] += sum(v - 1 for v in files.values())
    return counts


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kills", type=int, default=20)
    parser.add_argument("--seed", type=int, default=7)
    args = parser.parse_args()
    cyanorisk = str(Path(sys.executable).parent / "cyanorisk")
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        config_path = root / "demo.toml"
        config_path.write_text(re.sub(r'(?m)^root = "\.\."', 'root = "."', embedded_demo_text()),
                               encoding="utf-8")
        subprocess.run([cyanorisk, "demo", "--config", str(config_path)], cwd=root, check=True,
                       capture_output=True)
        inputs, tracebacks, misread, wrong = corpus(DemoInstall.of(config_path), root / "corpus")
        for line in wrong:
            print(f"  {line}")
        counts = kills(root, config_path, args.kills, random.Random(args.seed))
    print(f"  {counts['mid_run']} of {counts['kills']} kills landed while the run was going "
          "(the others after it had ended)")
    print(f"bench_faults: inputs={inputs} tracebacks={tracebacks + counts['tracebacks']} "
          f"misread={misread} kills={counts['kills']} survived={counts['survived']} "
          f"lost_reports={counts['lost_reports']} duplicates={counts['duplicates']}")


if __name__ == "__main__":
    main()
