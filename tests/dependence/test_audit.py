"""Tests for splitter.dependence.audit."""

import json

import numpy as np
import pytest

from splitter.dependence.audit import COLUMNS, RULES, audit_split
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
    assert "collection method" not in res.reasons[0]
    assert res.verdicts[0] == "independent"

    fold = np.random.default_rng(3).integers(0, 2, len(pts))
    cal, ev = _sets(fold, 2)
    res = audit_split(pts, cal, ev, groups=groups)
    # reference: hand count, both methods occur in every calibration set -> share 1
    np.testing.assert_array_equal(res.shared_method_share, [1.0, 1.0])
    assert all("collection method" in r for r in res.reasons)


def test_unknown_groups_are_left_out_of_the_share():
    pts = Points.lonlat(np.linspace(0, 1, 10), np.zeros(10))
    groups = np.array(["a", "a", "b", None, "", np.nan, "c", "a", "c", "b"], dtype=object)
    cal, ev = [np.arange(5)], [np.arange(5, 10)]
    res = audit_split(pts, cal, ev, groups=groups)
    # reference: hand count, evaluation groups (NaN, c, a, c, b) -> known 4, shared {a, b} -> 2 of 4
    assert res.shared_method_share[0] == pytest.approx(0.5)


def test_environment_rule_random_vs_environmental_split():
    rng = np.random.default_rng(4)
    n = 4000
    lon, lat = rng.uniform(0, 8, n), rng.uniform(44, 50, n)
    env = np.column_stack([20 - 0.8 * (lat - 44) + rng.normal(0, 0.5, n), 600 + 40 * lon + rng.normal(0, 30, n)])
    pts = Points.lonlat(lon, lat)
    fold = rng.integers(0, 2, n)
    cal, ev = _sets(fold, 2)
    res = audit_split(pts, cal, ev, env=env)
    # Random halves of 2000 records sample the same environments: D near 1 and no extrapolation
    # (reference: analytic, equal distributions have overlap 1; rule (ii) thresholds 0.9 and 5 %).
    assert np.all(res.schoener_d > 0.9)
    assert np.all(res.share_outside_envelope < 0.05)
    assert all("environment" in r for r in res.reasons)

    warm = env[:, 0] > np.quantile(env[:, 0], 0.8)
    res = audit_split(pts, [np.flatnonzero(~warm)], [np.flatnonzero(warm)], env=env)
    # The warmest fifth lies outside the calibration temperature range almost entirely
    # (reference: MESS < 0 beyond the calibration maximum, Methods in Ecology and Evolution 2010).
    assert res.share_outside_envelope[0] > 0.5
    assert res.schoener_d[0] < 0.9
    assert res.verdicts[0] == "independent"
    assert res.ranges[0].to_frame()["share_outside"].iloc[0] > 0.5


def test_insufficient_folds_and_no_rule():
    pts = Points.lonlat(np.linspace(0, 5, 30), np.zeros(30))
    cal = [np.arange(3, 30), np.arange(0, 20), np.zeros(0, dtype=int)]
    ev = [np.arange(0, 3), np.arange(20, 30), np.arange(0, 30)]
    res = audit_split(pts, cal, ev, fold_labels=["a", "b", "c"], range_km=10.0, min_evaluation=5)
    # reference: fold a has 3 < 5 evaluation records; fold c has no calibration records
    assert res.verdicts[0] == "insufficient" and "3 evaluation" in res.reasons[0]
    assert res.verdicts[2] == "insufficient" and "no calibration" in res.reasons[2]
    assert res.verdicts[1] in ("dependent", "independent")
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
    assert np.isfinite(frame["wasserstein_km"]).all()
    text = json.dumps(res.to_dict(), allow_nan=False)
    back = json.loads(text)
    assert [r["name"] for r in back["rules"]] == ["distance", "environment", "collection method"]
    assert all(set(r) == {"name", "rule", "threshold"} for r in RULES)
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
