"""The same flexible model under two splits: what a random split claims that spatial blocks do not."""

import numpy as np
import pytest
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.metrics import roc_auc_score
from threadpoolctl import threadpool_limits

from splitter.errors import InputError
from splitter.evaluate import split_optimism
from splitter.geo import Points
from splitter.partition.assignment import FoldAssignment

SIDE_KM = 200.0
BLOCK_KM = 50.0   # 4 x 4 blocks
PATCH_KM = 10.0   # patches much smaller than the blocks, and nested in them
FOLDS = 4


def _places(n, seed):
    rng = np.random.default_rng(seed)
    return rng, rng.uniform(0, SIDE_KM, size=(n, 2))


def _splits(xy, kind, seed):
    """Hand-made spatial blocks (each block wholly in one fold) and a random split of the same rows."""
    rng = np.random.default_rng(seed)
    ids = np.array([f"r{i}" for i in range(len(xy))])
    per_side = int(SIDE_KM // BLOCK_KM)
    block = (xy[:, 0] // BLOCK_KM).astype(int) + per_side * (xy[:, 1] // BLOCK_KM).astype(int)
    block_fold = rng.permutation(np.arange(per_side * per_side) % FOLDS) + 1   # 4 blocks per fold
    blocks = FoldAssignment.from_folds(ids, kind, block_fold[block], method="blocks")
    random = FoldAssignment.from_folds(ids, kind, rng.permutation(np.arange(len(xy)) % FOLDS) + 1, method="random")
    return blocks, random


def _place_only(n=3000, seed=3):
    """Invented: presence is a pure function of location in 10 km patches; the covariate is noise."""
    rng, xy = _places(n, seed)
    cells = int(SIDE_KM // PATCH_KM)
    patch = rng.random((cells, cells)) < 0.4
    present = patch[(xy[:, 0] // PATCH_KM).astype(int), (xy[:, 1] // PATCH_KM).astype(int)]
    kind = np.where(present, "presence", "absence")
    return xy, kind, rng.normal(size=(n, 1))


def _environment_only(n=3000, seed=4):
    """Invented: presence depends only on a covariate drawn independently at every record (no spatial structure)."""
    rng, xy = _places(n, seed)
    z = rng.normal(size=n)
    present = rng.random(n) < 1 / (1 + np.exp(-2.0 * z))
    return xy, np.where(present, "presence", "absence"), z[:, None]


def _hanley_mcneil_se(auc, n1, n2):
    # "The meaning and use of the area under a receiver operating characteristic (ROC) curve",
    # Radiology 1982: the standard error of an AUC from n1 positives and n2 negatives.
    q1, q2 = auc / (2 - auc), 2 * auc ** 2 / (1 + auc)
    return np.sqrt((auc * (1 - auc) + (n1 - 1) * (q1 - auc ** 2) + (n2 - 1) * (q2 - auc ** 2)) / (n1 * n2))


def test_a_random_split_claims_skill_a_model_of_place_does_not_have():
    xy, kind, cov = _place_only()
    blocks, random = _splits(xy, kind, seed=5)
    r = split_optimism(blocks, random, cov, xy, seed=0)
    # Under spatial blocks every held-out patch is independent of every calibration patch (patches
    # nest in blocks), so the model's expected AUC there is 0.5 (analytic: scores independent of labels);
    # under the random split ~3 of each patch's ~4 other records calibrate the model.
    assert r.means["blocks"]["auc"] < 0.6  # analytic 0.5; 0.1 covers the spread of 4 folds of ~750 records
    assert r.means["random"]["auc"] > 0.8  # common practice: a tree model learns axis-aligned patches it has seen
    assert r.differences["auc"] > 0.25  # the two bounds above
    assert r.differences["auc_ratio"] > 0  # the partial ratio moves with the AUC here
    assert r.differences["auc"] == pytest.approx(r.means["random"]["auc"] - r.means["blocks"]["auc"], abs=1e-15)


def test_no_spatial_signal_gives_no_difference_beyond_sampling_error():
    xy, kind, cov = _environment_only()
    blocks, random = _splits(xy, kind, seed=6)
    r = split_optimism(blocks, random, cov, xy, seed=0)
    df = r.to_frame()
    folds = df[df["fold"] != "mean"]
    # Tolerance: each fold's AUC has the Hanley-McNeil standard error (Radiology 1982) for its own
    # counts; a split's mean over k folds has SE sqrt(sum se_i^2) / k; the difference of the two
    # split means, taken as independent (conservative: they share records), has SE
    # sqrt(se_blocks^2 + se_random^2); we allow 4 of those SE (two-sided chance about 6e-5).
    se = {}
    for name in ("blocks", "random"):
        f = folds[folds["split"] == name]
        s = _hanley_mcneil_se(f["auc"].to_numpy(float), f["n_presence"].to_numpy(float), f["n_other"].to_numpy(float))
        se[name] = np.sqrt(np.sum(s ** 2)) / len(f)
    tolerance = 4 * np.hypot(se["blocks"], se["random"])
    assert 0.02 < tolerance < 0.06  # the arithmetic above with ~750 records per fold and AUC ~0.8
    assert abs(r.differences["auc"]) < tolerance
    # Both splits see the covariate's real signal (analytic AUC of the logistic link with slope 2 ~ 0.8).
    assert r.means["blocks"]["auc"] > 0.7 and r.means["random"]["auc"] > 0.7


def test_auc_and_omission_rate_match_an_independent_fit():
    xy, kind, cov = _place_only(n=1200, seed=8)
    blocks, random = _splits(xy, kind, seed=9)
    r = split_optimism(blocks, random, cov, xy, seed=2, max_iter=30)
    X = np.column_stack([cov, xy])
    y = (kind == "presence").astype(float)
    for assignment in (blocks, random):
        for i in assignment.folds:
            cal, ev = assignment.fold != i, assignment.fold == i
            model = HistGradientBoostingClassifier(max_iter=30, early_stopping=False, random_state=2)
            with threadpool_limits(limits=1, user_api="openmp"):  # speed only: many threads wait on a busy machine
                model.fit(X[cal], y[cal])
            s = model.predict_proba(X[ev])[:, 1]
            cal_p = model.predict_proba(X[cal & (y == 1)])[:, 1]
            threshold = np.quantile(cal_p, 0.1, method="lower")  # common practice: 10 % calibration-presence quantile
            got = next(f for f in r.folds if f.split == assignment.method and f.fold == str(i))
            assert got.auc == pytest.approx(roc_auc_score(y[ev], s), abs=1e-12)  # reference: sklearn roc_auc_score
            assert got.omission_rate == np.mean(s[y[ev] == 1] < threshold)  # definition: presences below the threshold
            assert got.n_presence == int(y[ev].sum()) and got.n_other == int((1 - y[ev]).sum())


def test_full_curve_ratio_is_twice_the_auc():
    # Analytic: with omission tolerance E = 1 the partial ROC ratio is the full AUC over the null's 0.5.
    xy, kind, cov = _environment_only(n=800, seed=10)
    blocks, random = _splits(xy, kind, seed=11)
    r = split_optimism(blocks, random, cov, xy, omission=1.0, max_iter=20)
    for f in r.folds:
        assert f.auc_ratio == pytest.approx(2 * f.auc, abs=1e-9)  # float summation order differs


def test_frame_rows_and_difference_row():
    xy, kind, cov = _environment_only(n=800, seed=12)
    blocks, random = _splits(xy, kind, seed=13)
    df = split_optimism(blocks, random, cov, xy, max_iter=20).to_frame()
    assert list(df["split"]) == ["blocks"] * 4 + ["random"] * 4 + ["blocks", "random", "random - blocks"]
    per_fold = df[df["fold"] != "mean"].groupby("split")[["auc", "auc_ratio", "omission_rate"]].mean()
    last = df.iloc[-1]
    for m in ("auc", "auc_ratio", "omission_rate"):
        # reference: pandas groupby means of the per-fold rows
        assert last[m] == pytest.approx(per_fold.loc["random", m] - per_fold.loc["blocks", m], abs=1e-12)


def test_same_inputs_same_result_and_geographic_points_are_projected():
    xy, kind, cov = _environment_only(n=600, seed=14)
    blocks, random = _splits(xy, kind, seed=15)
    # The same places as longitude/latitude near the equator: projected to km on an equal-area plane.
    pts = Points.lonlat(10 + xy[:, 0] / 111.32, xy[:, 1] / 110.57)
    a = split_optimism(blocks, random, cov, pts, max_iter=20).to_frame()
    b = split_optimism(blocks, random, cov, pts, max_iter=20).to_frame()
    assert a.equals(b)  # deterministic: same inputs, same numbers


def test_bad_inputs_name_the_parameter():
    xy, kind, cov = _environment_only(n=200, seed=16)
    blocks, random = _splits(xy, kind, seed=17)
    other = FoldAssignment.from_folds(random.record_id[::-1], random.kind[::-1], random.fold, method="random")
    with pytest.raises(InputError, match="same records"):
        split_optimism(blocks, other, cov, xy)
    with pytest.raises(InputError, match="names"):
        split_optimism(blocks, random, cov, xy, names=("a", "a"))
    with pytest.raises(InputError, match="covariates"):
        split_optimism(blocks, random, cov[:10], xy)
    with pytest.raises(InputError, match="points"):
        split_optimism(blocks, random, cov, xy[:10])
