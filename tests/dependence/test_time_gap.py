"""Time apart between evaluation and calibration records (splitter.dependence.time_gap).

Reference: brute force in the test (every evaluation date against every calibration
date, numpy min of absolute differences); and, from the command line, a design that
calibrates before 2016 and evaluates from it on (every evaluation record later than
all calibration records) against a random design (dates shared). Records invented,
seeded.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from splitter.cli import app
from splitter.dependence.time_gap import time_gaps
from tests.conftest import write_records_csv


@pytest.mark.parametrize("seed", range(5))
def test_gaps_equal_brute_force(seed):
    rng = np.random.default_rng(seed)
    t = rng.uniform(1990, 2020, 300)
    t[rng.random(300) < 0.1] = np.nan  # undated records are left out
    idx = rng.permutation(300)
    folds = np.array_split(idx, 4)
    cal = [np.concatenate([f for j, f in enumerate(folds) if j != i]) for i in range(4)]
    g = time_gaps(t, cal, folds)
    for i in range(4):
        te, tc = t[folds[i]], t[cal[i]]
        te, tc = te[np.isfinite(te)], tc[np.isfinite(tc)]
        gaps = np.abs(te[:, None] - tc[None, :]).min(axis=1)
        assert g.median_years[i] == pytest.approx(np.median(gaps), abs=1e-12)
        assert g.p10_years[i] == pytest.approx(np.percentile(gaps, 10), abs=1e-12)
        assert g.later_share[i] == pytest.approx(np.mean(te > tc.max()))
        assert g.n_dated[i] == te.size


def test_the_audit_reports_time_apart(tmp_path):
    src = write_records_csv(tmp_path / "records.csv")
    df = pd.read_csv(src, dtype=str, keep_default_na=False)
    df["year"] = (2006 + np.arange(len(df)) % 15).astype(str)
    df.to_csv(src, index=False)
    runner = CliRunner()
    run = lambda *a: runner.invoke(app, [str(x) for x in a])  # noqa: E731
    assert run("design", src, "--method", "holdout-period", "--calibrate-before", 2016,
               "--out", tmp_path / "later" / "folds.csv").exit_code == 0
    res = run("audit", tmp_path / "later" / "folds.csv", "--range-km", 20, "--out", tmp_path / "later" / "audit")
    assert res.exit_code == 0, res.output
    later = pd.read_csv(tmp_path / "later" / "audit" / "audit.csv")
    # Evaluated from 2016 on, calibrated on 2006-2015: the nearest calibration year is 2015.
    table = pd.read_csv(tmp_path / "later" / "folds.csv", dtype={"fold": "Int64"})
    ev_years = table.year[(table.fold == 1) & (table.kind == "presence")].to_numpy(float)
    assert later.time_later_share[0] == 1.0
    assert later.time_gap_median_years[0] == pytest.approx(np.median(ev_years - 2015))
    assert "time apart (year" in res.output
    assert run("design", src, "--method", "random", "--seed", 1,
               "--out", tmp_path / "random" / "folds.csv").exit_code == 0
    assert run("audit", tmp_path / "random" / "folds.csv", "--range-km", 20, "--out",
               tmp_path / "random" / "audit").exit_code == 0
    rand = pd.read_csv(tmp_path / "random" / "audit" / "audit.csv")
    assert (rand.time_gap_median_years == 0).all() and (rand.time_later_share == 0).all()
    doc = json.loads((tmp_path / "random" / "audit" / "audit.json").read_text())
    assert doc["context"]["time_column"] == "year" and len(doc["context"]["time_gaps"]) == 5


def test_the_audit_finds_a_date_column_by_its_usual_names(tmp_path):
    # No 'year' column: Darwin Core's eventDate dates the records (ISO dates), and a random
    # design's time gaps are measured from it as from a year column (reference: the same
    # records with 'year', audited the same way).
    src = write_records_csv(tmp_path / "records.csv")
    df = pd.read_csv(src, dtype=str, keep_default_na=False)
    years = (2006 + np.arange(len(df)) % 15).astype(str)
    df.assign(year=years).to_csv(tmp_path / "y.csv", index=False)
    df.assign(eventDate=[f"{y}-01-01" for y in years]).to_csv(tmp_path / "d.csv", index=False)
    runner = CliRunner()
    run = lambda *a: runner.invoke(app, [str(x) for x in a])  # noqa: E731
    docs = {}
    for name in ("y", "d"):
        assert run("design", tmp_path / f"{name}.csv", "--method", "random", "--seed", 1,
                   "--out", tmp_path / name / "folds.csv").exit_code == 0
        res = run("audit", tmp_path / name / "folds.csv", "--range-km", 20, "--out", tmp_path / name / "audit")
        assert res.exit_code == 0, res.output
        docs[name] = json.loads((tmp_path / name / "audit" / "audit.json").read_text())["context"]
    assert docs["d"]["time_column"] == "eventDate" and docs["y"]["time_column"] == "year"
    assert docs["d"]["time_gaps"] == docs["y"]["time_gaps"]
