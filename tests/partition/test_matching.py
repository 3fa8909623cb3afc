from pathlib import Path

import numpy as np
import pyproj
from scipy.stats import wasserstein_distance

import splitter
from splitter.io.rasters import sample_valid_locations
from tests.conftest import write_records_csv

DEMO = Path(__file__).resolve().parents[2] / "demo_data"
GEOD = pyproj.Geod(ellps="WGS84")


def _brute_nearest_km(q_lon, q_lat, r_lon, r_lat):
    # reference: pyproj.Geod brute force over all pairs
    a, b = np.meshgrid(q_lon, r_lon, indexing="ij")
    c, d = np.meshgrid(q_lat, r_lat, indexing="ij")
    _, _, dist = GEOD.inv(a.ravel(), c.ravel(), b.ravel(), d.ravel())
    return dist.reshape(a.shape).min(axis=1) / 1000


def test_match_keeps_the_rung_with_the_smallest_distance_mismatch(tmp_path):
    src = write_records_csv(tmp_path / "r.csv", n_presence=150, n_background=0, lon0=-38, lat0=45)
    env = [DEMO / "temperature.tif"]
    a = splitter.design(src, method="blocks", folds=4, block_size="match", env=env, seed=5)
    ladder = a.parameters["ladder"]
    w = np.array([r["wasserstein_km"] if r["wasserstein_km"] is not None else np.inf for r in ladder["rungs"]])
    sizes = np.array([r["block_km"] for r in ladder["rungs"]])
    assert ladder["chosen_km"] == sizes[np.argmin(w)] == a.parameters["block_size_km"]
    # Recompute the chosen rung's mismatch independently: geodesic brute force + scipy's W1.
    recs = a.records
    pres = np.flatnonzero((recs.kind == "presence") & recs.kept)
    pred = sample_valid_locations([str(p) for p in env], 2000, 5).to_lonlat()
    lon, lat = recs.points.x, recs.points.y
    target = _brute_nearest_km(pred.x, pred.y, lon[pres], lat[pres])
    dists = []
    for i in a.folds:
        ev = np.intersect1d(a.evaluation(i), pres)
        cal = np.setdiff1d(pres, ev)
        dists.append(_brute_nearest_km(lon[ev], lat[ev], lon[cal], lat[cal]))
    # reference: scipy.stats.wasserstein_distance
    ref = wasserstein_distance(np.concatenate(dists), target)
    assert abs(ref - w.min()) < 1e-6 * max(ref, 1)
