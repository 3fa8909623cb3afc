"""Cells held in memory are sorted once and answered by binary search; cells streamed in
blocks are placed in one pass. Both must give the slot weights a plain definition gives.

Reference: brute force in the test (for each query value, the summed weight of cells
strictly below it and equal to it, by numpy comparisons over all cells). Cells invented,
with ties and zero weights on purpose.
"""

from __future__ import annotations

import numpy as np
import pytest

from splitter.evaluate.cells import CellSource, summarise_surface


@pytest.mark.parametrize("weighted", [False, True])
def test_sorted_and_streamed_slots_equal_the_definition(weighted):
    rng = np.random.default_rng(3)
    cells = np.round(rng.random(50_000), 3)  # many ties
    weights = rng.uniform(0, 2, cells.size) if weighted else None
    if weighted:
        weights[::7] = 0.0
    queries = np.unique(np.r_[np.round(rng.random(200), 3), cells[:50], -1.0, 2.0])
    w = np.ones_like(cells) if weights is None else weights
    below = np.array([w[cells < q].sum() for q in queries])
    equal = np.array([w[cells == q].sum() for q in queries])
    in_memory = summarise_surface(CellSource.from_array(cells, weights), queries)
    streamed = summarise_surface([(cells[i:i + 9000], None if weights is None else weights[i:i + 9000])
                                  for i in range(0, cells.size, 9000)], queries)
    for s in (in_memory, streamed):
        assert np.allclose(s.weight_below, below, rtol=1e-12, atol=1e-9)
        assert np.allclose(s.weight_equal, equal, rtol=1e-12, atol=1e-9)
        assert s.total_weight == pytest.approx(w.sum(), rel=1e-12)
        assert s.n_cells == int(np.count_nonzero(w > 0)) and s.n_values == cells.size
        assert (s.value_min, s.value_max) == (cells.min(), cells.max())
        live = cells[w > 0]
        assert (s.live_min, s.live_max) == (live.min(), live.max())
