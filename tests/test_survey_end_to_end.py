"""A presence-absence survey, end to end, as a user runs it: no rasters, a local km grid.

Invented survey (seeded): 360 sites on a 90 km x 60 km local grid, a 0/1 column
(1 = found, 0 = surveyed and not found), two covariates measured at the sites.
design (blocks + buffer) -> audit (site covariates) -> evaluate (the user's
prediction table) -> appendix.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
from scipy.spatial.distance import cdist
from sklearn.metrics import roc_auc_score
from typer.testing import CliRunner

from splitter.cli import app

runner = CliRunner()


def run(*args):
    res = runner.invoke(app, [str(a) for a in args])
    assert res.exit_code == 0, res.output
    return res


def test_presence_absence_survey_on_a_local_grid(tmp_path):
    rng = np.random.default_rng(11)
    n = 360
    east, north = rng.random(n) * 90, rng.random(n) * 60
    temp = 6 + 0.15 * east + rng.normal(0, 0.8, n)
    wet = np.clip(0.3 + 0.008 * north + rng.normal(0, 0.1, n), 0, 1)
    p = np.exp(-((temp - 12) ** 2) / 5 - ((wet - 0.6) ** 2) / 0.1)
    found = (rng.random(n) < p).astype(int)
    survey = pd.DataFrame({"site": [f"S{i:03d}" for i in range(n)], "east_km": np.round(east, 3),
                           "north_km": np.round(north, 3), "found": found, "temp_c": np.round(temp, 2),
                           "wetness": np.round(wet, 3)})
    survey.to_csv(tmp_path / "survey.csv", index=False)
    run_dir = tmp_path / "run"

    run("design", tmp_path / "survey.csv", "--x", "east_km", "--y", "north_km", "--crs", "planar:km",
        "--id-column", "site", "--kind-column", "found", "--zero-means", "absence", "--method", "blocks",
        "--folds", 4, "--block-size", 15, "--buffer", 5, "--seed", 3, "--out", run_dir / "folds.csv")
    folds = pd.read_csv(run_dir / "folds.csv", dtype=str, keep_default_na=False)
    assert len(folds) == n and (folds["site"] == survey["site"]).all()  # every row, in order
    assert set(folds["kind"]) == {"presence", "absence"}  # 0 read as absence, never as background
    side = json.loads((run_dir / "folds.design.json").read_text())
    assert side["records"]["absence"] == int((found == 0).sum())
    # buffer guarantee checked with scipy.spatial.distance.cdist (Euclidean, km)
    gaps = pd.read_csv(run_dir / "folds.gaps.csv", dtype=str)
    xy = survey[["east_km", "north_km"]].to_numpy()
    for f in "1234":
        ev = np.flatnonzero(folds["fold"] == f)
        cal = np.flatnonzero((folds["fold"] != f) & ~folds["record_id"].isin(gaps.loc[gaps["fold"] == f, "record_id"]))
        assert cdist(xy[cal], xy[ev]).min() >= 5

    audit = run("audit", run_dir / "folds.csv", "--covariate-column", "temp_c,wetness", "--range-km", 8,
                "--null-splits", 19, "--seed", 1, "--out", run_dir / "audit")
    a = pd.read_csv(run_dir / "audit" / "audit.csv", dtype={"fold": str})
    assert np.isfinite(a.loc[a["fold"] != "all", "schoener_d"]).all()  # overlap from the site measurements
    assert (run_dir / "audit" / "audit_absences.csv").exists() and "absences" in audit.stdout

    # the user's own model: a niche curve on the site covariates with noise, one prediction per record and fold
    rows = []
    for f in "1234":
        s = np.exp(-((temp - 12) ** 2) / 5 - ((wet - 0.6) ** 2) / 0.1) + rng.normal(0, 0.15, n)
        rows.append(pd.DataFrame({"record_id": survey["site"], "fold": f, "prediction": np.round(s, 6)}))
    preds = pd.concat(rows)
    preds.to_csv(tmp_path / "my_predictions.csv", index=False)
    run("evaluate", run_dir / "folds.csv", "--prediction-table", tmp_path / "my_predictions.csv",
        "--replicates", 199, "--seed", 2, "--out", run_dir / "evaluation")
    ev = pd.read_csv(run_dir / "evaluation" / "evaluation.csv", dtype={"fold": str})
    for _, r in ev[ev["fold"] != "all"].iterrows():
        on = folds[folds["fold"] == r["fold"]]
        p = preds[preds["fold"] == r["fold"]].set_index("record_id")["prediction"].reindex(on["record_id"])
        # reference: sklearn.metrics.roc_auc_score, evaluation presences against evaluation absences
        assert abs(r["auc"] - roc_auc_score((on["kind"] == "presence").to_numpy(), p.to_numpy())) < 1e-9
        assert r["other_kind"] == "absence" and r["specificity_name"] == "specificity"

    app_res = run("appendix", run_dir, "--out", tmp_path / "appendix")
    md = (tmp_path / "appendix" / "appendix.md").read_text()
    assert "evaluation absences (sites surveyed where the species was not found)" in md
    assert "true specificity" in md and "planar grid in kilometres" in md
    assert "pseudo-specificity" not in md
    assert "absences as triangles" in md and "background as small squares" not in md
    assert "evaluation absences to calibration absences (verdict:" in md
    assert (tmp_path / "appendix" / "tables" / "run_audit_absences.csv").exists()
    assert "appendix.html" in app_res.stdout
