"""Ingest benchmark: cyanorisk's weather ingest against a bare parse and a plain pandas clean-up.

Makes a 20-year half-hourly messy station log with ``shared/bench/make_messy_weather.py`` (or
takes ``--file``), then times in one run, interleaved and repeated (best of N):

(a) ``pandas.read_csv`` of the file alone;
(b) the notebook-style clean-up in ``shared/bench/naive_pipeline.py``;
(c) ``cyanorisk.ingest.read_weather`` with the dialect below.

Peak memory of (c) is measured in a fresh subprocess as the growth of the peak resident set
over what the imports take (Linux /proc). Targets: (c) within 2.5x of (a), at least 5x faster than (b), peak
memory under 10x the file's size. The last line is machine-readable.

Usage: python benchmarks/bench_ingest.py [--years 20] [--repeat 5] [--file PATH]
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

from cyanorisk.ingest import ColumnSpec, WeatherDialect, read_weather

HERE = Path(__file__).resolve().parent
SHARED_BENCH = Path(os.environ.get("CYANORISK_SHARED_BENCH", HERE.parent.parent / "shared" / "bench"))

DIALECT = WeatherDialect(
    separator="\t", date_column="date", time_column="time", date_order="dmy",
    stamp_zone="+10:00",
    columns={
        "temp": ColumnSpec("air_temp_c", "degC"),
        "app_temp": ColumnSpec(None),
        "wind_dir": ColumnSpec("wind_dir_deg", "compass"),
        "wind_kmh": ColumnSpec("wind_speed_ms", "km/h"),
        "gust_kmh": ColumnSpec("wind_gust_ms", "km/h"),
        "rain_mm": ColumnSpec("rain_mm", "mm"),
        "rh": ColumnSpec("rel_humidity_pct", "%"),
    },
)
"""The layout of the generated log: the generator writes local standard time (UTC+10)."""


def _load(name: str):
    path = SHARED_BENCH / f"{name}.py"
    if not path.exists():
        raise SystemExit(f"{path}: not found; the benchmarks need the shared bench folder beside "
                         "the checkout (../shared/bench) or CYANORISK_SHARED_BENCH pointing at it")
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def ingest(path: Path) -> pd.DataFrame:
    data, meta = read_weather(path, DIALECT, "30min", "Australia/Brisbane", bad_rows="reject")
    meta.account.check()
    return data


def best_of(fn, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def _status_kb(field: str) -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    raise RuntimeError(f"{field} not in /proc/self/status")


def measure_peak(path: Path) -> float:
    """Peak resident-set growth [MB] of one ingest in this process (Linux): the high-water mark
    is reset after the imports (``/proc/self/clear_refs``), then read after the ingest."""
    Path("/proc/self/clear_refs").write_text("5")
    before = _status_kb("VmRSS")
    ingest(path)
    return (_status_kb("VmHWM") - before) / 1024


def peak_growth_mb(path: Path) -> float:
    """:func:`measure_peak` in a fresh interpreter, so nothing else in this run counts."""
    code = f"import sys; sys.path.insert(0, {str(HERE)!r}); import bench_ingest as b; " \
           f"print(b.measure_peak(b.Path({str(path)!r})))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return float(out.stdout.strip())


def log_arguments(doc: str) -> argparse.Namespace:
    """The command line shared by the benchmarks that run on a messy station log."""
    parser = argparse.ArgumentParser(description=doc.splitlines()[0])
    parser.add_argument("--years", type=int, default=20)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--file", type=Path)
    return parser.parse_args()


def messy_log(args: argparse.Namespace, folder: str) -> Path:
    """``--file``, or a log of ``--years`` years written by the shared generator into ``folder``."""
    if args.file is not None:
        return args.file
    path = Path(folder) / "messy.tsv"
    _load("make_messy_weather").make(args.years).to_csv(path, sep="\t", index=False)
    return path


def main() -> None:
    args = log_arguments(__doc__)
    with tempfile.TemporaryDirectory() as tmp:
        path = messy_log(args, tmp)
        naive = _load("naive_pipeline")
        size_mb = path.stat().st_size / 1e6
        rows = len(ingest(path))  # warm-up, and the row count
        parse_s = best_of(lambda: pd.read_csv(path, sep="\t"), args.repeat)
        ingest_s = best_of(lambda: ingest(path), args.repeat)
        naive_s = best_of(lambda: naive.clean(path), max(1, args.repeat // 2))
        peak_mb = peak_growth_mb(path)
    print(f"file: {size_mb:.1f} MB, {rows} half-hours on the grid")
    print(f"(a) pandas.read_csv alone   {parse_s * 1000:8.1f} ms")
    print(f"(b) plain pandas clean-up   {naive_s * 1000:8.1f} ms")
    print(f"(c) cyanorisk ingest        {ingest_s * 1000:8.1f} ms   peak +{peak_mb:.0f} MB "
          f"({peak_mb / size_mb:.1f}x the file)")
    print(f"targets: ingest_vs_parse <= 2.5, naive_vs_ingest >= 5, peak_mb <= {10 * size_mb:.0f}")
    print(f"bench_ingest: ingest_vs_parse={ingest_s / parse_s:.1f} "
          f"naive_vs_ingest={naive_s / ingest_s:.1f} peak_mb={peak_mb:.0f} rows={rows}")


if __name__ == "__main__":
    main()
