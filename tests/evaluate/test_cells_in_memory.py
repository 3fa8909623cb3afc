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


def _counting_source(cells, weights, keep_bytes):
    """A streamed source that counts how often its blocks are opened (reads of a raster)."""
    opened = []

    def open_blocks():
        opened.append(1)
        for i in range(0, cells.size, 7000):
            yield cells[i:i + 7000], weights[i:i + 7000]

    return CellSource(open_blocks, keep_bytes=keep_bytes), opened


@pytest.mark.parametrize("keep_bytes", [1 << 30, 50_000])
def test_streamed_source_is_read_once_when_it_fits(keep_bytes):
    """Within its budget a source replays the cells it kept; over it, it reads again.
    Either way every pass (and the two-part summary of kept cells) gives the slot weights
    of the definition (brute force, as above). Weights change only from row to row, as a
    raster's areas do, so their run-length code is exercised."""
    rng = np.random.default_rng(8)
    cells = np.round(rng.random(60_000), 3).astype(np.float32)  # ties, float32 as rasters give
    weights = np.repeat(rng.uniform(0.5, 2.0, 600), 100)
    weights[:100] = 0.0
    queries = np.unique(np.r_[cells[:300].astype(float), 0.25, 0.5])
    below = np.array([weights[cells < q].sum() for q in queries])
    equal = np.array([weights[cells == q].sum() for q in queries])
    source, opened = _counting_source(cells, weights, keep_bytes)
    for _ in range(3):
        s = summarise_surface(source, queries)
        assert np.allclose(s.weight_below, below, rtol=1e-12, atol=1e-9)
        assert np.allclose(s.weight_equal, equal, rtol=1e-12, atol=1e-9)
    replayed = np.concatenate([w for _, w in source.blocks()])
    np.testing.assert_array_equal(replayed, weights)
    assert len(opened) == (1 if keep_bytes > cells.nbytes * 2 else 4)


def test_evaluate_surface_reads_a_raster_once(tmp_path):
    """Evaluating a fold from a raster decodes it once when its cells fit in memory, and
    gives the same result as when every pass reads the file again."""
    from rasterio.transform import from_origin

    from splitter.evaluate.surface import evaluate_surface
    from splitter.io.rasters import valid_cells, write_geotiff

    rng = np.random.default_rng(2)
    grid = rng.random((120, 90))
    path = tmp_path / "p.tif"
    write_geotiff(path, grid.astype(np.float32), from_origin(0, 60, 0.5, 0.5), "EPSG:4326")
    presences = np.sqrt(rng.random(40))
    reads = []

    def cells():
        reads.append(1)
        return valid_cells(path, window_rows=16)

    kept = evaluate_surface(cells, presences, thresholds=[0.3], replicates=99, seed=4)
    assert len(reads) == 1
    reads.clear()
    fresh = evaluate_surface(CellSource(cells, keep_bytes=0), presences, thresholds=[0.3],
                             replicates=99, seed=4)
    assert len(reads) == 3  # range and total, null draws, summary
    assert fresh.partial_roc.pvalue == kept.partial_roc.pvalue
    assert fresh.partial_roc.auc_ratio == pytest.approx(kept.partial_roc.auc_ratio, rel=1e-12)
    assert fresh.boyce.statistic == pytest.approx(kept.boyce.statistic, rel=1e-12)
    np.testing.assert_allclose(fresh.area_shares, kept.area_shares, rtol=1e-12)


def test_run_ends_equal_numpy_searchsorted_right():
    """The right ends of tie runs, found by stepping, equal numpy's own search (reference:
    ``np.searchsorted(..., side="right")``), for long runs, no runs, all-equal cells, one
    cell, and queries outside the cells."""
    from splitter.evaluate.cells import _run_ends

    rng = np.random.default_rng(0)
    for vs in (np.sort(np.round(rng.random(10_000), 2)), np.sort(rng.random(10_000)), np.zeros(5),
               np.array([1.0])):
        q = np.unique(np.r_[rng.choice(vs, 50), -1.0, 2.0, vs[-1]])
        left = np.searchsorted(vs, q, side="left")
        np.testing.assert_array_equal(_run_ends(vs, q, left), np.searchsorted(vs, q, side="right"))


def test_equal_weight_draws_are_the_cells_the_cumulative_search_picks():
    """Cells in memory with equal weights are drawn by the integer part of each target; the
    reference is the definition (the first cell whose cumulative weight exceeds the target,
    found with numpy's searchsorted over 1, 2, ..., N), on the same random numbers."""
    from splitter.evaluate.cells import draw_cells

    rng = np.random.default_rng(1)
    cells = rng.random(5_000)
    drawn = draw_cells(CellSource.from_array(cells), 20_000, float(cells.size), np.random.default_rng(9))
    targets = np.random.default_rng(9).random(20_000) * cells.size
    at = np.searchsorted(np.arange(1.0, cells.size + 1.0), targets, side="right")
    np.testing.assert_array_equal(drawn, cells[at])


def test_weighted_draws_are_the_cells_the_cumulative_search_picks():
    """Draws found run by run of equal weight are the cells the definition picks: the first
    cell whose cumulative weight exceeds the target (reference: numpy's searchsorted over
    the cumulative weights of all cells, on the same random numbers). Whole-number weights
    keep every sum exact, so the two must agree draw for draw; runs of zero weight, runs of
    one cell and a source streamed in blocks are all exercised."""
    from splitter.evaluate.cells import draw_cells

    rng = np.random.default_rng(4)
    cells = rng.random(6_000)
    weights = np.repeat(rng.integers(0, 4, 600).astype(float), 10)
    weights[3000:3100] = rng.integers(1, 9, 100)  # runs of one cell
    total = float(weights.sum())
    targets = np.random.default_rng(11).random(30_000) * total
    at = np.searchsorted(np.cumsum(weights), targets, side="right")
    blocks = [(cells[i:i + 1700], weights[i:i + 1700]) for i in range(0, cells.size, 1700)]
    for source in (CellSource.from_array(cells, weights), blocks):
        drawn = draw_cells(source, 30_000, total, np.random.default_rng(11))
        np.testing.assert_array_equal(drawn, cells[at])
    assert not np.isin(drawn, cells[weights == 0]).any()
