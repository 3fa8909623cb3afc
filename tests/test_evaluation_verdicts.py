"""The verdicts of evaluate, end to end from the command line: Holm across folds, the
``all`` row from a stated combined test, means over interpretable folds only, and the
jackknife test for one-presence folds. All data invented here, seeded."""

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.multitest import multipletests
from typer.testing import CliRunner

from splitter.cli import app

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _table(tmp_path, n_folds, presences_per_fold, background_per_fold, seed):
    rng = np.random.default_rng(seed)
    rows = []
    for f in range(1, n_folds + 1):
        for kind, n in (("presence", presences_per_fold), ("background", background_per_fold)):
            for _ in range(n):
                rows.append({"record_id": f"r{len(rows) + 1}", "longitude": 10 + rng.random() * 5,
                             "latitude": 45 + rng.random() * 3, "kind": kind, "fold": f})
    df = pd.DataFrame(rows)
    df.to_csv(tmp_path / "mine.csv", index=False)
    return df


def _predictions(df, skilled_folds, seed):
    # Each fold's model scores every record. In skilled folds presences score higher
    # (uniform on [0.4, 1] against [0, 1]); elsewhere all scores are uniform: no skill.
    rng = np.random.default_rng(seed)
    out = []
    for f in sorted(df.fold.unique()):
        pres = (df.kind == "presence").to_numpy()
        score = rng.random(len(df))
        if f in skilled_folds:
            score = np.where(pres, 0.4 + 0.6 * rng.random(len(df)), score)
        out.append(pd.DataFrame({"record_id": df.record_id, "fold": f, "prediction": score}))
    return pd.concat(out)


def test_holm_decides_and_the_all_row_averages_interpretable_folds_only(tmp_path):
    df = _table(tmp_path, 4, 30, 150, seed=1)
    _predictions(df, skilled_folds={1, 2}, seed=2).to_csv(tmp_path / "preds.csv", index=False)
    res = run("evaluate", tmp_path / "mine.csv", "--prediction-table", tmp_path / "preds.csv",
              "--threshold", "lowest", "--replicates", 199, "--seed", 3, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    folds, all_row = ev[ev.fold != "all"], ev[ev.fold == "all"].iloc[0]
    # p_fold is the larger of the two p-values (both tests must reject)
    np.testing.assert_allclose(folds.p_fold, np.maximum(folds.binomial_p, folds.partial_roc_p))
    # reference: statsmodels multipletests(method="holm") on p_fold
    np.testing.assert_allclose(folds.p_adjusted, multipletests(folds.p_fold, method="holm")[1], rtol=1e-12)
    assert (folds.significant == (folds.p_adjusted < 0.05)).all()
    assert folds.significant.tolist() == [True, True, False, False]  # the two skilled folds only
    # The all row: smallest adjusted p, means over the interpretable folds only, and says so.
    assert all_row.combined_test == "holm" and all_row.p_adjusted == pytest.approx(folds.p_adjusted.min())
    assert all_row.n_interpretable == 2
    good = folds[folds.significant]
    for m in ("auc", "auc_ratio", "tss"):
        assert all_row[m] == pytest.approx(good[m].mean(), rel=1e-12), m  # reference: pandas mean of the two folds
    assert "interpretable" in all_row.warnings
    # The terminal says the same as the CSV.
    assert "do not interpret" in res.output and "means over 2 interpretable fold(s)" in res.output.replace("\n", " ")


def test_adjust_none_keeps_the_unadjusted_rule(tmp_path):
    df = _table(tmp_path, 4, 30, 150, seed=1)
    _predictions(df, skilled_folds={1, 2}, seed=2).to_csv(tmp_path / "preds.csv", index=False)
    res = run("evaluate", tmp_path / "mine.csv", "--prediction-table", tmp_path / "preds.csv", "--adjust", "none",
              "--threshold", "lowest", "--replicates", 199, "--seed", 3, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    folds = ev[ev.fold != "all"]
    assert (folds.p_adjusted == folds.p_fold).all() and (folds.significant == (folds.p_fold < 0.05)).all()
    bad = run("evaluate", tmp_path / "mine.csv", "--prediction-table", tmp_path / "preds.csv", "--adjust", "bonferroni",
              "--out", tmp_path / "ev2")
    assert bad.exit_code == 2 and "--adjust" in bad.output and "Traceback" not in bad.output


def _poisson_binomial_tail(shares, s):
    # Independent implementation for the check: dynamic programme over folds.
    dist = np.zeros(len(shares) + 1)
    dist[0] = 1.0
    for q in shares:
        dist[1:] = dist[1:] * (1 - q) + dist[:-1] * q
        dist[0] *= 1 - q
    return dist[s:].sum()


def test_jackknife_decides_when_every_fold_holds_one_presence(tmp_path):
    # 12 presences, each its own fold, with 30 background records per fold: the design
    # of a species known from few records (jackknife, Journal of Biogeography 2007).
    df = _table(tmp_path, 12, 1, 30, seed=4)
    _predictions(df, skilled_folds=set(range(1, 13)), seed=5).to_csv(tmp_path / "preds.csv", index=False)
    res = run("evaluate", tmp_path / "mine.csv", "--prediction-table", tmp_path / "preds.csv",
              "--threshold", "quantile:0.1", "--replicates", 19, "--seed", 6, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    folds, all_row = ev[ev.fold != "all"], ev[ev.fold == "all"].iloc[0]
    assert all_row.combined_test == "jackknife"
    assert all_row.jackknife_n == 12 and all_row.jackknife_successes == folds.successes.sum()
    want = _poisson_binomial_tail(folds.area_predicted.to_numpy(), int(folds.successes.sum()))
    assert all_row.jackknife_p == pytest.approx(want, rel=1e-10)  # reference: the DP above
    assert all_row.p_adjusted == all_row.jackknife_p
    assert bool(all_row.significant) == (want < 0.05)
    assert "jackknife" in res.output
