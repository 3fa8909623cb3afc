"""Benchmark: partial ROC with its null on a 10^7-cell raster, 500 presences, B = 1000.

Run:  python tests/benchmarks/bench_partial_roc.py

Floor: ``np.sort`` of the cell values (the least any exact rank-based curve can
cost). Targets (issue "Performance to the floor"): partial_roc with B = 1000
bootstrap and B = 1000 null replicates at most 2x the floor; B = 1000 at most
1.3x B = 10. Floor and target runs alternate; medians of 3 are reported.
The naive loops are timed on a few replicates and extrapolated to 1000 (each
replicate does the same work, so the cost is linear).
"""

from __future__ import annotations

import os

# One core: keep numpy's threaded back-ends (used by a few calls) to a single thread.
for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import time  # noqa: E402

import numpy as np  # noqa: E402
from affine import Affine  # noqa: E402

import sys  # noqa: E402
from pathlib import Path  # noqa: E402

from splitter.evaluate import cell_areas, partial_roc  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "evaluate"))
from reference_partial_roc import partial_roc_reference  # noqa: E402

HEIGHT, WIDTH = 2500, 4000  # 10^7 cells, a lon/lat raster from 70 N to 30 S
N_PRESENCES = 500
REPLICATES = 1000
SEED = 20240601


def _best_of(repeats, fn):
    times = []
    result = None
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - start)
    return min(times), result


def main() -> None:
    rng = np.random.default_rng(SEED)
    # Invented suitability surface, stored as float32 like most prediction rasters.
    cells = rng.random(HEIGHT * WIDTH, dtype=np.float32)
    transform = Affine(0.04, 0.0, -80.0, 0.0, -0.04, 70.0)
    weights = np.repeat(cell_areas(transform, HEIGHT, WIDTH, "EPSG:4326"), WIDTH)
    # Evaluation presences sampled at cells, favouring high suitability (so values tie
    # with their own cells, as with records sampled from the raster).
    candidates = cells[rng.integers(0, cells.size, 20 * N_PRESENCES)]
    keep = rng.random(candidates.size) < candidates**2
    presences = candidates[keep][:N_PRESENCES].astype(np.float64)
    assert presences.size == N_PRESENCES

    floors, fulls, tens = [], [], []
    for _ in range(3):  # alternate floor and target so load on the machine hits both alike
        floors.append(_best_of(1, lambda: np.sort(cells))[0])
        t, result = _best_of(1, lambda: partial_roc(cells, presences, weights, replicates=REPLICATES, seed=1))
        fulls.append(t)
        tens.append(_best_of(1, lambda: partial_roc(cells, presences, weights, replicates=10, seed=1))[0])
    t_floor, t_full, t_ten = (float(np.median(x)) for x in (floors, fulls, tens))

    m = result.sample_size
    indices = np.random.default_rng(1).integers(0, N_PRESENCES, size=(REPLICATES, m))

    # Naive 1: every replicate passes over all cells for its own sample of presences.
    few = 5
    start = time.perf_counter()
    naive = [partial_roc(cells, presences[indices[b]], weights, replicates=1).auc_ratio for b in range(few)]
    t_naive = (time.perf_counter() - start) / few * REPLICATES
    assert np.allclose(naive, result.ratios[:few], atol=1e-12), "naive and vectorised ratios differ"

    # Naive 2: the plain reference, which builds the whole polyline over all cells per replicate.
    start = time.perf_counter()
    ref = partial_roc_reference(cells, presences, indices[:1], weights)
    t_ref = (time.perf_counter() - start) * REPLICATES
    assert np.allclose(ref, result.ratios[:1], atol=1e-12), "reference and vectorised ratios differ"

    # Harder case for the one-pass lookup: a raster rounded to 1001 distinct values, so
    # about half the cells share their value with a presence and need the binary search.
    rounded = np.round(cells, 3)
    rounded_presences = np.round(presences, 3)
    t_rounded, _ = _best_of(3, lambda: partial_roc(rounded, rounded_presences, weights, replicates=REPLICATES, seed=1))

    rows = [
        ("floor: np.sort of the cells", f"{t_floor:.3f} s", ""),
        ("partial_roc, 1000 bootstrap + 1000 null replicates", f"{t_full:.3f} s", ""),
        ("ratio to the floor", f"{t_full / t_floor:.2f}", "<= 2"),
        ("partial_roc, 1000 replicates, raster rounded to 0.001", f"{t_rounded:.3f} s", ""),
        ("partial_roc, 10 replicates", f"{t_ten:.3f} s", ""),
        ("ratio 1000 / 10 replicates", f"{t_full / t_ten:.2f}", "< 1.3"),
        (f"naive cell pass per replicate (x{few} timed, x1000 extrapolated)", f"{t_naive:.1f} s", ""),
        ("speed-up over naive cell pass", f"{t_naive / t_full:.0f}x", ">= 100x"),
        ("plain reference polyline (x1 timed, x1000 extrapolated)", f"{t_ref:.0f} s", ""),
        ("speed-up over plain reference", f"{t_ref / t_full:.0f}x", ""),
    ]
    print(f"partial ROC benchmark: {cells.size:,} cells (float32, area-weighted), "
          f"{N_PRESENCES} presences, sample {m}, omission 0.05, one core")
    width = max(len(r[0]) for r in rows)
    print(f"{'measure':<{width}}  {'value':>10}  target")
    for name, value, target in rows:
        print(f"{name:<{width}}  {value:>10}  {target}")
    print(f"result: AUC {result.auc:.4f}, ratio {result.auc_ratio:.4f}, "
          f"bootstrap mean {result.bootstrap_mean:.4f} [{result.ratio_low:.4f}, {result.ratio_high:.4f}], "
          f"null median {result.null_median:.4f}, p = {result.pvalue:.3g}")


if __name__ == "__main__":
    main()
