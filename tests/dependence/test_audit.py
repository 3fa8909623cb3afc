"""Tests for splitter.dependence.audit."""

import json

import numpy as np
import pytest
from scipy.special import comb

from splitter.dependence.audit import COLUMNS, RULES, RuleOutcome, audit_split
from splitter.errors import InputError
from splitter.geo import Points


def _clustered(seed=0, per=25):
    """Clusters of records (about 5 km across) at the centres of a 1.5-degree lattice."""
    rng = np.random.default_rng(seed)
    gi, gj = np.meshgrid(np.arange(5), np.arange(4), indexing="ij")
    clon = 0.75 + 1.5 * gi.ravel() + rng.uniform(-0.15, 0.15, gi.size)
    clat = 45.75 + 1.5 * gj.ravel() + rng.uniform(-0.15, 0.15, gi.size)
    lon = np.repeat(clon, per) + rng.normal(0, 0.03, clon.size * per)
    lat = np.repeat(clat, per) + rng.normal(0, 0.03, clon.size * per)
    cluster = np.repeat(np.arange(clon.size), per)
    env = np.column_stack(
        [20 - 0.8 * (lat - 45) + rng.normal(0, 0.3, lon.size), 600 + 40 * lon + rng.normal(0, 20, lon.size)]
    )
    return Points.lonlat(lon, lat), cluster, env


def _sets(fold, k):
    return [np.flatnonzero(fold != i) for i in range(k)], [np.flatnonzero(fold == i) for i in range(k)]


def test_random_split_of_clustered_sample_is_dependent_by_distance():
    pts, cluster, env = _clustered()
    fold = np.random.default_rng(1).integers(0, 5, len(pts))
    cal, ev = _sets(fold, 5)
    res = audit_split(pts, cal, ev, env=env, env_names=["temp", "rain"], range_km=40.0)
    frame = res.to_frame()
    # Rule (i); common practice: evaluation records should lie beyond the autocorrelation range
    # of calibration records; here every record has cluster mates within ~10 km.
    assert (frame["verdict"] == "dependent").all()
    assert all("distance" in res.fired(i) for i in range(5))
    assert frame["reasons"].str.contains("distance").all()
    assert (frame["share_within_range"] > 0.9).all()
    assert res.verdict == "dependent"


def test_block_split_of_clustered_sample_passes_distance_rule():
    pts, cluster, env = _clustered()
    # One lattice cell (= one cluster) per block; blocks to folds at random.
    block_fold = np.random.default_rng(2).permutation(20) % 5
    fold = block_fold[cluster]
    cal, ev = _sets(fold, 5)
    res = audit_split(pts, cal, ev, range_km=40.0)
    # Clusters are >= ~80 km apart, beyond the 40 km range (common practice: blocks larger
    # than the range), so no evaluation record has a calibration record within the range.
    assert np.all(res.distance.share_within_range == 0.0)
    assert res.verdicts == ("independent",) * 5
    assert res.verdict == "independent"


def test_holdout_by_survey_method_is_not_flagged_by_method_rule():
    pts, cluster, env = _clustered()
    groups = np.where(cluster % 2 == 0, "museum", "transect")
    cal = [np.flatnonzero(groups == "museum")]
    ev = [np.flatnonzero(groups == "transect")]
    res = audit_split(pts, cal, ev, groups=groups)
    # reference: hand count, no evaluation record shares a method with calibration
    assert res.shared_method_share[0] == 0.0
    # reference: hand count, a share of 0 cannot be undercut, so every re-split is at least as dependent
    assert res.shared_method_null[0].share == 1.0
    assert res.fired(0) == ()
    assert res.verdicts[0] == "independent"

    fold = np.random.default_rng(3).integers(0, 2, len(pts))
    cal, ev = _sets(fold, 2)
    res = audit_split(pts, cal, ev, groups=groups)
    # reference: hand count, both methods occur in every calibration set -> share 1
    np.testing.assert_array_equal(res.shared_method_share, [1.0, 1.0])
    # Every re-split holds both methods on both sides too (250 of each): the measure cannot tell
    # splits of these records apart, and the tie does not count against the split.
    for i in range(2):
        (outcome,) = res.outcomes[i]
        assert outcome.rule == "collection method" and outcome.degenerate and not outcome.fired
        assert outcome.null_median == 1.0 and outcome.null_share == 1.0


def test_blocks_over_methods_mixed_at_random_are_independent():
    pts, cluster, env = _clustered(seed=7)
    rng = np.random.default_rng(8)
    groups = rng.choice(["light-trap", "transect"], size=len(pts))  # mixed at random in space
    block_fold = rng.permutation(20) % 5
    fold = block_fold[cluster]
    cal, ev = _sets(fold, 5)
    res = audit_split(pts, cal, ev, groups=groups, range_km=40.0, env=env)
    # Both methods occur in every fold (reference: hand count, share 1), as they would in any
    # split of these records, so the collection-method rule stays quiet; the blocks lie beyond
    # the range (common practice: blocks larger than the range), so the distance rule does too.
    np.testing.assert_array_equal(res.shared_method_share, np.ones(5))
    assert all(o.rule != "collection method" or not o.fired for outs in res.outcomes for o in outs)
    assert res.verdicts == ("independent",) * 5
    assert all({o.rule for o in outs} == {"distance", "collection method"} for outs in res.outcomes)

    fold = rng.integers(0, 5, len(pts))
    cal, ev = _sets(fold, 5)
    res = audit_split(pts, cal, ev, groups=groups, range_km=40.0)
    # A random split of the same records: dependent, by distance (cluster mates within the range).
    assert res.verdicts == ("dependent",) * 5
    assert all(res.fired(i) == ("distance",) for i in range(5))


def test_method_rule_fires_when_a_split_shares_more_than_chance():
    # 100 observers with 2 records each; the designed split puts one record of each of 20
    # observers in evaluation and the other in calibration, so every evaluation record's observer
    # is also a calibration observer.
    n_pairs, n_eval = 100, 20
    groups = np.repeat(np.arange(n_pairs), 2).astype(str)
    pts = Points.lonlat(np.linspace(0, 1, 2 * n_pairs), np.zeros(2 * n_pairs))
    ev = np.arange(0, 2 * n_eval, 2)
    cal = np.setdiff1d(np.arange(2 * n_pairs), ev)
    res = audit_split(pts, [cal], [ev], groups=groups, null_splits=999, seed=4)
    null = res.shared_method_null[0]
    assert null.statistic == 1.0
    # reference: analytic (combinatorics), a random re-split shares as much (share 1) only when its
    # 20 evaluation records come from 20 different observers: C(100, 20) 2^20 / C(200, 20)
    p_all_shared = comb(n_pairs, n_eval, exact=True) * 2**n_eval / comb(2 * n_pairs, n_eval, exact=True)
    se = np.sqrt(p_all_shared * (1 - p_all_shared) / 999)
    assert null.share == pytest.approx(p_all_shared, abs=4 * se)  # Monte Carlo error of 999 re-splits
    assert res.fired(0) == ("collection method",)
    assert res.verdicts[0] == "dependent"


def test_unknown_groups_are_left_out_of_the_share():
    pts = Points.lonlat(np.linspace(0, 1, 10), np.zeros(10))
    groups = np.array(["a", "a", "b", None, "", np.nan, "c", "a", "c", "b"], dtype=object)
    cal, ev = [np.arange(5)], [np.arange(5, 10)]
    res = audit_split(pts, cal, ev, groups=groups)
    # reference: hand count, evaluation groups (NaN, c, a, c, b) -> known 4, shared {a, b} -> 2 of 4
    assert res.shared_method_share[0] == pytest.approx(0.5)


def _gradient(n, seed):
    rng = np.random.default_rng(seed)
    lon, lat = rng.uniform(0, 8, n), rng.uniform(44, 50, n)
    env = np.column_stack([20 - 0.8 * (lat - 44) + rng.normal(0, 0.5, n), 600 + 40 * lon + rng.normal(0, 30, n)])
    return Points.lonlat(lon, lat), env, rng


def test_environment_rule_random_vs_environmental_split():
    pts, env, rng = _gradient(4000, 4)
    fold = rng.integers(0, 2, 4000)
    cal, ev = _sets(fold, 2)
    res = audit_split(pts, cal, ev, env=env, seed=1)
    # Random halves of 2000 records: D near 1 (reference: analytic, equal distributions overlap
    # fully) and near the middle of its re-splits, so the environment rule fires (no range given).
    assert np.all(res.schoener_d > 0.9)
    for i in range(2):
        comp = res.schoener_d_null[i]
        assert 0.05 < comp.share < 0.95
        assert res.fired(i) == ("environment",)

    warm = env[:, 0] > np.quantile(env[:, 0], 0.8)
    res = audit_split(pts, [np.flatnonzero(~warm)], [np.flatnonzero(warm)], env=env)
    # The warmest fifth lies outside the calibration temperature range almost entirely
    # (reference: MESS < 0 beyond the calibration maximum, Methods in Ecology and Evolution 2010).
    assert res.share_outside_envelope[0] > 0.5
    # Its D is below every re-split's: reference: analytic, a set cut off by a covariate shares
    # less density with the rest than any random set of its size (random sets match in law).
    assert res.schoener_d[0] < res.schoener_d_null[0].null.min()
    assert res.schoener_d_null[0].share == 1.0
    assert res.verdicts[0] == "independent"
    assert res.ranges[0].to_frame()["share_outside"].iloc[0] > 0.5

    res = audit_split(pts, cal, ev, env=env, range_km=30.0)
    # With a range the distance rule decides; D and its null are still reported.
    assert all({o.rule for o in outs} == {"distance"} for outs in res.outcomes)
    assert np.isfinite(res.to_frame()["schoener_d_null_share"]).all()


def test_environmental_clusters_are_better_than_random():
    from sklearn.cluster import KMeans

    pts, env, rng = _gradient(600, 9)
    z = (env - env.mean(0)) / env.std(0)
    fold = KMeans(4, n_init=4, random_state=0).fit_predict(z)
    cal, ev = _sets(fold, 4)
    res = audit_split(pts, cal, ev, env=env)
    # Clusters in covariate space (scikit-learn KMeans): every fold overlaps the others less than
    # all 199 random re-splits of its records (reference: analytic, a cluster cut from the
    # environment is the least overlapping set of its size up to sampling noise).
    for comp in res.schoener_d_null:
        assert comp.statistic < comp.null.min()
    assert res.verdicts == ("independent",) * 4


def test_insufficient_folds_and_no_rule():
    pts = Points.lonlat(np.linspace(0, 5, 30), np.zeros(30))
    cal = [np.arange(3, 30), np.arange(0, 20), np.zeros(0, dtype=int)]
    ev = [np.arange(0, 3), np.arange(20, 30), np.arange(0, 30)]
    res = audit_split(pts, cal, ev, fold_labels=["a", "b", "c"], range_km=10.0, min_evaluation=5)
    # reference: fold a has 3 < 5 evaluation records; fold c has no calibration records
    assert res.verdicts[0] == "insufficient" and "3 evaluation" in res.reasons[0]
    assert res.verdicts[2] == "insufficient" and "no calibration" in res.reasons[2]
    # Fold b: evaluation records 20..29 against calibration records 0..19 along the equator, 5/29
    # degrees apart; the nearest pair (19, 20) is 19.2 km apart (reference: pyproj.Geod.inv), beyond
    # the 10 km range, so no evaluation record lies within the range: share 0 <= 0.5, independent.
    import pyproj

    _, _, gap_m = pyproj.Geod(ellps="WGS84").inv(5 * 19 / 29, 0.0, 5 * 20 / 29, 0.0)
    assert gap_m / 1000 > 10.0
    assert res.to_frame()["share_within_range"].iloc[1] == 0.0
    assert res.verdicts[1] == "independent"
    res = audit_split(pts, cal[1:2], ev[1:2])
    # No range, covariates or groups: nothing to judge by.
    assert res.verdicts == ("insufficient",)
    assert res.verdict == "insufficient"


def test_frame_columns_dict_and_rules():
    pts, cluster, env = _clustered(per=6)
    fold = np.random.default_rng(5).integers(0, 3, len(pts))
    cal, ev = _sets(fold, 3)
    rng = np.random.default_rng(6)
    pred = Points.lonlat(rng.uniform(0, 7.5, 300), rng.uniform(45, 51, 300))
    groups = np.where(cluster < 10, "atlas", "citizen")
    res = audit_split(pts, cal, ev, env=env, env_names=["t", "p"], groups=groups, range_km=30.0,
                      prediction_points=pred)
    frame = res.to_frame()
    assert list(frame.columns)[:12] == [
        "fold", "n_evaluation", "n_calibration", "nn_median_km", "nn_p10_km", "share_within_range",
        "range_km", "wasserstein_km", "schoener_d", "share_outside_envelope", "shared_method_share", "verdict",
    ]
    assert list(frame.columns) == COLUMNS and "reasons" in frame.columns
    assert list(frame.columns)[12:] == ["reasons", "schoener_d_null_median", "schoener_d_null_share",
                                        "shared_method_null_median", "shared_method_null_share"]
    assert np.isfinite(frame["wasserstein_km"]).all()
    assert np.isfinite(frame[["schoener_d_null_median", "schoener_d_null_share", "shared_method_null_median",
                              "shared_method_null_share"]].to_numpy()).all()
    text = json.dumps(res.to_dict(), allow_nan=False)
    back = json.loads(text)
    assert [r["name"] for r in back["rules"]] == ["distance", "environment", "collection method"]
    assert all(set(r) == {"name", "rule", "threshold"} for r in RULES)
    assert back["null_splits"] == 199 and back["seed"] == 0
    # Structured reasons: every applied rule with its value and threshold or null summary.
    for row, outs in zip(back["folds"], res.outcomes):
        assert [o["rule"] for o in row["outcomes"]] == [o.rule for o in outs] == ["distance", "collection method"]
        assert row["outcomes"][0]["value"] == pytest.approx(row["share_within_range"])
        assert row["outcomes"][1]["null_share"] == pytest.approx(row["shared_method_null_share"])
        fired = [o.describe() for o in outs if o.fired]
        assert row["reasons"] == ("; ".join(fired) if fired else "no rule fired")
    d = RuleOutcome("distance", "share_within_range", 0.75, True, 0.5, range_km=30.0)
    assert d.describe() == "distance: 75% of evaluation records within 30 km > 50%"  # reference: hand-written
    # Same seed, same re-splits (deterministic); another seed draws others.
    again = audit_split(pts, cal, ev, env=env, env_names=["t", "p"], groups=groups, range_km=30.0,
                        prediction_points=pred)
    np.testing.assert_array_equal(again.schoener_d_null[0].null, res.schoener_d_null[0].null)
    other = audit_split(pts, cal, ev, env=env, groups=groups, range_km=30.0, seed=1)
    assert not np.array_equal(other.schoener_d_null[0].null, res.schoener_d_null[0].null)
    assert other.schoener_d[0] == res.schoener_d[0]
    # NaN becomes None: no groups -> shared_method_share is NaN
    res2 = audit_split(pts, cal, ev, range_km=30.0)
    assert json.loads(json.dumps(res2.to_dict(), allow_nan=False))["folds"][0]["shared_method_share"] is None


def test_bad_input():
    pts = Points.lonlat([0.0, 1.0, 2.0], [0.0, 0.0, 0.0])
    with pytest.raises(InputError):
        audit_split(pts, [[0, 1]], [[2]], env=np.ones((2, 2)))
    with pytest.raises(InputError):
        audit_split(pts, [[0, 1]], [[2]], groups=["a"])
    with pytest.raises(InputError):
        audit_split(pts, [[0, 1]], [[2]], fold_labels=["a", "b"])
    with pytest.raises(InputError):
        audit_split(pts, [[0, 1]], [[2]], min_evaluation=0)
    with pytest.raises(InputError, match="null_splits"):
        audit_split(pts, [[0, 1]], [[2]], null_splits=10)
    with pytest.raises(InputError, match="seed"):
        audit_split(pts, [[0, 1]], [[2]], seed=-1)
