"""Spatial blocks and hexagons: occupied cells dealt to folds with even counts."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from splitter.errors import InputError
from splitter.partition.balance import balance_cells
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
        raise InputError(f"--block-size {size_km}: give a positive size in km.")
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
            f"--folds {k}: the records fall in only {uniq.size} occupied "
            f"{'blocks' if shape == 'square' else 'hexagons'} of {size_km:g} km; "
            "use fewer folds or a smaller --block-size."
        )
    bal = balance_cells(pres.astype(np.int64), back.astype(np.int64), k, seed=seed)
    return CellFolds(bal.cell_fold[inverse], a, b, offset, int(uniq.size), bal.imbalance, bal.background_imbalance)
