"""Benchmark: per-fold evaluation of a 10^8-cell prediction raster, streamed in windows.

Run:  python tests/benchmarks/bench_windowed.py [--keep DIR]

Writes an invented 10 000 x 10 000 float32 GeoTIFF (longitude/latitude, 75 N to 15 N,
so cell areas differ by row; tiled 256 x 256, deflate; about 15 % nodata), generated
strip by strip so that writing it needs no array larger than one strip. Then, each in
a fresh process so that its peak resident memory (ru_maxrss) is its own:

* streamed: ``evaluate_surface(lambda: valid_cells(path), ...)`` (a min/max pass and
  a summary pass over ~10^6-cell windows) with 500 evaluation presences, 1000
  replicates, one threshold and the Boyce index;
* the same with GDAL's block cache limited to 64 MB (each window is read once, so
  the default cache of 5 % of RAM only holds memory);
* in memory: ``cell_values_and_areas`` + ``area_predicted`` + ``partial_roc`` +
  ``boyce_index`` on the same raster (float64 values and areas, 1.6 GB, plus the
  Boyce sort), run only if the machine has the memory for it;
* an exact reference for the area share, the full AUC and the Boyce P/E ratios:
  integer cell counts per row times the row's cell area (pyproj.Geod), summed with
  ``math.fsum``; Boyce windows and presence shares computed here from the definition,
  not with the package's helpers.

Target (DESIGN §6, "rasters larger than memory are read in windows"): the streamed
evaluation peaks under 1.5 GB, and gives the in-memory results (to 1e-12).
The raster is written to a temporary directory and deleted afterwards.
"""

from __future__ import annotations

import os

# One core for numpy's threaded back-ends; GDAL decompresses on the calling thread.
for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import resource  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HEIGHT = WIDTH = 10_000  # 10^8 cells
CELL = 0.006  # degrees: 60 degrees of longitude and latitude
WEST, NORTH = -30.0, 75.0
STRIP = 256  # rows written at a time (one row of 256 x 256 tiles)
N_PRESENCES = 500
N_CALIBRATION = 500
REPLICATES = 1000
SEED = 20240611
TARGET_MB = 1500


def _peak_mb() -> float:
    # Linux reports ru_maxrss in KiB.
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _strip_values(r0: int, rows: int, rng: np.random.Generator) -> np.ndarray:
    """Invented suitability for rows r0 .. r0 + rows: smooth gradients plus noise, NaN at sea."""
    y = (r0 + np.arange(rows, dtype=np.float32))[:, None] / HEIGHT
    x = np.arange(WIDTH, dtype=np.float32)[None, :] / WIDTH
    v = 0.5 + 0.3 * np.sin(7.0 * x) * np.cos(5.0 * y) + 0.15 * np.cos(23.0 * x * y)
    v = v + rng.normal(0.0, 0.05, size=v.shape).astype(np.float32)
    v = np.clip(v, 0.0, 1.0).astype(np.float32)
    coast = 0.12 + 0.05 * np.sin(11.0 * y)  # a wavy western coastline, ~15 % of cells at sea
    v[np.broadcast_to(x < coast, v.shape)] = np.nan
    return v


def write_raster(path: Path) -> tuple[np.ndarray, np.ndarray]:
    """Write the raster strip by strip; return presence and calibration scores sampled at cells."""
    import rasterio
    from rasterio.transform import from_origin

    rng = np.random.default_rng(SEED)
    # Candidate record cells, drawn up front so their values can be kept as the strips go by.
    cand_rows = np.sort(rng.integers(0, HEIGHT, 40 * (N_PRESENCES + N_CALIBRATION)))
    cand_cols = rng.integers(0, WIDTH, cand_rows.size)
    cand_vals = np.full(cand_rows.size, np.nan)
    profile = dict(
        driver="GTiff", width=WIDTH, height=HEIGHT, count=1, dtype="float32", crs="EPSG:4326",
        transform=from_origin(WEST, NORTH, CELL, CELL), nodata=-9999.0, compress="deflate",
        predictor=3, tiled=True, blockxsize=256, blockysize=256, BIGTIFF="IF_SAFER",
    )
    with rasterio.open(path, "w", **profile) as dst:
        for r0 in range(0, HEIGHT, STRIP):
            rows = min(STRIP, HEIGHT - r0)
            v = _strip_values(r0, rows, rng)
            sel = (cand_rows >= r0) & (cand_rows < r0 + rows)
            cand_vals[sel] = v[cand_rows[sel] - r0, cand_cols[sel]]
            dst.write(np.where(np.isnan(v), np.float32(-9999.0), v), 1,
                      window=rasterio.windows.Window(0, r0, WIDTH, rows))
    ok = np.isfinite(cand_vals)
    vals = cand_vals[ok]
    # Records favour high suitability (accepted with probability value^3).
    keep = vals[rng.random(vals.size) < vals**3]
    rng.shuffle(keep)
    if keep.size < N_PRESENCES + N_CALIBRATION:
        raise RuntimeError("too few invented records; raise the candidate count")
    return keep[:N_PRESENCES].astype(np.float64), keep[N_PRESENCES : N_PRESENCES + N_CALIBRATION].astype(np.float64)


# ----------------------------------------------------------------------------- workers


def _summary(area_share, proc, boyce) -> dict:
    return {
        "area_share": area_share,
        "auc": proc.auc,
        "auc_ratio": proc.auc_ratio,
        "ratio_mean": proc.statistic,
        "ratio_low": proc.ratio_low,
        "ratio_high": proc.ratio_high,
        "pvalue": proc.pvalue,
        "n_cells": proc.n_cells,
        "boyce": boyce.statistic,
        "ratios": proc.ratios.tolist(),
        "boyce_ratios": boyce.ratios.tolist(),
    }


def run_streamed(path: str, records: str) -> dict:
    from splitter.evaluate.surface import evaluate_surface, summarise_surface, surface_queries, surface_range
    from splitter.io.rasters import valid_cells

    data = np.load(records)
    presences, threshold = data["presences"], float(data["threshold"])
    base = _peak_mb()
    start = time.perf_counter()
    r = evaluate_surface(lambda: valid_cells(path), presences, [threshold], replicates=REPLICATES, seed=1)
    elapsed = time.perf_counter() - start
    peak = _peak_mb()
    # Where the time goes (after the measured run): reading alone, the min/max pass, the summary pass.
    t0 = time.perf_counter()
    n = sum(len(b) for b in valid_cells(path))
    t_read = time.perf_counter() - t0
    t0 = time.perf_counter()
    lo, hi = surface_range(valid_cells(path))
    t_range = time.perf_counter() - t0
    t0 = time.perf_counter()
    summarise_surface(valid_cells(path), surface_queries(presences, [threshold], (lo, hi)))
    t_summary = time.perf_counter() - t0
    out = _summary(float(r.area_shares[0]), r.partial_roc, r.boyce)
    out.update(seconds=elapsed, peak_mb=peak, base_mb=base, valid_cells=n, read_only_seconds=t_read,
               range_pass_seconds=t_range, summary_pass_seconds=t_summary)
    return out


def run_in_memory(path: str, records: str) -> dict:
    from splitter.evaluate import area_predicted, boyce_index, partial_roc
    from splitter.io.rasters import cell_values_and_areas

    data = np.load(records)
    presences, threshold = data["presences"], float(data["threshold"])
    base = _peak_mb()
    start = time.perf_counter()
    cells, areas = cell_values_and_areas(path)
    t_read = time.perf_counter() - start
    share = area_predicted(cells, areas, threshold)
    proc = partial_roc(cells, presences, areas, replicates=REPLICATES, seed=1)
    boyce = boyce_index(presences, cells, areas)
    elapsed = time.perf_counter() - start
    out = _summary(share, proc, boyce)
    out.update(seconds=elapsed, peak_mb=_peak_mb(), base_mb=base, read_seconds=t_read)
    return out


def run_exact(path: str, records: str) -> dict:
    """Integer counts per row times the row's cell area, summed with math.fsum.

    An independent reference: reads the raster with rasterio in strips (not through
    valid_cells), places cells with plain binary searches, counts cells per row
    exactly as integers, and sums count x area with correctly rounded sums, so its
    only rounding is in the final few operations.
    """
    import math

    import rasterio
    from rasterio.windows import Window

    import pyproj

    data = np.load(records)
    presences, threshold = data["presences"], float(data["threshold"])
    u = np.unique(presences)
    with rasterio.open(path) as src:
        # Row areas from pyproj.Geod.polygon_area_perimeter (WGS84, the ellipsoid of EPSG:4326),
        # each cell outline with its two parallel edges densified into 256 geodesic pieces
        # (a geodesic between two points of one parallel bulges poleward; 256 pieces leave < 1e-9).
        assert src.crs.to_epsg() == 4326
        geod, t = pyproj.Geod(ellps="WGS84"), src.transform
        lons = np.linspace(t.c, t.c + t.a, 257)
        row_area = np.empty(src.height)
        for r in range(src.height):
            top = t.f + r * t.e
            area, _ = geod.polygon_area_perimeter(np.r_[lons, lons[::-1]],
                                                  np.r_[np.full(257, top), np.full(257, top + t.e)])
            row_area[r] = abs(area) / 1e6
        nodata = src.nodata
        # First pass: value range (for the Boyce windows).
        lo, hi = np.inf, -np.inf
        for r0 in range(0, src.height, STRIP):
            v = src.read(1, window=Window(0, r0, src.width, min(STRIP, src.height - r0))).astype(np.float64)
            v = v[(v != nodata) & np.isfinite(v)]
            lo, hi = min(lo, v.min()), max(hi, v.max())
        # Boyce windows as splitter.evaluate.boyce's module notes define them: width 0.1 of the
        # range, starts evenly spaced from lo to hi - width at most 0.01 of the range apart (91).
        n_windows = int(np.ceil(round(0.9 / 0.01, 9))) + 1
        starts = lo + np.linspace(0.0, 0.9, n_windows) * (hi - lo)
        ends = starts + 0.1 * (hi - lo)
        k = starts.size
        below = np.zeros((src.height, u.size), np.int64)  # cells < u_j, per row
        tied = np.zeros((src.height, u.size), np.int64)  # cells == u_j, per row
        at_or_above_start = np.zeros((src.height, k), np.int64)  # cells >= start_k, per row
        above_end = np.zeros((src.height, k), np.int64)  # cells > end_k, per row
        hit = np.zeros(src.height, np.int64)  # cells >= threshold, per row
        valid = np.zeros(src.height, np.int64)
        for r0 in range(0, src.height, STRIP):
            rows = min(STRIP, src.height - r0)
            v = src.read(1, window=Window(0, r0, src.width, rows)).astype(np.float64)
            row = np.broadcast_to(np.arange(r0, r0 + rows)[:, None], v.shape)
            ok = (v != nodata) & np.isfinite(v)
            v, row = v[ok], row[ok]
            rel = row - r0
            valid[r0 : r0 + rows] = np.bincount(rel, minlength=rows)
            hit[r0 : r0 + rows] = np.bincount(rel, weights=v >= threshold, minlength=rows).astype(np.int64)

            def per_row(idx, width):
                # counts[r, j] = number of cells of row r with idx > j (idx in 0..width)
                c = np.bincount(rel * (width + 1) + idx, minlength=rows * (width + 1)).reshape(rows, width + 1)
                return np.cumsum(c[:, ::-1], axis=1)[:, ::-1][:, 1:]

            n_le = np.searchsorted(u, v, side="right")  # presence values <= cell
            n_lt = np.searchsorted(u, v, side="left")  # presence values < cell
            gt = per_row(n_lt, u.size)  # cells > u_j  (u_j < cell  <=> j < n_lt)
            ge = per_row(n_le, u.size)  # cells >= u_j
            cnt = valid[r0 : r0 + rows, None]
            below[r0 : r0 + rows] = cnt - ge
            tied[r0 : r0 + rows] = ge - gt
            at_or_above_start[r0 : r0 + rows] = per_row(np.searchsorted(starts, v, side="right"), k)
            above_end[r0 : r0 + rows] = per_row(np.searchsorted(ends, v, side="left"), k)

    def fsum_rows(counts):
        return np.array([math.fsum(counts[:, j] * row_area) for j in range(counts.shape[1])])

    total = math.fsum(valid * row_area)
    b, t = fsum_rows(below) / total, fsum_rows(tied) / total
    group = np.searchsorted(u, presences)
    auc = math.fsum(b[group] + t[group] / 2.0) / presences.size
    expected = fsum_rows(at_or_above_start - above_end) / total
    # Share of presences in each closed window [start, end], by plain binary searches.
    ordered = np.sort(presences)
    predicted = (np.searchsorted(ordered, ends, side="right") - np.searchsorted(ordered, starts, side="left")) / presences.size
    used = expected > 0
    return {
        "area_share": math.fsum(hit * row_area) / total,
        "auc": auc,
        "boyce_ratios": (predicted[used] / expected[used]).tolist(),
        "n_cells": int(valid.sum()),
    }


def _child(mode: str, path: Path, records: Path, env: dict | None = None) -> dict:
    proc = subprocess.run(
        [sys.executable, __file__, "--worker", mode, str(path), str(records)],
        capture_output=True, text=True, check=False, env={**os.environ, **(env or {})},
    )
    if proc.returncode != 0:
        raise RuntimeError(f"{mode} worker failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _available_mb() -> float:
    with open("/proc/meminfo") as f:
        for line in f:
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) / 1024.0
    return float("nan")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--worker", nargs=3, metavar=("MODE", "RASTER", "RECORDS"))
    parser.add_argument("--keep", help="write the raster into this directory and keep it")
    args = parser.parse_args()
    if args.worker:
        mode, path, records = args.worker
        fn = {"streamed": run_streamed, "in-memory": run_in_memory, "exact": run_exact}[mode]
        print(json.dumps(fn(path, records)))
        return

    tmp = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench_windowed_"))
    tmp.mkdir(parents=True, exist_ok=True)
    path, records = tmp / "prediction.tif", tmp / "records.npz"
    try:
        if not path.exists():
            start = time.perf_counter()
            presences, calibration = write_raster(path)
            t_write = time.perf_counter() - start
            threshold = float(np.quantile(calibration, 0.10))  # 10th percentile of calibration presences
            np.savez(records, presences=presences, threshold=threshold)
            print(f"wrote {path} ({path.stat().st_size / 1e6:.0f} MB on disk) in {t_write:.0f} s "
                  f"(writer peak RSS {_peak_mb():.0f} MB)")
        streamed = _child("streamed", path, records)
        # GDAL keeps decoded blocks in its cache (default 5 % of RAM) although each
        # window is read once; a small cache shows how much of the peak that is.
        small_cache = _child("streamed", path, records, env={"GDAL_CACHEMAX": "64"})
        exact = _child("exact", path, records)
        available = _available_mb()
        in_memory = _child("in-memory", path, records) if available > 9000 else None
        print(f"{streamed['valid_cells']:,} valid cells of {HEIGHT * WIDTH:,} (float32, lon/lat, area-weighted), "
              f"{N_PRESENCES} presences, {REPLICATES} replicates, 1 threshold, Boyce index")
        rows = [
            ("streamed: wall time (range pass + summary pass + bootstrap)", f"{streamed['seconds']:.1f} s", ""),
            ("  reading valid_cells alone, one pass", f"{streamed['read_only_seconds']:.1f} s", ""),
            ("  min/max pass", f"{streamed['range_pass_seconds']:.1f} s", ""),
            ("  summary pass", f"{streamed['summary_pass_seconds']:.1f} s", ""),
            ("streamed: peak RSS", f"{streamed['peak_mb']:.0f} MB", f"< {TARGET_MB} MB"),
            ("  of which after imports", f"{streamed['base_mb']:.0f} MB", ""),
            ("streamed, GDAL_CACHEMAX=64 MB: wall time", f"{small_cache['seconds']:.1f} s", ""),
            ("streamed, GDAL_CACHEMAX=64 MB: peak RSS", f"{small_cache['peak_mb']:.0f} MB", f"< {TARGET_MB} MB"),
        ]
        if in_memory is not None:
            rows += [
                ("in memory: wall time (read + tests)", f"{in_memory['seconds']:.1f} s", ""),
                ("  reading cell_values_and_areas", f"{in_memory['read_seconds']:.1f} s", ""),
                ("in memory: peak RSS", f"{in_memory['peak_mb']:.0f} MB", ""),
            ]
        width = max(len(r[0]) for r in rows)
        print(f"{'measure':<{width}}  {'value':>10}  target")
        for name, value, target in rows:
            print(f"{name:<{width}}  {value:>10}  {target}")

        def rel(a, b):
            a, b = np.asarray(a), np.asarray(b)
            return float(np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300)))

        print("errors against the exact reference (per-row integer counts x row area, math.fsum):")
        paths = [("streamed", streamed)] + ([("in memory", in_memory)] if in_memory is not None else [])
        for name, r in paths:
            print(f"  {name:<10} area share {abs(r['area_share'] - exact['area_share']):.1e}, "
                  f"AUC {abs(r['auc'] - exact['auc']):.1e}, Boyce P/E max relative {rel(r['boyce_ratios'], exact['boyce_ratios']):.1e}, "
                  f"cells {'equal' if r['n_cells'] == exact['n_cells'] else 'DIFFER'}")
        if in_memory is None:
            print(f"in-memory path skipped: only {available:.0f} MB available (it needs about 9 GB here)")
        else:
            diffs = {k: abs(streamed[k] - in_memory[k]) for k in
                     ("area_share", "auc", "auc_ratio", "ratio_mean", "ratio_low", "ratio_high", "pvalue", "boyce")}
            diffs["bootstrap ratios"] = float(np.max(np.abs(np.subtract(streamed["ratios"], in_memory["ratios"]))))
            diffs["Boyce P/E"] = float(np.max(np.abs(np.subtract(streamed["boyce_ratios"], in_memory["boyce_ratios"]))))
            print(f"largest |streamed - in memory| over {', '.join(diffs)}: {max(diffs.values()):.1e} (target <= 1e-12)")
        print(f"result: area share {streamed['area_share']:.4f}, AUC {streamed['auc']:.4f}, "
              f"ratio {streamed['auc_ratio']:.4f}, mean bootstrap ratio {streamed['ratio_mean']:.4f} "
              f"[{streamed['ratio_low']:.4f}, {streamed['ratio_high']:.4f}], p = {streamed['pvalue']:.3g}, "
              f"Boyce {streamed['boyce']:.3f}")
    finally:
        if not args.keep:
            shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
