"""The cells of a testing region, one source for every evaluation kernel.

A fold's testing region is either an array of cell values in memory (with optional
cell areas) or a prediction raster read in windows (rasters larger than memory).
:class:`CellSource` puts both behind one small interface, ``blocks()``, which yields
``(values, weights)`` pairs afresh on every call, so a kernel may pass over the cells
more than once without holding them.

Kernels never need the cells sorted. What they need is known in advance of a pass:

* :func:`summarise_surface` places every cell among fixed *query values* (presence
  scores, thresholds, Boyce window edges) in one pass and returns
  :class:`SuitabilitySurface`, the exact cell weight strictly between and equal to
  the query values (no binning);
* :func:`draw_cells` draws cells with probability proportional to their weight
  (area) in one pass, for the partial ROC's null of presences placed at random.

Cost: O(N) per pass for N cells (a lookup table on a fine monotone bucketing of the
value range, a binary search only for cells next to a query value), memory one
block plus O(number of queries).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Iterable, Iterator

import numpy as np

from splitter.errors import InputError

__all__ = ["CellSource", "as_cells", "SuitabilitySurface", "summarise_surface", "surface_extent", "surface_range", "draw_cells"]

# Cells keyed at a time inside a block: the lookup's temporaries (bucket numbers,
# keys) then stay in the CPU caches.
_CHUNK = 1 << 18
# A streamed source keeps its cells in memory after its first pass when they fit in
# this many bytes (about 1.5 * 10^8 float32 cells), so the kernels' later passes
# (summary, null draws, null summary) never read or decode the raster again.
# Larger rasters are read afresh on every pass, as before.
KEEP_BYTES = 640 << 20
# Lookup-table buckets per cell key, and at most this many buckets (see _CellKeys).
_BUCKETS_PER_KEY = 8
_MAX_BUCKETS = 1 << 24


# ----------------------------------------------------------------------------- source


@dataclass(frozen=True, eq=False)
class CellSource:
    """Cells of a testing region, streamed in blocks as often as a kernel asks.

    Parameters
    ----------
    open_blocks : callable
        Returns a fresh iterable of blocks on every call. A block is a ``CellBlock``
        from :func:`splitter.io.rasters.valid_cells` (values and areas), a
        ``(values, weights)`` pair (weights None = equal), or a bare array of values.

    Examples
    --------
    >>> cells = CellSource.from_array(np.array([0.2, 0.9, 0.5]), block=2)
    >>> [v.tolist() for v, _ in cells.blocks()]
    [[0.2, 0.9], [0.5]]
    """

    open_blocks: Callable[[], Iterable]
    # Cells held in memory (values, weights or None): kernels may then sort them once
    # and answer every query by binary search (see summarise_surface).
    in_memory: tuple | None = field(default=None, repr=False)
    keep_bytes: int = field(default=KEEP_BYTES, repr=False)
    _cache: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_array(cls, values, weights=None, block: int = 1 << 20) -> "CellSource":
        """Cells held in memory, served as views of ``block`` cells (no copy)."""
        v = np.asarray(values)
        if v.dtype.kind != "f":
            v = v.astype(np.float64)
        v = v.ravel()
        w = None
        if weights is not None:
            w = np.asarray(weights, dtype=np.float64).ravel()
            if w.shape != v.shape:
                raise InputError(f"Got {w.size} cell weights for {v.size} cell values; give one weight per cell.")
        if v.size == 0:
            raise InputError("No cell values were given; the testing region has no valid cells.")

        def open_blocks():
            for start in range(0, v.size, block):
                yield v[start : start + block], (None if w is None else w[start : start + block])

        return cls(open_blocks, in_memory=(v, w))

    def sorted_cells(self) -> tuple[np.ndarray, np.ndarray | None]:
        """Values ascending and their weights (None = equal), for cells held in memory;
        sorted once per source and kept."""
        if "sorted" not in self._cache:
            v, w = self.in_memory
            if w is None:
                self._cache["sorted"] = (np.sort(v), None)
            else:
                order = np.argsort(v)
                self._cache["sorted"] = (v[order], w[order])
        return self._cache["sorted"]

    def parts(self, count: int = 2) -> list:
        """The blocks as ``count`` consecutive parts when they are kept in memory (each an
        iterable of ``(values, runs)`` as :meth:`run_blocks` gives them), else one part:
        the stream itself."""
        kept = self._cache.get("kept")
        if kept is None or count < 2 or len(kept) < count:
            return [self.run_blocks()]
        cut = np.linspace(0, len(kept), count + 1).astype(int)
        return [kept[a:b] for a, b in zip(cut[:-1], cut[1:])]

    @staticmethod
    def _replay(kept):
        for v, runs in kept:
            yield v, _expand(runs)

    def blocks(self) -> Iterator[tuple[np.ndarray, np.ndarray | None]]:
        """``(values, weights)`` of every block, in a fixed order.

        The first complete pass of a streamed source keeps its blocks (values as
        given, weights as runs of equal weight: a raster's areas change only from row
        to row) while they fit in ``keep_bytes``; later passes replay them.
        """
        return self._stream(as_runs=False)

    def run_blocks(self) -> Iterator[tuple[np.ndarray, tuple | None]]:
        """``(values, runs)`` of every block: the weights as runs of equal weight, ``(weight of
        each run, its length)``, or None for equal weights; never expanded cell by cell
        when the source already has them as runs (kept blocks, raster windows)."""
        return self._stream(as_runs=True)

    def _stream(self, as_runs: bool):
        kept = self._cache.get("kept")
        if kept is not None:
            yield from (kept if as_runs else self._replay(kept))
            return
        keeping = [] if self.in_memory is None and self.keep_bytes > 0 and "too_big" not in self._cache else None
        size = 0
        for b in self.open_blocks():
            v, w, runs = _block_parts(b)
            if runs is None and w is not None and (as_runs or keeping is not None):
                runs = _runs(w)
            if keeping is not None:
                size += v.nbytes + (0 if runs is None else runs[0].nbytes + runs[1].nbytes)
                if size > self.keep_bytes:
                    keeping = None
                    self._cache["too_big"] = True
                else:
                    keeping.append((v, runs))
            if as_runs:
                yield v, runs
            else:
                yield v, (w if w is not None else _expand(runs))
        if keeping is not None:
            self._cache["kept"] = keeping


def _expand(runs) -> np.ndarray | None:
    """One weight per cell from runs of equal weight (None stays None: equal weights)."""
    return None if runs is None else np.repeat(runs[0], runs[1])


def _expand_chunks(runs, size: int, chunk: int):
    """The weights of cells [0, chunk), [chunk, 2 chunk), ... of a block, one chunk at a time
    (None each for equal weights): expanded where they are used, so that a block's weights
    never stand in memory cell by cell (8 bytes a cell, written once and read once)."""
    if runs is None:
        for _ in range(0, size, chunk):
            yield None
        return
    rv, rl = runs
    ends = np.cumsum(rl)
    for start in range(0, size, chunk):
        stop = min(start + chunk, size)
        a = int(np.searchsorted(ends, start, side="right"))  # the run holding cell `start`
        b = int(np.searchsorted(ends, stop - 1, side="right"))  # ... and cell `stop - 1`
        lengths = rl[a : b + 1].copy()
        lengths[0] = min(int(ends[a]), stop) - start
        if b > a:
            lengths[-1] = stop - int(ends[b - 1])
        yield np.repeat(rv[a : b + 1], lengths)


def _runs(w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Run-length code of a weight array: (value of each run, its length)."""
    if w.size == 0:
        return w[:0].copy(), np.zeros(0, np.int64)
    starts = np.concatenate(([0], np.flatnonzero(w[1:] != w[:-1]) + 1))
    return w[starts].copy(), np.diff(np.append(starts, w.size))


def is_streamed(cells) -> bool:
    """Cells given as a source, a function returning blocks or a list of blocks (not one array)."""
    return (isinstance(cells, CellSource) or callable(cells)
            or (isinstance(cells, list) and bool(cells) and not np.isscalar(cells[0])))


def as_cells(cells, weights=None) -> CellSource:
    """A :class:`CellSource` from an array of cell values (with optional weights),
    a source, a function returning blocks, or a list of blocks.

    A one-shot iterator (e.g. a generator) is refused: the partial ROC passes over
    the cells more than once (its null draws cells at random, then places them).
    """
    if isinstance(cells, CellSource):
        return cells
    if is_streamed(cells):
        if callable(cells):
            return CellSource(cells)
        return CellSource(lambda: cells, keep_bytes=0)  # a list of blocks is in memory already
    if not isinstance(cells, (np.ndarray, list, tuple)) and iter(cells) is cells:
        raise InputError(
            "The cells can be streamed only once here, but the tests pass over them more than once; "
            "pass a function that returns the blocks (e.g. lambda: valid_cells(path)) or a list of blocks."
        )
    return CellSource.from_array(cells, weights)


# ----------------------------------------------------------------------------- lookup


def _bucket(x: np.ndarray, low: float, scale: float, buckets: int, y=None, out=None) -> np.ndarray:
    """Monotone bucket number in -1..buckets (shifted to 0..buckets+1) of float values,
    computed in ``y`` (float64) and ``out`` (intp) when given.

    Every step (subtract, multiply, clip, floor) is monotone in floating point, so
    x1 <= x2 implies bucket(x1) <= bucket(x2); that is all the exactness needs.
    """
    y = np.subtract(x, low, dtype=np.float64, out=y)
    y *= scale
    np.clip(y, -1.0, float(buckets), out=y)  # before the cast: huge values stay finite
    np.floor(y, out=y)
    out = np.empty(y.shape, np.intp) if out is None else out
    np.copyto(out, y, casting="unsafe")
    out += 1
    return out


class _Scratch:
    """Work arrays of one chunk of cells, reused chunk after chunk by one thread: fresh
    memory costs more than the lookup itself on some machines (its first touch)."""

    def __init__(self, size: int, table_dtype):
        self.y = np.empty(size)
        self.b = np.empty(size, np.intp)
        self.packed = np.empty(size, table_dtype)
        self.count = np.empty(size, table_dtype)


class _CellKeys:
    """Places cell values among sorted distinct query values (one lookup per cell).

    Each cell gets key = number of edges <= its value, where the edges interleave
    the distinct query values u_j with their next float up, u_j+:
    [u_0, u_0+, u_1, u_1+, ...]. So key = 2j for a cell strictly between u_{j-1}
    and u_j, 2j + 1 for a cell equal to u_j, and 2d above all of them; one
    weighted bincount of the keys then gives the area below and tied with every
    query value.

    A plain binary search per cell costs ~10 mispredicted branches, so the key is
    found through a lookup table on a fine monotone bucketing of the value range:
    a cell whose bucket holds no edge takes the table's key exactly (edges in
    lower buckets are below it, edges in higher buckets above); only cells sharing
    a bucket with an edge (about d / buckets of them for continuous predictions)
    are binary-searched. Callers feed the cells in blocks that stay in cache.

    Used by :func:`summarise_surface` on streamed cells (cells held in memory are
    sorted once instead), for the partial ROC and :mod:`splitter.evaluate.surface`.
    """

    def __init__(self, u: np.ndarray):
        # u: ascending distinct finite float64 query values.
        self.edges = np.column_stack([u, np.nextafter(u, np.inf)]).ravel()
        self.n_keys = 2 * u.size + 1
        low = float(self.edges[0])
        span = float(self.edges[-1]) - low  # > 0: u_0+ > u_0
        # About 8 buckets per key, so that few cells share a bucket with a key even
        # when there are many keys (the partial ROC's null places ~B n values).
        buckets = int(min(_MAX_BUCKETS, max(1 << 16, _BUCKETS_PER_KEY * self.n_keys)))
        with np.errstate(over="ignore", divide="ignore"):
            scale = buckets / span
        self.use_table = bool(np.isfinite(span) and np.isfinite(scale) and scale > 0)
        self.low, self.scale, self.buckets = low, scale, buckets
        if self.use_table:
            # The edges are ascending, so their buckets are too: the table is a step function
            # of the bucket, written run by run (np.repeat) rather than counted per bucket and
            # summed over all 2**24 of them. Key of a cell in a bucket without an edge: the
            # number of edges in lower buckets, i.e. the index of the first edge at or above
            # its bucket.
            edge_bucket = _bucket(self.edges, low, scale, buckets)
            first = np.flatnonzero(np.r_[True, edge_bucket[1:] != edge_bucket[:-1]])
            occupied = edge_bucket[first]
            per_bucket = np.diff(np.r_[first, edge_bucket.size])
            # Packed with the bucket's edges, capped at 3 ("more than two"), in the low two
            # bits: one lookup per cell instead of two (the lookups are the cost: the table
            # does not fit in cache). A bucket with one or two edges places its cells by
            # comparing with them, only fuller ones search.
            packed = np.r_[first, edge_bucket.size].astype(np.int32 if 4 * self.n_keys < 2**31 else np.int64) << 2
            self.table = np.repeat(packed, np.diff(np.r_[-1, occupied, buckets + 1]))
            self.table[occupied] |= np.minimum(per_bucket, 3).astype(self.table.dtype)
            self.padded = np.append(self.edges, np.inf)  # edges[t + 1] exists for the last edge too

    def scratch(self, size: int = _CHUNK) -> _Scratch:
        """Work arrays for :meth:`__call__` on blocks of up to ``size`` cells (one per thread)."""
        return _Scratch(size, self.table.dtype if self.use_table else np.intp)

    def __call__(self, vb: np.ndarray, scratch: _Scratch | None = None) -> np.ndarray:
        """Key (0 .. n_keys - 1) of every value of the block ``vb``; written into ``scratch``
        (then valid until its next use) when given."""
        if self.use_table:
            work = scratch if scratch is not None and scratch.y.size >= vb.size else self.scratch(vb.size)
            n = vb.size
            with np.errstate(over="ignore"):  # overflow to inf is clipped to the top bucket
                b = _bucket(vb, self.low, self.scale, self.buckets, work.y[:n], work.b[:n])
            packed = np.take(self.table, b, out=work.packed[:n])
            count = np.bitwise_and(packed, 3, out=work.count[:n])
            key = np.right_shift(packed, 2, out=b)
            near = np.flatnonzero(count)
            if near.size:
                # A cell sharing its bucket with edges e[t] (and e[t + 1]): its key is t
                # plus the number of those edges at or below it, exactly as a search gives.
                v = vb[near].astype(np.float64)
                t, c = key[near], count[near]
                e = self.padded
                k = t + (v >= e[t]) + ((c >= 2) & (v >= e[t + 1]))
                # A fuller bucket: a cell at or above its first two edges walks on along the
                # edges (edges of higher buckets are above it, so the walk stops in its own),
                # a few steps at a time; the rare cell still walking after them is searched.
                full = np.flatnonzero((c > 2) & (k == t + 2))
                if full.size:
                    kf, vf = k[full], v[full]
                    for _ in range(4):
                        step = vf >= e[kf]
                        if not step.any():
                            break
                        kf += step
                    else:
                        rest = vf >= e[kf]
                        kf[rest] = np.searchsorted(self.edges, vf[rest], side="right")
                    k[full] = kf
                key[near] = k
            return key
        # Query values span less than ~1e-300, or more than the float range:
        # a plain binary search for every cell.
        return np.searchsorted(self.edges, vb.astype(np.float64), side="right")




# ----------------------------------------------------------------------------- summary


@dataclass(frozen=True, eq=False)
class SuitabilitySurface:
    """Exact cell weights of a prediction surface around fixed query values.

    Attributes
    ----------
    query_values : numpy.ndarray
        The ascending distinct values the surface answers about (float64).
    slot_weights : numpy.ndarray, shape (2 * len(query_values) + 1,)
        Summed cell weight (e.g. km²) per slot: slot 2j holds the cells strictly
        between ``query_values[j-1]`` and ``query_values[j]`` (slot 0: below the
        first, slot 2d: above the last), slot 2j + 1 the cells equal to
        ``query_values[j]``.
    total_weight : float
        Summed weight of all cells.
    n_cells : int
        Cells with positive weight.
    n_values : int
        All cells streamed (including zero-weight ones).
    value_min, value_max : float
        Smallest and largest cell value (all cells).
    live_min, live_max : float
        Smallest and largest value of the cells with positive weight.

    Examples
    --------
    >>> s = summarise_surface([(np.array([0.1, 0.5, 0.5, 0.9]), np.array([1.0, 1.0, 2.0, 4.0]))], [0.5])
    >>> s.slot_weights.tolist(), s.area_share_at(0.5)
    ([1.0, 3.0, 4.0], 0.875)
    """

    query_values: np.ndarray
    slot_weights: np.ndarray = field(repr=False)
    total_weight: float
    n_cells: int
    n_values: int
    value_min: float
    value_max: float
    live_min: float
    live_max: float

    @property
    def weight_below(self) -> np.ndarray:
        """Weight of cells strictly below each query value."""
        return np.cumsum(self.slot_weights)[0:-1:2]

    @property
    def weight_equal(self) -> np.ndarray:
        """Weight of cells equal to each query value."""
        return self.slot_weights[1::2].copy()

    @property
    def weight_above(self) -> np.ndarray:
        """Weight of cells strictly above each query value."""
        # Suffix sums, so a small share above a high value keeps its relative precision.
        return np.cumsum(self.slot_weights[::-1])[::-1][2::2]

    def _positions(self, values, what: str) -> np.ndarray:
        q = np.asarray(values, dtype=np.float64).ravel()
        if q.size == self.query_values.size and np.array_equal(q, self.query_values):
            return np.arange(q.size)  # summarised for exactly these values (the null's draws)
        pos = np.searchsorted(self.query_values, q)
        found = pos < self.query_values.size
        found[found] = self.query_values[pos[found]] == q[found]
        if not np.all(found):
            missing = q[~found][0]
            raise InputError(
                f"The {what} {missing!r} is not one of the values the surface was summarised for; "
                "pass it to surface_queries (or evaluate_surface) before streaming the cells."
            )
        return pos

    def area_share_at(self, threshold: float) -> float:
        """Weighted share of cells with value >= ``threshold`` (the binomial test's p).

        Equals :func:`splitter.evaluate.area_predicted` on all cells; the threshold
        must be one of :attr:`query_values`.
        """
        j = int(self._positions([threshold], "threshold")[0])
        return float(np.sum(self.slot_weights[2 * j + 1 :]) / self.total_weight)

    def to_dict(self) -> dict:
        """Scalars only."""
        return {
            "n_queries": int(self.query_values.size),
            "total_weight": self.total_weight,
            "n_cells": self.n_cells,
            "n_values": self.n_values,
            "value_min": self.value_min,
            "value_max": self.value_max,
        }




def _finite_scores(values, what: str, name: str) -> np.ndarray:
    s = np.asarray(values, dtype=np.float64).ravel()
    if not np.all(np.isfinite(s)):
        raise InputError(f"Some {what} are missing or infinite; drop those {name} first.")
    return s


def _block_parts(block) -> tuple[np.ndarray, np.ndarray | None, tuple | None]:
    """(values, weights, runs) of one streamed block.

    A block is a ``CellBlock`` from :func:`splitter.io.rasters.valid_cells` (values,
    and areas as row runs: weights None, runs given), a ``(values, weights)`` pair
    (weights may be None), or a bare array of values (equal weights).
    """
    runs = getattr(block, "area_runs", None)
    if runs is not None:
        values, weights = block.values, None
    elif hasattr(block, "values") and hasattr(block, "areas"):
        values, weights = block.values, block.areas
    elif isinstance(block, tuple) and len(block) == 2:
        values, weights = block
    else:
        values, weights = block, None
    v = np.asarray(values)
    if v.dtype.kind != "f":
        v = v.astype(np.float64)
    v = v.ravel()
    if runs is not None:
        rv, rl = np.asarray(runs[0], dtype=np.float64), np.asarray(runs[1], dtype=np.int64)
        if int(rl.sum()) != v.size:
            raise InputError(f"A block has {int(rl.sum())} cell weights for {v.size} cell values; give one weight per cell.")
        return v, None, (rv, rl)
    if weights is None:
        return v, None, None
    w = np.asarray(weights, dtype=np.float64).ravel()
    if w.shape != v.shape:
        raise InputError(f"A block has {w.size} cell weights for {v.size} cell values; give one weight per cell.")
    return v, w, None


def surface_extent(cells) -> tuple[float, float, float]:
    """Smallest and largest cell value and the summed weight: one pass over the blocks
    (for a raster, the pass that reads the file; a source keeps the cells for later passes).

    Parameters
    ----------
    cells : CellSource, array_like or list of blocks
        See :func:`as_cells`.

    Returns
    -------
    (float, float, float)

    Examples
    --------
    >>> surface_extent([np.array([0.4, 0.2]), (np.array([0.9]), np.array([2.5]))])
    (0.2, 0.9, 4.5)
    """
    lo, hi, total = np.inf, -np.inf, 0.0
    for v, runs in as_cells(cells).run_blocks():
        if v.size:
            lo, hi = min(lo, float(v.min())), max(hi, float(v.max()))
            total += float(v.size) if runs is None else float(np.dot(runs[0], runs[1]))
    if lo > hi:
        raise InputError("No cell values were given; the testing region has no valid cells.")
    if not (np.isfinite(lo) and np.isfinite(hi)):
        raise InputError("Some cell values are missing or infinite; drop nodata cells first.")
    return lo, hi, total


def surface_range(cells) -> tuple[float, float]:
    """Smallest and largest cell value over streamed blocks (:func:`surface_extent`'s first two).

    Examples
    --------
    >>> surface_range([np.array([0.4, 0.2]), np.array([0.9])])
    (0.2, 0.9)
    """
    return surface_extent(cells)[:2]


def _tally(blocks, keys: _CellKeys) -> tuple:
    """Slot weights, counts and value extremes of some ``(values, runs)`` blocks (one part of a summary)."""
    slots = np.zeros(keys.n_keys)
    scratch = keys.scratch()
    n_values = n_cells = 0
    lo = live_lo = np.inf
    hi = live_hi = -np.inf
    for v, runs in blocks:
        if v.size == 0:
            continue
        # min and max propagate NaN and show infinities: two reductions, no mask over the block.
        bmin, bmax = float(v.min()), float(v.max())
        if not (np.isfinite(bmin) and np.isfinite(bmax)):
            raise InputError("Some cell values are missing or infinite; drop nodata cells first.")
        lo, hi = min(lo, bmin), max(hi, bmax)
        n_values += v.size
        if runs is None:
            n_cells += v.size
            live_lo, live_hi = min(live_lo, bmin), max(live_hi, bmax)
        else:
            wmin, wsum = float(runs[0].min()), float(np.dot(runs[0], runs[1]))
            if not (np.isfinite(wsum) and wmin >= 0.0):
                raise InputError("Cell weights must be finite and not negative.")
            if wmin > 0.0:
                n_cells += v.size
                live_lo, live_hi = min(live_lo, bmin), max(live_hi, bmax)
            else:
                live = v[_expand(runs) > 0]
                n_cells += live.size
                if live.size:
                    live_lo, live_hi = min(live_lo, float(live.min())), max(live_hi, float(live.max()))
        for start, w in zip(range(0, v.size, _CHUNK), _expand_chunks(runs, v.size, _CHUNK)):
            key = keys(v[start : start + _CHUNK], scratch)
            slots += np.bincount(key, weights=w, minlength=keys.n_keys)
    return slots, n_values, n_cells, lo, hi, live_lo, live_hi


def summarise_surface(cells, query_values) -> SuitabilitySurface:
    """Stream cell blocks once into exact weights around the query values.

    Parameters
    ----------
    cells : CellSource, array_like or list of blocks
        See :func:`as_cells`; a block is a ``CellBlock`` from
        :func:`splitter.io.rasters.valid_cells` (values and areas), a ``(values,
        weights)`` pair (weights None = equal), or a bare array of values. Values
        must be finite (nodata removed), weights finite and not negative.
    query_values : array_like of float
        The values to answer about, e.g. from :func:`surface_queries`.

    Returns
    -------
    SuitabilitySurface

    Raises
    ------
    InputError
        No cells, non-finite cell values, negative or non-finite weights, weights
        summing to zero, or no finite query value.

    Notes
    -----
    Cost O(N) for N cells (the lookup of :mod:`splitter.evaluate.partial_roc`, with a
    binary search only for cells near a query value) and memory O(block + queries).

    Examples
    --------
    >>> s = summarise_surface([np.array([0.1, 0.4]), np.array([0.4, 0.8])], [0.4])
    >>> s.weight_below.tolist(), s.weight_equal.tolist(), s.weight_above.tolist()
    ([1.0], [2.0], [1.0])
    """
    q = _finite_scores(query_values, "query values", "values")
    if not np.all(q[1:] > q[:-1]):  # already ascending and distinct (np.unique's output): no sort
        q = np.unique(q)
    if q.size == 0:
        raise InputError("No query values were given; pass the presence scores and thresholds to summarise for.")
    source = as_cells(cells)
    if source.in_memory is not None:
        return _summarise_sorted(source, q)
    keys = _CellKeys(q)
    from splitter.threads import side_by_side, threads

    # Cells kept in memory: each half is tallied on its own core (numpy releases the GIL
    # in the lookup), then the halves are added in a fixed order.
    parts = source.parts(min(2, threads()))
    tallies = side_by_side([lambda part=part: _tally(part, keys) for part in parts], len(parts))
    slots = tallies[0][0]
    for t in tallies[1:]:
        slots = slots + t[0]
    n_values = sum(t[1] for t in tallies)
    n_cells = sum(t[2] for t in tallies)
    lo, hi = min(t[3] for t in tallies), max(t[4] for t in tallies)
    live_lo, live_hi = min(t[5] for t in tallies), max(t[6] for t in tallies)
    if n_values == 0:
        raise InputError("No cell values were given; the testing region has no valid cells.")
    total = float(slots.sum())
    if total <= 0.0:
        raise InputError("Cell weights sum to zero; give cell areas.")
    return SuitabilitySurface(
        query_values=q,
        slot_weights=slots,
        total_weight=total,
        n_cells=int(n_cells),
        n_values=int(n_values),
        value_min=float(lo),
        value_max=float(hi),
        live_min=float(live_lo),
        live_max=float(live_hi),
    )




def _run_ends(vs: np.ndarray, q: np.ndarray, left: np.ndarray) -> np.ndarray:
    """``np.searchsorted(vs, q, side="right")`` given the left positions: a few steps along
    each run of cells equal to its query value (most runs are 0 or 1 long for continuous
    predictions), then a search only for the queries with longer runs."""
    right = left.copy()
    for _ in range(3):
        inside = right < vs.size
        step = inside.copy()
        step[inside] = vs[right[inside]] == q[inside]
        if not step.any():
            return right
        right += step
    rest = (right < vs.size)
    rest[rest] = vs[right[rest]] == q[rest]
    right[rest] = np.searchsorted(vs, q[rest], side="right")
    return right


def _summarise_sorted(source: CellSource, q: np.ndarray) -> SuitabilitySurface:
    """summarise_surface for cells in memory: the cells are sorted once (the floor of any
    exact method) and every set of query values is then placed by binary search, its slots
    summed over contiguous runs of the sorted weights. The same slots as the streamed
    pass, summed in another order (equal to about 1e-15 relative)."""
    v, w = source.in_memory
    if v.size == 0:
        raise InputError("No cell values were given; the testing region has no valid cells.")
    if "checked" not in source._cache:
        lo, hi = float(v.min()), float(v.max())
        if not (np.isfinite(lo) and np.isfinite(hi)):
            raise InputError("Some cell values are missing or infinite; drop nodata cells first.")
        if w is None:
            live = (v.size, lo, hi)
        else:
            if not (np.isfinite(w.sum()) and float(w.min()) >= 0.0):
                raise InputError("Cell weights must be finite and not negative.")
            pos = w > 0
            lv = v[pos]
            live = (int(pos.sum()), float(lv.min()) if lv.size else np.inf, float(lv.max()) if lv.size else -np.inf)
        source._cache["checked"] = (lo, hi, live)
    lo, hi, (n_cells, live_lo, live_hi) = source._cache["checked"]
    vs, ws = source.sorted_cells()
    n = vs.size
    bounds = np.empty(2 * q.size + 2, dtype=np.int64)
    bounds[0], bounds[-1] = 0, n
    left = np.searchsorted(vs, q, side="left")
    bounds[1:-1:2] = left
    bounds[2:-1:2] = _run_ends(vs, q, left)
    if ws is None:
        slots = np.diff(bounds).astype(np.float64)
    else:
        starts = bounds[:-1]
        nonempty = starts < bounds[1:]
        slots = np.zeros(starts.size)
        # Each non-empty slot runs to the next non-empty slot's start (empty ones have no length).
        slots[nonempty] = np.add.reduceat(ws, starts[nonempty])
    total = float(slots.sum())
    if total <= 0.0:
        raise InputError("Cell weights sum to zero; give cell areas.")
    return SuitabilitySurface(query_values=q, slot_weights=slots, total_weight=total, n_cells=int(n_cells),
                              n_values=int(n), value_min=lo, value_max=hi, live_min=float(live_lo),
                              live_max=float(live_hi))


# ----------------------------------------------------------------------------- draws


def draw_cells(cells, count: int, total_weight: float, rng: np.random.Generator) -> np.ndarray:
    """Values of ``count`` cells drawn independently with probability proportional to weight.

    This is where presences of a model with no predictive ability would fall:
    anywhere in the testing region, each place as likely as its area. One pass
    over the blocks: ``count`` uniform targets on [0, total weight) are sorted,
    and each block takes the targets that fall within its own cumulative weight,
    found run by run of equal weight (a raster row's cells share one area), then
    cell by cell within the run. Zero-weight cells are never drawn.

    Parameters
    ----------
    cells : CellSource, array_like or list of blocks
        See :func:`as_cells`.
    count : int
        Draws (with replacement).
    total_weight : float
        Summed weight of all cells (e.g. ``SuitabilitySurface.total_weight``).
    rng : numpy.random.Generator
        Source of the ``count`` uniform numbers (drawn first, in one call).

    Returns
    -------
    numpy.ndarray of float64, shape (count,)
        The drawn cells' values, in draw order.

    Examples
    --------
    >>> values, areas = np.array([0.1, 0.5, 0.9]), np.array([0.0, 1.0, 3.0])
    >>> draws = draw_cells(CellSource.from_array(values, areas), 4000, 4.0, np.random.default_rng(0))
    >>> sorted(set(draws.tolist()))  # never 0.1: it has no area
    [0.5, 0.9]
    >>> bool(abs(np.mean(draws == 0.9) - 0.75) < 0.03)  # 3 of 4 area units; 0.03 > 4 binomial SE
    True
    """
    targets = rng.random(count) * float(total_weight)
    source = as_cells(cells)
    if source.in_memory is not None and source.in_memory[1] is None:
        # Equal weights: the cumulative weights are 1, 2, ..., N, so the cell a target
        # falls in is its integer part (what the search below finds, without it).
        v = source.in_memory[0]
        return v[np.minimum(targets.astype(np.int64), v.size - 1)].astype(np.float64)
    order = np.argsort(targets, kind="stable")
    t = targets[order]
    out = np.empty(count, dtype=np.float64)
    done, offset = 0, 0.0
    last_value = None
    for v, runs in source.run_blocks():
        if v.size == 0:
            continue
        # Runs of equal weight (a raster's cells share their row's area): the cumulative
        # weight is needed only at run ends, not at every cell.
        rv, rl = (np.ones(1), np.array([v.size])) if runs is None else runs
        mass = rv * rl
        cum = np.cumsum(mass)
        block_total = float(cum[-1])
        if block_total <= 0.0:
            continue
        first = np.cumsum(rl) - rl  # first cell of each run
        weighted = np.flatnonzero(rv > 0)
        end = int(np.searchsorted(t, offset + block_total, side="left"))
        if end > done:
            # The run whose cumulative weight first exceeds the target (a zero-weight run
            # has no interval of its own and is never chosen), then the cell within it.
            u = t[done:end] - offset
            r = np.minimum(np.searchsorted(cum, u, side="right"), weighted[-1])
            before = np.concatenate(([0.0], cum[:-1]))[r]
            j = np.clip(np.floor((u - before) / rv[r]), 0, rl[r] - 1).astype(np.int64)
            out[order[done:end]] = v[first[r] + j]
            done = end
        offset += block_total
        last_value = v[first[weighted[-1]] + rl[weighted[-1]] - 1]  # last cell with weight
    if done < count:
        # Targets a rounding error above the summed weight: the last weighted cell.
        if last_value is None:
            raise InputError("Cell weights sum to zero; give cell areas.")
        out[order[done:]] = last_value
    return out
