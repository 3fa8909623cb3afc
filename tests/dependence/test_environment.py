"""Tests for splitter.dependence.environment."""

import json

import numpy as np
import pytest
from scipy.stats import gaussian_kde, norm

import splitter.dependence.environment as environment
from splitter.dependence.environment import covariate_ranges, mess, schoener_d
from splitter.errors import InputError


def test_identical_samples_overlap_fully():
    rng = np.random.default_rng(0)
    a = rng.normal(size=(800, 4))
    res = schoener_d(a, a.copy())
    # reference: analytic, D = 1 - 0.5 * sum|p - p| = 1 for identical densities
    assert res.statistic == pytest.approx(1.0, abs=1e-12)
    assert res.n_components == 2


def test_same_distribution_overlaps_nearly_fully():
    rng = np.random.default_rng(1)
    a, b = rng.normal(size=20000), rng.normal(size=20000)
    # reference: analytic overlap of two equal normals is 1 (Inman & Bradley, Communications in
    # Statistics - Theory and Methods 1989); 0.97: measured over 20 seeds at n = 20000 per sample,
    # D has mean 0.988 and sd 0.0025 (sampling noise in |p - q|), so 0.97 lies 7 sd below the mean
    assert schoener_d(a, b).statistic > 0.97


def test_disjoint_samples_do_not_overlap():
    rng = np.random.default_rng(2)
    a = rng.normal(size=(600, 3))
    b = rng.normal(size=(600, 3)) + 25.0
    # reference: analytic, densities 25 sd apart share no mass (D = 0); kernels of h ~ 0.35 sd leave
    # Gaussian tails of ~1e-30 beyond 12 sd, so any value above 1e-6 is an error
    assert schoener_d(a, b).statistic < 1e-6


@pytest.mark.parametrize("delta", [0.5, 1.0, 2.0, 3.0])
def test_overlap_of_two_normals(delta):
    rng = np.random.default_rng(int(delta * 10))
    sigma = 2.0
    a = rng.normal(0.0, sigma, 20000)
    b = rng.normal(delta * sigma, sigma, 20000)
    # reference: overlapping coefficient of two normals with equal sd, 2 * Phi(-|delta| / 2)
    # (Inman & Bradley, "The overlapping coefficient as a measure of agreement between probability
    # distributions and point estimation of the overlap of two normal distributions",
    # Communications in Statistics - Theory and Methods 1989); D equals it for exact densities.
    # abs=0.03: Scott's kernel (h = 0.14 sd at n = 20000) widens both densities by 1 %; measured over
    # 20 seeds at delta = 2, D - OVL has mean 0.003 and sd 0.0035, so 0.03 is about 8 sd.
    assert schoener_d(a, b).statistic == pytest.approx(2 * norm.cdf(-delta / 2), abs=0.03)


def reference_d(a, b, nodes):
    """Outside reference: Schoener's D from scipy.stats.gaussian_kde on the raw 2-D samples.

    D = 1 - 0.5 * sum|p - q| over a grid (Schoener, "The Anolis lizards of Bimini: resource
    partitioning in a complex fauna", Ecology 1968), densities by gaussian_kde with its default
    Scott factor n ** (-1/6). gaussian_kde's kernel covariance is the sample's covariance times
    the factor squared, so it is affine-equivariant: standardising and rotating both samples (what
    schoener_d does before smoothing 2-D data) leaves D unchanged, and this reference skips both.
    """
    ka, kb = gaussian_kde(a.T), gaussian_kde(b.T)
    both = np.vstack([a, b])
    pad = 4 * np.sqrt(max(np.diag(ka.covariance).max(), np.diag(kb.covariance).max()))
    axes = [np.linspace(both[:, j].min() - pad, both[:, j].max() + pad, nodes) for j in range(2)]
    mesh = np.stack([g.ravel() for g in np.meshgrid(*axes, indexing="ij")])
    pa, pb = ka(mesh), kb(mesh)
    return 1.0 - 0.5 * float(np.abs(pa / pa.sum() - pb / pb.sum()).sum())


@pytest.mark.parametrize("n, nodes", [(1500, 120), (6000, 80)])  # 6000 > _BIN_ABOVE: the binned path
def test_d_matches_scipy_gaussian_kde(n, nodes):
    rng = np.random.default_rng(3)
    cov = [[4.0, 1.2], [1.2, 1.0]]
    a = rng.multivariate_normal([0.0, 0.0], cov, n)
    b = rng.multivariate_normal([1.5, 0.5], cov, n)
    want = reference_d(a, b, nodes)  # reference: scipy.stats.gaussian_kde (see reference_d)
    # abs=0.002: two Riemann sums of the same smooth densities on grids of >= 3 nodes per kernel sd;
    # binning moves a point by at most half a fine step (~0.02 data sd); measured gaps 2e-5 and 2e-4.
    assert schoener_d(a, b).statistic == pytest.approx(want, abs=0.002)
    # Sanity of the reference itself: two normals with equal covariance, Mahalanobis distance
    # delta = 1.62, overlap 2 * Phi(-delta / 2) = 0.707 (Inman & Bradley 1989, cited above); the
    # kernel widens both densities (factor n ** (-1/6) = 0.23..0.30 of the sd) and sampling moves
    # the means by ~0.03 sd, so 0.04 either way.
    delta = np.sqrt(np.array([1.5, 0.5]) @ np.linalg.inv(cov) @ np.array([1.5, 0.5]))
    assert want == pytest.approx(2 * norm.cdf(-delta / 2), abs=0.04)


def test_binned_density_matches_direct_kernel(monkeypatch):
    """Consistency check between two of our own paths (binned vs direct kernel), beside the outside
    check test_d_matches_scipy_gaussian_kde."""
    rng = np.random.default_rng(3)
    a = rng.multivariate_normal([0, 0, 0], [[1, 0.6, 0], [0.6, 1, 0.2], [0, 0.2, 1]], 6000)
    b = rng.multivariate_normal([0.7, 0, 0.3], [[1, 0.6, 0], [0.6, 1, 0.2], [0, 0.2, 1]], 6000)
    binned = schoener_d(a, b).statistic  # 6000 > _BIN_ABOVE: binned path
    monkeypatch.setattr(environment, "_BIN_ABOVE", 10**9)
    direct = schoener_d(a, b).statistic
    # abs=0.01: binning onto a lattice twice as fine as the 100-node grid moves each point by at
    # most a quarter of a grid step (~0.02 sd here); measured gap below 0.001.
    assert binned == pytest.approx(direct, abs=0.01)


def test_reference_sets_the_axes():
    rng = np.random.default_rng(4)
    # The reference's covariates are strongly correlated (one dominant axis); the records' are not.
    ref = rng.multivariate_normal([0, 0, 0], [[1, 0.9, 0.9], [0.9, 1, 0.9], [0.9, 0.9, 1]], 3000)
    a = rng.normal(size=(400, 3))
    b = a + [0.0, 0.2, 0.0]
    res = schoener_d(a, b, reference=ref)
    pooled = schoener_d(a, b)

    def top_two_share(x):
        # reference: numpy.linalg.eigvalsh of the correlation matrix (PCA on standardised data)
        ev = np.linalg.eigvalsh(np.corrcoef(x, rowvar=False))[::-1]
        return ev[:2].sum() / ev.sum()

    assert res.explained_variance == pytest.approx(top_two_share(ref), rel=1e-9)
    assert pooled.explained_variance == pytest.approx(top_two_share(np.vstack([a, b])), rel=1e-9)
    # the two differ (0.97 against ~0.7 here), so the first check could not pass on the pooled axes
    assert res.explained_variance - pooled.explained_variance > 0.2
    assert (res.n_a, res.n_b) == (400, 400)
    json.dumps(res.to_dict(), allow_nan=False)


def test_mess_hand_computed():
    reference = np.array([[1.0, 10.0], [2.0, 20.0], [4.0, 30.0]])
    query = np.array([[3.0, 25.0], [1.5, 5.0], [5.0, 10.0], [2.0, 20.0], [np.nan, 20.0]])
    # reference: hand arithmetic with the definitions of Elith, Kearney & Phillips,
    # "The art of modelling range-shifting species", Methods in Ecology and Evolution 2010.
    # min/max: var1 1..4 (range 3), var2 10..30 (range 20); f = % of reference values < v.
    # q1 (3, 25): var1 f = 2/3 = 66.7 -> 2(100 - 66.7) = 66.7; var2 f = 66.7 -> 66.7; MESS 66.7
    # q2 (1.5, 5): var1 f = 33.3 -> 2f = 66.7; var2 f = 0 -> (5 - 10)/20*100 = -25; MESS -25
    # q3 (5, 10): var1 f = 100 -> (4 - 5)/3*100 = -33.3; var2 f = 0 -> (10 - 10)/20*100 = 0; MESS -33.3
    # q4 (2, 20): var1 f = 33.3 -> 66.7; var2 f = 33.3 -> 66.7; MESS 66.7
    # q5: missing value -> NaN
    want = [200 / 3, -25.0, -100 / 3, 200 / 3, np.nan]
    np.testing.assert_allclose(mess(reference, query), want, rtol=1e-12)


def test_mess_constant_reference_convention():
    # reference: documented convention (0 at the constant, -100 elsewhere)
    np.testing.assert_array_equal(mess([[2.0], [2.0]], [[2.0], [3.0]]), [0.0, -100.0])


def test_covariate_ranges():
    cal = np.array([[0.0, 5.0], [1.0, 6.0], [2.0, np.nan]])
    ev = np.array([[0.5, 7.0], [3.0, 5.5], [-1.0, np.nan], [1.5, 5.0]])
    r = covariate_ranges(cal, ev, ["a", "b"])
    f = r.to_frame()
    # reference: hand count; a: 3.0 and -1.0 of 4 outside [0, 2]; b: 7.0 of 3 values outside [5, 6]
    np.testing.assert_allclose(f["share_outside"], [0.5, 1 / 3])
    np.testing.assert_allclose(f["calibration_max"], [2.0, 6.0])  # reference: hand (NaN ignored)
    np.testing.assert_allclose(f["evaluation_min"], [-1.0, 5.0])  # reference: hand
    json.dumps(r.to_dict(), allow_nan=False)


def test_bad_input():
    with pytest.raises(InputError):
        schoener_d(np.ones((10, 2)), np.ones((10, 3)))
    with pytest.raises(InputError):
        schoener_d(np.random.default_rng(0).normal(size=(2, 2)), np.ones((10, 2)))
    with pytest.raises(InputError):
        mess(np.ones((3, 2)), np.ones((3, 1)))
    with pytest.raises(InputError):
        covariate_ranges(np.ones((3, 2)), np.ones((3, 2)), ["only_one"])
