"""Command-line benchmark: how soon the commands answer, as whole processes.

Generates the demo reservoir (12 years, as ``cyanorisk demo`` does) in a temporary folder,
ingests it, trains its model and runs the daily job once for the record's last day; then times,
in one run, interleaved and repeated (best of N):

(a) ``python -c pass`` and (b) ``python -c "import pandas"`` (the baselines);
(c) ``cyanorisk --version``; (d) ``cyanorisk status``;
(e) ``cyanorisk report`` for the demo's last day with unchanged inputs (a second call: the
    clean tables are reused);
(f) ``cyanorisk run`` for a day already issued (nothing new to do).

Targets: (c) within 3x of (a); (e) within 6x of (b); (f) within 4x of (b). The last line is
machine-readable.

Usage: python benchmarks/bench_cli.py [--repeat 5]
"""

from __future__ import annotations

import argparse
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from cyanorisk.config import embedded_demo_text

DEMO_LAST_DAY = "2025-01-14"


def run(argv: list[str], cwd: Path) -> float:
    """Wall-clock seconds of one process; fails loudly if the command fails."""
    start = time.perf_counter()
    done = subprocess.run(argv, cwd=cwd, capture_output=True, text=True, check=False)
    took = time.perf_counter() - start
    if done.returncode not in (0, 3):  # 3: insufficient data, still an answer
        raise SystemExit(f"{' '.join(argv)} failed ({done.returncode}): {done.stderr.strip()}")
    return took


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    python = sys.executable
    cyanorisk = str(Path(python).parent / "cyanorisk")
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        config = root / "demo.toml"
        config.write_text(re.sub(r'(?m)^root = "\.\."', 'root = "."', embedded_demo_text()),
                          encoding="utf-8")
        c = ["--config", str(config)]
        subprocess.run([cyanorisk, "demo", *c], cwd=root, check=True, capture_output=True)
        subprocess.run([cyanorisk, "run", *c, "--as-of", DEMO_LAST_DAY], cwd=root, check=True,
                       capture_output=True)
        commands = {
            "python": [python, "-c", "pass"],
            "pandas": [python, "-c", "import pandas"],
            "version": [cyanorisk, "--version"],
            "status": [cyanorisk, "status", *c],
            "report": [cyanorisk, "report", *c, "--as-of", DEMO_LAST_DAY],
            "rerun": [cyanorisk, "run", *c, "--as-of", DEMO_LAST_DAY],
        }
        best = {name: float("inf") for name in commands}
        for _ in range(args.repeat):
            for name, argv in commands.items():
                best[name] = min(best[name], run(argv, root))
    labels = {"python": "(a) python -c pass", "pandas": "(b) python -c 'import pandas'",
              "version": "(c) cyanorisk --version", "status": "(d) cyanorisk status",
              "report": "(e) cyanorisk report, inputs unchanged",
              "rerun": "(f) cyanorisk run, day already issued"}
    for name, label in labels.items():
        print(f"{label:<42} {best[name] * 1000:8.0f} ms")
    print("targets: version_vs_python < 3, report_vs_pandas < 6, rerun_vs_pandas < 4")
    print(f"bench_cli: version_vs_python={best['version'] / best['python']:.1f} "
          f"report_vs_pandas={best['report'] / best['pandas']:.1f} "
          f"rerun_vs_pandas={best['rerun'] / best['pandas']:.1f}")


if __name__ == "__main__":
    sys.exit(main())
