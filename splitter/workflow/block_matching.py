"""Block size matched to the prediction task.

Tries a ladder of block sizes and keeps the one whose evaluation-to-calibration
nearest-neighbour distances are distributed most like the distances from
prediction locations to their nearest record (smallest Wasserstein-1 distance;
nearest-neighbour distance matching, Methods in Ecology and Evolution 2022).
Small blocks give short evaluation distances (interpolation), large blocks long
ones (extrapolation); the match picks the size whose test resembles the use.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import wasserstein_distance

from splitter.errors import InputError
from splitter.geo import NeighbourIndex, Points

RUNGS = 8


@dataclass(frozen=True)
class BlockLadder:
    """Every block size tried, its distance mismatch and fold balance."""

    sizes_km: np.ndarray
    wasserstein_km: np.ndarray
    imbalance: np.ndarray
    chosen_km: float
    prediction_locations: str

    def to_dict(self) -> dict:
        return {
            "chosen_km": float(self.chosen_km),
            "prediction_locations": self.prediction_locations,
            "rule": "smallest Wasserstein-1 distance between evaluation-to-calibration and prediction-to-record nearest-neighbour distances",
            "rungs": [
                {"block_km": float(s), "wasserstein_km": None if not np.isfinite(w) else float(w),
                 "presence_imbalance": None if not np.isfinite(b) else float(b)}
                for s, w, b in zip(self.sizes_km, self.wasserstein_km, self.imbalance)
            ],
        }


def _prediction_points(points: Points, env, seed, n=2000) -> tuple[Points, str]:
    if env:
        from splitter.io.rasters import sample_valid_locations

        return sample_valid_locations([str(p) for p in env], n, seed), f"{n} locations sampled by area over the --env rasters' valid cells"
    import shapely

    from splitter.geo import equal_area_crs, planar_km

    pts = points
    crs = equal_area_crs(pts) if pts.geographic else pts.crs
    x, y = planar_km(pts, crs)
    hull = shapely.MultiPoint(np.column_stack([x, y])).convex_hull
    rng = np.random.default_rng(seed)
    minx, miny, maxx, maxy = hull.bounds
    xs, ys = np.zeros(0), np.zeros(0)
    for _ in range(100):
        if xs.size >= n:
            break
        cx, cy = rng.uniform(minx, maxx, 4 * n), rng.uniform(miny, maxy, 4 * n)
        keep = shapely.contains_xy(hull, cx, cy)
        xs, ys = np.r_[xs, cx[keep]], np.r_[ys, cy[keep]]
    if xs.size == 0:
        raise InputError("block_size='match': the records span no area; give `env` rasters or a block size in km.")
    factor = crs.axis_info[0].unit_conversion_factor / 1000.0
    return Points(xs[:n] / factor, ys[:n] / factor, crs).to_crs(points.crs), f"{n} locations sampled by area inside the records' convex hull"


def match_block_size(rule, points: Points, x_km, y_km, is_pres) -> BlockLadder:
    """Try a ladder of block sizes with ``rule`` (a SpatialBlocks, Hexagons or
    Checkerboard); keep the one that best matches the prediction task.

    ``points`` are the usable records, ``x_km, y_km`` their planar coordinates
    in km and ``is_pres`` marks the presences.
    """
    folds = rule.folds
    pres_pts = points.take(np.flatnonzero(is_pres))
    pred_pts, how = _prediction_points(points, rule.env, rule.seed)
    target = NeighbourIndex(pres_pts).nearest(pred_pts)[0]
    # Ladder: from 1/60 of the records' extent to a size that still leaves
    # about two cells per fold, in geometric steps.
    extent = max(np.ptp(x_km), np.ptp(y_km))
    lo = max(extent / 60.0, 1e-3)
    hi = max(extent / np.sqrt(2.0 * folds), lo * 1.5)
    sizes = np.geomspace(lo, hi, RUNGS)
    w = np.full(RUNGS, np.nan)
    imb = np.full(RUNGS, np.nan)
    # The checkerboard ladder is laid on the unshifted grid (as it always was).
    fixed = {"offset": (0.0, 0.0)} if rule.method == "checkerboard" else {}
    for r, size in enumerate(sizes):
        try:
            f, measured = rule.folds_at(x_km, y_km, is_pres, size, **fixed)
        except InputError:
            continue
        if "presence_imbalance" in measured:
            imb[r] = measured["presence_imbalance"]
        else:
            counts = np.bincount(f[is_pres], minlength=folds + 1)[1:]
            if (counts == 0).any():
                continue
            imb[r] = (counts.max() - counts.min()) / counts.mean()
        fp = f[is_pres]
        dists = []
        for q in range(1, folds + 1):
            ev, cal = fp == q, fp != q
            if ev.any() and cal.any():
                dists.append(NeighbourIndex(pres_pts.take(np.flatnonzero(cal))).nearest(pres_pts.take(np.flatnonzero(ev)))[0])
        if dists:
            w[r] = wasserstein_distance(np.concatenate(dists), target)
    if not np.isfinite(w).any():
        raise InputError("block_size='match': no block size on the ladder gave enough occupied cells; give a block size in km.")
    best = int(np.nanargmin(w))
    return BlockLadder(sizes, w, imb, float(sizes[best]), how)
