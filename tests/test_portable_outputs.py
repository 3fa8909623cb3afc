"""No output names a file by an absolute path of this machine (outputs go into
manuscripts): every command is run with absolute paths, then every file written is
searched for the temporary folder's path and the project's own folder.

Reference: the paths themselves, searched for as bytes in each output file. Records
and predictions are invented, seeded.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
from typer.testing import CliRunner

from splitter.cli import app
from tests.conftest import write_records_csv

runner = CliRunner()
REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "demo_data"


def run(*args):
    argv = [str(a) for a in args]
    # The command line is recorded from sys.argv, which CliRunner leaves as pytest's: set it as a shell would.
    saved, sys.argv = sys.argv, ["splitter", *argv]
    try:
        res = runner.invoke(app, argv)
    finally:
        sys.argv = saved
    assert res.exit_code == 0, res.output
    return res


def _leaks(folder: Path, *paths: Path) -> list:
    needles = [str(p).encode() for p in paths]
    return [f"{f.relative_to(folder)} names {n.decode()}" for f in sorted(folder.rglob("*")) if f.is_file()
            for n in needles if n in f.read_bytes()]


def test_no_output_names_an_absolute_path(tmp_path):
    src = write_records_csv(tmp_path / "records.csv")
    run_dir = tmp_path / "run"
    env = [a for name in ("temperature.tif", "moisture.tif") for a in ("--env", DEMO / name)]
    run("range", *env, "--seed", 1, "--out", run_dir / "range")
    run("design", src, "--block-size", 40, "--buffer", 20, "--seed", 1, "--out", run_dir / "blocks" / "folds.csv")
    run("audit", run_dir / "blocks" / "folds.csv", "--range-km", 40, "--out", run_dir / "blocks" / "audit")
    table = pd.read_csv(run_dir / "blocks" / "folds.csv", dtype=str, keep_default_na=False)
    rng = np.random.default_rng(0)
    preds = pd.concat([pd.DataFrame({"record_id": table.record_id, "fold": f,
                                     "prediction": rng.uniform(0, 1, len(table)) + (table.kind == "presence") * 0.3})
                       for f in map(str, range(1, 6))])
    preds.to_csv(tmp_path / "predictions.csv", index=False)
    run("evaluate", run_dir / "blocks" / "folds.csv", "--prediction-table", tmp_path / "predictions.csv",
        "--replicates", 50, "--out", run_dir / "blocks" / "evaluation")
    run("appendix", run_dir, "--out", tmp_path / "appendix")
    written = sorted(p.relative_to(tmp_path).as_posix() for p in tmp_path.rglob("*") if p.is_file())
    # Every stage wrote its record (so the search below searched something).
    for name in ("run/range/range.json", "run/blocks/folds.design.json", "run/blocks/audit/audit.json",
                 "run/blocks/evaluation/evaluation.json", "appendix/appendix.md", "appendix/appendix.html"):
        assert name in written
    assert _leaks(tmp_path / "run", tmp_path, REPO) == []
    assert _leaks(tmp_path / "appendix", tmp_path, REPO) == []
    # The inputs are still named: by file name, with their checksums.
    md = (tmp_path / "appendix" / "appendix.md").read_text()
    # (relative to the working folder when inside it, else the file name: either way no leading "/")
    assert "records.csv` |" in md and "predictions.csv --replicates 50" in md
    assert "temperature.tif --env " in md and "--env /" not in md and "--out /" not in md
