"""Fold tables remember how to read them: after `design` names the coordinate columns,
CRS, id and kind columns once, `audit`, `evaluate` and `appendix` read the fold table
without any record option.

Outside references: pyproj transforms the projected coordinates to lon/lat for the
appendix's record table; sklearn.metrics.roc_auc_score gives fold 1's AUC from the
prediction table. Records are invented, seeded: a projected (EPSG:3035) site table
whose columns have names the reader does not guess.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pyproj
import pytest
from sklearn.metrics import roc_auc_score
from typer.testing import CliRunner

from splitter.cli import app

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _sites(path, n=300, seed=3):
    rng = np.random.default_rng(seed)
    east = 4_000_000 + rng.random(n) * 300_000
    north = 2_500_000 + rng.random(n) * 200_000
    status = np.where(rng.random(n) < 0.5, "presence", "background")
    pd.DataFrame({"site": [f"s{i}" for i in range(n)], "east": east.round(1), "north": north.round(1),
                  "status": status, "temp": rng.normal(10, 2, n).round(2)}).to_csv(path, index=False)
    return path


def test_audit_evaluate_and_appendix_need_no_record_option_after_design(tmp_path):
    src = _sites(tmp_path / "sites.csv")
    run_dir = tmp_path / "run"
    res = run("design", src, "--x", "east", "--y", "north", "--crs", "EPSG:3035", "--id-column", "site",
              "--kind-column", "status", "--block-size", 40, "--seed", 1, "--out", run_dir / "folds.csv")
    assert res.exit_code == 0, res.output
    side = json.loads((run_dir / "folds.design.json").read_text())
    back = side["read_back"]
    assert (back["x"], back["y"], back["crs"]) == ("east", "north", "EPSG:3035")

    # Without the sidecar's record, the same table cannot be read (the names are not guessed):
    # so the runs below show the sidecar at work.
    bare = tmp_path / "bare.csv"
    bare.write_bytes((run_dir / "folds.csv").read_bytes())
    res = run("audit", bare, "--range-km", 30, "--out", tmp_path / "a0")
    assert res.exit_code == 2 and "--x" in res.output

    res = run("audit", run_dir / "folds.csv", "--range-km", 30, "--out", run_dir / "audit")
    assert res.exit_code == 0, res.output

    table = pd.read_csv(run_dir / "folds.csv", dtype={"fold": "Int64"})
    rng = np.random.default_rng(0)
    score = rng.uniform(0, 1, len(table)) + 0.4 * (table.kind == "presence")
    preds = pd.concat([pd.DataFrame({"record_id": table.record_id, "fold": f, "prediction": score})
                       for f in range(1, 6)])
    preds.to_csv(tmp_path / "predictions.csv", index=False)
    res = run("evaluate", run_dir / "folds.csv", "--prediction-table", tmp_path / "predictions.csv",
              "--replicates", 50, "--out", run_dir / "evaluation")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(run_dir / "evaluation" / "evaluation.csv")
    f1 = table.fold == 1
    y = (table.kind[f1] == "presence").to_numpy(int)
    assert ev.auc[0] == pytest.approx(roc_auc_score(y, score[f1]), abs=1e-12)

    res = run("appendix", run_dir, "--out", tmp_path / "appendix")
    assert res.exit_code == 0, res.output
    records = pd.read_csv(next((tmp_path / "appendix" / "tables").glob("*_records.csv")))
    lon, lat = pyproj.Transformer.from_crs(3035, 4326, always_xy=True).transform(table.east, table.north)
    assert np.allclose(records.longitude, lon, atol=1e-6) and np.allclose(records.latitude, lat, atol=1e-6)


def test_an_option_given_still_wins_over_the_sidecar(tmp_path):
    src = _sites(tmp_path / "sites.csv")
    out = tmp_path / "run" / "folds.csv"
    assert run("design", src, "--x", "east", "--y", "north", "--crs", "EPSG:3035", "--kind-column", "status",
               "--block-size", 40, "--out", out).exit_code == 0
    assert run("audit", out, "--range-km", 30, "--out", tmp_path / "a").exit_code == 0
    res = run("audit", out, "--x", "temp", "--range-km", 30, "--out", tmp_path / "b")
    assert res.exit_code == 0, res.output

    # Outside reference: scipy's cKDTree on the planar coordinates (metres), fold 1's evaluation
    # presences against its calibration presences. The audit measures geodesic distances; the
    # Lambert equal-area scale error within 700 km of its centre is under 0.3 %, hence rel=0.01.
    from scipy.spatial import cKDTree

    table = pd.read_csv(out, dtype={"fold": "Int64"})
    pres = table[table.kind == "presence"]  # the audit measures presence to presence
    ev, cal = pres[pres.fold == 1], pres[pres.fold.notna() & (pres.fold != 1)]

    def nn_median_km(xcol):
        d, _ = cKDTree(cal[[xcol, "north"]].to_numpy()).query(ev[[xcol, "north"]].to_numpy())
        return np.median(d) / 1000

    a = pd.read_csv(tmp_path / "a" / "audit.csv")
    assert a.nn_median_km[0] == pytest.approx(nn_median_km("east"), rel=0.01)
    # With --x temp (values near 10 m), every record sits on one north-south line: distances shrink.
    b = pd.read_csv(tmp_path / "b" / "audit.csv")
    assert b.nn_median_km[0] < 0.5 * a.nn_median_km[0]


def test_a_reader_warning_is_printed_once_and_kept_in_the_sidecar(tmp_path):
    src = tmp_path / "two.csv"
    rows = ["record_id,longitude,latitude,kind,species"]
    rng = np.random.default_rng(4)
    for i in range(120):
        rows.append(f"{i + 1},{10 + 3 * rng.random():.4f},{45 + 2 * rng.random():.4f},"
                    f"{'presence' if i < 60 else 'background'},{'A a' if i % 2 else 'B b'}")
    src.write_text("\n".join(rows) + "\n", encoding="utf-8")
    res = CliRunner().invoke(app, ["design", str(src), "--method", "random", "--folds", "3", "--out", str(tmp_path / "f.csv")])
    assert res.exit_code == 0, res.output
    assert res.output.count("names 2 species among the presences") == 1
    notes = json.loads((tmp_path / "f.design.json").read_text())["notes"]
    assert any("names 2 species" in n for n in notes)


def test_a_users_fold_table_with_a_capitalised_header_needs_no_renaming(tmp_path):
    # Someone else's split, exported from a spreadsheet: CV_Fold, PA (0/1), Temp. Every option
    # names the columns in lower case; the audit is the one the exact names give.
    rng = np.random.default_rng(6)
    n = 300
    table = pd.DataFrame({"ID": np.arange(1, n + 1), "Lon": (5 + 4 * rng.random(n)).round(4),
                          "Lat": (44 + 3 * rng.random(n)).round(4), "PA": (rng.random(n) < 0.4).astype(int),
                          "CV_Fold": rng.integers(1, 4, n), "Temp": rng.normal(12, 3, n).round(2)})
    table.to_csv(tmp_path / "theirs.csv", index=False)
    runner = CliRunner()
    for names, out in ((("cv_fold", "pa", "id", "temp"), "lower"), (("CV_Fold", "PA", "ID", "Temp"), "exact")):
        fold, kind, ident, cov = names
        res = runner.invoke(app, ["audit", str(tmp_path / "theirs.csv"), "--fold-column", fold, "--kind-column", kind,
                                  "--zero-means", "absence", "--id-column", ident, "--covariate-column", cov,
                                  "--range-km", "20", "--null-splits", "19", "--out", str(tmp_path / out)])
        assert res.exit_code == 0, res.output
    pd.testing.assert_frame_equal(pd.read_csv(tmp_path / "lower" / "audit.csv"), pd.read_csv(tmp_path / "exact" / "audit.csv"))
