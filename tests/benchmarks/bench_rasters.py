"""Raster I/O timings on a 10^7-cell lon/lat GeoTIFF (run: python tests/benchmarks/bench_rasters.py).

Prints the time of each operation and the peak resident memory, so windowed reading
can be seen to keep memory near one window rather than the whole raster.
"""

import resource
import tempfile
import time
from pathlib import Path

import numpy as np
from affine import Affine

from splitter.geo import Points
from splitter.io.rasters import (
    cell_values_and_areas,
    sample_cells,
    sample_rasters,
    sample_valid_locations,
    valid_cells,
    write_geotiff,
)


def timed(label, fn):
    start = time.perf_counter()
    out = fn()
    print(f"{label:<48s} {time.perf_counter() - start:7.2f} s")
    return out


def main(rows=2500, cols=4000):
    rng = np.random.default_rng(0)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "suitability.tif"
        # 0.01-degree cells over 0–40° E, 30–55° N; a tenth of the cells are nodata.
        arr = rng.random((rows, cols), dtype=np.float32)
        arr[rng.random((rows, cols)) < 0.1] = np.nan
        transform = Affine(40 / cols, 0, 0.0, 0, -25 / rows, 55.0)
        timed(f"write_geotiff {rows}x{cols}", lambda a=arr: write_geotiff(path, a, transform, "EPSG:4326"))
        del arr
        print(f"file size {path.stat().st_size / 1e6:.0f} MB")
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

        pts = Points.lonlat(rng.uniform(0, 40, 100_000), rng.uniform(30, 55, 100_000))
        timed("sample_rasters, 10^5 points", lambda: sample_rasters([path], pts))
        few = Points.lonlat(rng.uniform(0, 1, 1000), rng.uniform(54, 55, 1000))
        timed("sample_rasters, 10^3 points in one corner", lambda: sample_rasters([path], few))
        total = timed("valid_cells streamed (sum of areas)", lambda: sum(b.areas.sum() for b in valid_cells(path)))
        print(f"  valid area {total:,.0f} km²")
        timed("valid_cells streamed, 100-row windows", lambda: sum(len(b) for b in valid_cells(path, window_rows=100)))
        values, areas = timed("cell_values_and_areas", lambda: cell_values_and_areas(path))
        print(f"  {values.size:,d} valid cells")
        del values, areas
        timed("sample_valid_locations, 10^5", lambda: sample_valid_locations([path], 100_000, seed=1))
        timed("sample_cells, 10^4", lambda: sample_cells([path], 10_000, seed=1))
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(f"peak RSS {peak:.0f} MB (after writing: {base:.0f} MB)")


if __name__ == "__main__":
    main()
