"""Square and hexagonal cells laid over planar (equal-area) coordinates in km."""

from __future__ import annotations

import numpy as np

# A hexagon with flat-to-flat width w has area (sqrt(3)/2) w^2; choosing
# w = L * sqrt(2/sqrt(3)) gives hexagons the same area as an L x L block.
HEX_WIDTH_PER_BLOCK = float(np.sqrt(2.0 / np.sqrt(3.0)))


def square_cells(x_km, y_km, size_km: float, offset=(0.0, 0.0)) -> tuple[np.ndarray, np.ndarray]:
    """Column and row index of the ``size_km`` square cell holding each point.

    The lattice origin is shifted by ``offset`` (km), so a seeded offset moves
    the grid without changing its size.

    Examples
    --------
    >>> square_cells([0.5, 1.5], [0.5, 0.5], 1.0)
    (array([0, 1]), array([0, 0]))
    """
    x = (np.asarray(x_km, float) - offset[0]) / size_km
    y = (np.asarray(y_km, float) - offset[1]) / size_km
    return np.floor(x).astype(np.int64), np.floor(y).astype(np.int64)


def square_cell_corners(i, j, size_km: float, offset=(0.0, 0.0)) -> np.ndarray:
    """Corner coordinates (n, 4, 2) in km of square cells (counter-clockwise)."""
    i = np.asarray(i, float)
    j = np.asarray(j, float)
    x0 = i * size_km + offset[0]
    y0 = j * size_km + offset[1]
    dx = np.array([0, 1, 1, 0]) * size_km
    dy = np.array([0, 0, 1, 1]) * size_km
    return np.stack([x0[:, None] + dx, y0[:, None] + dy], axis=-1)


def hexagon_cells(x_km, y_km, size_km: float, offset=(0.0, 0.0)) -> tuple[np.ndarray, np.ndarray]:
    """Axial (q, r) index of the pointy-top hexagon holding each point.

    Hexagons have the same area as a ``size_km`` square block (flat-to-flat
    width ``size_km * 1.0746``). Vectorised cube rounding.
    """
    w = size_km * HEX_WIDTH_PER_BLOCK
    radius = w / np.sqrt(3.0)  # centre-to-corner distance of a pointy-top hexagon
    x = (np.asarray(x_km, float) - offset[0]) / radius
    y = (np.asarray(y_km, float) - offset[1]) / radius
    qf = (np.sqrt(3.0) / 3.0) * x - y / 3.0
    rf = (2.0 / 3.0) * y
    sf = -qf - rf
    q, r, s = np.round(qf), np.round(rf), np.round(sf)
    dq, dr, ds = np.abs(q - qf), np.abs(r - rf), np.abs(s - sf)
    fix_q = (dq > dr) & (dq > ds)
    fix_r = ~fix_q & (dr > ds)
    q = np.where(fix_q, -r - s, q)
    r = np.where(fix_r, -q - s, r)
    return q.astype(np.int64), r.astype(np.int64)


def hexagon_corners(q, r, size_km: float, offset=(0.0, 0.0)) -> np.ndarray:
    """Corner coordinates (n, 6, 2) in km of pointy-top hexagons."""
    w = size_km * HEX_WIDTH_PER_BLOCK
    radius = w / np.sqrt(3.0)
    q = np.asarray(q, float)
    r = np.asarray(r, float)
    cx = radius * (np.sqrt(3.0) * q + np.sqrt(3.0) / 2.0 * r) + offset[0]
    cy = radius * (1.5 * r) + offset[1]
    ang = np.deg2rad(60.0 * np.arange(6) - 30.0)
    return np.stack([cx[:, None] + radius * np.cos(ang), cy[:, None] + radius * np.sin(ang)], axis=-1)


def cell_keys(a, b) -> np.ndarray:
    """One int64 key per (a, b) cell index pair, for grouping."""
    a = np.asarray(a, np.int64)
    b = np.asarray(b, np.int64)
    return (a << 32) ^ (b & 0xFFFFFFFF)
