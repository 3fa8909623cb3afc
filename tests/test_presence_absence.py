"""Presence-absence surveys: a 0/1 column read with --zero-means, absences through design and evaluate.

The survey is invented here (seeded): sites on a lon/lat patch, a 0/1 column, a
site covariate whose optimum the species tracks.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix, roc_auc_score
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler
from typer.testing import CliRunner

from splitter.cli import app
from splitter.evaluate import fit_baseline, predict_suitability

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _survey(path, n=400, seed=3):
    rng = np.random.default_rng(seed)
    lon = 10 + rng.random(n) * 4
    lat = 45 + rng.random(n) * 3
    temp = 8 + 2.5 * (lon - 10) + rng.normal(0, 1, n)
    p = np.exp(-((temp - 13) ** 2) / 6)
    found = rng.random(n) < p
    df = pd.DataFrame({"site": [f"s{i:03d}" for i in range(n)], "lon": np.round(lon, 5), "lat": np.round(lat, 5),
                       "found": np.where(found, "1", "0"), "temp": np.round(temp, 3)})
    df.to_csv(path, index=False)
    return df


@pytest.fixture(scope="module")
def survey_folds(tmp_path_factory):
    d = tmp_path_factory.mktemp("pa")
    df = _survey(d / "survey.csv")
    res = run("design", d / "survey.csv", "--kind-column", "found", "--zero-means", "absence", "--id-column", "site",
              "--method", "blocks", "--folds", 4, "--block-size", 60, "--seed", 2, "--out", d / "folds.csv")
    assert res.exit_code == 0, res.output
    return d, df, res.stdout


def test_zero_one_column_without_zero_means_is_one_line_naming_both_readings(tmp_path):
    _survey(tmp_path / "survey.csv", n=50)
    res = run("design", tmp_path / "survey.csv", "--kind-column", "found", "--method", "random", "--folds", 2,
              "--out", tmp_path / "f.csv")
    assert res.exit_code == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "--zero-means" in lines[0] and "'absence'" in lines[0] and "'background'" in lines[0]
    assert not (tmp_path / "f.csv").exists()


def test_absences_are_balanced_and_reported_as_absences(survey_folds):
    d, df, stdout = survey_folds
    folds = pd.read_csv(d / "folds.csv", dtype=str, keep_default_na=False)
    side = json.loads((d / "folds.design.json").read_text())
    # reference: analytic — 1 is presence, 0 the absence the user said it was
    assert (folds["kind"].to_numpy() == np.where(df["found"] == "1", "presence", "absence")).all()
    assert side["records"]["absence"] == int((df["found"] == "0").sum()) and side["records"]["background"] == 0
    assert side["parameters"]["zero_means"] == "absence" and side["read_back"]["zero_means"] == "absence"
    # an independent count of absences per fold and its (max - min) / mean
    per_fold = folds[folds["kind"] == "absence"].groupby("fold").size().reindex(["1", "2", "3", "4"], fill_value=0)
    expected = round(float((per_fold.max() - per_fold.min()) / per_fold.mean()), 4)
    assert side["parameters"]["absence_imbalance"] == pytest.approx(expected)
    assert "background_imbalance" not in side["parameters"]
    assert [f["evaluation_absence"] for f in side["folds"]] == per_fold.tolist()
    assert "eval A" in stdout and "A absences" in stdout and "background" not in stdout and " B " not in stdout
    assert f"absences {expected:.3f}" in stdout


def _pred_table(d, df, folds, noise=0.5, seed=0):
    """A user's model: the niche curve plus noise, one prediction per record and fold."""
    rng = np.random.default_rng(seed)
    suit = np.exp(-((df["temp"].to_numpy() - 13) ** 2) / 6)
    rows = []
    for f in sorted(set(folds["fold"]) - {""}):
        s = suit + noise * rng.random(len(df))
        rows.append(pd.DataFrame({"record_id": df["site"], "fold": f, "prediction": np.round(s, 6)}))
    out = pd.concat(rows)
    out.to_csv(d / "preds.csv", index=False)
    return out


def test_evaluate_without_raster_sets_presences_against_absences(survey_folds, tmp_path):
    d, df, _ = survey_folds
    folds = pd.read_csv(d / "folds.csv", dtype=str, keep_default_na=False)
    preds = _pred_table(tmp_path, df, folds)
    res = run("evaluate", d / "folds.csv", "--prediction-table", tmp_path / "preds.csv", "--replicates", 99,
              "--threshold", "quantile:0.1", "--seed", 1, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    for _, r in ev[ev["fold"] != "all"].iterrows():
        f = r["fold"]
        p = preds[preds["fold"] == f].set_index("record_id")["prediction"]
        ev_rows = folds[folds["fold"] == f]
        pres = p.reindex(ev_rows.loc[ev_rows["kind"] == "presence", "record_id"]).to_numpy()
        absn = p.reindex(ev_rows.loc[ev_rows["kind"] == "absence", "record_id"]).to_numpy()
        y = np.r_[np.ones(pres.size), np.zeros(absn.size)]
        # reference: sklearn.metrics.roc_auc_score on evaluation presences vs evaluation absences
        assert r["auc"] == pytest.approx(roc_auc_score(y, np.r_[pres, absn]), abs=1e-9)
        # the binomial test's p: the share of absences predicted present (analytic)
        assert r["area_predicted"] == pytest.approx(np.mean(absn >= r["threshold"]))
        assert r["other_kind"] == "absence" and r["n_other"] == absn.size
        # reference: sklearn.metrics.confusion_matrix — true specificity and commission
        tn, fp, fn, tp = confusion_matrix(y, np.r_[pres, absn] >= r["threshold"]).ravel()
        assert r["specificity"] == pytest.approx(tn / (tn + fp)) and r["commission_rate"] == pytest.approx(fp / (tn + fp))
        assert r["specificity_name"] == "specificity" and r["commission_name"] == "commission rate"
    assert "presences compared with evaluation absences (true specificity)" in res.stdout


def test_baseline_with_absences_is_a_presence_absence_logistic_model():
    rng = np.random.default_rng(5)
    Xp, Xa = rng.normal(1, 0.7, (60, 2)), rng.normal(0, 1, (300, 2))
    model = fit_baseline(Xp, Xa, seed=0, other_kind="absence")
    # reference: the same terms fitted with scikit-learn directly, no class weights (absences are data)
    ref = Pipeline([("s", StandardScaler()), ("t", PolynomialFeatures(2, include_bias=False)),
                    ("l", LogisticRegression(C=1.0, max_iter=2000))]).fit(np.vstack([Xp, Xa]), np.r_[np.ones(60), np.zeros(300)])
    grid = rng.normal(0, 1.5, (50, 2))
    assert np.allclose(predict_suitability(model, grid), ref.predict_proba(grid)[:, 1], atol=1e-6)
    balanced = fit_baseline(Xp, Xa, seed=0)  # background reading: balanced weights, a different model
    assert not np.allclose(predict_suitability(balanced, grid), ref.predict_proba(grid)[:, 1], atol=1e-3)


def test_audit_uses_site_covariates_and_audits_absences_too(survey_folds, tmp_path):
    from pyproj import Geod

    d, df, _ = survey_folds
    res = run("audit", d / "folds.csv", "--covariate-column", "temp", "--range-km", 30, "--null-splits", 19,
              "--out", tmp_path / "a")
    assert res.exit_code == 0, res.output
    folds = pd.read_csv(d / "folds.csv", dtype=str, keep_default_na=False)
    temp = folds["temp"].astype(float).to_numpy()
    lon, lat = folds["lon"].astype(float).to_numpy(), folds["lat"].astype(float).to_numpy()
    pres = pd.read_csv(tmp_path / "a" / "audit.csv", dtype={"fold": str}).set_index("fold")
    absn = pd.read_csv(tmp_path / "a" / "audit_absences.csv", dtype={"fold": str}).set_index("fold")
    geod = Geod(ellps="WGS84")
    for f in ["1", "2", "3", "4"]:
        for kind, table in (("presence", pres), ("absence", absn)):
            ev = np.flatnonzero((folds["fold"] == f) & (folds["kind"] == kind))
            cal = np.flatnonzero((folds["fold"] != f) & (folds["fold"] != "") & (folds["kind"] == kind))
            # a plain envelope check: outside the calibration records' temp range (one covariate: MESS < 0)
            outside = np.mean((temp[ev] < temp[cal].min()) | (temp[ev] > temp[cal].max()))
            assert table.loc[f, "share_outside_envelope"] == pytest.approx(outside)
            # reference: pyproj.Geod, brute-force nearest calibration record of the same kind
            nn = [geod.inv(np.full(cal.size, lon[i]), np.full(cal.size, lat[i]), lon[cal], lat[cal])[2].min() / 1000
                  for i in ev]
            assert table.loc[f, "nn_median_km"] == pytest.approx(np.median(nn), rel=1e-6)
    assert "per fold, absences to absences" in res.stdout


def test_baseline_from_site_covariate_columns_is_fitted_on_calibration_presences_and_absences(survey_folds, tmp_path):
    d, df, _ = survey_folds
    res = run("evaluate", d / "folds.csv", "--model", "baseline", "--covariate-column", "temp", "--replicates", 99,
              "--seed", 1, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    preds = pd.read_csv(tmp_path / "ev" / "predictions" / "predictions.csv", dtype={"fold": str, "record_id": str})
    folds = pd.read_csv(d / "folds.csv", dtype=str, keep_default_na=False)
    temp = folds["temp"].astype(float).to_numpy()[:, None]
    for f in ["1", "2", "3", "4"]:
        cal = (folds["fold"] != f) & (folds["fold"] != "")
        y = (folds.loc[cal, "kind"] == "presence").to_numpy(int)
        # reference: scikit-learn, the documented terms, presences against absences, no class weights
        ref = Pipeline([("s", StandardScaler()), ("t", PolynomialFeatures(2, include_bias=False)),
                        ("l", LogisticRegression(C=1.0, max_iter=2000))]).fit(temp[cal.to_numpy()], y)
        got = preds[preds["fold"] == f].set_index("record_id")["prediction"]
        want = pd.Series(ref.predict_proba(temp)[:, 1], index=folds["record_id"]).reindex(got.index)
        assert np.allclose(got.to_numpy(), want.to_numpy(), atol=1e-6)
        assert set(got.index) == set(folds["record_id"])  # every record of the fold is scored
    assert "presence-absence model" in res.stdout


def test_zero_means_background_gives_pseudo_measures(tmp_path):
    df = _survey(tmp_path / "survey.csv")
    res = run("design", tmp_path / "survey.csv", "--kind-column", "found", "--zero-means", "background",
              "--id-column", "site", "--method", "blocks", "--folds", 4, "--block-size", 60, "--seed", 2,
              "--out", tmp_path / "folds.csv")
    assert res.exit_code == 0, res.output
    folds = pd.read_csv(tmp_path / "folds.csv", dtype=str, keep_default_na=False)
    assert set(folds["kind"]) == {"presence", "background"} and "eval B" in res.stdout and "B background" in res.stdout
    _pred_table(tmp_path, df, folds)
    res = run("evaluate", tmp_path / "folds.csv", "--prediction-table", tmp_path / "preds.csv", "--replicates", 99,
              "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    rows = ev[ev["fold"] != "all"]
    assert (rows["other_kind"] == "background").all() and (rows["specificity_name"] == "pseudo-specificity").all()
    assert (rows["commission_name"] == "pseudo-commission rate").all()


def test_with_absences_and_background_in_a_fold_absences_are_what_presences_meet(tmp_path):
    df = _survey(tmp_path / "survey.csv", n=300, seed=8)
    rng = np.random.default_rng(8)
    kind = np.where(df["found"] == "1", "presence", np.where(rng.random(len(df)) < 0.5, "absence", "background"))
    df.assign(kind=kind).drop(columns="found").to_csv(tmp_path / "mixed.csv", index=False)
    res = run("design", tmp_path / "mixed.csv", "--id-column", "site", "--method", "random", "--folds", 3,
              "--seed", 1, "--out", tmp_path / "folds.csv")
    assert res.exit_code == 0, res.output
    folds = pd.read_csv(tmp_path / "folds.csv", dtype=str, keep_default_na=False)
    preds = _pred_table(tmp_path, df, folds)
    res = run("evaluate", tmp_path / "folds.csv", "--prediction-table", tmp_path / "preds.csv", "--replicates", 99,
              "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    for _, r in ev[ev["fold"] != "all"].iterrows():
        on = folds[(folds["fold"] == r["fold"]) & (folds["kind"] != "background")]
        p = preds[preds["fold"] == r["fold"]].set_index("record_id")["prediction"].reindex(on["record_id"])
        # reference: sklearn.metrics.roc_auc_score on presences vs absences only (background left aside)
        assert r["auc"] == pytest.approx(roc_auc_score(on["kind"] == "presence", p), abs=1e-9)
        assert r["other_kind"] == "absence" and r["n_other"] == int((on["kind"] == "absence").sum())
