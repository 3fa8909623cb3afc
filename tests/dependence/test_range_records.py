"""Range from a records table's own covariate columns and presence-absence response."""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from splitter.dependence.variogram import fit_variogram
from splitter.errors import InputError
from splitter.io.records import read_records
from splitter.workflow.range_estimate import estimate_range, estimate_range_from_records
from splitter.synthetic import gaussian_field

RANGE_KM = 40.0
CELL_KM = 2.0
SHAPE = (200, 200)  # a 400 km x 400 km region


def _survey(tmp_path, seed, n=1500, missing=0):
    """Sites scattered over two Gaussian random fields of known range (splitter.synthetic)."""
    rng = np.random.default_rng(seed)
    cov = gaussian_field(SHAPE, CELL_KM, RANGE_KM, seed=seed)
    occ = gaussian_field(SHAPE, CELL_KM, RANGE_KM, seed=seed + 1000)
    k = rng.choice(cov.size, n, replace=False)
    r, c = np.unravel_index(k, SHAPE)
    df = pd.DataFrame({
        "easting": 4_000_000 + c * CELL_KM * 1000.0,  # metres in EPSG:3035
        "northing": 3_000_000 + r * CELL_KM * 1000.0,
        "kind": np.where(occ.ravel()[k] > 0, "presence", "absence"),
        "soil": cov.ravel()[k].round(6).astype(object),
    })
    if missing:
        df.loc[: missing - 1, "soil"] = ""
        df.loc[missing: 2 * missing - 1, "soil"] = "n/a"
    path = tmp_path / f"survey_{seed}.csv"
    df.to_csv(path, index=False)
    return read_records(path, x="easting", y="northing", crs="EPSG:3035"), df


def _fit(est, covariate, model="exponential"):
    return next(f for f in est.fits if f.covariate == covariate and f.model == model)


def test_covariate_column_range_matches_the_simulated_field(tmp_path):
    import skgstat  # here, not at collection: it loads numba (0.5 s) on every worker
    # Five independent fields, 1500 sites each, ranges estimated from each table alone.
    ests, frames = [], []
    for seed in range(3, 8):
        recs, df = _survey(tmp_path, seed=seed)
        ests.append(estimate_range(records=recs, covariates=["soil"], seed=0))
        frames.append(df)
    ranges = np.array([_fit(e, "soil").range_km for e in ests])
    sills = np.array([_fit(e, "soil").sill for e in ests])
    # reference: the simulated fields' effective range (splitter.synthetic: correlation 0.05 at
    # 40 km, exponential covariance, circulant embedding, SIAM J. Sci. Comput. 1997), which is the
    # exponential model's effective range here to 0.2 % (exp(-3) = 0.0498). Tolerance: a 400 km
    # square holds m = (400 / 40)^2 = 100 range-sized patches, so one field's variogram has a relative
    # standard error of at least sqrt(2 / m) = 0.14; its fitted range spreads more, 0.2 (measured over
    # 20 fields: 35-62 km); the median of 5 has standard error 1.25 * 0.2 / sqrt(5) = 0.11; 2.3 of them.
    assert abs(np.median(ranges) - RANGE_KM) / RANGE_KM < 0.25
    assert np.median(sills) == pytest.approx(1.0, abs=0.15)  # reference: unit variance; 0.14 / sqrt(5) * 2.3
    for e in ests:
        assert e.suggested_block_km == pytest.approx(e.best["soil"].range_km)  # one covariate: its range

    # The empirical semivariogram equals scikit-gstat's on the same points.
    sv, df = ests[0].semivariograms["soil"], frames[0]
    xy = df[["easting", "northing"]].to_numpy(float) / 1000.0
    ref = skgstat.Variogram(xy, df["soil"].astype(float).to_numpy(), bin_func=list(sv.bin_edges_km[1:]),
                            estimator="matheron", fit_method=None)
    # reference: scikit-gstat (skgstat.Variogram, Matheron estimator, same upper bin edges)
    np.testing.assert_allclose(sv.gamma, ref.experimental, rtol=1e-9)
    np.testing.assert_array_equal(sv.pair_counts, ref.bin_count)


def test_indicator_semivariogram_of_presence_absence(tmp_path):
    # Presence where a zero-mean Gaussian field is positive. For a field of correlation rho(h)
    # thresholded at its median, P(both present) = 1/4 + arcsin(rho) / (2 pi) (Sheppard's formula,
    # Philosophical Transactions of the Royal Society A 1899), so the indicator semivariogram is
    # gamma_I(h) = 1/4 - arcsin(rho(h)) / (2 pi).
    ests = [estimate_range_from_records(_survey(tmp_path, seed=s)[0], response=True, seed=0) for s in (5, 6, 7, 8)]
    svs = [e.semivariograms["presence"] for e in ests]
    pooled = replace(svs[0], gamma=np.mean([s.gamma for s in svs], axis=0),
                     lags_km=np.mean([s.lags_km for s in svs], axis=0))
    rho = np.exp(-np.log(20.0) * pooled.lags_km / RANGE_KM)  # reference: splitter.synthetic's covariance
    analytic = 0.25 - np.arcsin(rho) / (2 * np.pi)
    # Tolerance: the plateau 1/4 is a variance; each of 4 fields gives it with relative standard error
    # sqrt(2 / 100) = 0.14 (100 range-sized patches), their mean 0.07, i.e. 0.018 absolute; two of them.
    np.testing.assert_allclose(pooled.gamma, analytic, atol=0.036)
    # The fit of the pooled empirical curve against the same model fitted to the analytic curve on the
    # same lags (reference: Sheppard's formula), within the sampling tolerance above (0.3).
    fit = fit_variogram(pooled, "exponential", "presence")
    truth = fit_variogram(replace(pooled, gamma=analytic), "exponential", "presence")
    assert abs(fit.range_km - truth.range_km) / truth.range_km < 0.3


def test_missing_values_are_left_out_with_a_note(tmp_path):
    recs, df = _survey(tmp_path, seed=9, n=400, missing=20)
    est = estimate_range_from_records(recs, covariates=["soil"], response=True, seed=0, sample=300)
    # reference: 20 empty and 20 text cells in the column
    assert any("40 row(s) without a numeric value" in n for n in est.notes)
    assert any("sample of 300" in n for n in est.notes)
    # reference: 400 sites minus 100 left out by the seeded sample, minus those of the 40 without a value
    assert 300 - 40 <= est.semivariograms["soil"].n_points <= 300
    assert est.semivariograms["presence"].n_points == 300


def test_bad_input(tmp_path):
    recs, _ = _survey(tmp_path, seed=11, n=200)
    with pytest.raises(InputError, match="no such column"):
        estimate_range_from_records(recs, covariates=["depth"])
    with pytest.raises(InputError, match="no kept row holds a number"):
        estimate_range_from_records(recs, covariates=["kind"])
    with pytest.raises(InputError, match="covariates"):
        estimate_range_from_records(recs)
    only_pres = replace(recs, kind=np.full(len(recs), "presence", dtype=object))
    with pytest.raises(InputError, match="absences"):
        estimate_range_from_records(only_pres, response=True)
    with pytest.raises(InputError, match="not both"):
        estimate_range(["a.tif"], records=recs, covariates=["soil"])
    with pytest.raises(InputError, match="sample"):
        estimate_range_from_records(recs, covariates=["soil"], sample=20)
