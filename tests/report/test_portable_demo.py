"""The demo's outputs name no absolute path of this machine: commands, inputs and
fold tables are named relative to the demo folder or by file name (reference: the
demo folder's and the project's paths, searched for as bytes in every file)."""

from __future__ import annotations

import json
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


def test_the_demo_names_no_absolute_path(demo_run):
    needles = [str(demo_run.parent).encode(), str(REPO).encode()]
    files = [f for f in sorted(demo_run.rglob("*")) if f.is_file()]
    assert len(files) > 40
    leaks = [f"{f.relative_to(demo_run)}" for f in files for n in needles if n in f.read_bytes()]
    assert leaks == []
    side = json.loads((demo_run / "blocks" / "folds.design.json").read_text())
    assert side["command"].startswith("splitter design ") and "--out blocks/folds.csv" in side["command"]
