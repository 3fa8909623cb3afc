"""Tests for splitter.synthetic: exact Gaussian random fields with a known covariance."""

import warnings

import numpy as np
import pytest
from scipy import stats

from splitter.errors import InputError
from splitter.synthetic import correlation, covariance, gaussian_field


def _realisations(n, shape, cell, range_km, model, mean=0.0, sd=1.0, first_seed=0):
    return np.stack([
        gaussian_field(shape, cell, range_km, seed=first_seed + s, model=model, mean=mean, sd=sd)
        for s in range(n)
    ])


@pytest.mark.parametrize("model", ["exponential", "gaussian"])
def test_correlation_is_005_at_the_effective_range(model):
    # reference: analytic result, exp(-ln 20) = 1/20 (the effective-range convention)
    assert correlation(37.5, 37.5, model) == pytest.approx(0.05, rel=1e-12)
    # reference: analytic result, correlation 1 at distance 0
    assert correlation(0.0, 37.5, model) == pytest.approx(1.0)
    # reference: analytic result, C(0) = sd^2
    assert covariance(0.0, 10.0, model, sd=3.0) == pytest.approx(9.0)


def test_exponential_matches_practical_range_convention():
    # The usual "practical range = 3 x scale" exponential has correlation exp(-3) at the range.
    # reference: analytic result, exp(-3) = 0.049787 vs 0.05 (0.4 % apart)
    assert correlation(100.0, 100.0, "exponential") == pytest.approx(np.exp(-3.0), rel=0.005)


@pytest.mark.parametrize(
    "model, cell, lags",
    [
        # lags as (rows, columns); with square cells (3, 4) and (6, 8) test isotropy
        ("exponential", 1.0, [(0, 0), (0, 1), (0, 3), (3, 4), (0, 10), (6, 8), (10, 0), (0, 20)]),
        ("gaussian", 1.0, [(0, 0), (0, 2), (3, 4), (0, 8), (6, 8), (10, 0)]),
        # rectangular cells: 2 km between rows, 1 km between columns
        ("exponential", (2.0, 1.0), [(1, 0), (0, 2), (2, 0), (0, 4), (3, 4), (5, 0)]),
    ],
)
def test_empirical_covariance_matches_analytic(model, cell, lags):
    n, shape, range_km = 200, (48, 48), 10.0
    fields = _realisations(n, shape, cell, range_km, model)
    dy_km, dx_km = (cell, cell) if np.isscalar(cell) else cell
    for dy, dx in lags:
        # The mean is known (0), so E[Z(s) Z(s+h)] estimates C(h) without bias.
        products = fields[:, : shape[0] - dy, : shape[1] - dx] * fields[:, dy:, dx:]
        per_field = products.mean(axis=(1, 2))
        estimate = per_field.mean()
        se = per_field.std(ddof=1) / np.sqrt(n)
        expected = covariance(np.hypot(dy * dy_km, dx * dx_km), range_km, model)
        # reference: analytic covariance C(h) = exp(-ln20 h/a) or exp(-ln20 (h/a)^2);
        # the realisations are independent, so a 4-standard-error band holds the truth.
        assert abs(estimate - expected) < 4 * se, (dy, dx, estimate, expected, se)
        assert se < 0.02  # the test has the power to see a wrong range or model


def test_mean_and_sd_over_realisations():
    n = 150
    fields = _realisations(n, (40, 40), 1.0, 6.0, "exponential", mean=5.0, sd=2.0, first_seed=1000)
    per_field_mean = fields.mean(axis=(1, 2))
    # reference: scipy.stats.ttest_1samp (realisation means are independent draws around the mean)
    assert stats.ttest_1samp(per_field_mean, 5.0).pvalue > 0.001
    per_field_var = ((fields - 5.0) ** 2).mean(axis=(1, 2))
    se = per_field_var.std(ddof=1) / np.sqrt(n)
    # reference: analytic result, E[(Z - mean)^2] = sd^2 = 4
    assert abs(per_field_var.mean() - 4.0) < 4 * se
    assert se < 0.1


def test_mean_and_sd_of_one_large_field():
    z = gaussian_field((512, 512), 1.0, 4.0, seed=7, mean=-3.0, sd=0.5)
    # The sd of the spatial mean is about 0.5 * sqrt(2 pi (4/ln20)^2 / 512^2) = 0.003.
    # reference: analytic result (mean of the field = -3)
    assert z.mean() == pytest.approx(-3.0, abs=0.02)
    # reference: analytic result (sd of the field = 0.5); rel=0.03: the sample variance of a field with
    # about 512^2 / (2 pi (4 / ln 20)^2) ~ 23 000 independent patches has relative sd sqrt(2 / 23 000) = 0.9 %,
    # so the sd's is about 0.5 % and 3 % is about 6 sd
    assert z.std() == pytest.approx(0.5, rel=0.03)


@pytest.mark.parametrize("model, skgstat_factor", [
    # skgstat's exponential uses a = r/3 (correlation exp(-3) at r) and its gaussian a = r/2
    # (correlation exp(-4) at r); convert our effective range to its r (recalled from memory,
    # checked against skgstat.models source).
    ("exponential", 3.0 / np.log(20.0)),
    ("gaussian", np.sqrt(4.0 / np.log(20.0))),
])
def test_fitted_variogram_range_matches(model, skgstat_factor):
    import skgstat as skg  # here, not at collection: it loads numba (0.5 s) on every worker

    range_km = 15.0
    z = gaussian_field((200, 200), 1.0, range_km, seed=3, model=model)
    rng = np.random.default_rng(11)
    idx = rng.choice(z.size, 1500, replace=False)
    rows, cols = np.unravel_index(idx, z.shape)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # 1 km lag classes: skgstat places each class at its upper edge, so wide classes
        # would stretch the fitted range.
        vario = skg.Variogram(np.column_stack([cols, rows]).astype(float), z.ravel()[idx],
                              model=model, n_lags=60, maxlag=60.0)
    fitted_range, sill = vario.parameters[0], vario.parameters[1]
    # reference: skgstat.Variogram fit; one realisation, so a 25 % band (a range off by the
    # 3x scale/range confusion would miss it by far)
    assert fitted_range == pytest.approx(range_km * skgstat_factor, rel=0.25)
    # reference: analytic result (sill = sd^2 = 1); rel=0.25: one 200 x 200 km field holds about
    # (200 / 15)^2 ~ 180 range-sized patches, so its variance has relative sd ~ sqrt(2 / 180) = 0.11; 0.25 is ~2.4 sd
    assert sill == pytest.approx(1.0, rel=0.25)


def test_one_dimensional_field():
    n = 300
    fields = np.stack([gaussian_field(500, 2.0, 30.0, seed=s) for s in range(n)])
    assert fields.shape == (n, 500)
    lag = 5  # 10 km
    per_field = (fields[:, :-lag] * fields[:, lag:]).mean(axis=1)
    se = per_field.std(ddof=1) / np.sqrt(n)
    # reference: analytic covariance exp(-ln20 * 10 / 30)
    assert abs(per_field.mean() - np.exp(-np.log(20.0) * 10.0 / 30.0)) < 4 * se


def test_large_range_relative_to_grid_still_exact():
    # A range far beyond the minimal embedding forces the periodic grid to be enlarged.
    n = 200
    fields = _realisations(n, (16, 16), 1.0, 40.0, "exponential", first_seed=500)
    per_field = (fields[:, :, :-8] * fields[:, :, 8:]).mean(axis=(1, 2))
    se = per_field.std(ddof=1) / np.sqrt(n)
    # reference: analytic covariance exp(-ln20 * 8 / 40)
    assert abs(per_field.mean() - np.exp(-np.log(20.0) * 8.0 / 40.0)) < 4 * se


def test_seeded_and_deterministic():
    a = gaussian_field((30, 20), 1.5, 8.0, seed=42)
    b = gaussian_field((30, 20), 1.5, 8.0, seed=42)
    c = gaussian_field((30, 20), 1.5, 8.0, seed=43)
    assert a.shape == (30, 20) and a.dtype == np.float64
    np.testing.assert_array_equal(a, b)
    assert not np.allclose(a, c)
    # A Generator is accepted as the seed as well.
    g = gaussian_field((30, 20), 1.5, 8.0, seed=np.random.default_rng(42))
    np.testing.assert_array_equal(g, a)


@pytest.mark.parametrize("kwargs", [
    {"range_km": 0.0},
    {"range_km": -5.0},
    {"range_km": float("nan")},
    {"model": "spherical"},
    {"shape": (0, 10)},
    {"shape": (2, 2, 2, 2)},
    {"cell_size_km": (1.0, 1.0, 1.0)},
    {"cell_size_km": -1.0},
    {"sd": -1.0},
])
def test_bad_input_raises_input_error(kwargs):
    args = {"shape": (10, 10), "cell_size_km": 1.0, "range_km": 5.0, "seed": 0, **kwargs}
    with pytest.raises(InputError):
        gaussian_field(**args)


@pytest.mark.parametrize("model, range_km, n", [
    ("exponential", 40.0, 16),   # minimal embedding has negative eigenvalues: must be enlarged
    ("gaussian", 60.0, 24),      # clipping them instead would inflate the variance by ~10 %
    ("gaussian", 5.0, 40),
    ("exponential", 8.0, 40),
])
def test_implied_covariance_is_exact(model, range_km, n):
    from splitter.synthetic import _circulant_eigenvalues

    eig = _circulant_eigenvalues((n, n), (1.0, 1.0), range_km, model)
    assert eig.min() >= 0
    # The simulated field's covariance is the inverse FFT of the eigenvalues it is built from.
    implied = np.fft.ifftn(eig).real[:n, :n]
    rows, cols = np.mgrid[0:n, 0:n]
    # reference: analytic covariance at every lag inside the grid
    np.testing.assert_allclose(implied, correlation(np.hypot(rows, cols), range_km, model), atol=1e-6)
