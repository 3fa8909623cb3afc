"""Tests for the random re-splits behind the audit's environment and collection-method rules."""

import math

import numpy as np
import pytest
from scipy.stats import hypergeom, norm
from sklearn.decomposition import PCA

from splitter.dependence.environment import schoener_d_resplit
from splitter.dependence.resplit import NullComparison, resplit_counts, shared_group_resplit
from splitter.errors import InputError


def test_resplit_counts_are_those_of_random_subsets():
    counts = np.array([30, 5, 0, 65])
    draws = resplit_counts(np.random.default_rng(0), counts, 20, 20000)
    assert (draws.sum(axis=1) == 20).all() and (draws <= counts).all()
    # reference: scipy.stats.hypergeom, the count of a category in a uniformly random 20-subset of
    # 100 records (mean and variance; Monte Carlo standard errors of 20000 draws, four of them)
    assert (draws[:, 2] == 0).all()  # an empty category stays empty
    for j, c in enumerate(counts):
        if c == 0:
            continue
        h = hypergeom(100, c, 20)
        assert draws[:, j].mean() == pytest.approx(h.mean(), abs=4 * math.sqrt(h.var() / 20000) + 1e-12)
        assert draws[:, j].var() == pytest.approx(h.var(), rel=0.05, abs=1e-12)  # 4 x sqrt(2 / 20000) = 0.04
    # The same counts as re-splitting records one by one (numpy permutations, a different path).
    labels = np.repeat(np.arange(4), counts)
    rng = np.random.default_rng(1)
    by_hand = np.array([np.bincount(rng.permutation(labels)[:20], minlength=4) for _ in range(4000)])
    np.testing.assert_allclose(by_hand.mean(axis=0), draws.mean(axis=0), atol=4 * math.sqrt(4.0 / 4000))


def test_shared_method_null_matches_record_by_record_resplits():
    rng = np.random.default_rng(3)
    codes = rng.choice([0, 1, 2, 3, 4, -1], size=60, p=[0.5, 0.3, 0.1, 0.04, 0.03, 0.03])
    ev = np.zeros(60, bool)
    ev[:15] = True
    res = shared_group_resplit(codes, ev, null_splits=4999, seed=2)
    # reference: the share computed record by record over numpy permutations of the same records
    shares = []
    for _ in range(4000):
        e = rng.permutation(ev)
        known = codes[e][codes[e] >= 0]
        shares.append(np.isin(known, codes[~e][codes[~e] >= 0]).mean())
    shares = np.array(shares)
    se = math.sqrt(shares.var() / 4000 + res.null.var() / 4999)
    assert res.null.mean() == pytest.approx(shares.mean(), abs=4 * se)
    assert res.statistic == pytest.approx(np.isin(codes[:15][codes[:15] >= 0], codes[15:][codes[15:] >= 0]).mean())


def test_null_comparison_counts_ties_as_dependent():
    c = NullComparison(1.0, np.array([1.0, 1.0, 0.9, np.nan]))
    # reference: hand count, 2 of the 3 finite re-splits are >= 1.0
    assert c.share == pytest.approx(2 / 3) and c.null_splits == 3
    assert not c.degenerate and not c.better_than_random()
    flat = NullComparison(1.0, np.ones(19))
    assert flat.degenerate and flat.share == 1.0 and flat.better_than_random()


def _kde_on_grid(pc, h, axes):
    """Reference density: sum of Gaussian product kernels (scipy.stats.norm) over unbinned records."""
    g1, g2 = np.meshgrid(*axes, indexing="ij")
    dens = np.zeros(g1.shape)
    for x, y in pc:  # a loop is fine in a reference
        dens += norm.pdf(g1, x, h[0]) * norm.pdf(g2, y, h[1])
    return dens / dens.sum()


def test_designed_d_matches_direct_kernel_sum():
    rng = np.random.default_rng(2)
    x = rng.multivariate_normal([0, 0, 0], [[1, 0.5, 0], [0.5, 1, 0.3], [0, 0.3, 1]], 300)
    ev = np.zeros(300, bool)
    ev[rng.choice(300, 60, replace=False)] = True
    grid = 64
    res = schoener_d_resplit(x, ev, null_splits=19, grid=grid)
    # The documented recipe with scikit-learn's PCA and scipy's normal density on the unbinned records.
    z = (x - x.mean(0)) / x.std(0)
    pc = PCA(2, svd_solver="full").fit(z).transform(z)
    s = pc.std(0)
    h_e, h_c = s * 60 ** (-1 / 6), s * 240 ** (-1 / 6)
    lo, hi = pc.min(0), pc.max(0)
    pad = np.maximum(3 * np.maximum(h_e, h_c), 0.05 * (hi - lo))
    axes = [np.linspace(lo[j] - pad[j], hi[j] + pad[j], grid) for j in range(2)]
    p = _kde_on_grid(pc[ev], h_e, axes)
    q = _kde_on_grid(pc[~ev], h_c, axes)
    d = 1 - 0.5 * np.abs(p - q).sum()
    # reference: scipy.stats.norm kernel sums; binning moves each record by at most half a grid
    # step (about a fifth of a kernel width here), which changes D by well under 0.01
    assert res.statistic == pytest.approx(d, abs=0.01)


def test_environment_rule_holds_its_level_on_random_splits():
    # The designed split is itself a random split of the records, so it is exchangeable with the
    # re-splits: the rule calls it better than random (share >= 0.95) with probability
    # (B + 1 - ceil(0.95 B)) / (B + 1) = 5 / 100 for B = 99 (reference: analytic, the rank of one
    # of B + 1 exchangeable values is uniform; Davison & Hinkley, Bootstrap Methods and their
    # Application, 1997, on Monte Carlo tests).
    seeds, b = 400, 99
    better = 0
    for seed in range(seeds):
        rng = np.random.default_rng(seed)
        x = rng.normal(size=(150, 3))
        ev = np.zeros(150, bool)
        ev[rng.choice(150, 30, replace=False)] = True
        better += schoener_d_resplit(x, ev, null_splits=b, seed=seed + 10_000, grid=24).better_than_random()
    rate = better / seeds
    se = math.sqrt(0.05 * 0.95 / seeds)
    assert abs(rate - 0.05) <= 3 * se  # three Monte Carlo standard errors
    # So the rule flags a random split as dependent in about 95 % of draws.


def test_environmental_split_is_caught():
    rng = np.random.default_rng(5)
    x = rng.normal(size=(300, 2))
    x[:100] += [2.5, 0.0]  # one cluster of 100 records apart in covariate space
    ev = np.zeros(300, bool)
    ev[:100] = True
    res = schoener_d_resplit(x, ev, null_splits=99, seed=1)
    # reference: analytic, two unit normals 2.5 sd apart overlap 2 Phi(-1.25) = 0.21 (Inman & Bradley,
    # Communications in Statistics - Theory and Methods 1989); the cluster's D is far below every
    # re-split's; the looser bound allows for kernel smoothing, which raises D
    assert res.statistic < 2 * norm.cdf(-1.25) + 0.15
    assert res.statistic < res.null.min() and res.better_than_random()


def test_shared_group_resplit_bad_input():
    with pytest.raises(InputError, match="null_splits"):
        shared_group_resplit([0, 1], [True, False], null_splits=3)
    with pytest.raises(InputError):
        shared_group_resplit([0, 1, 1], [True, False])
    with pytest.raises(InputError):
        schoener_d_resplit(np.ones((10, 2)), np.r_[np.ones(5, bool), np.zeros(5, bool)], null_splits=19)
    with pytest.raises(InputError):
        schoener_d_resplit(np.random.default_rng(0).normal(size=(10, 2)), np.r_[np.ones(2, bool), np.zeros(8, bool)])


def test_one_covariate_and_missing_values():
    rng = np.random.default_rng(0)
    x = rng.normal(size=500)
    res = schoener_d_resplit(x, x > 1.0, null_splits=19)
    # reference: analytic, the upper tail of a normal cut at 1 sd shares little density with the rest
    # (both densities smoothed by a kernel, so not 0); every random set of its size overlaps more
    assert res.statistic < 0.5 and res.share == 1.0
    x2 = np.column_stack([x, np.where(rng.random(500) < 0.1, np.nan, rng.normal(size=500))])
    keep = np.isfinite(x2).all(axis=1)
    with_nan = schoener_d_resplit(x2, x > 0.5, null_splits=19, seed=3)
    complete = schoener_d_resplit(x2[keep], (x > 0.5)[keep], null_splits=19, seed=3)
    # consistency: the same records without the rows that miss a covariate
    assert with_nan.statistic == complete.statistic
    np.testing.assert_array_equal(with_nan.null, complete.null)


def test_a_reference_sample_sets_the_axes_once_for_every_fold():
    from splitter.dependence.audit import audit_split
    from splitter.dependence.environment import ComponentSpace
    from splitter.geo import Points

    rng = np.random.default_rng(11)
    ref = rng.multivariate_normal([0, 0, 0], [[1, 0.6, 0.1], [0.6, 1, 0.2], [0.1, 0.2, 1]], 900)
    space = ComponentSpace.fit(ref)
    # reference: scikit-learn's PCA with the full SVD of the standardised reference sample;
    # the same axes up to sign, and the same share of variance
    z = (ref - ref.mean(0)) / ref.std(0)
    full = PCA(2, svd_solver="full").fit(z)
    np.testing.assert_allclose(np.abs(space.pca.components_), np.abs(full.components_), atol=1e-10)
    assert space.pca.explained_variance_ratio_.sum() == pytest.approx(full.explained_variance_ratio_.sum(), rel=1e-12)
    np.testing.assert_allclose(np.abs(space.transform(ref)), np.abs(full.transform(z)), atol=1e-9)
    pc_full = full.transform(z)  # the reference's extent on each axis (its width is sign-free)
    np.testing.assert_allclose(space.hi - space.lo, pc_full.max(0) - pc_full.min(0), rtol=1e-9)

    # consistency: a fitted space and the raw reference give the same D and null, fold by fold,
    # and audit_split (which fits the space once) gives each fold that D
    n = 500
    x = rng.multivariate_normal([0.3, 0, 0], [[1, 0.5, 0], [0.5, 1, 0.3], [0, 0.3, 1]], n)
    lon, lat = rng.uniform(0, 4, n), rng.uniform(40, 43, n)
    fold = np.minimum((lon // 1).astype(int), 3)
    cal = [np.flatnonzero(fold != i) for i in range(4)]
    ev = [np.flatnonzero(fold == i) for i in range(4)]
    res = audit_split(Points.lonlat(lon, lat), cal, ev, env=x, env_reference=ref, null_splits=19, seed=5)
    for i in range(4):
        pool = np.concatenate([cal[i], ev[i]])
        is_ev = np.r_[np.zeros(cal[i].size, bool), np.ones(ev[i].size, bool)]
        raw = schoener_d_resplit(x[pool], is_ev, reference=ref, null_splits=19, seed=[5, i, 0])
        fitted = schoener_d_resplit(x[pool], is_ev, reference=space, null_splits=19, seed=[5, i, 0])
        assert raw.statistic == fitted.statistic and np.array_equal(raw.null, fitted.null)
        assert res.schoener_d[i] == raw.statistic and np.array_equal(res.schoener_d_null[i].null, raw.null)
