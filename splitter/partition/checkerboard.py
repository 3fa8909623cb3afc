"""Checkerboard folds: adjacent lattice cells never share a fold.

``checkerboard_folds`` is the array function; ``Checkerboard`` is the rule.
"""

from __future__ import annotations

import numpy as np

from splitter.errors import InputError
from splitter.geo import equal_area_crs, planar_km
from splitter.partition.base import RuleFolds, RuleInput
from splitter.partition.blocks import _CellRule, resolve_block_size
from splitter.partition.grid import square_cells


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
    raise InputError(f"folds={k}: {CHECKERBOARD_FOLDS}")


CHECKERBOARD_FOLDS = "a checkerboard needs 2, 4 or at least 5 folds so that adjacent cells never share one."


class Checkerboard(_CellRule):
    """Square cells of ``block_size`` km coloured so that neighbouring cells never
    share a fold (see :func:`checkerboard_folds`); the grid origin is shifted
    by a seeded random offset unless ``random_offset=False``.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import Checkerboard  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": [500, 1500, 500, 1500], "y": [500, 500, 1500, 1500]})  # metres
    >>> rule = Checkerboard(folds=2, block_size=1.0, random_offset=False)
    >>> rule.assign(pts, crs="EPSG:3035").fold.tolist()
    [1, 2, 2, 1]
    >>> Checkerboard(folds=3, block_size=1.0)
    Traceback (most recent call last):
    ...
    splitter.errors.InputError: folds=3: a checkerboard needs 2, 4 or at least 5 folds so that adjacent cells never share one.
    """

    method = "checkerboard"

    def _check_folds_here(self):
        if self.folds == 3:
            raise InputError(f"folds={self.folds}: {CHECKERBOARD_FOLDS}")

    def offset(self, size_km: float) -> tuple:
        if not self.random_offset:
            return (0.0, 0.0)
        return tuple(float(v) for v in np.random.default_rng(self.seed).uniform(0, size_km, 2))

    def folds_at(self, x_km, y_km, is_presence, size_km: float, offset=None) -> tuple[np.ndarray, dict]:
        off = self.offset(size_km) if offset is None else offset
        i, j = square_cells(x_km, y_km, size_km, off)
        return checkerboard_folds(i, j, self.folds), {"grid_offset_km": off}

    def _folds(self, data: RuleInput) -> RuleFolds:
        pts = data.points
        crs = pts.crs if not pts.geographic else equal_area_crs(pts)
        x_km, y_km = planar_km(pts, crs)
        size, measured = resolve_block_size(self, data)
        fold, more = self.folds_at(x_km, y_km, data.is_presence, size)
        for q in range(1, self.folds + 1):
            if not np.any(data.is_presence & (fold == q)):
                raise InputError(f"block_size={size:g}: checkerboard fold {q} has no presence records; "
                                 "use a smaller block size or fewer folds.")
        return RuleFolds(fold, self.folds, measured={**measured, **more, "block_size_km": size}, geometry_crs=crs)
