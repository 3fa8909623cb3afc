"""Assign occupied cells (blocks, hexagons, clusters) to folds with even counts."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from splitter.errors import InputError


@dataclass(frozen=True)
class Balance:
    """Fold of each cell and how even the result is.

    ``imbalance`` is (largest - smallest) / mean of presence counts per fold
    (0 = perfectly even); ``background_imbalance`` the same for background.
    """

    cell_fold: np.ndarray
    presence_per_fold: np.ndarray
    background_per_fold: np.ndarray
    imbalance: float
    background_imbalance: float


def _spread(counts) -> float:
    m = counts.mean()
    return float((counts.max() - counts.min()) / m) if m > 0 else 0.0


def balance_cells(presence_counts, background_counts, k: int, seed: int = 0, trials: int = 64) -> Balance:
    """Deal cells to ``k`` folds so presence (then background) counts are even.

    Seeded randomised greedy: each trial shuffles the cells, orders them by
    presence count (largest first, shuffled among ties) and gives each to the
    fold with the fewest presences so far (fewest background on a tie); a cell
    without presences goes to the fold with the fewest other records. The
    trial with the smallest presence spread, then background spread, wins.
    Every fold receives at least one cell.

    Examples
    --------
    >>> b = balance_cells([5, 4, 3, 3, 1], [0, 0, 0, 0, 0], k=2, seed=1)
    >>> sorted(b.presence_per_fold.tolist())
    [8, 8]
    """
    pres = np.asarray(presence_counts, np.int64)
    back = np.asarray(background_counts, np.int64)
    ncell = pres.size
    if k < 2:
        raise InputError(f"--folds {k}: need at least 2 folds.")
    if ncell < k:
        raise InputError(
            f"--folds {k}: only {ncell} occupied cells; use fewer folds or a smaller --block-size."
        )
    rng = np.random.default_rng(seed)
    # The greedy pass is one step per cell; with very many cells a serpentine
    # deal (1..k, k..1, ...) of the sorted cells is as even and vectorised.
    greedy = ncell * trials <= 200_000
    key_scale = int(back.sum()) + 1
    best = None
    for _ in range(trials if greedy else 8):
        perm = rng.permutation(ncell)
        order = perm[np.lexsort((-back[perm], -pres[perm]))]
        cell_fold = np.empty(ncell, np.int64)
        if greedy:
            fold_key = np.zeros(k, np.int64)
            fold_n = np.zeros(k, np.int64)
            for pos, c in enumerate(order):
                left = ncell - pos
                empty = np.flatnonzero(fold_n == 0)
                if empty.size and left <= empty.size:
                    f = empty[0]
                elif pres[c] > 0:
                    f = int(np.argmin(fold_key))
                else:
                    # A cell without presences cannot change presence balance: it goes to
                    # the fold with the fewest other records (absences, background), so a
                    # survey's absences are balanced too, not heaped on the presence-poorest fold.
                    f = int(np.argmin(fold_key % key_scale))
                cell_fold[c] = f
                fold_key[f] += pres[c] * key_scale + back[c]
                fold_n[f] += 1
        else:
            lap = np.arange(ncell) % (2 * k)
            cell_fold[order] = np.where(lap < k, lap, 2 * k - 1 - lap)
        fold_p = np.bincount(cell_fold, weights=pres, minlength=k).astype(np.int64)
        fold_b = np.bincount(cell_fold, weights=back, minlength=k).astype(np.int64)
        score = (_spread(fold_p), _spread(fold_b))
        if best is None or score < best[0]:
            best = (score, cell_fold.copy(), fold_p, fold_b)
    (ip, ib), cell_fold, fp, fb = best
    return Balance(cell_fold + 1, fp, fb, ip, ib)
