"""Benchmark: batch throughput (runs per minute) at 1 and 2 local Dask workers.

Run: python tests/benchmarks/bench_batch.py [--runs 12] [--workers 1,2] [--replicates 1000]

Each run is a full job on invented records inside the demo region: spatial blocks
(150 km) with a 20 km buffer, an audit over the three demo rasters, the baseline
model per fold and the per-fold evaluation (partial ROC with --replicates). Every
worker count starts from an empty output folder and its own local cluster; the wall
time includes starting the cluster. Prints one line per worker count.
"""

from __future__ import annotations

import argparse
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

DEMO = Path(__file__).resolve().parents[2] / "demo_data"
ENV = ";".join(str(DEMO / f) for f in ("temperature.tif", "moisture.tif", "canopy.tif"))


def invented_runs(folder: Path, runs: int, replicates: int) -> Path:
    """``runs`` record sets (150 clustered presences, 150 background points each) and their manifest."""
    folder.mkdir(parents=True, exist_ok=True)
    lines = ["run,records,method,folds,block_size,buffer,env,seed,model,replicates,range_km"]
    for r in range(runs):
        rng = np.random.default_rng(r)
        centres = rng.uniform([-42, 41.5], [-34, 48.5], size=(6, 2))
        pick = rng.integers(0, 6, 150)
        lon = np.r_[centres[pick, 0] + rng.normal(0, 0.5, 150), rng.uniform(-43.5, -32.5, 150)]
        lat = np.r_[centres[pick, 1] + rng.normal(0, 0.4, 150), rng.uniform(40.5, 49.5, 150)]
        kind = ["presence"] * 150 + ["background"] * 150
        rows = "".join(f"{i + 1},{x:.5f},{y:.5f},{k}\n" for i, (x, y, k) in enumerate(zip(lon, lat, kind)))
        (folder / f"species_{r:02d}.csv").write_text("record_id,longitude,latitude,kind\n" + rows)
        lines.append(f"species_{r:02d},species_{r:02d}.csv,blocks,5,150,20,{ENV},{r},baseline,{replicates},150")
    manifest = folder / "manifest.csv"
    manifest.write_text("\n".join(lines) + "\n")
    return manifest


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=12)
    ap.add_argument("--workers", default="1,2")
    ap.add_argument("--replicates", type=int, default=1000)
    args = ap.parse_args()
    from splitter.batch import run_batch

    base = Path(tempfile.mkdtemp(prefix="bench-batch-"))
    try:
        manifest = invented_runs(base / "inputs", args.runs, args.replicates)
        print(f"{args.runs} runs: blocks 150 km + buffer 20 km, audit, baseline model, {args.replicates} partial ROC replicates")
        print(f"{'workers':>7} {'wall s':>8} {'runs/min':>9} {'mean run s':>11} {'ok':>4} {'failed':>7}")
        for w in [int(s) for s in args.workers.split(",")]:
            out = base / f"out_{w}"
            t0 = time.perf_counter()
            res = run_batch(manifest, out, workers=w)
            wall = time.perf_counter() - t0
            mean_run = float(np.mean([r["seconds"] for r in res.rows]))
            print(f"{w:>7} {wall:>8.1f} {60 * len(res.rows) / wall:>9.1f} {mean_run:>11.2f} {res.n_ok:>4} {res.n_failed:>7}")
            for run, why in res.failures.items():
                print(f"  failed {run}: {why}")
    finally:
        shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    main()
