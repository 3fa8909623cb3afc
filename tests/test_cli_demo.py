"""splitter demo as a newcomer runs it."""

import json

from typer.testing import CliRunner

from splitter.cli import app


def test_demo_runs_end_to_end(tmp_path):
    res = CliRunner().invoke(app, ["demo", str(tmp_path / "d"), "--replicates", "100"])
    assert res.exit_code == 0, res.output
    out = tmp_path / "d"
    for split in ("blocks", "random"):
        for f in ("folds.csv", "folds.design.json", "audit/audit.csv", "audit/audit.json", "audit/distance_ecdf.png",
                  "evaluation/evaluation.csv", "evaluation/evaluation.json"):
            assert (out / split / f).exists(), f
    assert (out / "blocks" / "folds.gaps.csv").exists()
    assert (out / "range" / "range.json").exists() and (out / "range" / "variogram.png").exists()
    assert (out / "appendix" / "appendix.html").exists() and (out / "appendix" / "appendix.md").exists()
    blocks = json.loads((out / "blocks" / "audit" / "audit.json").read_text())
    random = json.loads((out / "random" / "audit" / "audit.json").read_text())
    # common practice: a random split of clustered records leaves evaluation records next to calibration ones
    assert random["verdict"] == "dependent" and blocks["verdict"] == "independent"
    assert "appendix" in res.output and "blocks: audit" in res.output
