"""batch in processes of its own: a local cluster stopped by Ctrl-C, a scheduler and a worker
started as separate processes, and a run whose temporary folder is withdrawn.

Kept apart from tests/test_batch.py (whose module shares one cluster and one first batch) so
that pytest-xdist can run the two files on two workers. Records are invented, seeded.
"""

from __future__ import annotations

import json
import subprocess
import sys
import time

import pytest

from splitter.batch import read_manifest, run_batch
from tests.conftest import write_records_csv
from tests.test_batch import _children, _interrupt_after_first, _slow_manifest, partial_folders

pytestmark = pytest.mark.slow


def test_ctrl_c_on_a_local_cluster_leaves_only_whole_runs(tmp_path):
    m = _slow_manifest(tmp_path / "in")
    kids = _children()
    with pytest.raises(KeyboardInterrupt):
        run_batch(m, tmp_path / "out", workers=1, progress=_interrupt_after_first)
    out = tmp_path / "out"
    assert partial_folders(out) == [] and not (out / "batch.csv").exists()
    done = [p for p in out.iterdir()]
    # reference: the interrupt came after the first of 6 runs; only complete runs (with run.json) remain
    assert 1 <= len(done) < 6 and all((p / "run.json").is_file() for p in done)
    deadline = time.monotonic() + 15
    while _children() - kids and time.monotonic() < deadline:  # the cluster's worker processes are gone
        time.sleep(0.2)
    assert not (_children() - kids)


def test_scheduler_and_worker_as_separate_processes(tmp_path):
    """'dask scheduler' + 'dask worker' on loopback, then --scheduler ADDRESS."""
    import distributed

    folder = tmp_path / "in"
    folder.mkdir()
    lines = ["run,records,method,folds,seed"]
    for i in range(3):
        write_records_csv(folder / f"r{i}.csv", n_presence=60, n_background=40, seed=i)
        lines.append(f"r{i},r{i}.csv,random,4,{i}")
    (folder / "m.csv").write_text("\n".join(lines) + "\n")
    dask = [sys.executable, "-m", "dask"]
    sched_file = tmp_path / "scheduler.json"
    logs = open(tmp_path / "dask.log", "w")
    procs = []
    try:
        procs.append(subprocess.Popen([*dask, "scheduler", "--host", "127.0.0.1", "--port", "0", "--no-dashboard",
                                       "--scheduler-file", str(sched_file)], stdout=logs, stderr=logs))
        deadline = time.monotonic() + 60
        while not sched_file.exists() and time.monotonic() < deadline:
            time.sleep(0.2)
        address = json.loads(sched_file.read_text())["address"]
        assert address.startswith("tcp://127.0.0.1:")
        procs.append(subprocess.Popen([*dask, "worker", address, "--host", "127.0.0.1", "--nworkers", "1",
                                       "--nthreads", "1", "--no-dashboard"], stdout=logs, stderr=logs))
        with distributed.Client(address, set_as_default=False, timeout="30s") as c:
            c.wait_for_workers(1, timeout=60)
        res = run_batch(folder / "m.csv", tmp_path / "out", scheduler=address)
        assert [r["status"] for r in res.rows] == ["ok", "ok", "ok"]  # reference: the 3-row manifest above
        assert all((tmp_path / "out" / f"r{i}" / "folds.csv").is_file() for i in range(3))
    finally:
        # The worker is stopped before the scheduler: a worker whose scheduler is already gone
        # spends about 8 s retrying it before it exits.
        for p in reversed(procs):
            p.terminate()
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait(timeout=10)
        logs.close()


def test_a_run_whose_folder_is_withdrawn_stops_and_leaves_nothing(tmp_path):
    """What a task still running on an existing cluster does after Ctrl-C swept its folder."""
    import threading

    from splitter.batch import _remove_partials, execute_run, fingerprint

    spec = read_manifest(_slow_manifest(tmp_path / "in", n=1))[0]
    fp, inputs = fingerprint(spec)
    out = tmp_path / "out"
    box = {}
    worker = threading.Thread(target=lambda: box.update(row=execute_run(spec, str(out), fp, inputs)))
    worker.start()
    deadline = time.monotonic() + 30
    while not list(out.glob(".s0.partial-*/folds.csv")) and time.monotonic() < deadline:
        time.sleep(0.01)
    assert list(out.glob(".s0.partial-*/folds.csv"))  # the design is written, the model is being fitted
    _remove_partials(out, ["s0"])
    worker.join(timeout=60)
    assert (box["row"]["status"], box["row"]["error"]) == ("failed", "interrupted")
    assert list(out.iterdir()) == []  # no run folder, no temporary folder

