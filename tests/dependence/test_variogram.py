"""Tests for splitter.dependence.variogram."""

import json
from dataclasses import replace

import numpy as np
import pytest
from scipy.spatial.distance import cdist, pdist

from splitter.dependence.variogram import (
    Semivariogram,
    empirical_semivariogram,
    fit_ranges,
    fit_variogram,
)
from splitter.errors import InputError


def _covariance(model, d, eff_range):
    """Analytic unit-sill covariance C(h) = 1 - gamma(h) for the two models."""
    if model == "exponential":
        return np.exp(-3.0 * d / eff_range)
    r = np.minimum(d / eff_range, 1.0)
    return 1.0 - (1.5 * r - 0.5 * r**3)


def _gaussian_fields(model, eff_range, n=1500, reps=5, side_km=150.0, seed=0):
    """Exact Gaussian fields on random points by Cholesky of the covariance matrix."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0.0, side_km, (n, 2))
    c = _covariance(model, cdist(xy, xy), eff_range)
    chol = np.linalg.cholesky(c + 1e-8 * np.eye(n))  # tiny jitter for round-off only
    return xy, chol @ rng.standard_normal((n, reps))


@pytest.mark.parametrize("model", ["spherical", "exponential"])
@pytest.mark.parametrize("eff_range", [20.0, 35.0])
def test_range_recovery_on_simulated_fields(model, eff_range):
    xy, z = _gaussian_fields(model, eff_range, seed=int(eff_range))
    # Average the empirical semivariograms of 5 realisations on the same points, then fit once:
    # each is unbiased for the model semivariogram, the mean is less noisy.
    svs = [empirical_semivariogram(xy[:, 0], xy[:, 1], z[:, k]) for k in range(z.shape[1])]
    pooled = replace(svs[0], gamma=np.mean([s.gamma for s in svs], axis=0))
    fit = fit_variogram(pooled, model)
    # reference: analytic covariance used to simulate (effective range eff_range, sill 1, nugget 0)
    assert abs(fit.range_km - eff_range) / eff_range < 0.25
    assert abs(fit.sill - 1.0) < 0.25  # reference: analytic unit sill
    assert not fit.range_at_bound


def test_semivariances_equal_scikit_gstat():
    import skgstat  # here, not at collection: it loads numba (0.5 s) on every worker
    rng = np.random.default_rng(11)
    xy = rng.uniform(0.0, 80.0, (700, 2))
    z = np.sin(xy[:, 0] / 9.0) + 0.3 * rng.standard_normal(700)
    sv = empirical_semivariogram(xy[:, 0], xy[:, 1], z, n_lags=12, max_lag_km=45.0)
    ref = skgstat.Variogram(
        xy, z, bin_func=list(sv.bin_edges_km[1:]), estimator="matheron", fit_method=None
    )
    # reference: scikit-gstat (skgstat.Variogram, Matheron estimator, same upper bin edges)
    np.testing.assert_allclose(sv.gamma, ref.experimental, rtol=1e-9)
    np.testing.assert_array_equal(sv.pair_counts, ref.bin_count)  # reference: scikit-gstat


def test_default_max_lag_and_pair_bookkeeping():
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 50, (2, 200))
    z = rng.standard_normal(200)
    sv = empirical_semivariogram(x, y, z, n_lags=10)
    d = pdist(np.column_stack([x, y]))
    # reference: scipy.spatial.distance.pdist (documented default: half the largest pairwise distance)
    assert sv.max_lag_km == pytest.approx(0.5 * d.max(), rel=1e-12)
    # reference: scipy pdist count of pairs closer than the max lag (classes are [lo, hi))
    assert sv.pair_counts.sum() == np.sum(d < sv.max_lag_km)
    inside = d[(d >= sv.bin_edges_km[2]) & (d < sv.bin_edges_km[3])]
    # reference: numpy mean of the pair distances in class 3 (lags are mean pair distances)
    assert sv.lags_km[2] == pytest.approx(inside.mean(), rel=1e-12)


def test_missing_values_are_left_out():
    rng = np.random.default_rng(4)
    x, y = rng.uniform(0, 50, (2, 150))
    z = rng.standard_normal(150)
    z_nan = z.copy()
    z_nan[:10] = np.nan
    a = empirical_semivariogram(x, y, z_nan, max_lag_km=20.0)
    b = empirical_semivariogram(x[10:], y[10:], z[10:], max_lag_km=20.0)
    # consistency: the same estimator on the 140 complete points (missing values left out, not imputed)
    np.testing.assert_allclose(a.gamma, b.gamma, rtol=1e-12)
    assert a.n_points == 140  # reference: 150 points minus 10 missing values


@pytest.mark.parametrize("model", ["spherical", "exponential"])
def test_fit_recovers_exact_model_and_matches_skgstat_curve(model):
    import skgstat  # here, not at collection: it loads numba (0.5 s) on every worker

    edges = np.linspace(0, 100, 16)
    lags = 0.5 * (edges[1:] + edges[:-1])
    skg_model = getattr(skgstat.models, model)
    # reference: scikit-gstat model functions (effective range r, partial sill c0, nugget b)
    truth = np.array([skg_model(h, 40.0, 2.0, 0.5) for h in lags], dtype=float)
    sv = Semivariogram(lags, truth, np.full(15, 1000), edges, 500)
    fit = fit_variogram(sv, model)
    # reference: the parameters used to build the noise-free semivariogram; rel=1e-4: the least-squares
    # optimiser stops at its convergence tolerance, not at machine precision, on a noise-free curve
    assert fit.range_km == pytest.approx(40.0, rel=1e-4)
    assert fit.nugget == pytest.approx(0.5, rel=1e-4)
    assert fit.sill == pytest.approx(2.5, rel=1e-4)
    assert fit.r2 == pytest.approx(1.0, abs=1e-8)
    # reference: scikit-gstat model curve with the fitted parameters
    h = np.linspace(1, 100, 50)
    want = np.array([skg_model(v, fit.range_km, fit.partial_sill, fit.nugget) for v in h], dtype=float)
    np.testing.assert_allclose(fit.predict(h), want, rtol=1e-9)


def test_exponential_effective_range_is_95_percent_of_partial_sill():
    edges = np.linspace(0, 100, 16)
    lags = 0.5 * (edges[1:] + edges[:-1])
    sv = Semivariogram(lags, 1.0 - np.exp(-lags / 12.0), np.full(15, 100), edges, 100)
    fit = fit_variogram(sv, "exponential")
    # reference: analytic, 1 - exp(-h/a) reaches 95 % (1 - e^-3) at h = 3a = 36 km (rel=1e-4: optimiser tolerance)
    assert fit.range_km == pytest.approx(36.0, rel=1e-4)
    assert fit.predict([fit.range_km])[0] == pytest.approx(1 - np.exp(-3.0), rel=1e-6)


def test_estimate_range_chooses_and_summarises():
    xy, z = _gaussian_fields("spherical", 25.0, n=900, reps=3, seed=7)
    covs = {"short": z[:, 0], "also_short": z[:, 1], "noise_plus": z[:, 2] + 0.1}
    est = fit_ranges(xy[:, 0], xy[:, 1], covs, n_lags=12)
    frame = est.to_frame()
    assert list(frame.columns) == ["covariate", "model", "range_km", "sill", "nugget", "rmse", "r2", "chosen"]
    assert len(frame) == 6  # reference: 3 covariates x 2 models
    assert (frame.groupby("covariate")["chosen"].sum() == 1).all()  # one chosen model per covariate
    for name, fit in est.best.items():
        pair = [f for f in est.fits if f.covariate == name]
        # reference: documented choice, lower Cressie-weighted residual (python min)
        assert fit.weighted_sse == min(f.weighted_sse for f in pair)
    # reference: numpy.median of the chosen effective ranges (rule in the module docstring)
    assert est.suggested_block_km == pytest.approx(np.median([f.range_km for f in est.best.values()]))
    # reference: analytic range of the simulated covariance (25 km). Measured over seeds 7..16 of
    # these three fields: the suggestion ran 22.9-37.4 km (mean 26.5, sd 4.1), so 15-40 km allows
    # the worst seed plus ~0.6 sd above and 2.5 sd below.
    assert 15.0 < est.suggested_block_km < 40.0
    text = json.dumps(est.to_dict(), allow_nan=False)
    assert "suggested_block_km" in text


def test_bad_input_raises_input_error():
    x = np.arange(10.0)
    with pytest.raises(InputError):
        empirical_semivariogram(x, x, np.ones(9))
    with pytest.raises(InputError):
        empirical_semivariogram(x, x, x, n_lags=1)
    with pytest.raises(InputError):
        empirical_semivariogram(x[:2], x[:2], x[:2])
    sv = empirical_semivariogram(x, np.zeros(10), np.ones(10), n_lags=3)
    with pytest.raises(InputError, match="constant"):
        fit_variogram(sv, "spherical")
    with pytest.raises(InputError):
        fit_variogram(empirical_semivariogram(x, x, x, n_lags=3), "gaussian")
    with pytest.raises(InputError):
        fit_ranges(x, x, {"a": np.ones(3)})
