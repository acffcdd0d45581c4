"""Backtest benchmark: a 20-season daily walk-forward for one site, beside a bare parse.

Generates 20 years of the demo reservoir's data (weather and lab sheets), ingests them and builds
the training table once, then times in one run: (a) ``pandas.read_csv`` of the site's weather
files, (b) the walk-forward backtest over the last 5, 10 and 20 seasons (fit on everything known
before each season, a forecast for every issue day, scores with bootstrap intervals). Targets:
20 seasons under 10 s on this machine class, cost growing about linearly with the seasons. The
last line is machine-readable.

Usage: python benchmarks/bench_backtest.py [--repeat 2]
"""

from __future__ import annotations

import argparse
import re
import sys
import tempfile
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_ingest import best_of
from cyanorisk.backtest import walk_forward
from cyanorisk.config import embedded_demo_text, load_config
from cyanorisk.demo import write_demo
from cyanorisk.pipeline import SitePipeline
from cyanorisk.spec import SiteSpec, Thresholds
from cyanorisk.training import season_of


def site_record(config_path: Path) -> tuple[SiteSpec, pd.DataFrame, pd.DataFrame, list[int]]:
    """The first site of a configuration, ingested: its specification, per-sample totals,
    training table and the seasons the table holds, in order."""
    config = load_config(config_path)
    pipeline = SitePipeline.of(config, config.sites[0])
    spec = pipeline.spec
    table = pipeline.training_table()
    seasons = sorted(set(season_of(table["issue_date"], spec.season_start_month).tolist()))
    return spec, pipeline.clean().totals, table, seasons


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        config_path = root / "bench.toml"
        config_path.write_text(re.sub(r'(?m)^root = "\.\."', 'root = "."', embedded_demo_text()),
                               encoding="utf-8")
        files = write_demo(root / "demo_data", 20, 20261202)
        spec, totals, table, seasons = site_record(config_path)
        seasons = seasons[1:][-20:]
        thresholds = Thresholds.default(spec.levels)
        parse_s = best_of(lambda: [pd.read_csv(p, sep="\t", skiprows=1) for p in files.weather],
                          args.repeat + 2)
        timings = {}
        for n in (5, 10, 20):
            chosen = seasons[-n:]
            timings[n] = best_of(lambda c=chosen: walk_forward(spec, table, totals, c, thresholds),
                                 args.repeat)
    print(f"{len(table):,} issue days, seasons {seasons[0]}-{seasons[-1]}")
    print(f"(a) pandas.read_csv of the weather files   {parse_s * 1000:8.1f} ms")
    for n, s in timings.items():
        print(f"(b) walk-forward over {n:2d} seasons          {s:8.2f} s")
    print("targets: seconds_20 < 10, growth_20_vs_5 about 4 (linear)")
    print(f"bench_backtest: seconds_20={timings[20]:.1f} backtest_vs_parse={timings[20] / parse_s:.0f} "
          f"growth_20_vs_5={timings[20] / timings[5]:.1f}")


if __name__ == "__main__":
    sys.exit(main())
