"""Start-up cost beside its floor (plain script: python tests/benchmarks/bench_startup.py).

Usage: python tests/benchmarks/bench_startup.py [--repeat N] [--json PATH]

Each row times a command in a fresh Python process and, in the same loop, the
floor that any such command must pay, alternating floor and target runs so both
see the same machine load; it prints the medians and their ratio.

  row                              floor                                   target
  splitter --help, each command's  python -c "import typer, rich.console"   <= 2x
  --help
  import splitter                  python -c "import numpy, pandas"         <= 1.5x

Exit code 1 when a ratio is above its target (timings on a busy machine vary:
rerun before believing a failure).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import time

PY = sys.executable
HELP_FLOOR = ("import typer, rich.console", [PY, "-c", "import typer, rich.console"])
IMPORT_FLOOR = ("import numpy, pandas", [PY, "-c", "import numpy, pandas"])
CLI = [PY, "-c", "from splitter.cli import app; app()"]  # what the installed `splitter` script runs
COMMANDS = ("design", "range", "audit", "evaluate", "appendix", "demo", "batch")


def rows():
    yield "splitter --help", CLI + ["--help"], HELP_FLOOR, 2.0
    for c in COMMANDS:
        yield f"splitter {c} --help", CLI + [c, "--help"], HELP_FLOOR, 2.0
    yield "import splitter", [PY, "-c", "import splitter"], IMPORT_FLOOR, 1.5


def wall(cmd) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True,
                   env={**os.environ, "COLUMNS": "80"})
    return time.perf_counter() - t0


def measure(target, floor, repeat: int) -> tuple[float, float]:
    """Median wall seconds of target and floor, run alternately after one warm-up each."""
    wall(floor)
    wall(target)  # warm the file cache and bytecode before timing
    t, f = [], []
    for _ in range(repeat):
        f.append(wall(floor))
        t.append(wall(target))
    return statistics.median(t), statistics.median(f)


def main(argv) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--json", default=None, help="also write the table as JSON to this path")
    args = ap.parse_args(argv)
    table = []
    print(f"{'work':<28} {'median s':>9} {'floor':<28} {'floor s':>8} {'ratio':>6} {'target':>7}  status")
    for name, cmd, (floor_name, floor_cmd), target in rows():
        t, f = measure(cmd, floor_cmd, args.repeat)
        ratio = t / f
        ok = ratio <= target
        table.append({"work": name, "seconds": t, "floor": floor_name, "floor_seconds": f, "ratio": ratio,
                      "target": target, "ok": ok})
        print(f"{name:<28} {t:>9.3f} {floor_name:<28} {f:>8.3f} {ratio:>6.2f} {'<=' + format(target, 'g') + 'x':>7}"
              f"  {'ok' if ok else 'OVER'}", flush=True)
    machine = {"cores": os.cpu_count(), "python": platform.python_version(), "platform": platform.platform(),
               "repeat": args.repeat, "load_average": os.getloadavg()}
    print(f"median of {args.repeat} alternating runs each; machine: {machine['cores']} cores, "
          f"Python {machine['python']}, load {machine['load_average'][0]:.2f}")
    if args.json:
        with open(args.json, "w", encoding="utf-8") as fh:
            json.dump({"machine": machine, "rows": table}, fh, indent=2)
    return 0 if all(r["ok"] for r in table) else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
