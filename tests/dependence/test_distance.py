"""Tests for splitter.dependence.distance."""

import json

import numpy as np
import pyproj
import pytest
from scipy.spatial.distance import cdist
from scipy.stats import wasserstein_distance

from splitter.dependence.distance import distance_diagnostics, nearest_other_km
from splitter.errors import InputError
from splitter.geo import Points

GEOD = pyproj.Geod(ellps="WGS84")


def _geod_matrix_km(lon_a, lat_a, lon_b, lat_b):
    """Brute-force geodesic distance matrix with pyproj.Geod."""
    la, lb = len(lon_a), len(lon_b)
    _, _, d = GEOD.inv(
        np.repeat(lon_a, lb), np.repeat(lat_a, lb), np.tile(lon_b, la), np.tile(lat_b, la)
    )
    return np.asarray(d).reshape(la, lb) / 1000.0


def _geographic_sample(seed=0, n=400):
    rng = np.random.default_rng(seed)
    lon = rng.uniform(-10, 30, n)
    lat = rng.uniform(35, 62, n)
    # A tight cluster, exact duplicates and points either side of the antimeridian.
    lon[:30] = 5 + rng.normal(0, 0.01, 30)
    lat[:30] = 50 + rng.normal(0, 0.01, 30)
    lon[30:33], lat[30:33] = lon[40], lat[40]
    lon[33:37] = [179.95, -179.95, 179.99, -179.9]
    lat[33:37] = [-16.0, -16.05, -16.1, -16.0]
    return lon, lat


def _folds(n, k, seed):
    fold = np.random.default_rng(seed).integers(0, k, n)
    return [np.flatnonzero(fold != i) for i in range(k)], [np.flatnonzero(fold == i) for i in range(k)]


def test_geographic_nearest_distances_match_geod_brute_force():
    lon, lat = _geographic_sample()
    pts = Points.lonlat(lon, lat)
    cal, ev = _folds(len(lon), 4, seed=1)
    rng = np.random.default_rng(2)
    plon, plat = rng.uniform(-10, 30, 300), rng.uniform(35, 62, 300)
    dd = distance_diagnostics(pts, cal, ev, range_km=150.0, prediction_points=Points.lonlat(plon, plat))

    pred = _geod_matrix_km(plon, plat, lon, lat).min(axis=1)
    # reference: pyproj.Geod brute force over all records
    np.testing.assert_allclose(dd.prediction_to_record_km, pred, rtol=1e-3)
    full = _geod_matrix_km(lon, lat, lon, lat)
    for i in range(4):
        brute = full[np.ix_(ev[i], cal[i])].min(axis=1)
        got = dd.evaluation_to_calibration_km[i]
        # reference: pyproj.Geod brute force (relative error < 1e-3; zero distances compared absolutely)
        np.testing.assert_allclose(got, brute, rtol=1e-3, atol=1e-9)
        assert dd.nn_median_km[i] == pytest.approx(np.median(brute), rel=1e-3)  # reference: numpy on brute force
        assert dd.nn_p10_km[i] == pytest.approx(np.percentile(brute, 10), rel=1e-3)  # reference: numpy
        assert dd.share_within_range[i] == pytest.approx(np.mean(brute < 150.0))  # reference: brute force
        # reference: scipy.stats.wasserstein_distance on the brute-force distances
        assert dd.wasserstein_km[i] == pytest.approx(wasserstein_distance(brute, pred), rel=1e-3)
    np.fill_diagonal(full, np.inf)
    # reference: pyproj.Geod brute force, nearest other record (leave-self-out)
    np.testing.assert_allclose(dd.record_to_record_km, full.min(axis=1), rtol=1e-3, atol=1e-9)
    assert np.all(dd.record_to_record_km[30:33] == 0.0)  # reference: exact duplicates are 0 km apart


def test_projected_nearest_distances_match_cdist():
    rng = np.random.default_rng(5)
    x = rng.uniform(3.5e6, 4.5e6, 500)  # metres in ETRS89-LAEA
    y = rng.uniform(2.5e6, 3.5e6, 500)
    pts = Points(x, y, pyproj.CRS.from_epsg(3035))
    cal, ev = _folds(500, 5, seed=6)
    px, py = rng.uniform(3.5e6, 4.5e6, 200), rng.uniform(2.5e6, 3.5e6, 200)
    dd = distance_diagnostics(pts, cal, ev, range_km=20.0, prediction_points=Points(px, py, pts.crs))
    xy = np.column_stack([x, y])
    pred = cdist(np.column_stack([px, py]), xy).min(axis=1) / 1000.0
    np.testing.assert_allclose(dd.prediction_to_record_km, pred, rtol=1e-12)  # reference: scipy cdist min
    for i in range(5):
        brute = cdist(xy[ev[i]], xy[cal[i]]).min(axis=1) / 1000.0
        # reference: scipy.spatial.distance.cdist min
        np.testing.assert_allclose(dd.evaluation_to_calibration_km[i], brute, rtol=1e-12)
        # reference: scipy.stats.wasserstein_distance
        assert dd.wasserstein_km[i] == pytest.approx(wasserstein_distance(brute, pred), rel=1e-12)
    full = cdist(xy, xy)
    np.fill_diagonal(full, np.inf)
    # reference: scipy cdist min over other records
    np.testing.assert_allclose(dd.record_to_record_km, full.min(axis=1) / 1000.0, rtol=1e-12)


def test_masks_equal_indices_and_kept_records_only():
    lon, lat = _geographic_sample(seed=3, n=120)
    pts = Points.lonlat(lon, lat)
    fold = np.random.default_rng(4).integers(0, 3, 120)
    fold[:20] = -1  # dropped records take part in no set
    cal = [(fold >= 0) & (fold != i) for i in range(3)]
    ev = [fold == i for i in range(3)]
    a = distance_diagnostics(pts, cal, ev)
    b = distance_diagnostics(pts, [np.flatnonzero(c) for c in cal], [np.flatnonzero(e) for e in ev])
    for da, db in zip(a.evaluation_to_calibration_km, b.evaluation_to_calibration_km):
        np.testing.assert_array_equal(da, db)  # reference: same selection given two ways
    assert a.record_to_record_km.size == 100  # reference: 120 records minus 20 dropped
    assert np.all(np.isnan(a.share_within_range))  # no range given -> not computed
    assert np.all(np.isnan(a.wasserstein_km))  # no prediction points -> not computed
    json.dumps(a.to_dict(), allow_nan=False)


def test_empty_fold_gives_nan_not_error():
    pts = Points.lonlat([0.0, 1.0, 2.0], [0.0, 0.0, 0.0])
    dd = distance_diagnostics(pts, [[0, 1], [0, 1, 2]], [[2], []])
    assert dd.n_evaluation.tolist() == [1, 0]
    assert np.isnan(dd.nn_median_km[1])
    # reference: pyproj.Geod distance from (2, 0) to (1, 0)
    assert dd.nn_median_km[0] == pytest.approx(GEOD.inv(2.0, 0.0, 1.0, 0.0)[2] / 1000, rel=1e-9)


def test_nearest_other_lone_point_and_bad_input():
    assert np.isnan(nearest_other_km(Points.lonlat([1.0], [2.0]))[0])
    pts = Points.lonlat([0.0, 1.0], [0.0, np.nan])
    with pytest.raises(InputError):
        distance_diagnostics(pts, [[0]], [[1]])
    ok = Points.lonlat([0.0, 1.0], [0.0, 0.0])
    with pytest.raises(InputError):
        distance_diagnostics(ok, [[0]], [[1], [0]])
    with pytest.raises(InputError):
        distance_diagnostics(ok, [[0]], [[5]])
    with pytest.raises(InputError):
        distance_diagnostics(ok, [[0]], [[1]], range_km=-3)


def test_nearest_other_is_the_brute_force_geodesic_nearest():
    """Leave-self-out nearest neighbours on WGS84. Reference: pyproj.Geod.inv over every pair
    (the smallest distance to any other point; among equal distances, the smallest index).
    Clustered points with exact duplicates and near-ties, where the sphere and the ellipsoid
    can disagree on the order, are the cases the candidate filter must not miss."""
    import pyproj

    from splitter.geo import NeighbourIndex

    rng = np.random.default_rng(12)
    lon = np.r_[rng.normal(10, 0.05, 300), rng.normal(-60, 8, 300)]
    lat = np.r_[rng.normal(60, 0.05, 300), rng.normal(-20, 20, 300)]
    lon[:40], lat[:40] = np.round(lon[:40], 1), np.round(lat[:40], 1)  # duplicates
    d, i = NeighbourIndex(Points.lonlat(lon, lat)).nearest_other()
    n = lon.size
    a, b = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    _, _, dist = pyproj.Geod(ellps="WGS84").inv(lon[a.ravel()], lat[a.ravel()], lon[b.ravel()], lat[b.ravel()])
    dist = dist.reshape(n, n) / 1000.0
    np.fill_diagonal(dist, np.inf)
    np.testing.assert_allclose(d, dist.min(axis=1), rtol=1e-12, atol=1e-9)
    np.testing.assert_array_equal(i, np.argmin(dist, axis=1))  # argmin: the first, smallest index


def test_folds_searched_side_by_side_equal_one_thread(monkeypatch):
    # consistency: the folds and the record-to-record search run on threads of their own
    # (splitter.threads); with SPLITTER_THREADS=1 they run one after another in one thread.
    # The outside check of the same numbers is test_geographic_nearest_distances_match_geod_brute_force.
    lon, lat = _geographic_sample(seed=6, n=600)
    pts = Points.lonlat(lon, lat)
    cal, ev = _folds(600, 5, seed=7)
    pred = Points.lonlat(np.linspace(-10, 30, 50), np.linspace(35, 62, 50))
    monkeypatch.setenv("SPLITTER_THREADS", "3")
    many = distance_diagnostics(pts, cal, ev, range_km=100.0, prediction_points=pred)
    monkeypatch.setenv("SPLITTER_THREADS", "1")
    one = distance_diagnostics(pts, cal, ev, range_km=100.0, prediction_points=pred)
    assert json.dumps(many.to_dict()) == json.dumps(one.to_dict())
    for a, b in zip(many.evaluation_to_calibration_km, one.evaluation_to_calibration_km):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(many.record_to_record_km, one.record_to_record_km)
    np.testing.assert_array_equal(many.prediction_to_record_km, one.prediction_to_record_km)
