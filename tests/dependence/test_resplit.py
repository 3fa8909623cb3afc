"""Tests for the random re-splits behind the audit's environment and collection-method rules."""

import math

import numpy as np
import pytest
from scipy.stats import norm
from sklearn.decomposition import PCA

from splitter.dependence.environment import schoener_d_resplit
from splitter.dependence.resplit import NullComparison, random_subsets, shared_group_resplit
from splitter.errors import InputError


def test_random_subsets_are_uniform():
    rng = np.random.default_rng(0)
    rows = np.vstack(list(random_subsets(rng, 12, 4, 6000)))
    assert rows.shape == (6000, 4)
    assert all(len(set(r)) == 4 for r in rows[:200])  # without replacement
    freq = np.bincount(rows.ravel(), minlength=12) / 6000
    # reference: analytic, each of n records is in a uniformly random size-k subset with
    # probability k / n = 1/3; binomial standard error sqrt(p (1 - p) / 6000) = 0.0061
    np.testing.assert_allclose(freq, 1 / 3, atol=4 * 0.0061)
    pairs = np.mean([(0 in r) and (1 in r) for r in rows])
    # reference: analytic, a given pair is in the subset with probability C(10, 2) / C(12, 4) = 1/11
    assert pairs == pytest.approx(1 / 11, abs=4 * math.sqrt(1 / 11 * 10 / 11 / 6000))


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
