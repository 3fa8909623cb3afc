"""Every stage beside its floor, measured in the same run: one table, JSON and a figure.

Usage:
    python tests/benchmarks/run_all.py            # all stages, full sizes (about 21 min, 2 cores)
    python tests/benchmarks/run_all.py --quick    # smaller sizes, for a check (about 2 min)
    python tests/benchmarks/run_all.py design partial_roc --repeat 5   # only these; the other
                                       # rows of docs/performance.json are kept from the last run

Each (stage, size) runs in a fresh process that times the floor and the work
alternately, ``--repeat`` times each (batch of 200 runs: twice) after one untimed run
of each (batch: of the floor's first 20 runs only; every batch starts its own cluster,
so there is nothing of the work's to warm), so that machine load hits both alike. The
process keeps the memory it frees, as a splitter command does (``splitter.memory``),
for the floor as for the work. The table gives the medians, their ratio and the process's peak resident
memory (os.wait4). A stage's slope is fitted to log(time) against log(size)
over its sizes: about 1 for linear work, 1.1 for n log n; above 1.15 is flagged.

Floors (the least the work can cost; each stated beside its row):

| work | floor |
| --- | --- |
| ``design`` blocks + buffer, CSV in and out | pandas read + write of the same table + one cKDTree nearest-neighbour pass over the points |
| ``audit`` of a 5-fold split (distances, overlap) | one cKDTree query of each fold's evaluation presences against its calibration presences |
| ``evaluate`` of one fold on a GeoTIFF, windows, B = 1000, Boyce | a bare windowed rasterio read that counts valid cells (64 MB block cache, as splitter reads) |
| ``partial_roc`` with B = 1000 null and bootstrap replicates | ``np.sort`` of the cell values |
| ``batch`` of small runs on 2 local Dask workers | the same runs one after another in one process |

The batch row also gives its scheduling overhead: the share of the two workers' time
(2 x wall) not spent inside a run, from each run's own ``seconds`` (target <= 10 %).

Start-up (``splitter --help``, each command's ``--help``, ``import splitter``) is
measured first, with the floors of ``bench_startup.py`` (``import typer, rich.console``;
``import numpy, pandas``), 7 alternating runs each.

Writes ``docs/performance.json``, ``docs/performance.md`` (the tables) and
``docs/images/performance.png`` (time against work size, log-log, each stage with
its floor).
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")  # one core each for numpy's back-ends: the floor gets the same

import argparse  # noqa: E402
import json  # noqa: E402
import platform  # noqa: E402
import shutil  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
DOCS = ROOT / "docs"

# stage -> (sizes, quick sizes, size unit, target ratio, peak memory target MB or None, floor words)
STAGES = {
    "design": ([10_000, 100_000, 1_000_000], [10_000, 100_000], "records", 1.5, 2048,
               "pandas read + write of the table + one cKDTree nearest-neighbour pass"),
    "audit": ([10_000, 100_000, 1_000_000], [10_000, 100_000], "records", 2.0, None,
              "one cKDTree query per fold, evaluation against calibration presences"),
    "evaluate": ([1_000_000, 10_000_000, 100_000_000], [1_000_000, 4_000_000], "cells", 1.5, 1024,
                 "a bare windowed rasterio read counting valid cells (64 MB block cache, as splitter reads)"),
    "partial_roc": ([100_000, 1_000_000, 10_000_000], [100_000, 1_000_000], "cells", 2.0, None,
                    "np.sort of the cell values"),
    "batch": ([20, 200], [6], "runs", None, None, "the same runs one after another in one process"),
}
SLOPE_LIMIT = 1.15  # n log n over a decade or two has a fitted slope of about 1.1


# ----------------------------------------------------------------------------- invented inputs

def _records_csv(path: Path, n: int, seed: int = 0) -> Path:
    """bench_design's invented records (clustered presences, uniform background) with two covariates."""
    sys.path.insert(0, str(HERE))
    from bench_design import invented_frame

    rng = np.random.default_rng(seed + 1)
    df = invented_frame(n, seed)
    lon, lat = df.lon.to_numpy(), df.lat.to_numpy()
    df = df.assign(record_id=np.arange(1, n + 1), longitude=lon.round(5), latitude=lat.round(5),
                   temp=(20 - 0.8 * (lat - 40) + rng.normal(0, 1, n)).round(3),
                   moist=(0.5 + 0.04 * lon + rng.normal(0, 0.05, n)).round(4))
    df[["record_id", "longitude", "latitude", "kind", "temp", "moist"]].to_csv(path, index=False)
    return path


def _unit_xyz(lon, lat) -> np.ndarray:
    lo, la = np.radians(lon), np.radians(lat)
    return np.column_stack([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)])


def _raster(path: Path, cells: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """A square lon/lat float32 GeoTIFF of about ``cells`` cells (tiled, deflate, ~15 % nodata),
    written strip by strip; returns 500 evaluation presence scores and one threshold's worth of
    calibration scores drawn at cells, favouring high values."""
    import rasterio
    from rasterio.transform import from_origin
    from rasterio.windows import Window

    side = int(round(np.sqrt(cells)))
    rng = np.random.default_rng(seed)
    picks = []
    profile = dict(driver="GTiff", width=side, height=side, count=1, dtype="float32", crs="EPSG:4326",
                   transform=from_origin(-30.0, 75.0, 60.0 / side, 60.0 / side), nodata=-9999.0,
                   compress="deflate", predictor=3, tiled=True, blockxsize=256, blockysize=256, BIGTIFF="IF_SAFER")
    with rasterio.open(path, "w", **profile) as dst:
        for r0 in range(0, side, 256):
            rows = min(256, side - r0)
            y = (r0 + np.arange(rows, dtype=np.float32))[:, None] / side
            x = np.arange(side, dtype=np.float32)[None, :] / side
            v = 0.5 + 0.3 * np.sin(7 * x) * np.cos(5 * y) + rng.normal(0, 0.05, (rows, side)).astype(np.float32)
            v = np.clip(v, 0, 1).astype(np.float32)
            v[np.broadcast_to(x < 0.12 + 0.05 * np.sin(11 * y), v.shape)] = np.nan
            ok = v[np.isfinite(v)]
            per_strip = -(-4000 * 256 // side)  # about 4000 candidate records over the whole raster
            picks.append(rng.choice(ok, size=min(ok.size, per_strip), replace=False))
            dst.write(np.where(np.isnan(v), np.float32(-9999.0), v), 1, window=Window(0, r0, side, rows))
    vals = np.concatenate(picks).astype(np.float64)
    keep = vals[rng.random(vals.size) < vals ** 3]
    return keep[:500], keep[500:1000]


# ----------------------------------------------------------------------------- one stage, one size

def _prepare(stage: str, n: int, tmp: Path):
    """Inputs and the (work, floor) pair of callables for one size; nothing here is timed."""
    from scipy.spatial import cKDTree

    from splitter.workflow.job import JobOptions, design_step

    if stage == "design":
        import pandas as pd

        src = _records_csv(tmp / "records.csv", n)
        options = JobOptions(method="blocks", folds=5, block_size="50", buffer=10.0, seed=1)

        def work():
            design_step(src, options, tmp / "folds.csv")

        def floor():
            df = pd.read_csv(src)
            df.to_csv(tmp / "copy.csv", index=False)
            xyz = _unit_xyz(df.longitude.to_numpy(), df.latitude.to_numpy())
            cKDTree(xyz).query(xyz, k=2)

        return work, floor, {}
    if stage == "audit":
        from splitter.workflow.audit import audit
        from splitter.workflow.job import read_step

        src = _records_csv(tmp / "records.csv", n)
        options = JobOptions(method="blocks", folds=5, block_size="50", seed=1)
        design_step(src, options, tmp / "folds.csv")
        _, a, names = read_step(tmp / "folds.csv", options)
        xyz = _unit_xyz(a.records.points.x, a.records.points.y)
        pres = a.kind == "presence"

        def work():
            audit(a, covariates=["temp", "moist"], range_km=50.0, seed=1, fold_names=names)

        def floor():
            for i in a.folds:
                ev, cal = a.evaluation(i), a.calibration(i)
                cKDTree(xyz[cal[pres[cal]]]).query(xyz[ev[pres[ev]]])

        return work, floor, {}
    if stage == "evaluate":
        import rasterio

        from splitter.evaluate.surface import evaluate_surface
        from splitter.io.rasters import valid_cells

        path = tmp / "prediction.tif"
        presences, calibration = _raster(path, n)
        threshold = float(np.quantile(calibration, 0.1))

        def work():
            evaluate_surface(lambda: valid_cells(path), presences, thresholds=[threshold], replicates=1000, seed=1,
                             boyce=True)

        def floor():
            # With the small block cache splitter's own reader uses: GDAL's default cache (5 % of
            # RAM) would fill with every decoded tile and give it back at close, and a read then
            # pays first-touch memory costs that vary from 1.2 to 2 s here, a floor too easy to beat.
            count = 0
            with rasterio.Env(GDAL_CACHEMAX=64), rasterio.open(path) as src:
                for _, window in src.block_windows(1):
                    block = src.read(1, window=window)
                    count += int(np.count_nonzero(block != src.nodata))
            return count

        return work, floor, {}
    if stage == "partial_roc":
        from splitter.evaluate import partial_roc

        rng = np.random.default_rng(0)
        cells = rng.random(n)
        presences = np.sqrt(rng.random(500))

        def work():
            partial_roc(cells, presences, replicates=1000, seed=1)

        def few():
            partial_roc(cells, presences, replicates=10, seed=1)

        def floor():
            np.sort(cells)

        return work, floor, {"few": few}
    if stage == "batch":
        sys.path.insert(0, str(HERE))
        from bench_batch import invented_runs

        from splitter.batch import execute_run, fingerprint, read_manifest, run_batch

        manifest = invented_runs(tmp / "inputs", n, replicates=200)
        specs = read_manifest(manifest)
        counter = iter(range(10**6))
        busy = []  # per batch: seconds the runs spent on their own work, summed over the workers

        def work():
            out = tmp / f"parallel_{next(counter)}"
            res = run_batch(manifest, out, workers=2)
            assert res.n_failed == 0, res.failures
            busy.append(sum(r["seconds"] for r in res.rows))

        def floor(some=specs):
            out = tmp / f"serial_{next(counter)}"
            for spec in some:
                fp, inputs = fingerprint(spec)
                row = execute_run(spec, str(out), fp, inputs)
                assert row["status"] == "ok", row["error"]

        # Imports, file cache and the process's memory are warm after a few runs; the
        # whole floor again would cost minutes for nothing.
        return work, floor, {"busy": busy, "warm": lambda: floor(specs[:20])}
    raise SystemExit(f"unknown stage {stage}")


def _child(stage: str, n: int, repeat: int) -> None:
    from splitter.memory import keep_freed_memory

    keep_freed_memory()  # as every splitter command does; the floor runs in the same process
    tmp = Path(tempfile.mkdtemp(prefix=f"bench-{stage}-"))
    try:
        work, floor, extra = _prepare(stage, n, tmp)
        # Warm-up, untimed: imports, the file cache and the process's first use of memory,
        # for both sides alike (batch starts a new cluster on every run: nothing to warm).
        extra.get("warm", floor)()
        if stage != "batch":
            work()
        works, floors, fews = [], [], []
        for _ in range(repeat):
            t0 = time.perf_counter()
            floor()
            floors.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            work()
            works.append(time.perf_counter() - t0)
            if "few" in extra:
                t0 = time.perf_counter()
                extra["few"]()
                fews.append(time.perf_counter() - t0)
        print(json.dumps({"work": works, "floor": floors, "few": fews, "busy": extra.get("busy", [])}))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _measure(stage: str, n: int, repeat: int) -> dict:
    proc = subprocess.Popen([sys.executable, __file__, "--child", stage, str(n), str(repeat)],
                            stdout=subprocess.PIPE, text=True)
    out = proc.stdout.read()
    _, status, usage = os.wait4(proc.pid, 0)
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"{stage} at {n}: the benchmark process failed")
    doc = json.loads(out.strip().splitlines()[-1])
    row = {"stage": stage, "size": n, "work_s": statistics.median(doc["work"]),
           "floor_s": statistics.median(doc["floor"]), "peak_mb": usage.ru_maxrss / 1024, "repeat": repeat,
           "measured": time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())}
    row["ratio"] = row["work_s"] / row["floor_s"]
    if doc["few"]:
        row["b10_s"] = statistics.median(doc["few"])
        row["b1000_over_b10"] = row["work_s"] / row["b10_s"]
    if doc.get("busy"):
        # Scheduling overhead: the share of the two workers' time (2 x wall) not spent inside
        # a run (cluster start, dispatch, results coming back, a worker idle at the end).
        row["overhead"] = statistics.median(1 - b / (2 * w) for b, w in zip(doc["busy"], doc["work"]))
    return row


# ----------------------------------------------------------------------------- report

def _slope(rows) -> float | None:
    if len(rows) < 2:
        return None
    x = np.log([r["size"] for r in rows])
    y = np.log([r["work_s"] for r in rows])
    return float(np.polyfit(x, y, 1)[0])


def _machine() -> dict:
    import importlib.metadata as md

    versions = {}
    for dist in ("splitter", "numpy", "scipy", "pandas", "rasterio", "pyproj", "shapely", "dask", "distributed"):
        try:
            versions[dist] = md.version(dist)
        except md.PackageNotFoundError:
            pass
    mem_gb = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    return {"cores": os.cpu_count(), "memory_gb": round(mem_gb, 1), "python": platform.python_version(),
            "platform": platform.platform(), "load_average": os.getloadavg(), "versions": versions,
            "fresh_memory_us_per_page": _fresh_memory_cost(),
            "date": time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())}


# 256 MB touched page by page twice in a fresh process: the first touch of memory the process has
# never held, then again after freeing it. On a virtual machine whose host takes freed memory
# back, the first touch can cost a hundred times the second; a stage that needs hundreds of MB
# of fresh memory (evaluate at 10^8 cells) pays it, its floor (a read into reused buffers) does not.
_TOUCH = """
import time, numpy as np
out = []
for _ in range(2):
    t = time.perf_counter(); a = np.empty(256 << 20, np.uint8); a[::4096] = 1
    out.append((time.perf_counter() - t) / 65536 * 1e6); del a
print(*out)
"""


def _fresh_memory_cost() -> dict:
    done = subprocess.run([sys.executable, "-c", _TOUCH], capture_output=True, text=True)
    first, again = (float(v) for v in done.stdout.split())
    return {"first_touch": round(first, 2), "touched_again": round(again, 2)}


def _verdicts(rows) -> list:
    for r in rows:
        sizes, _, unit, target, mem, floor_words = STAGES[r["stage"]]
        largest = r["size"] == max(x["size"] for x in rows if x["stage"] == r["stage"])
        if r["stage"] == "batch":
            speedup = 1 / r["ratio"]
            r["speedup"] = speedup
            ok = speedup >= 1.7 and r.get("overhead", 1.0) <= 0.10
            target_text = ">= 1.7x faster, overhead <= 10 %"
        else:
            ok = r["ratio"] <= target and (mem is None or r["peak_mb"] <= mem)
            target_text = f"<= {target:g}x" + (f", <= {mem} MB" if mem else "")
            if "b1000_over_b10" in r:
                ok = ok and r["b1000_over_b10"] <= 1.3
                target_text += ", B1000 <= 1.3x B10"
        r.update(target=target_text, floor=floor_words, unit=unit,
                 status=("ok" if ok else "over") if largest else "")
    return rows


def _table(rows, slopes) -> str:
    lines = ["| stage | size | work s | floor s | ratio | peak MB | target | status | slope |",
             "| --- | ---: | ---: | ---: | ---: | ---: | --- | --- | ---: |"]
    for r in rows:
        ratio = f"{r['ratio']:.2f}" if r["stage"] != "batch" else f"{r['speedup']:.2f}x faster"
        if "b1000_over_b10" in r:
            ratio += f" (B1000/B10 {r['b1000_over_b10']:.2f})"
        if "overhead" in r:
            ratio += f" (overhead {100 * r['overhead']:.1f} %)"
        slope = slopes.get(r["stage"])
        slope_text = "" if slope is None or r["size"] != max(x["size"] for x in rows if x["stage"] == r["stage"]) \
            else f"{slope:.2f}" + (" (over)" if slope > SLOPE_LIMIT else "")
        lines.append(f"| {r['stage']} | {r['size']:,} {r['unit']} | {r['work_s']:.2f} | {r['floor_s']:.2f} | {ratio} | "
                     f"{r['peak_mb']:.0f} | {r['target']} | {r['status']} | {slope_text} |")
    return "\n".join(lines)


def _figure(rows, path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import matplotlib.ticker

    stages = [s for s in STAGES if any(r["stage"] == s for r in rows)]
    fig, axes = plt.subplots(1, len(stages), figsize=(3.2 * len(stages), 3.2), squeeze=False)
    for ax, stage in zip(axes[0], stages):
        rs = sorted((r for r in rows if r["stage"] == stage), key=lambda r: r["size"])
        sizes = [r["size"] for r in rs]
        ax.loglog(sizes, [r["work_s"] for r in rs], "o-", color="#1b6ca8", label=stage)
        ax.loglog(sizes, [r["floor_s"] for r in rs], "s--", color="#8a8a8a", label="floor")
        ax.set_title(stage, fontsize=10)
        ax.set_xlabel(rs[0]["unit"], fontsize=9)
        ax.tick_params(labelsize=8)
        # Only the decades are labelled: the labels of minor ticks overlap on a short span (batch).
        ax.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.yaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.legend(fontsize=8, frameon=False)
    axes[0][0].set_ylabel("seconds (median)", fontsize=9)
    fig.tight_layout()
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=110, metadata={"Software": None})
    plt.close(fig)


def main(argv) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes (a check, not the figures for the docs)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--no-docs", action="store_true", help="print only; leave docs/ as it is")
    ap.add_argument("--child", nargs=3, metavar=("STAGE", "SIZE", "REPEAT"), help=argparse.SUPPRESS)
    ap.add_argument("stages", nargs="*")
    args = ap.parse_args(argv)
    if args.child:
        _child(args.child[0], int(args.child[1]), int(args.child[2]))
        return 0
    wanted = [s for s in (args.stages or ["startup", *STAGES]) if s != "startup"]
    startup = []
    if not args.stages or "startup" in args.stages:
        sys.path.insert(0, str(HERE))
        import bench_startup

        for name, cmd, (floor_name, floor_cmd), target in bench_startup.rows():
            t, f = bench_startup.measure(cmd, floor_cmd, 7)
            startup.append({"work": name, "seconds": t, "floor": floor_name, "floor_seconds": f, "ratio": t / f,
                            "target": target, "status": "ok" if t / f <= target else "over"})
            print(f"{name}: {t / f:.2f}x {floor_name}", flush=True)
    rows = []
    for stage in wanted:
        sizes = STAGES[stage][1] if args.quick else STAGES[stage][0]
        for n in sizes:
            # 200 runs take minutes each way; two pairs, as one pair's ratio moved by up to 0.2 between runs.
            repeat = min(2, args.repeat) if stage == "batch" and n > 20 else args.repeat
            print(f"{stage} at {n:,} ...", flush=True)
            rows.append(_measure(stage, n, repeat))
    previous = DOCS / "performance.json"
    if args.stages and not args.quick and previous.exists():
        # Only some stages measured: keep the others' rows from the last full run (their dates differ;
        # the JSON says which run each came from).
        old = json.loads(previous.read_text())
        kept = [r for r in old["rows"] if r["stage"] not in wanted]
        rows = sorted(kept + rows, key=lambda r: (list(STAGES).index(r["stage"]), r["size"]))
        startup = startup or old.get("startup", [])
        wanted = [s for s in STAGES if any(r["stage"] == s for r in rows)]
    slopes = {s: _slope([r for r in rows if r["stage"] == s]) for s in wanted if s != "batch"}
    rows = _verdicts(rows)
    table = _table(rows, slopes)
    startup_table = "\n".join(
        ["| work | median s | floor | floor s | ratio | target | status |", "| --- | ---: | --- | ---: | ---: | --- | --- |"]
        + [f"| `{r['work']}` | {r['seconds']:.3f} | `{r['floor']}` | {r['floor_seconds']:.3f} | {r['ratio']:.2f} | "
           f"<= {r['target']:g}x | {r['status']} |" for r in startup])
    machine = _machine()
    if startup:
        print(startup_table)
    print(table)
    touch = machine["fresh_memory_us_per_page"]
    print(f"machine: {machine['cores']} cores, {machine['memory_gb']} GB, Python {machine['python']}, "
          f"load {machine['load_average'][0]:.2f}, fresh memory {touch['first_touch']:.2f} us per 4 KB page "
          f"({touch['touched_again']:.2f} when touched again)")
    if not args.no_docs:
        DOCS.mkdir(exist_ok=True)
        doc = {"machine": machine, "startup": startup, "rows": rows, "slopes": slopes, "slope_limit": SLOPE_LIMIT,
               "quick": args.quick}
        (DOCS / "performance.json").write_text(json.dumps(doc, indent=2, sort_keys=True) + "\n")
        _figure(rows, DOCS / "images" / "performance.png")
        floors = "\n".join(f"- **{s}**: {STAGES[s][5]}" for s in wanted)
        (DOCS / "performance.md").write_text(
            "# Performance beside its floor\n\n"
            f"Made by `python tests/benchmarks/run_all.py{' --quick' if args.quick else ''}` on {machine['date']}: "
            f"{machine['cores']} cores, {machine['memory_gb']} GB, Python {machine['python']}, load average "
            f"{machine['load_average'][0]:.2f} at the end; memory the process had never held cost "
            f"{touch['first_touch']:.2f} us per 4 KB page on first touch, {touch['touched_again']:.2f} when "
            "touched again. Each row is the median of alternating runs of the work and its floor in one process, "
            "after one untimed run of each (batch: of the floor's first 20 runs only, as every batch starts its own "
            "cluster; 200 runs: two pairs); the process keeps the memory it frees, as splitter commands do "
            "(`splitter.memory`), so neither side pays that first touch again. Ratio = work / floor (batch: "
            "floor / work, the speed-up of 2 workers); "
            "status is judged at a stage's largest size; slope = fitted exponent of time against size "
            f"(flagged above {SLOPE_LIMIT}).\n\n"
            + (f"Start-up (7 alternating runs each):\n\n{startup_table}\n\n" if startup else "")
            + f"Floors of the stages:\n\n{floors}\n\n{table}\n\n![time against work size](images/performance.png)\n\n"
            "Versions: " + ", ".join(f"{k} {v}" for k, v in machine["versions"].items()) + "\n")
    over = ([r for r in rows if r["status"] == "over"] + [r for r in startup if r["status"] == "over"]
            + [s for s, v in slopes.items() if v and v > SLOPE_LIMIT])
    return 1 if over else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
