"""Buffered exclusion: calibration records near a fold's evaluation records."""

from __future__ import annotations

import numpy as np

from splitter.geo import NeighbourIndex, Points, adjacent_cells, proximity_cells


def buffer_gaps(points: Points, fold: np.ndarray, radius_km: float) -> tuple[np.ndarray, np.ndarray]:
    """Rows to leave out of each fold's calibration set.

    For fold i, every kept record not in fold i that lies closer than
    ``radius_km`` (geodesic, or planar for a projected CRS) to any fold-i
    evaluation record is returned as a (row, i) pair. Guarantee: after removal,
    no calibration record of fold i is closer than ``radius_km`` to a fold-i
    evaluation record.

    Returns
    -------
    rows, folds : ndarray of int
    """
    fold = np.asarray(fold)
    rows_out, folds_out = [], []
    if radius_km <= 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    # Only records in or next to a cell holding fold i's evaluation records can be near them:
    # with folds laid in blocks most calibration records are far from any other fold.
    kept = np.flatnonzero(fold >= 0)
    cells = np.zeros(fold.size, np.int64)
    cells[kept] = proximity_cells(points.take(kept), radius_km)
    for i in np.unique(fold[fold >= 1]):
        ev = np.flatnonzero(fold == i)
        cand = np.flatnonzero((fold >= 0) & (fold != i))
        if not ev.size or not cand.size:
            continue
        cand = cand[np.isin(cells[cand], adjacent_cells(cells[ev], points, radius_km))]
        if not cand.size:
            continue
        hit = cand[NeighbourIndex(points.take(ev)).within(points.take(cand), radius_km)]
        rows_out.append(hit)
        folds_out.append(np.full(hit.size, i, np.int64))
    if not rows_out:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    return np.concatenate(rows_out).astype(np.int64), np.concatenate(folds_out)
