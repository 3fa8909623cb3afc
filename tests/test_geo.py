import numpy as np
import pyproj
from hypothesis import given, settings, strategies as st

from splitter.geo import NeighbourIndex, Points, distance_km, equal_area_crs, planar_km

GEOD = pyproj.Geod(ellps="WGS84")


def brute_nearest_km(q: Points, r: Points) -> np.ndarray:
    # reference: pyproj.Geod.inv brute force over every pair
    out = np.empty(len(q))
    for j in range(len(q)):
        _, _, d = GEOD.inv(np.full(len(r), q.x[j]), np.full(len(r), q.y[j]), r.x, r.y)
        out[j] = d.min() / 1000
    return out


def test_nearest_equals_geod_brute_force_worldwide():
    rng = np.random.default_rng(3)
    q = Points.lonlat(rng.uniform(-180, 180, 300), rng.uniform(-89, 89, 300))
    r = Points.lonlat(rng.uniform(-180, 180, 500), rng.uniform(-89, 89, 500))
    d, i = NeighbourIndex(r).nearest(q)
    ref = brute_nearest_km(q, r)
    # reference: pyproj.Geod brute force; relative error < 1e-3 asked, exact expected
    np.testing.assert_allclose(d, ref, rtol=1e-9)
    np.testing.assert_allclose(distance_km(q, r.take(i)), ref, rtol=1e-9)


@settings(max_examples=25, deadline=None, derandomize=True, database=None)
@given(st.integers(0, 10_000), st.floats(-80, 80))
def test_nearest_dense_cluster_matches_brute_force(seed, lat0):
    rng = np.random.default_rng(seed)
    q = Points.lonlat(rng.normal(10, 0.05, 40), np.clip(rng.normal(lat0, 0.05, 40), -89, 89))
    r = Points.lonlat(rng.normal(10, 0.05, 60), np.clip(rng.normal(lat0, 0.05, 60), -89, 89))
    d, _ = NeighbourIndex(r).nearest(q)
    # reference: pyproj.Geod brute force
    np.testing.assert_allclose(d, brute_nearest_km(q, r), rtol=1e-9, atol=1e-9)


def test_projected_distances_are_euclidean_km():
    crs = pyproj.CRS.from_epsg(3035)
    a = Points(np.array([4_000_000.0]), np.array([3_000_000.0]), crs)
    b = Points(np.array([4_003_000.0]), np.array([3_004_000.0]), crs)
    # reference: analytic (3-4-5 triangle in metres -> 5 km)
    assert distance_km(a, b)[0] == 5.0
    assert NeighbourIndex(b).nearest(a)[0][0] == 5.0


def test_equal_area_crs_preserves_area_far_from_centre():
    pts = Points.lonlat([0.0, 40.0], [35.0, 70.0])
    crs = equal_area_crs(pts)
    x, y = planar_km(Points.lonlat([39.0, 39.1, 39.1, 39.0], [69.0, 69.0, 69.1, 69.1]), crs)
    planar_area = 0.5 * abs(np.dot(x, np.roll(y, 1)) - np.dot(y, np.roll(x, 1)))
    # reference: pyproj.Geod.polygon_area_perimeter of the same (small) cell
    geod_area, _ = GEOD.polygon_area_perimeter([39.0, 39.1, 39.1, 39.0], [69.0, 69.0, 69.1, 69.1])
    assert abs(planar_area - abs(geod_area) / 1e6) / (abs(geod_area) / 1e6) < 1e-3


def test_distance_along_the_equator_is_the_equatorial_arc():
    a = Points.lonlat([0.0], [0.0])
    b = Points.lonlat([1.0], [0.0])
    # reference: analytic, WGS84 equatorial radius 6378.137 km times pi/180 (the equator is a geodesic)
    np.testing.assert_allclose(distance_km(a, b), [6378.137 * np.pi / 180], rtol=1e-12)


def test_distance_km_refuses_point_sets_of_different_lengths():
    import pytest

    from splitter.errors import InputError

    with pytest.raises(InputError, match="a has 2 points and b has 1"):
        distance_km(Points.lonlat([10.0, 11.0], [45.0, 45.0]), Points.lonlat([10.0], [46.0]))


def test_distance_km_refuses_bad_coordinates_in_one_sentence():
    import pytest

    from splitter.errors import InputError

    ok = Points.lonlat([0.0, 1.0], [0.0, 0.0])
    for lon, lat, what in (([0.0, 1.0], [0.0, 95.0], "latitude"), ([0.0, np.nan], [0.0, 0.0], "missing"),
                           ([0.0, 500.0], [0.0, 0.0], "longitude")):
        with pytest.raises(InputError, match=f"point 1 of b .*{what}") as info:
            distance_km(ok, Points.lonlat(lon, lat))
        assert "\n" not in str(info.value)
    planar = Points(np.array([0.0, 1.0]), np.array([0.0, 1.0]), pyproj.CRS.from_wkt(
        'ENGCRS["local",EDATUM["site"],CS[Cartesian,2],AXIS["x",east,LENGTHUNIT["metre",1]],'
        'AXIS["y",north,LENGTHUNIT["metre",1]]]'))
    with pytest.raises(InputError, match="cannot be converted"):
        distance_km(ok, planar)  # no transformation exists from a local engineering CRS (pyproj raises ProjError)


def test_geodesics_in_parts_over_threads_equal_one_pyproj_call():
    from splitter.geo import _geodesic_km

    rng = np.random.default_rng(8)
    n = 45_001  # several parts of uneven length over two and three threads
    lon1, lat1 = rng.uniform(-180, 180, n), rng.uniform(-89, 89, n)
    lon2, lat2 = lon1 + rng.normal(0, 2, n), np.clip(lat1 + rng.normal(0, 2, n), -89.9, 89.9)
    # reference: one pyproj.Geod.inv call over every pair
    whole = np.asarray(GEOD.inv(lon1, lat1, lon2, lat2)[2]) / 1000.0
    for workers in (1, 2, 3):
        np.testing.assert_array_equal(_geodesic_km(lon1, lat1, lon2, lat2, workers), whole)
