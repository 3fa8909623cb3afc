"""Checkerboard folds: adjacent lattice cells never share a fold."""

from __future__ import annotations

import numpy as np

from splitter.errors import InputError


def checkerboard_folds(i, j, k: int) -> np.ndarray:
    """Fold (1..k) of square lattice cell (i, j).

    k = 2: rook-adjacent cells differ (the classic two-colour board).
    k = 4: a 2 x 2 tile, so queen-adjacent cells (sharing an edge or a corner) differ.
    k >= 5: fold = (i + 2 j) mod k; queen neighbours differ because
    di + 2 dj lies in -3..3 and is 0 only for the cell itself.

    Examples
    --------
    >>> checkerboard_folds([0, 1, 0, 1], [0, 0, 1, 1], 2)
    array([1, 2, 2, 1])
    """
    i = np.asarray(i, np.int64)
    j = np.asarray(j, np.int64)
    if k == 2:
        return (np.mod(i + j, 2) + 1).astype(np.int64)
    if k == 4:
        return (np.mod(i, 2) + 2 * np.mod(j, 2) + 1).astype(np.int64)
    if k >= 5:
        return (np.mod(i + 2 * j, k) + 1).astype(np.int64)
    raise InputError(
        f"--folds {k}: a checkerboard needs 2, 4 or at least 5 folds so that adjacent cells never share one."
    )
