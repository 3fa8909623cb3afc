"""The buffer's cell prefilter never drops a record that is within the radius.

Reference: pyproj.Geod.inv distances between every pair (geographic) and Euclidean
distances (projected), computed in the test; the buffer's gaps must equal the pairs
closer than the radius that belong to different folds. Points invented, seeded, with
many pairs near the radius on purpose.
"""

from __future__ import annotations

import numpy as np
import pyproj
import pytest

from splitter.geo import Points, adjacent_cells, proximity_cells
from splitter.partition import buffer_gaps


def _gaps_by_brute_force(dist, fold, radius):
    rows, folds = [], []
    for i in np.unique(fold[fold >= 1]):
        ev = fold == i
        near = (dist[:, ev] < radius).any(axis=1) & (fold >= 0) & ~ev
        rows.append(np.flatnonzero(near))
        folds.append(np.full(near.sum(), i))
    return set(zip(np.concatenate(rows).tolist(), np.concatenate(folds).tolist()))


@pytest.mark.parametrize("seed", range(3))
def test_geographic_gaps_equal_brute_force(seed):
    rng = np.random.default_rng(seed)
    n = 400
    lon, lat = rng.uniform(10, 10.6, n), rng.uniform(60, 60.4, n)  # far north: degrees shrink east-west
    fold = rng.integers(1, 5, n)
    fold[:10] = -1  # dropped records take no part
    geod = pyproj.Geod(ellps="WGS84")
    a = np.repeat(np.arange(n), n)
    b = np.tile(np.arange(n), n)
    _, _, d = geod.inv(lon[a], lat[a], lon[b], lat[b])
    dist = (d / 1000).reshape(n, n)
    got = buffer_gaps(Points.lonlat(lon, lat), fold, 5.0)
    assert set(zip(got[0].tolist(), got[1].tolist())) == _gaps_by_brute_force(dist, fold, 5.0)


def test_projected_gaps_equal_brute_force():
    rng = np.random.default_rng(9)
    x, y = rng.uniform(0, 40_000, 300), rng.uniform(0, 30_000, 300)  # metres
    fold = rng.integers(1, 4, 300)
    dist = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :]) / 1000
    got = buffer_gaps(Points(x, y, pyproj.CRS("EPSG:3035")), fold, 3.0)
    assert set(zip(got[0].tolist(), got[1].tolist())) == _gaps_by_brute_force(dist, fold, 3.0)


def test_every_close_pair_is_in_adjacent_cells():
    rng = np.random.default_rng(4)
    lon, lat = rng.uniform(-180, 180, 3000), rng.uniform(-89, 89, 3000)
    lon2, lat2, _ = pyproj.Geod(ellps="WGS84").fwd(lon, lat, rng.uniform(0, 360, 3000), rng.uniform(0, 9999, 3000))
    p, q = Points.lonlat(lon, lat), Points.lonlat(lon2, lat2)  # each q within 10 km of its p
    cp, cq = proximity_cells(p, 10.0), proximity_cells(q, 10.0)
    assert all(np.isin(cq[k], adjacent_cells(cp[k:k + 1], p, 10.0)) for k in range(3000))
