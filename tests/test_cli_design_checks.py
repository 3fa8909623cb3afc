"""Design checks that speak before modelling, from the command line: what each fold's
tests can show (terminal, sidecar, appendix), a fold that cannot be tested stops the
run, a small fold and a heavy buffer warn.

Outside references: the binomial bound is checked against scipy.stats.binomtest
(a model that predicts every one of n evaluation presences present, with a share a
of the area predicted present, has p = a**n); the buffer shares are recounted here
from the gaps file with pandas. Records are invented, seeded.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy.stats import binomtest
from typer.testing import CliRunner

from splitter.cli import app
from tests.conftest import write_records_csv

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _two_clusters(path, n=60, seed=0):
    # Presences in two tight clusters 200 km apart, background spread over the whole square:
    # with 4 folds of 40 km blocks, at most two folds can hold a presence.
    rng = np.random.default_rng(seed)
    rows = ["record_id,longitude,latitude,kind"]
    for i in range(n):
        cx, cy = (10.1, 45.1) if i % 2 else (11.9, 46.9)
        rows.append(f"p{i},{cx + 0.05 * rng.random():.5f},{cy + 0.05 * rng.random():.5f},presence")
    for i in range(80):
        rows.append(f"b{i},{10 + 2 * rng.random():.5f},{45 + 2 * rng.random():.5f},background")
    path.write_text("\n".join(rows) + "\n")
    return path


def test_the_checks_reach_the_terminal_and_the_sidecar(tmp_path):
    src = write_records_csv(tmp_path / "records.csv")
    out = tmp_path / "run" / "folds.csv"
    res = run("design", src, "--block-size", 40, "--buffer", 60, "--folds", 5, "--seed", 2, "--alpha", 0.05,
              "--adjust", "holm", "--out", out)
    assert res.exit_code == 0, res.output
    assert "what each fold can show" in res.output
    side = json.loads((tmp_path / "run" / "folds.design.json").read_text())
    checks = side["checks"]
    assert checks["alpha"] == 0.05 and checks["adjust"] == "holm" and len(checks["folds"]) == 5

    table = pd.read_csv(out, dtype={"fold": "Int64"})
    gaps = pd.read_csv(tmp_path / "run" / "folds.gaps.csv")
    k = 5
    for f in checks["folds"]:
        i = f["fold"]
        ev = table[table.fold == i]
        n = int((ev.kind == "presence").sum())
        assert f["evaluation_presences"] == n
        # Outside reference: at the bound, a model hitting all n presences has binomial p = alpha/k
        # (the first Holm step); predicting a little more area present, it no longer rejects.
        a = f["binomial_bound"]
        assert binomtest(n, n, a, alternative="greater").pvalue == pytest.approx(0.05 / k, rel=1e-9)
        assert binomtest(n, n, min(1.0, a * 1.01), alternative="greater").pvalue > 0.05 / k
        # Buffer shares recounted from the fold table and the gaps file.
        out_ids = set(gaps.record_id[gaps.fold == i].astype(str))
        calib = table[(table.fold.notna()) & (table.fold != i)]
        left = calib.record_id.astype(str).isin(out_ids)
        assert f["buffer_record_share"] == pytest.approx(left.mean())
        pres = calib.kind == "presence"
        assert f["buffer_presence_share"] == pytest.approx(left[pres].mean())
        assert f["calibration_records"] == int((~left).sum())
    # The terminal shows each fold's bound as a percentage.
    for f in checks["folds"]:
        assert f"{f['binomial_bound']:.0%}" in res.output


def test_adjust_none_uses_alpha_itself(tmp_path):
    src = write_records_csv(tmp_path / "records.csv")
    res = run("design", src, "--block-size", 40, "--folds", 4, "--adjust", "none", "--alpha", 0.1,
              "--out", tmp_path / "f.csv")
    assert res.exit_code == 0, res.output
    checks = json.loads((tmp_path / "f.design.json").read_text())["checks"]
    for f in checks["folds"]:
        n = f["evaluation_presences"]
        assert binomtest(n, n, f["binomial_bound"], alternative="greater").pvalue == pytest.approx(0.1, rel=1e-9)


def test_a_fold_with_no_evaluation_presence_stops_the_design(tmp_path):
    src = _two_clusters(tmp_path / "records.csv")
    res = run("design", src, "--block-size", 40, "--folds", 4, "--out", tmp_path / "f.csv")
    assert res.exit_code == 2, res.output
    line = res.output.strip().splitlines()
    assert len(line) == 1 and "Traceback" not in res.output
    assert "no evaluation presence" in line[0] and "--folds 4" in line[0] and "--block-size" in line[0]
    assert not (tmp_path / "f.csv").exists()


def test_small_folds_and_a_heavy_buffer_warn(tmp_path):
    # 40 presences in 8 folds: 5 per fold; (0.05/8)**(1/5) = 0.36 < 0.5, so every fold warns.
    src = write_records_csv(tmp_path / "records.csv", n_presence=40, n_background=40)
    res = run("design", src, "--method", "random", "--folds", 8, "--seed", 1, "--buffer", 60,
              "--out", tmp_path / "f.csv")
    assert res.exit_code == 0, res.output
    checks = json.loads((tmp_path / "f.design.json").read_text())["checks"]
    assert all(f["evaluation_presences"] == 5 for f in checks["folds"])
    assert checks["folds"][0]["binomial_bound"] == pytest.approx((0.05 / 8) ** (1 / 5))
    text = " ".join(res.output.split())
    assert text.count("warning: fold") == 8 and "predicts at most 36% of the area present" in text
    # A 60 km buffer around records scattered over about 480 by 440 km takes over half of some folds' calibration records.
    heavy = [f for f in checks["folds"] if f["buffer_record_share"] > 0.5]
    assert heavy and all(f"the buffer removes {f['buffer_record_share']:.0%} of fold {f['fold']}'s" in text for f in heavy)
    assert checks["warnings"] and len(checks["warnings"]) == 8 + len(heavy)


def test_the_appendix_shows_the_checks(tmp_path):
    src = write_records_csv(tmp_path / "records.csv", n_presence=40, n_background=40)
    run_dir = tmp_path / "run"
    res = run("design", src, "--method", "random", "--folds", 8, "--seed", 1, "--out", run_dir / "folds.csv")
    assert res.exit_code == 0, res.output
    res = run("appendix", run_dir, "--out", tmp_path / "app")
    assert res.exit_code == 0, res.output
    md = (tmp_path / "app" / "appendix.md").read_text()
    assert "What each fold's tests can show" in md
    bound = (0.05 / 8) ** (1 / 5)
    assert f"| {100 * bound:.0f} % |" in md
    assert md.count("Caution: fold") == 8
    table = pd.read_csv(next((tmp_path / "app" / "tables").glob("*fold_checks.csv")))
    assert len(table) == 8 and np.allclose(table.binomial_bound, bound)


@pytest.mark.parametrize("args, flag", [
    (["--alpha", "1.5"], "--alpha"), (["--adjust", "bonferroni"], "--adjust"), (["--omission", "1"], "--omission"),
])
def test_check_options_with_a_wrong_value_get_one_line(tmp_path, args, flag):
    src = write_records_csv(tmp_path / "records.csv")
    res = run("design", src, "--block-size", 40, *args, "--out", tmp_path / "f.csv")
    assert res.exit_code == 2, res.output
    lines = res.output.strip().splitlines()
    assert len(lines) == 1 and flag in lines[0], res.output
