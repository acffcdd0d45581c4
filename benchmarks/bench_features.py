"""Driver benchmark: the daily bloom drivers of 20 years of half-hourly weather, beside a bare parse.

Makes a 20-year messy half-hourly log with ``shared/bench/make_messy_weather.py`` (or takes
``--file``), ingests it once, then times in one run, best of N: (a) ``pandas.read_csv`` of the
file alone and (b) ``FeatureBuilder.transform`` on the clean series (every driver, every day).
Target: (b) under 3x (a). The last line is machine-readable.

Usage: python benchmarks/bench_features.py [--years 20] [--repeat 5] [--file PATH]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_ingest import best_of, ingest, log_arguments, messy_log
from cyanorisk.features import FeatureBuilder, FeatureSettings


def main() -> None:
    args = log_arguments(__doc__)
    with tempfile.TemporaryDirectory() as tmp:
        path = messy_log(args, tmp)
        weather = ingest(path)
        builder = FeatureBuilder(FeatureSettings(anemometer_height_m=10.0), "Australia/Brisbane")
        drivers = builder.transform(weather)
        parse_s = best_of(lambda: pd.read_csv(path, sep="\t"), args.repeat)
        features_s = best_of(lambda: builder.transform(weather), args.repeat)
    print(f"{len(weather):,} half-hours -> {len(drivers):,} issue days x {drivers.shape[1]} columns")
    print(f"(a) pandas.read_csv alone   {parse_s * 1000:8.1f} ms")
    print(f"(b) drivers, every day      {features_s * 1000:8.1f} ms")
    print("target: features_vs_parse < 3")
    print(f"bench_features: features_vs_parse={features_s / parse_s:.1f} days={len(drivers)}")


if __name__ == "__main__":
    main()
