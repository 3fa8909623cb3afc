"""Run every benchmark in this folder and print one summary table.

Usage: python tests/benchmarks/run_all.py [--repeat N] [name ...]
       (names without the bench_ prefix, e.g. design partial_roc; default: all)

Each script runs N times (default 3) in its own process; the first run's own table
is printed in full, and the summary gives the median, min and max wall time and
the peak resident memory of each script (from os.wait4, per process).
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def run_once(script: Path, show: bool) -> tuple[float, float, int]:
    """Wall seconds, peak RSS in MB and exit code of one run of ``script``."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, str(script)], stdout=None if show else subprocess.DEVNULL,
                            stderr=None if show else subprocess.DEVNULL)
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    return time.perf_counter() - t0, usage.ru_maxrss / 1024, proc.returncode


def main(argv) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("names", nargs="*")
    args = ap.parse_args(argv)
    wanted = set(args.names)
    scripts = sorted(p for p in HERE.glob("bench_*.py") if not wanted or p.stem.removeprefix("bench_") in wanted)
    rows = []
    for script in scripts:
        print(f"\n=== {script.stem} ===", flush=True)
        runs = [run_once(script, show=(i == 0)) for i in range(max(args.repeat, 1))]
        walls = [r[0] for r in runs]
        rows.append((script.stem, statistics.median(walls), min(walls), max(walls), max(r[1] for r in runs),
                     max(r[2] != 0 for r in runs)))
    print(f"\nsummary: {args.repeat} run(s) each, machine: {os.cpu_count()} cores")
    print(f"{'benchmark':<20} {'median s':>9} {'min s':>8} {'max s':>8} {'peak RSS MB':>12}  status")
    for name, med, lo, hi, rss, failed in rows:
        print(f"{name:<20} {med:>9.1f} {lo:>8.1f} {hi:>8.1f} {rss:>12.0f}  {'FAILED' if failed else 'ok'}")
    return 1 if any(r[5] for r in rows) else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
