"""Faults a real run meets: stopped mid-write (SIGINT, SIGTERM), two runs on one --out,
an output folder that cannot be written, a working folder that cannot be written.

Each test drives the installed command in its own process, as a user or a job
scheduler would. Records are invented here, seeded."""

from __future__ import annotations

import hashlib
import os
import shutil
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

SPLITTER = [sys.executable, "-m", "splitter.cli"]


def _records(path: Path, n: int, seed: int = 0) -> Path:
    # Invented: n presences and n background points scattered over 10 by 6 degrees.
    rng = np.random.default_rng(seed)
    lon = 5 + 10 * rng.random(2 * n)
    lat = 40 + 6 * rng.random(2 * n)
    kind = np.r_[np.full(n, "presence"), np.full(n, "background")]
    with open(path, "w") as f:
        f.write("record_id,longitude,latitude,kind\n")
        f.writelines(f"{i + 1},{x:.5f},{y:.5f},{k}\n" for i, (x, y, k) in enumerate(zip(lon, lat, kind)))
    return path


def _digest(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _design(src: Path, out: Path, *extra, **popen):
    return subprocess.Popen([*SPLITTER, "design", str(src), "--method", "blocks", "--folds", "5", "--block-size", "50",
                             "--buffer", "30", "--seed", "1", "--out", str(out), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **popen)


def _held(lock: Path, pid: int) -> bool:
    """Whether process ``pid`` holds a flock on ``lock``: read from Linux's /proc/locks (lines
    "N: FLOCK ADVISORY WRITE pid major:minor:inode start end"), without touching the lock."""
    try:
        inode = lock.stat().st_ino
    except FileNotFoundError:
        return False
    for line in Path("/proc/locks").read_text().splitlines():
        f = line.split()
        if len(f) >= 6 and f[1] == "FLOCK" and f[4] == str(pid) and f[5].rsplit(":", 1)[-1] == str(inode):
            return True
    return False


@pytest.fixture(scope="module")
def big_records(tmp_path_factory):
    # Large enough that the fold table's temporary file exists for a noticeable time (measured
    # about 105 ms for these 50,000 rows, against a 5 ms poll), small enough that designing it
    # takes under two seconds.
    return _records(tmp_path_factory.mktemp("big") / "records.csv", 25_000)


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_a_run_stopped_mid_write_leaves_no_partial_file(big_records, tmp_path, sig):
    before = hashlib.sha256(big_records.read_bytes()).hexdigest()
    out = tmp_path / "folds.csv"
    proc = _design(big_records, out)
    # Wait until a temporary output file exists: the run is then writing.
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if any(p.name.startswith(".folds") and ".tmp-" in p.name for p in tmp_path.iterdir()):
            break
        time.sleep(0.005)
    else:
        pytest.fail(f"the run never started writing (exit {proc.returncode}): {proc.stderr.read()}")
    proc.send_signal(sig)
    _, stderr = proc.communicate(timeout=120)
    assert proc.returncode == 130, stderr
    assert "interrupted" in stderr and "Traceback" not in stderr
    assert list(tmp_path.iterdir()) == []  # no fold table, no temp file, no lock file
    assert hashlib.sha256(big_records.read_bytes()).hexdigest() == before  # input untouched


@pytest.mark.slow
def test_a_second_run_on_the_same_output_is_refused(big_records, tmp_path):
    out = tmp_path / "folds.csv"
    first = _design(big_records, out)
    lock = tmp_path / ".folds.csv.lock"
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and not _held(lock, first.pid):  # the file appears before its flock
        time.sleep(0.005)
    assert _held(lock, first.pid), "the first run never took its lock"
    # Hold the first run still (SIGSTOP) while the second starts, so the overlap does not depend
    # on how long the first run takes; then let it finish (SIGCONT).
    first.send_signal(signal.SIGSTOP)
    try:
        second = _design(big_records, out)
        _, err2 = second.communicate(timeout=120)
    finally:
        first.send_signal(signal.SIGCONT)
    _, err1 = first.communicate(timeout=300)
    assert first.returncode == 0, err1
    assert second.returncode == 2 and "another splitter run is writing" in err2 and "--out" in err2
    assert len(err2.strip().splitlines()) == 1 and "Traceback" not in err2
    # The first run's outputs are complete: the table has every input row.
    assert sum(1 for _ in open(out)) == sum(1 for _ in open(big_records))


def test_an_output_folder_that_cannot_be_written_gets_one_line(tmp_path):
    if os.geteuid() == 0:
        # root ignores permission bits; a path under a regular file cannot be a folder for anyone.
        blocker = tmp_path / "a-file"
        blocker.write_text("x")
        out = blocker / "audit"
    else:
        locked = tmp_path / "locked"
        locked.mkdir()
        locked.chmod(stat.S_IRUSR | stat.S_IXUSR)
        out = locked / "audit"
    src = _records(tmp_path / "r.csv", 200)
    res = subprocess.run([*SPLITTER, "range", "--env", str(Path(__file__).parent.parent / "demo_data" / "canopy.tif"),
                          "--out", str(out)], capture_output=True, text=True)
    assert res.returncode == 2, res.stderr
    assert len(res.stderr.strip().splitlines()) == 1 and "--out" in res.stderr and "Traceback" not in res.stderr
    assert src.exists()


def test_nothing_is_written_outside_out_from_a_read_only_working_folder(tmp_path, tmp_path_factory):
    src = _records(tmp_path / "r.csv", 300)
    work = tmp_path / "work"
    work.mkdir()
    out = tmp_path / "results" / "folds.csv"
    out.parent.mkdir()
    before = _digest(tmp_path)
    # HOME is the read-only folder too; a plotting library's font cache, if one is built,
    # goes to its own configuration folder (MPLCONFIGDIR), which is not ours to police.
    env = dict(os.environ, HOME=str(work), MPLCONFIGDIR=str(tmp_path_factory.mktemp("mplconfig")))
    work.chmod(stat.S_IRUSR | stat.S_IXUSR)
    try:
        res = subprocess.run([*SPLITTER, "design", str(src), "--method", "blocks", "--folds", "3", "--block-size",
                              "150", "--seed", "1", "--out", str(out)], cwd=work, env=env,
                             capture_output=True, text=True)
    finally:
        work.chmod(stat.S_IRWXU)
    assert res.returncode == 0, res.stderr
    after = _digest(tmp_path)
    new = sorted(set(after) - set(before))
    assert all(n.startswith("results/") for n in new), new  # only inside the output's folder
    assert {n: after[n] for n in before} == before  # nothing that existed was changed
    assert list(work.iterdir()) == []


def _tree(folder: Path) -> dict:
    # Every file and folder, hidden ones included, with its bytes (None for a folder).
    return {p.relative_to(folder).as_posix(): (p.read_bytes() if p.is_file() else None)
            for p in sorted(folder.rglob("*"))}


@pytest.mark.slow
def test_a_rerun_stopped_half_way_leaves_the_last_run_whole(demo_run, tmp_path):
    # A demo folder is rerun with another seed and stopped once the rerun has put a
    # finished file in place. Without splitter.io.journal the folder would then mix the
    # new range with the old folds, evaluation and appendix.
    out = tmp_path / "run"
    shutil.copytree(demo_run, out)  # copies keep their old times
    before, start = _tree(out), time.time_ns()

    def replaced():
        return any(p.stat().st_mtime_ns >= start for p in out.rglob("*")
                   if p.is_file() and not p.name.startswith("."))

    proc = subprocess.Popen([*SPLITTER, "demo", str(out), "--replicates", "100", "--seed", "2"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if replaced():
            break
        time.sleep(0.005)
    else:
        pytest.fail(f"the rerun never replaced a file (exit {proc.returncode}): {proc.stderr.read()}")
    proc.send_signal(signal.SIGTERM)
    _, stderr = proc.communicate(timeout=120)
    assert proc.returncode == 130, stderr
    assert "interrupted" in stderr and "Traceback" not in stderr
    after = _tree(out)
    assert sorted(after) == sorted(before)  # no file added, none lost, no hidden copy left
    assert [k for k in before if after[k] != before[k]] == []  # every byte as before
