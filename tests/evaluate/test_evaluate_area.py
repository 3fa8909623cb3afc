"""Cell areas: true ground area per raster row."""

import numpy as np
import pytest
from affine import Affine
from pyproj import CRS, Geod
from rasterio.crs import CRS as RioCRS

from splitter.errors import InputError
from splitter.evaluate import cell_areas

# A lon/lat raster of 1-degree cells from 75 N down to the equator, 10 columns.
TRANSFORM = Affine(1.0, 0.0, -5.0, 0.0, -1.0, 75.0)
HEIGHT, WIDTH = 75, 10


def _densified_cell(geod_lon0, lon1, lat_top, lat_bottom, steps=200):
    # Geodesic edges between corners on one parallel bow towards the pole; many points
    # along each parallel keep the polygon on the true cell boundary.
    lons = np.linspace(geod_lon0, lon1, steps)
    xs = np.concatenate([lons, lons[::-1]])
    ys = np.concatenate([np.full(steps, lat_bottom), np.full(steps, lat_top)])
    return xs, ys


def test_rows_match_pyproj_geod_polygon_area():
    areas = cell_areas(TRANSFORM, HEIGHT, WIDTH, "EPSG:4326")
    assert areas.shape == (HEIGHT,)  # contract: one area per row (brief)
    geod = Geod(ellps="WGS84")
    for row in range(0, HEIGHT, 7):
        top = 75.0 - row
        xs, ys = _densified_cell(-5.0, -4.0, top, top - 1.0)
        ref, _ = geod.polygon_area_perimeter(xs, ys)  # reference: pyproj.Geod.polygon_area_perimeter
        assert areas[row] == pytest.approx(abs(ref) / 1e6, rel=1e-6)  # reference: pyproj.Geod


def _band_share(crs):
    per_row = cell_areas(TRANSFORM, HEIGHT, WIDTH, crs) * WIDTH
    top_lat = 75.0 - np.arange(HEIGHT)  # upper edge of each row
    band = top_lat > 60.0  # the 15 rows between 60 and 75 N
    return per_row[band].sum() / per_row.sum(), band


# analytic: spherical zone area is proportional to d_lambda * (sin phi2 - sin phi1)
SPHERE_SHARE = (np.sin(np.radians(75)) - np.sin(np.radians(60))) / np.sin(np.radians(75))


def test_band_share_on_a_sphere_is_the_zone_formula():
    share, _ = _band_share("+proj=longlat +R=6371000 +no_defs")
    assert share == pytest.approx(SPHERE_SHARE, rel=1e-12)  # analytic: spherical zone area


def test_band_share_on_wgs84_is_close_to_the_zone_formula_and_far_from_cell_count():
    share, band = _band_share("EPSG:4326")
    # analytic: spherical zone formula. WGS84 is flattened (1/298.257): the same geodetic
    # latitudes enclose about 0.7 % more of the area in this 60-75 N band than on a sphere
    # (0.10416 vs 0.10342), so the tolerance is 1 %, not exact; the exact ellipsoidal check
    # is test_rows_match_pyproj_geod_polygon_area.
    assert share == pytest.approx(SPHERE_SHARE, rel=1e-2)  # analytic: spherical zone formula
    # Counting cells instead gives 15/75 = 0.2, about twice the true share.
    cell_count_share = band.sum() / HEIGHT
    assert cell_count_share == pytest.approx(0.2)  # analytic: 15 of 75 rows
    assert abs(cell_count_share - share) > 0.09  # analytic: 0.2 vs about 0.10


def test_whole_hemisphere_matches_ellipsoid_area():
    # One row from the equator to the pole, 360 degrees wide: half the ellipsoid.
    areas = cell_areas(Affine(360.0, 0, -180.0, 0, -90.0, 90.0), 1, 1, "EPSG:4326")
    # analytic: half the surface of WGS84 is 2 pi R^2 with its authalic radius
    # R = 6371007.1809 m (recalled from memory), about 255.03 million km^2.
    r_auth = 6371007.1809
    assert areas[0] == pytest.approx(2 * np.pi * r_auth**2 / 1e6, rel=1e-9)  # analytic (radius recalled from memory)


def test_bottom_up_raster_gives_same_areas():
    up = cell_areas(Affine(1.0, 0, -5.0, 0, 1.0, 0.0), HEIGHT, WIDTH, "EPSG:4326")
    down = cell_areas(TRANSFORM, HEIGHT, WIDTH, "EPSG:4326")
    # analytic: same rows, listed in the opposite order
    np.testing.assert_allclose(up, down[::-1], rtol=1e-12)


def test_rasterio_crs_is_accepted():
    a = cell_areas(TRANSFORM, 3, 3, RioCRS.from_epsg(4326))
    b = cell_areas(TRANSFORM, 3, 3, CRS.from_epsg(4326))
    np.testing.assert_array_equal(a, b)  # reference: same CRS given two ways


def test_projected_metres_and_feet():
    # EPSG:3035 (metres): 1 km cells are 1 km^2
    km = cell_areas(Affine(1000.0, 0, 4e6, 0, -1000.0, 3e6), 4, 5, "EPSG:3035")
    np.testing.assert_allclose(km, 1.0, rtol=1e-12)  # analytic
    # EPSG:2227 (US survey feet): a US survey foot is 1200/3937 m
    ft = cell_areas(Affine(100.0, 0, 0, 0, -100.0, 0), 2, 2, "EPSG:2227")
    np.testing.assert_allclose(ft, (100 * 1200 / 3937) ** 2 / 1e6, rtol=1e-12)  # analytic: unit definition


def test_bad_inputs():
    with pytest.raises(InputError, match="CRS"):
        cell_areas(TRANSFORM, 3, 3, None)
    with pytest.raises(InputError, match="rotated"):
        cell_areas(Affine(1.0, 0.1, 0, 0.1, -1.0, 0), 3, 3, "EPSG:4326")
    with pytest.raises(InputError, match="empty"):
        cell_areas(TRANSFORM, 0, 3, "EPSG:4326")
