"""Many-sites benchmark: the daily job and backtests of 100 demo-like sites, serial and on a
two-worker Dask LocalCluster.

Builds 100 sites with the demo generator (a seed each, four years of data), holds back the last
three days of weather, trains every site once (ordinal family, no calibration, no cross-validation:
the daily job's cost does not depend on them) and runs the daily job for the day before the
held-back ones, so that each site has a previous report. Then times in one run:

- the daily job for all 100 sites with a new day of weather for each, serial (in this process);
- the same with the next new day on a two-worker LocalCluster (``[compute] engine = "local"``,
  its start included);
- the same day again, nothing new, on the LocalCluster (its start included);
- a backtest of 10 of the sites over 3 seasons, serial and on the LocalCluster (its start
  included), which must give the same forecasts; the family and calibration are chosen at each
  season start as ``train`` would (the demo's setting, and the backtest's real cost).

Targets on this 2-core machine class: the 100-site daily job with new data under 60 s on two
workers, the repeated day under 10 s, a backtest speed-up of at least 1.6 on two workers. A
profile of ten sites' daily job with new data (serial, before the timed runs) says where the
time goes. The last line is
machine-readable.

Usage: python benchmarks/bench_sites.py [--sites 100] [--backtest-sites 10]
"""

from __future__ import annotations

import argparse
import cProfile
import pstats
import re
import tempfile
import time
from pathlib import Path

from cyanorisk.compute import SerialEngine, open_engine, run_all
from cyanorisk.config import ComputeSettings, embedded_demo_text, load_config
from cyanorisk.demo import sister_site_toml, write_demo
from cyanorisk.pipeline.many import backtest_sites
from cyanorisk.service.jobs import run_daily, utc_clock

YEARS = 4
SEED = 20261202
LAST_DAY = "2025-01-14"
"""The last day of the demo generator's record."""
HELD_BACK_DAYS = 3
ROWS_PER_DAY = 48
BACKTEST_SEASONS = "2022-2024"

TIMED = ("assess_site", "_file_rows", "assess", "render_report", "figures", "_finish",
         "write_rendered", "record_report", "site_inputs", "write_overview", "_start")
"""The functions the profile summary reports (cumulative seconds)."""


def site_id(i: int) -> str:
    return f"site{i:03d}"


def config_text(root: Path, n: int, engine: str = "serial", pinned: bool = True) -> str:
    """A configuration of ``n`` demo-like sites under ``root``; ``pinned``: the ordinal family
    without calibration (else chosen by ``train``'s rule at each season, as in the demo)."""
    text = embedded_demo_text()
    head = text[:text.index("[[sites]]")].replace('root = ".."', f'root = "{root.as_posix()}"')
    head = head.replace("[ingest]", f'[compute]\nengine = "{engine}"\n'
                        + ('workers = 2\n' if engine == "local" else "") + "\n[ingest]", 1)
    blocks = "".join(sister_site_toml(text, site_id(i), f"Demo-like reservoir {i}")
                     for i in range(n))
    if pinned:
        blocks = re.sub(r'(?m)^family = "auto".*$', 'family = "ordinal"', blocks)
        blocks = re.sub(r'(?m)^calibration = "auto".*$', 'calibration = "none"', blocks)
    return head + blocks


def generate(out_dir: str, i: int) -> str:
    """One site's exports, with the last days held back (kept beside, as .full)."""
    files = write_demo(Path(out_dir), YEARS, SEED + i, site_id(i))
    last = files.weather[-1]
    full = last.read_text(encoding="utf-8")
    last.with_suffix(".full").write_text(full, encoding="utf-8")
    last.write_text(_cut(full, HELD_BACK_DAYS), encoding="utf-8")
    return str(last)


def _cut(text: str, days: int) -> str:
    lines = text.splitlines(keepends=True)
    return "".join(lines[:len(lines) - days * ROWS_PER_DAY]) if days else text


def give_back(last_files: list[str], days_still_held: int) -> None:
    """The held-back weather given back to every site, but for ``days_still_held``."""
    for name in last_files:
        path = Path(name)
        full = path.with_suffix(".full").read_text(encoding="utf-8")
        path.write_text(_cut(full, days_still_held), encoding="utf-8")


def train(config_path: str, sid: str) -> str:
    from cyanorisk.pipeline import SitePipeline

    config = load_config(config_path)
    SitePipeline.of(config, config.site(sid)).train(cross_validation=False)
    return sid


def timed(what) -> tuple[float, object]:
    start = time.perf_counter()
    value = what()
    return time.perf_counter() - start, value


def day(offset: int) -> str:
    import pandas as pd

    return str((pd.Timestamp(LAST_DAY) - pd.Timedelta(days=offset)).date())


def profile_summary(config_path: Path, n: int, as_of: str) -> list[str]:
    """Where a serial daily job of the first ``n`` sites spends its time."""
    import dataclasses

    config = load_config(config_path)
    config = dataclasses.replace(config, sites=config.sites[:n])
    profile = cProfile.Profile()
    profile.enable()
    run_daily(as_of, config, clock=utc_clock)
    profile.disable()
    stats = pstats.Stats(profile).stats
    total = max(v[3] for v in stats.values())
    lines = [f"profile of {n} sites' daily job, serial, {total:.1f} s (cumulative seconds):"]
    for name in TIMED:
        cum = sum(v[3] for (file, _, func), v in stats.items() if func == name
                  and "cyanorisk" in file)
        lines.append(f"  {name:<16} {cum:6.2f} s  {100 * cum / total:5.1f}%")
    return lines


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, default=100)
    parser.add_argument("--backtest-sites", type=int, default=10)
    args = parser.parse_args()
    n = args.sites
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        serial_cfg, local_cfg = root / "serial.toml", root / "local.toml"
        serial_cfg.write_text(config_text(root, n), encoding="utf-8")
        local_cfg.write_text(config_text(root, n, "local"), encoding="utf-8")
        back_cfg = root / "backtest.toml"
        back_cfg.write_text(config_text(root, args.backtest_sites, pinned=False), encoding="utf-8")
        setup = time.perf_counter()
        with open_engine(ComputeSettings(engine="local", workers=2)) as engine:
            made = [d.value for d in run_all(engine, [
                (site_id(i), generate, (str(root / "demo_data"), i)) for i in range(n)])]
            failed = [d.key for d in run_all(engine, [
                (site_id(i), train, (str(serial_cfg), site_id(i))) for i in range(n)]) if d.error]
        assert not failed, f"training failed for {failed}"
        first = run_daily(day(HELD_BACK_DAYS), load_config(local_cfg), clock=utc_clock)
        assert first.status == "ok", [(o.site_id, o.reason) for o in first.sites][:3]
        print(f"setup: {n} sites generated, trained and reported for {day(HELD_BACK_DAYS)} in "
              f"{time.perf_counter() - setup:.0f} s")

        give_back(made, 2)
        profile = profile_summary(serial_cfg, min(10, n), day(2))
        give_back(made, 1)
        serial_s, serial = timed(lambda: run_daily(day(1), load_config(serial_cfg), clock=utc_clock))
        assert [o.action for o in serial.sites] == ["issued"] * n, serial.status
        give_back(made, 0)
        run_s, local = timed(lambda: run_daily(day(0), load_config(local_cfg), clock=utc_clock))
        assert [o.action for o in local.sites] == ["issued"] * n, local.status
        rerun_s, again = timed(lambda: run_daily(day(0), load_config(local_cfg), clock=utc_clock))
        assert [o.action for o in again.sites] == ["unchanged"] * n, again.status
        print(f"daily job, {n} sites with new data: serial {serial_s:.1f} s, two workers "
              f"{run_s:.1f} s (target < 60 s); the same day again {rerun_s:.1f} s (target < 10 s)")

        config = load_config(back_cfg)
        back_serial_s, runs = timed(lambda: backtest_sites(config, BACKTEST_SEASONS,
                                                           SerialEngine(), progress=False))
        assert all(not isinstance(r, Exception) for r in runs.values()), runs

        def spread():
            with open_engine(ComputeSettings(engine="local", workers=2)) as engine:
                return backtest_sites(config, BACKTEST_SEASONS, engine, progress=False)

        back_local_s, spread_runs = timed(spread)
        for sid, run in runs.items():
            assert run.result.forecasts.equals(spread_runs[sid].result.forecasts), sid
        print(f"backtest, {args.backtest_sites} sites x 3 seasons: serial {back_serial_s:.1f} s, "
              f"two workers {back_local_s:.1f} s (the same forecasts)")
        for line in profile:
            print(line)
    print(f"bench_sites: sites={n} run_s={run_s:.0f} rerun_s={rerun_s:.1f} "
          f"run_speedup={serial_s / run_s:.2f} backtest_speedup={back_serial_s / back_local_s:.2f}")


if __name__ == "__main__":
    main()
