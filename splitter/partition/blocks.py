"""Spatial blocks and hexagons: occupied cells dealt to folds with even counts.

``cell_folds`` is the array function; ``SpatialBlocks`` and ``Hexagons`` are the rules.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from splitter.errors import InputError
from splitter.geo import equal_area_crs, planar_km
from splitter.partition.balance import balance_cells
from splitter.partition.base import FoldRule, RuleFolds, RuleInput, check_fold_count
from splitter.partition.grid import cell_keys, hexagon_cells, square_cells


@dataclass(frozen=True)
class CellFolds:
    """Fold per record plus the cell layout that produced it."""

    fold: np.ndarray
    cell_a: np.ndarray
    cell_b: np.ndarray
    offset: tuple
    n_cells: int
    imbalance: float
    background_imbalance: float


def cell_folds(x_km, y_km, is_presence, k: int, size_km: float, seed: int = 0,
               shape: str = "square", random_offset: bool = True) -> CellFolds:
    """Lay square or hexagonal cells of ``size_km`` and deal occupied cells to k folds.

    Presences are balanced first, background second (see
    :func:`splitter.partition.balance.balance_cells`). Every record in a cell gets
    the cell's fold, presences and background alike, so background follows the
    same spatial rule as presences.

    Examples
    --------
    >>> r = cell_folds([1, 2, 51, 52, 101, 102], [1] * 6, [True] * 6, k=3, size_km=50,
    ...                random_offset=False)
    >>> len(set(r.fold.tolist()))
    3
    """
    if not size_km or size_km <= 0 or not np.isfinite(size_km):
        raise InputError(f"block_size={size_km!r}: give a positive size in km.")
    rng = np.random.default_rng(seed)
    offset = tuple(float(v) for v in rng.uniform(0, size_km, 2)) if random_offset else (0.0, 0.0)
    cells = square_cells if shape == "square" else hexagon_cells
    a, b = cells(x_km, y_km, size_km, offset)
    keys = cell_keys(a, b)
    uniq, inverse = np.unique(keys, return_inverse=True)
    pres = np.bincount(inverse, weights=np.asarray(is_presence, float), minlength=uniq.size)
    back = np.bincount(inverse, minlength=uniq.size) - pres
    if uniq.size < k:
        raise InputError(
            f"folds={k}: the records fall in only {uniq.size} occupied "
            f"{'blocks' if shape == 'square' else 'hexagons'} of {size_km:g} km; "
            "use fewer folds or a smaller block_size."
        )
    bal = balance_cells(pres.astype(np.int64), back.astype(np.int64), k, seed=seed)
    return CellFolds(bal.cell_fold[inverse], a, b, offset, int(uniq.size), bal.imbalance, bal.background_imbalance)


class _CellRule(FoldRule):
    """Square or hexagonal cells of ``block_size`` km dealt to ``folds`` folds."""

    shape = "square"

    def __init__(self, folds=5, block_size=None, buffer=0.0, seed=0, random_offset=True, env=(), covariates=(),
                 range_sample=2000):
        self.folds = check_fold_count(folds, self._min_folds())
        self.block_size = check_block_size(block_size, self.method, env, covariates)
        self.random_offset = bool(random_offset)
        self.range_sample = int(range_sample)
        self._common(buffer, seed, env, covariates)
        self._check_folds_here()

    def _min_folds(self) -> int:
        return 2

    def _check_folds_here(self):
        pass

    def folds_at(self, x_km, y_km, is_presence, size_km: float) -> tuple[np.ndarray, dict]:
        """Fold of each point for cells of ``size_km`` (km coordinates), and what was measured
        (imbalances unrounded)."""
        cf = cell_folds(x_km, y_km, is_presence, self.folds, size_km, seed=self.seed, shape=self.shape,
                        random_offset=self.random_offset)
        return cf.fold, {"grid_offset_km": tuple(cf.offset), "occupied_cells": cf.n_cells,
                         "presence_imbalance": cf.imbalance,
                         "background_imbalance": cf.background_imbalance, "cell_shape": self.shape}

    def _folds(self, data: RuleInput) -> RuleFolds:
        pts = data.points
        crs = pts.crs if not pts.geographic else equal_area_crs(pts)
        x_km, y_km = planar_km(pts, crs)
        size, measured = resolve_block_size(self, data)
        fold, more = self.folds_at(x_km, y_km, data.is_presence, size)
        more["presence_imbalance"] = round(more["presence_imbalance"], 4)
        more["background_imbalance"] = round(more["background_imbalance"], 4)
        return RuleFolds(fold, self.folds, measured={**measured, **more, "block_size_km": size}, geometry_crs=crs)


class SpatialBlocks(_CellRule):
    """Square spatial blocks of ``block_size`` km, dealt to folds so presence
    (then background) counts per fold are as even as possible.

    ``block_size`` is a size in km, ``"auto"`` (the autocorrelation range of the
    ``env`` rasters) or ``"match"`` (the size whose evaluation distances best
    match prediction distances).

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import SpatialBlocks  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": [1e3, 2e3, 51e3, 52e3, 101e3, 102e3], "y": [1e3] * 6})  # metres
    >>> rule = SpatialBlocks(folds=3, block_size=50, random_offset=False)
    >>> rule
    SpatialBlocks(folds=3, block_size=50.0, random_offset=False)
    >>> a = rule.assign(pts, crs="EPSG:3035")
    >>> a.fold[0] == a.fold[1] and len(set(a.fold.tolist())) == 3
    True
    """

    method = "blocks"
    shape = "square"


class Hexagons(_CellRule):
    """Hexagonal cells with the area of a ``block_size`` km square block, dealt
    to folds like :class:`SpatialBlocks`.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import Hexagons  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": [0, 1e3, 200e3, 201e3], "y": [0] * 4})  # metres
    >>> a = Hexagons(folds=2, block_size=50, random_offset=False).assign(pts, crs="EPSG:3035")
    >>> a.fold.tolist() in ([1, 1, 2, 2], [2, 2, 1, 1])
    True
    """

    method = "hexagons"
    shape = "hexagon"


def check_block_size(block_size, method: str, env, covariates=()) -> float | str:
    """A positive size in km, 'auto' (needs ``env`` or ``covariates``) or 'match'."""
    if block_size is None:
        raise InputError(f"{method} need block_size: give a size in km, 'auto' or 'match'.")
    text = str(block_size).strip().lower()
    if text == "auto":
        if not env and not covariates:
            raise InputError("block_size='auto' needs covariates: give `env` (raster paths) or `covariates` (column names).")
        return "auto"
    if text == "match":
        return "match"
    try:
        size = float(text)
    except ValueError:
        raise InputError(f"block_size={block_size!r}: give a size in km, 'auto' or 'match'.") from None
    if not (np.isfinite(size) and size > 0):
        raise InputError(f"block_size={block_size!r}: give a positive size in km.")
    return size


def resolve_block_size(rule, data) -> tuple[float, dict]:
    """The cell size in km, and how it was chosen.

    'auto' and 'match' are chosen by the shell (they read rasters or fit
    variograms) and arrive in ``data.block_size_km`` / ``data.block_choice``.
    """
    if rule.block_size in ("auto", "match"):
        if data.block_size_km is None:
            raise InputError(f"block_size={rule.block_size!r}: the size is chosen when records are read; "
                             "call assign() or splitter.design(), not the core rule.")
        return float(data.block_size_km), dict(data.block_choice)
    return float(rule.block_size), {"block_size_rule": "given"}
