"""Run every benchmark in this folder, one after another, printing their tables.

Usage: python tests/benchmarks/run_all.py [name ...]   (e.g. design partial_roc)
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv):
    wanted = set(argv)
    scripts = sorted(p for p in HERE.glob("bench_*.py") if not wanted or p.stem.removeprefix("bench_") in wanted)
    failed = 0
    for script in scripts:
        print(f"\n=== {script.stem} ===", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call([sys.executable, str(script)])
        print(f"--- {script.stem}: exit {rc}, {time.perf_counter() - t0:.1f} s", flush=True)
        failed += rc != 0
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
