import numpy as np
import pyproj
import shapely
from hypothesis import given, settings, strategies as st

from splitter.geo import Points, equal_area_crs
from splitter.partition.checkerboard import checkerboard_folds
from splitter.partition.grid import hexagon_cells, hexagon_corners, square_cell_corners, square_cells

GEOD = pyproj.Geod(ellps="WGS84")


def _geodesic_area_km2(corners_m, crs, densify=20):
    """Area of a planar cell outline measured on the ellipsoid after projecting back."""
    ring = np.vstack([corners_m, corners_m[:1]])
    pts = []
    for a, b in zip(ring[:-1], ring[1:]):
        t = np.linspace(0, 1, densify, endpoint=False)[:, None]
        pts.append(a + t * (b - a))
    pts = np.vstack(pts)
    lon, lat = pyproj.Transformer.from_crs(crs, 4326, always_xy=True).transform(pts[:, 0], pts[:, 1])
    area, _ = GEOD.polygon_area_perimeter(lon, lat)
    return abs(area) / 1e6


def test_square_blocks_are_L_by_L_km_anywhere_on_the_globe():
    # Records spread over a continent-sized area at several latitudes, high latitude included.
    for lon0, lat0 in [(0, 0), (20, 45), (-60, -40), (100, 72), (30, -75)]:
        pts = Points.lonlat([lon0 - 15, lon0 + 15], [max(lat0 - 8, -89), min(lat0 + 8, 89)])
        crs = equal_area_crs(pts)
        L = 50.0
        for i, j in [(0, 0), (-14, 12), (13, -15)]:
            corners = square_cell_corners([i], [j], L)[0] * 1000
            # reference: pyproj.Geod.polygon_area_perimeter; asked: within 1 % of L^2
            assert abs(_geodesic_area_km2(corners, crs) - L * L) / (L * L) < 0.01


def test_hexagons_have_the_area_of_an_L_block_and_hold_their_nearest_points():
    L = 30.0
    corners = hexagon_corners([0, 2, -3], [0, -1, 4], L)
    for c in corners:
        # reference: analytic (shapely polygon area of the six corners) equals L^2 by construction
        assert abs(shapely.Polygon(c).area - L * L) < 1e-6
    rng = np.random.default_rng(0)
    x, y = rng.uniform(-200, 200, 4000), rng.uniform(-200, 200, 4000)
    q, r = hexagon_cells(x, y, L)
    cand_q, cand_r = np.meshgrid(np.arange(-12, 13), np.arange(-12, 13))
    cq, cr = cand_q.ravel(), cand_r.ravel()
    cen = hexagon_corners(cq, cr, L).mean(axis=1)
    d = np.hypot(x[:, None] - cen[None, :, 0], y[:, None] - cen[None, :, 1])
    best = d.argmin(axis=1)
    # reference: analytic — a regular hexagonal tiling is the Voronoi diagram of its centres
    assert np.array_equal(q, cq[best]) and np.array_equal(r, cr[best])


def test_square_cells_contain_their_points():
    rng = np.random.default_rng(1)
    x, y = rng.uniform(-500, 500, 1000), rng.uniform(-500, 500, 1000)
    i, j = square_cells(x, y, 37.0, offset=(5.0, 11.0))
    c = square_cell_corners(i, j, 37.0, offset=(5.0, 11.0))
    # reference: analytic — the point lies inside its cell's corners
    assert np.all((c[:, 0, 0] <= x) & (x < c[:, 1, 0]) & (c[:, 0, 1] <= y) & (y < c[:, 2, 1]))


@settings(max_examples=60, deadline=None, derandomize=True, database=None)
@given(st.sampled_from([2, 4, 5, 6, 7, 9, 12]), st.integers(-50, 50), st.integers(-50, 50))
def test_checkerboard_adjacent_cells_never_share_a_fold(k, i0, j0):
    i, j = np.meshgrid(np.arange(i0, i0 + 6), np.arange(j0, j0 + 6), indexing="ij")
    f = checkerboard_folds(i.ravel(), j.ravel(), k).reshape(i.shape)
    assert f.min() >= 1 and f.max() <= k
    # rook neighbours (common practice: the checkerboard definition of DESIGN §4)
    assert np.all(f[1:, :] != f[:-1, :]) and np.all(f[:, 1:] != f[:, :-1])
    if k >= 4:  # queen neighbours too
        assert np.all(f[1:, 1:] != f[:-1, :-1]) and np.all(f[1:, :-1] != f[:-1, 1:])
    if k in (2, 4):
        assert len(np.unique(f)) == k
