"""Benchmark: design `blocks` + buffer at 10^4, 10^5 and 10^6 records.

Run: python tests/benchmarks/bench_design.py [--sizes 10000,100000,1000000]
Prints wall time and peak resident memory (of this process) per size.
Target (DESIGN §6): 10^6 records in under 60 s on 2 cores, peak memory under 4 GB.
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np
import pandas as pd


def invented_frame(n: int, seed: int = 0) -> pd.DataFrame:
    """Clustered presences (20 %) and uniform background over a 10 x 8 degree region."""
    rng = np.random.default_rng(seed)
    n_p = n // 5
    centres = rng.uniform([0, 40], [10, 48], size=(200, 2))
    pick = rng.integers(0, 200, n_p)
    lon = np.r_[centres[pick, 0] + rng.normal(0, 0.2, n_p), rng.uniform(0, 10, n - n_p)]
    lat = np.r_[centres[pick, 1] + rng.normal(0, 0.15, n_p), rng.uniform(40, 48, n - n_p)]
    kind = np.array(["presence"] * n_p + ["background"] * (n - n_p), object)
    return pd.DataFrame({"lon": lon, "lat": lat, "kind": kind})


def invented_records(n: int, seed: int = 0):
    """:func:`invented_frame` as splitter Records."""
    from splitter.geo import Points
    from splitter.io.records import Records

    df = invented_frame(n, seed)
    return Records(table=df[["lon", "lat"]], points=Points.lonlat(df.lon.to_numpy(), df.lat.to_numpy()),
                   record_id=np.arange(1, n + 1).astype(str).astype(object), kind=df.kind.to_numpy(object),
                   dropped=np.full(n, "", object), x_column="lon", y_column="lat")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="10000,100000,1000000")
    ap.add_argument("--block-size", type=float, default=50.0)
    ap.add_argument("--buffer", type=float, default=10.0)
    args = ap.parse_args()
    import splitter

    print(f"{'records':>10} {'design s':>9} {'gaps':>10} {'peak RSS MB':>12}")
    for n in [int(s) for s in args.sizes.split(",")]:
        recs = invented_records(n)
        t0 = time.perf_counter()
        a = splitter.design(recs, method="blocks", folds=5, block_size=args.block_size, buffer=args.buffer, seed=1)
        dt = time.perf_counter() - t0
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(f"{n:>10} {dt:>9.2f} {a.gap_rows.size:>10} {peak:>12.0f}")


if __name__ == "__main__":
    main()
