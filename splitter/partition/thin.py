"""Thinning presences before folds are made: one per raster cell, or none closer than a distance.

Repeat visits and clusters of records in one place both inflate a model's apparent
fit and hide dependence between calibration and evaluation data, so thinning them
first is common practice. Only presences are thinned; absences and background stay.
Both rules are seeded and deterministic, and loop over rounds, never over records.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from splitter.errors import InputError
from splitter.geo import _SPHERE_SLACK, Points, _chord, _geodesic_km, _unit_factor_km, _unit_xyz


@dataclass(frozen=True)
class Thinning:
    """Which presences a thinning rule keeps.

    Attributes
    ----------
    keep : ndarray of bool
        One per input point; False only for presences the rule removed.
    rule : str
        ``"cell"`` (one presence per raster cell) or ``"distance"`` (none closer than ``min_km``).
    min_km : float or None
    before, after : int
        Presences considered, and presences kept.
    """

    keep: np.ndarray
    rule: str
    min_km: float | None
    before: int
    after: int

    def to_dict(self) -> dict:
        return {"thin": "cell" if self.rule == "cell" else self.min_km, "presence_before_thinning": self.before,
                "presence_after_thinning": self.after}


def check_thin(thin):
    """``"cell"`` or a distance in km greater than 0 (text or number); None means no thinning."""
    if thin is None:
        return None
    if isinstance(thin, str) and thin.strip().lower() == "cell":
        return "cell"
    try:
        value = float(thin) if not isinstance(thin, bool) and (isinstance(thin, numbers.Real) or
                                                               isinstance(thin, str)) else np.nan
    except ValueError:
        value = np.nan
    if not np.isfinite(value) or value <= 0:
        raise InputError(f"thin={thin!r}: give 'cell' (one presence per cell of the first `env` raster) or a "
                         "distance in km greater than 0 (no two presences closer).")
    return value


def thin_cells(cell, candidate, seed: int = 0) -> Thinning:
    """Keep one candidate per cell, chosen at random (seeded).

    Candidates with a negative cell (outside the raster) are kept as they are.

    Examples
    --------
    >>> t = thin_cells([4, 4, 4, 7, -1, 7], [True, True, True, True, True, False], seed=0)
    >>> int(t.keep[[0, 1, 2]].sum()), t.keep[3:].tolist(), (t.before, t.after)
    (1, [True, True, True], (5, 3))
    """
    cell = np.asarray(cell, np.int64)
    candidate = np.asarray(candidate, bool)
    idx = np.flatnonzero(candidate & (cell >= 0))
    perm = np.random.default_rng(seed).permutation(idx)
    _, first = np.unique(cell[perm], return_index=True)
    keep = ~candidate | (cell < 0)
    keep[perm[first]] = True
    return Thinning(keep, "cell", None, int(candidate.sum()), int((keep & candidate).sum()))


def _close_pairs(points: Points, min_km: float) -> tuple[np.ndarray, np.ndarray]:
    """Pairs (i < j) of points closer than ``min_km`` (geodesic for lon/lat, else Euclidean)."""
    if points.geographic:
        tree = cKDTree(_unit_xyz(points))
        pairs = tree.query_pairs(float(_chord(min_km * _SPHERE_SLACK)), output_type="ndarray")
        ll = points.to_lonlat()
        i, j = pairs[:, 0], pairs[:, 1]
        d = _geodesic_km(ll.x[i], ll.y[i], ll.x[j], ll.y[j])
    else:
        f = _unit_factor_km(points.crs)
        xy = np.column_stack([points.x * f, points.y * f])
        pairs = cKDTree(xy).query_pairs(min_km, output_type="ndarray")
        i, j = pairs[:, 0], pairs[:, 1]
        d = np.hypot(*(xy[i] - xy[j]).T)
    close = d < min_km
    return i[close], j[close]


def thin_distance(points: Points, candidate, min_km: float, seed: int = 0) -> Thinning:
    """Keep candidates so that no two kept ones are closer than ``min_km`` km.

    The result is what visiting the candidates in a seeded random order and keeping
    each one with no kept candidate within ``min_km`` gives; it is found in rounds
    (each round keeps every candidate that comes before all its remaining close
    neighbours, then removes those neighbours), so no loop runs over records.
    Every candidate removed has a kept one closer than ``min_km``.

    Examples
    --------
    >>> import pyproj
    >>> p = Points([0.0, 0.5, 3.0, 3.2, 9.0], [0.0] * 5, pyproj.CRS.from_epsg(3035))
    >>> t = thin_distance(Points(p.x * 1000, p.y, p.crs), [True] * 5, 1.0, seed=1)
    >>> (t.before, t.after), bool(t.keep[4])
    ((5, 3), True)
    """
    candidate = np.asarray(candidate, bool)
    idx = np.flatnonzero(candidate)
    m = idx.size
    i, j = _close_pairs(points.take(idx), float(min_km))
    rank = np.empty(m, np.int64)
    rank[np.random.default_rng(seed).permutation(m)] = np.arange(m)
    active = np.ones(m, bool)
    kept = np.zeros(m, bool)
    while active.any():
        live = active[i] & active[j]
        a, b = i[live], j[live]
        later = np.zeros(m, bool)  # a close, still active neighbour comes first
        a_first = rank[a] < rank[b]
        later[b[a_first]] = True
        later[a[~a_first]] = True
        win = active & ~later
        kept |= win
        gone = win.copy()
        gone[b[win[a]]] = True
        gone[a[win[b]]] = True
        active &= ~gone
    keep = ~candidate
    keep[idx[kept]] = True
    return Thinning(keep, "distance", float(min_km), int(m), int(kept.sum()))
