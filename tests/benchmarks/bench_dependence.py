"""Benchmarks for splitter.dependence (plain script: python tests/benchmarks/bench_dependence.py).

1. Distance diagnostics, 5 folds, 10**4, 10**5 and 10**6 geographic records
   (+ 10**5 prediction locations): target < 30 s on 2 cores at 10**6.
2. Range estimation for 3 covariates held as 10**7-cell arrays: seeded sample of
   2000 cells from each array, semivariogram, spherical and exponential fits:
   target < 20 s.
3. The same from three 10**7-cell GeoTIFFs on disk, as `splitter range` runs it
   (area-weighted cell sample in one windowed pass + fits): target < 20 s.
"""

import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

from splitter.dependence import distance_diagnostics, fit_ranges  # noqa: E402
from splitter.geo import Points  # noqa: E402


def bench_distance(n=1_000_000, k=5, n_pred=100_000, seed=0):
    rng = np.random.default_rng(seed)
    # Clustered records over Europe: 5000 clusters of ~200 records.
    centres_lon = rng.uniform(-10, 30, 5000)
    centres_lat = rng.uniform(36, 62, 5000)
    c = rng.integers(0, 5000, n)
    lon = centres_lon[c] + rng.normal(0, 0.2, n)
    lat = np.clip(centres_lat[c] + rng.normal(0, 0.2, n), -89, 89)
    pts = Points.lonlat(lon, lat)
    fold = rng.integers(0, k, n)
    cal = [np.flatnonzero(fold != i) for i in range(k)]
    ev = [np.flatnonzero(fold == i) for i in range(k)]
    pred = Points.lonlat(rng.uniform(-10, 30, n_pred), rng.uniform(36, 62, n_pred))
    t0 = time.perf_counter()
    dd = distance_diagnostics(pts, cal, ev, range_km=50.0, prediction_points=pred)
    t = time.perf_counter() - t0
    print(f"distance diagnostics: {n:,} records, {k} folds, {n_pred:,} prediction points: {t:.1f} s (target < 30 s)")
    print(dd.to_frame().round(3).to_string(index=False))
    return t


def bench_range(cells=10_000_000, sample=2000, seed=0):
    rng = np.random.default_rng(seed)
    nx = 4000
    ny = cells // nx
    # Three smooth covariates on an ny x nx grid of 1 km cells (built outside the timing).
    iy, ix = np.divmod(np.arange(ny * nx, dtype=np.int64), nx)
    arrays = {
        "temperature": (np.sin(ix / 400.0) + np.cos(iy / 700.0)).astype(np.float32),
        "rainfall": (np.sin((ix + iy) / 250.0) + 0.1 * rng.standard_normal(ny * nx)).astype(np.float32),
        "elevation": (np.cos(ix / 150.0) * np.sin(iy / 220.0)).astype(np.float32),
    }
    t0 = time.perf_counter()
    pick = np.random.default_rng(seed + 1).choice(ny * nx, size=sample, replace=False)
    sy, sx = np.divmod(pick, nx)
    values = {name: a[pick].astype(float) for name, a in arrays.items()}
    est = fit_ranges(sx.astype(float), sy.astype(float), values, n_lags=15)
    t = time.perf_counter() - t0
    print(f"range estimation: 3 covariates x {ny * nx:,} cells, sample {sample}: {t:.2f} s (target < 20 s)")
    print(est.to_frame().round(3).to_string(index=False))
    print(f"suggested block: {est.suggested_block_km:.1f} km")
    return t


def bench_range_rasters(cells=10_000_000, sample=2000, seed=0):
    import tempfile
    from pathlib import Path

    from affine import Affine

    from splitter.io.rasters import write_geotiff
    from splitter.workflow.range_estimate import estimate_range_from_rasters

    nx = 4000
    ny = cells // nx
    with tempfile.TemporaryDirectory() as tmp:
        paths = []
        iy, ix = np.divmod(np.arange(ny * nx, dtype=np.int64), nx)
        fields = {
            "temperature": np.sin(ix / 400.0) + np.cos(iy / 700.0),
            "rainfall": np.sin((ix + iy) / 250.0),
            "elevation": np.cos(ix / 150.0) * np.sin(iy / 220.0),
        }
        for name, f in fields.items():
            p = Path(tmp) / f"{name}.tif"
            # 0.01-degree cells over 0-40 E, 30-55 N
            write_geotiff(p, f.reshape(ny, nx).astype(np.float32), Affine(40 / nx, 0, 0, 0, -25 / ny, 55), "EPSG:4326")
            paths.append(p)
        del iy, ix, fields
        t0 = time.perf_counter()
        est = estimate_range_from_rasters(paths, sample=sample, seed=seed)
        t = time.perf_counter() - t0
    print(f"range from 3 GeoTIFFs of {ny * nx:,} cells (windowed sample of {sample}): {t:.2f} s (target < 20 s); "
          f"suggested block {est.suggested_block_km:.1f} km")
    return t


if __name__ == "__main__":
    for n in (10_000, 100_000, 1_000_000):
        bench_distance(n=n)
    bench_range()
    bench_range_rasters()
