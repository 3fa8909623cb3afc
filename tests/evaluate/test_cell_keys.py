"""The cell keys behind every streamed summary: one lookup per cell must place each cell
exactly where a binary search would.

Reference: ``numpy.searchsorted(edges, v, side="right")`` over the interleaved edges
[u_0, next float after u_0, u_1, ...] (the definition of the key, splitter.evaluate.cells).
Values are invented, seeded.
"""

from __future__ import annotations

import numpy as np
import pytest

from splitter.evaluate.cells import _CellKeys


def _reference(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    edges = np.column_stack([u, np.nextafter(u, np.inf)]).ravel()
    return np.searchsorted(edges, v.astype(np.float64), side="right")


def _cells_around(u: np.ndarray, rng, n: int) -> np.ndarray:
    """Cells anywhere in and beyond the queries' range, plus cells equal to queries and
    one float either side of them (the comparisons that decide a key)."""
    lo, hi = float(u.min()), float(u.max())
    span = max(hi - lo, 1e-300)
    pick = rng.choice(u, n // 4)
    return np.concatenate([rng.uniform(lo - 0.1 * span, hi + 0.1 * span, n // 4), pick,
                           np.nextafter(pick, -np.inf), np.nextafter(pick, np.inf)])


@pytest.mark.parametrize("case", ["continuous", "clustered", "few", "tiny-span", "float32"])
def test_keys_equal_a_binary_search(case):
    rng = np.random.default_rng(["continuous", "clustered", "few", "tiny-span", "float32"].index(case))
    if case == "continuous":
        u = np.unique(rng.beta(2, 3, 200_000))  # ~8 buckets per key, some shared
    elif case == "clustered":
        # 3000 queries inside one bucket's width, the rest spread: full buckets are searched
        u = np.unique(np.r_[0.5 + rng.uniform(0, 1e-9, 3000), rng.uniform(0, 1, 20_000)])
    elif case == "few":
        u = np.array([0.25, 0.5, 0.75])
    elif case == "tiny-span":
        u = np.array([1e-310, 2e-310, 3e-310])  # the span's scale overflows: plain search path
    else:
        u = np.unique(rng.random(50_000).astype(np.float32).astype(np.float64))
    cells = _cells_around(u, rng, 400_000)
    if case == "float32":
        cells = cells.astype(np.float32)
    keys = _CellKeys(u)
    assert case != "tiny-span" or not keys.use_table
    np.testing.assert_array_equal(keys(cells), _reference(u, cells))


@pytest.mark.parametrize("chunk", [1, 3, 7, 64, 1000])
def test_weights_expanded_chunk_by_chunk_equal_the_whole_block(chunk):
    # The summary expands a block's run-coded areas one chunk at a time; the pieces
    # must be the block's weights, cell for cell (reference: numpy.repeat of the runs).
    from splitter.evaluate.cells import _expand_chunks

    rng = np.random.default_rng(chunk)
    lengths = rng.integers(1, 9, 60)
    lengths[::7] = 1  # runs of one cell next to chunk edges
    runs = (rng.uniform(0.5, 2.0, lengths.size), lengths)
    size = int(lengths.sum())
    pieces = list(_expand_chunks(runs, size, chunk))
    assert len(pieces) == -(-size // chunk)
    np.testing.assert_array_equal(np.concatenate(pieces), np.repeat(*runs))
    assert all(p is None for p in _expand_chunks(None, size, chunk))


def test_keys_in_reused_work_arrays_equal_a_binary_search():
    # The summary keeps one set of work arrays per thread and reuses it block after block;
    # a shorter block must not see a longer one's leftovers, a longer one gets its own arrays.
    rng = np.random.default_rng(9)
    u = np.unique(rng.random(5000))
    keys = _CellKeys(u)
    scratch = keys.scratch(1000)
    for size in (1000, 7, 1000, 2500, 3):
        cells = _cells_around(u, rng, size * 4)[:size]
        np.testing.assert_array_equal(keys(cells, scratch).copy(), _reference(u, cells))
