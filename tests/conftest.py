"""Shared fixtures: small invented record sets written to temporary files, and one demo run."""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest


def write_records_csv(path, n_presence=240, n_background=160, seed=0, lon0=12.0, lat0=45.0,
                      spread=(1.5, 1.0), extra_rows=()):
    """An invented record table with clustered presences and uniform background."""
    rng = np.random.default_rng(seed)
    centres = rng.normal([lon0, lat0], spread, size=(8, 2))
    pick = rng.integers(0, 8, n_presence)
    lon_p = centres[pick, 0] + rng.normal(0, 0.25, n_presence)
    lat_p = centres[pick, 1] + rng.normal(0, 0.2, n_presence)
    lon_b = rng.uniform(lon0 - 3, lon0 + 3, n_background)
    lat_b = rng.uniform(lat0 - 2, lat0 + 2, n_background)
    lines = ["record_id,longitude,latitude,kind,method,note"]
    for i in range(n_presence):
        m = "transect" if lon_p[i] < lon0 else "trap"
        lines.append(f"p{i + 1},{lon_p[i]:.5f},{lat_p[i]:.5f},presence,{m},x{i % 7}")
    for i in range(n_background):
        lines.append(f"b{i + 1},{lon_b[i]:.5f},{lat_b[i]:.5f},background,,")
    lines.extend(extra_rows)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.fixture
def records_csv(tmp_path):
    return write_records_csv(tmp_path / "records.csv")


@dataclass(frozen=True)
class DemoCommand:
    """One `splitter demo OUT --replicates 100` run: its folder, terminal output and exit code."""

    out: Path
    output: str
    exit_code: int


@pytest.fixture(scope="session")
def demo_command(tmp_path_factory) -> DemoCommand:
    """The whole demo, run once per test session through the command line (the newcomer's path).

    The demo test reads its terminal output; the report, browser and notebook tests read its
    folder (``demo_run``). ``run_demo`` builds its own appendix at the end (``<run>/appendix``).
    """
    import fcntl
    import json
    import os

    from typer.testing import CliRunner

    from splitter.cli import app

    # Under pytest-xdist every worker has its own basetemp inside the session's folder; the demo is
    # made once in that shared folder, under an exclusive flock, and the other worker reads it.
    base = tmp_path_factory.getbasetemp()
    shared = base.parent if os.environ.get("PYTEST_XDIST_WORKER") else base
    out, record = shared / "demo-run" / "run", shared / "demo-run.json"
    with open(shared / "demo-run.lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)  # released when the file is closed
        if not record.exists():
            res = CliRunner().invoke(app, ["demo", str(out), "--replicates", "100"])
            record.write_text(json.dumps({"output": res.output, "exit_code": res.exit_code}))
    done = json.loads(record.read_text())
    return DemoCommand(out, done["output"], done["exit_code"])


@pytest.fixture(scope="session")
def demo_run(demo_command) -> Path:
    """A complete run folder (range, blocks, random; audited and evaluated; appendix)."""
    assert demo_command.exit_code == 0, demo_command.output
    return demo_command.out


@pytest.fixture
def run_copy(demo_run, tmp_path):
    """A private copy of the demo run without its appendix, to build from or to alter."""
    dst = tmp_path / "run"
    shutil.copytree(demo_run, dst, ignore=shutil.ignore_patterns("appendix"))
    return dst


# The file whose tests first read the shared demo run; it is collected first.
_DEMO_FIRST = "tests/report/test_appendix.py"


def pytest_collection_modifyitems(config, items):
    """Order files for two workers (``--dist loadfile`` sends a file whole to one worker).

    The first file that needs the shared demo run goes first, so one worker builds the demo
    while the other runs the rest; the other files that read the demo run go last, when it
    exists, so no worker waits on the demo's lock. Within each group, files holding a test
    marked ``slow`` go first (longest first), so the last files to finish are short ones.
    """
    def path(item):
        return item.nodeid.split("::", 1)[0]

    demo_files = {path(i) for i in items if {"demo_command", "demo_run"} & set(i.fixturenames)}
    slow_files = {path(i) for i in items if i.get_closest_marker("slow")}

    def rank(item):
        p = path(item)
        if p == _DEMO_FIRST:
            return 0
        return (3 if p in demo_files else 1) + (0 if p in slow_files else 1)

    items.sort(key=rank)  # stable: the order within each group is kept
