"""Exact evaluation of prediction rasters larger than memory, from streamed cells.

The significance and performance tests of a fold need from the prediction raster
only a handful of numbers, all known in advance of reading it:

* the cumulative binomial test: the area share of cells ``>= threshold``;
* the partial ROC (Ecological Modelling 213, 2008): for every distinct evaluation
  presence value u, the area share of cells strictly below u and equal to u (see
  :mod:`splitter.evaluate.partial_roc`; its bootstrap never looks at cells again);
* the continuous Boyce index ("Evaluating the ability of habitat suitability models
  to predict species presences", Ecological Modelling 2006): the area share of cells
  in each closed moving window ``[start, end]``, i.e. the area below each ``start``
  and at or below each ``end``.

So the cells are streamed once, in blocks (e.g. the row windows of
:func:`splitter.io.rasters.valid_cells`), and each block is placed among the sorted
*query values* (presence values, thresholds, window edges) with the same one-pass
lookup as the in-memory partial ROC; one weighted ``bincount`` per block adds the
block's area to every "strictly between two query values" and "equal to a query
value" slot. The result, :class:`SuitabilitySurface`, holds those slot weights
exactly (no binning of values): every number above is a sum of slots. Memory is
one block plus O(number of query values), whatever the raster size.

The Boyce windows are laid on the range of the cell values, which is only known
after a pass over the cells, so :func:`evaluate_surface` makes two passes when the
Boyce index is asked for and no range is given: a cheap min/max pass, then the
summary pass.

The results equal the in-memory functions on all cells (``partial_roc``,
``area_predicted``, ``boyce_index``) up to the order in which floating-point areas
are summed (about 1e-15 relative), and the bootstrap draws the same replicates for
the same seed.

Examples
--------
>>> rng = np.random.default_rng(0)
>>> cells = rng.random(10_000)
>>> areas = rng.uniform(0.5, 1.0, 10_000)
>>> presences = np.sqrt(rng.random(100))
>>> blocks = [(cells[i : i + 1000], areas[i : i + 1000]) for i in range(0, 10_000, 1000)]
>>> result = evaluate_surface(blocks, presences, thresholds=[0.3], replicates=200, seed=1)
>>> from splitter.evaluate import partial_roc
>>> bool(abs(result.partial_roc.auc - partial_roc(cells, presences, areas, replicates=1).auc) < 1e-12)
True
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterable

import numpy as np

from splitter.errors import InputError
from splitter.evaluate.boyce import BoyceResult, _from_expected, _windows
from splitter.evaluate.partial_roc import (
    PartialROCResult,
    _CellKeys,
    _check_options,
    _prepared_from_mass,
    _result,
)

__all__ = [
    "SuitabilitySurface",
    "SurfaceEvaluation",
    "surface_queries",
    "surface_range",
    "summarise_surface",
    "partial_roc_from_surface",
    "boyce_from_surface",
    "evaluate_surface",
]

# Cells keyed at a time inside a block: the lookup's temporaries (bucket numbers,
# keys) then stay in the CPU caches, as in the in-memory partial ROC.
_CHUNK = 1 << 18


# ----------------------------------------------------------------------------- results


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


@dataclass(frozen=True, eq=False)
class SurfaceEvaluation:
    """Result of :func:`evaluate_surface`.

    Attributes
    ----------
    thresholds : numpy.ndarray
        The thresholds asked about, in the order given.
    area_shares : numpy.ndarray
        Weighted share of cells ``>=`` each threshold.
    partial_roc : PartialROCResult
        As :func:`splitter.evaluate.partial_roc` on all cells (with its curve for the figure).
    boyce : BoyceResult or None
        As :func:`splitter.evaluate.boyce_index` on all cells; None if not asked for.
    surface : SuitabilitySurface
        The streamed summary (cell value range, total area, cell count).
    """

    thresholds: np.ndarray
    area_shares: np.ndarray
    partial_roc: PartialROCResult = field(repr=False)
    boyce: BoyceResult | None = field(repr=False)
    surface: SuitabilitySurface = field(repr=False)

    def to_dict(self) -> dict:
        """Scalars and short lists (for JSON)."""
        out = {
            "thresholds": self.thresholds.tolist(),
            "area_shares": self.area_shares.tolist(),
            "boyce": self.boyce.statistic if self.boyce is not None else float("nan"),
        }
        out.update({f"partial_roc_{k}": v for k, v in self.partial_roc.to_dict().items()})
        out.update(self.surface.to_dict())
        return out

    def to_frame(self):
        """One-row pandas DataFrame of :meth:`to_dict`."""
        import pandas as pd

        return pd.DataFrame([self.to_dict()])


# ----------------------------------------------------------------------------- inputs


def _finite_scores(values, what: str, name: str) -> np.ndarray:
    s = np.asarray(values, dtype=np.float64).ravel()
    if not np.all(np.isfinite(s)):
        raise InputError(f"Some {what} are missing or infinite; drop those {name} first.")
    return s


def _block_arrays(block) -> tuple[np.ndarray, np.ndarray | None]:
    """(values, weights) of one streamed block.

    A block is a ``CellBlock`` from :func:`splitter.io.rasters.valid_cells` (values
    and areas), a ``(values, weights)`` pair (weights may be None), or a bare array
    of values (equal weights).
    """
    if hasattr(block, "values") and hasattr(block, "areas"):
        values, weights = block.values, block.areas
    elif isinstance(block, tuple) and len(block) == 2:
        values, weights = block
    else:
        values, weights = block, None
    v = np.asarray(values)
    if v.dtype.kind != "f":
        v = v.astype(np.float64)
    v = v.ravel()
    if weights is None:
        return v, None
    w = np.asarray(weights, dtype=np.float64).ravel()
    if w.shape != v.shape:
        raise InputError(f"A block has {w.size} cell weights for {v.size} cell values; give one weight per cell.")
    return v, w


def _stream(blocks, passes_needed: int):
    """A function returning a fresh iterable of blocks for each pass.

    ``blocks`` may be a zero-argument callable (called once per pass, e.g.
    ``lambda: valid_cells(path, region)``), or a re-iterable such as a list. A
    one-shot iterator can serve a single pass only.
    """
    if callable(blocks):
        return blocks
    if passes_needed > 1 and iter(blocks) is blocks:
        raise InputError(
            "The cells can be streamed only once here, but the Boyce windows need a first pass for the "
            "value range; pass a function that returns the blocks (e.g. lambda: valid_cells(path)) "
            "or give value_range."
        )
    return lambda: blocks


# ----------------------------------------------------------------------------- passes


def surface_queries(presence_scores=(), thresholds=(), boyce_range=None, width_share: float = 0.1,
                    step_share: float = 0.01) -> np.ndarray:
    """The values a surface must be summarised for, ascending and distinct.

    Parameters
    ----------
    presence_scores : array_like of float
        Predictions at the evaluation presences (for the partial ROC).
    thresholds : array_like of float
        Thresholds whose area share is wanted (for the binomial test).
    boyce_range : (float, float), optional
        Suitability range the Boyce windows are laid on (usually the cells' min and
        max, from :func:`surface_range`); None leaves the Boyce windows out.
    width_share, step_share : float
        Boyce window width and step as shares of the range (as in
        :func:`splitter.evaluate.boyce_index`).

    Returns
    -------
    numpy.ndarray
        Ascending distinct float64 values.

    Examples
    --------
    >>> surface_queries([0.2, 0.7, 0.2], thresholds=[0.5]).tolist()
    [0.2, 0.5, 0.7]
    >>> surface_queries(boyce_range=(0.0, 1.0), width_share=0.5, step_share=0.25).tolist()
    [0.0, 0.25, 0.5, 0.75, 1.0]
    """
    parts = [
        _finite_scores(presence_scores, "evaluation presence scores", "records"),
        _finite_scores(thresholds, "thresholds", "thresholds"),
    ]
    if boyce_range is not None:
        lo, hi = boyce_range
        starts, ends, _ = _windows(lo, hi, width_share, step_share)
        parts += [starts, ends]
    return np.unique(np.concatenate(parts))


def surface_range(blocks: Iterable) -> tuple[float, float]:
    """Smallest and largest cell value over streamed blocks (the cheap first pass).

    Parameters
    ----------
    blocks : iterable
        Blocks as for :func:`summarise_surface`.

    Returns
    -------
    (float, float)

    Examples
    --------
    >>> surface_range([np.array([0.4, 0.2]), np.array([0.9])])
    (0.2, 0.9)
    """
    lo, hi = np.inf, -np.inf
    for block in blocks:
        v, _ = _block_arrays(block)
        if v.size:
            lo, hi = min(lo, float(v.min())), max(hi, float(v.max()))
    if lo > hi:
        raise InputError("No cell values were given; the testing region has no valid cells.")
    if not (np.isfinite(lo) and np.isfinite(hi)):
        raise InputError("Some cell values are missing or infinite; drop nodata cells first.")
    return lo, hi


def summarise_surface(blocks: Iterable, query_values) -> SuitabilitySurface:
    """Stream cell blocks once into exact weights around the query values.

    Parameters
    ----------
    blocks : iterable
        Each item is a ``CellBlock`` from :func:`splitter.io.rasters.valid_cells`
        (values and areas), a ``(values, weights)`` pair (weights None = equal), or
        a bare array of values. Values must be finite (nodata removed), weights
        finite and not negative.
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
    q = np.unique(_finite_scores(query_values, "query values", "values"))
    if q.size == 0:
        raise InputError("No query values were given; pass the presence scores and thresholds to summarise for.")
    keys = _CellKeys(q)
    slots = np.zeros(keys.n_keys)
    n_values = n_cells = 0
    lo = live_lo = np.inf
    hi = live_hi = -np.inf
    for block in blocks:
        v, w = _block_arrays(block)
        if v.size == 0:
            continue
        # min and max propagate NaN and show infinities: two reductions, no mask over the block.
        bmin, bmax = float(v.min()), float(v.max())
        if not (np.isfinite(bmin) and np.isfinite(bmax)):
            raise InputError("Some cell values are missing or infinite; drop nodata cells first.")
        lo, hi = min(lo, bmin), max(hi, bmax)
        n_values += v.size
        if w is None:
            n_cells += v.size
            live_lo, live_hi = min(live_lo, bmin), max(live_hi, bmax)
        else:
            wmin, wsum = float(w.min()), float(w.sum())
            if not (np.isfinite(wsum) and wmin >= 0.0):
                raise InputError("Cell weights must be finite and not negative.")
            if wmin > 0.0:
                n_cells += v.size
                live_lo, live_hi = min(live_lo, bmin), max(live_hi, bmax)
            else:
                live = v[w > 0]
                n_cells += live.size
                if live.size:
                    live_lo, live_hi = min(live_lo, float(live.min())), max(live_hi, float(live.max()))
        for start in range(0, v.size, _CHUNK):
            key = keys(v[start : start + _CHUNK])
            if w is None:
                slots += np.bincount(key, minlength=keys.n_keys)
            else:
                slots += np.bincount(key, weights=w[start : start + _CHUNK], minlength=keys.n_keys)
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


# ----------------------------------------------------------------------------- tests


def partial_roc_from_surface(
    surface: SuitabilitySurface,
    presence_scores,
    omission: float = 0.05,
    replicates: int = 1000,
    sample_share: float = 0.5,
    seed=0,
) -> PartialROCResult:
    """Partial ROC from a streamed surface; as :func:`splitter.evaluate.partial_roc` on all cells.

    Parameters
    ----------
    surface : SuitabilitySurface
        Summarised for (at least) every presence score.
    presence_scores, omission, replicates, sample_share, seed
        As in :func:`splitter.evaluate.partial_roc`; the same seed draws the same
        replicates.

    Returns
    -------
    PartialROCResult

    Raises
    ------
    InputError
        As :func:`~splitter.evaluate.partial_roc`, or a presence score the surface was
        not summarised for.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> cells, presences = rng.random(5000), np.sqrt(rng.random(80))
    >>> s = summarise_surface([cells[:2500], cells[2500:]], presences)
    >>> r = partial_roc_from_surface(s, presences, replicates=100, seed=3)
    >>> bool(r.statistic > 1 and r.pvalue < 0.05)
    True
    """
    omission, replicates, sample_share = _check_options(omission, replicates, sample_share)
    s = np.asarray(presence_scores, dtype=np.float64).ravel()
    if s.size == 0:
        raise InputError("There are no evaluation presences; the partial ROC needs at least one.")
    if not np.all(np.isfinite(s)):
        raise InputError("Some evaluation presence scores are missing or infinite; drop those records first.")
    if surface.live_min == surface.live_max:
        raise InputError(
            "All cell values of the testing region are equal, so the prediction does not rank "
            "the region; check the prediction raster for this fold."
        )
    u, inverse = np.unique(s, return_inverse=True)
    pos = surface._positions(u, "presence score")
    # Merge the surface's slots into the slots of the presence values alone (below
    # u_0, at u_0, between u_0 and u_1, ...): segment sums by reduceat, whose
    # segments are never empty because their bounds alternate in parity.
    bounds = np.column_stack([2 * pos + 1, 2 * pos + 2]).ravel()
    mass = np.add.reduceat(surface.slot_weights, np.r_[0, bounds])
    prep = _prepared_from_mass(u, inverse, mass, surface.n_cells)
    return _result(prep, s.size, omission, replicates, sample_share, seed)


def boyce_from_surface(
    surface: SuitabilitySurface,
    presence_scores,
    width_share: float = 0.1,
    step_share: float = 0.01,
    value_range=None,
) -> BoyceResult:
    """Continuous Boyce index from a streamed surface; as :func:`splitter.evaluate.boyce_index`.

    Parameters
    ----------
    surface : SuitabilitySurface
        Summarised for the window edges, i.e. with
        ``surface_queries(boyce_range=value_range or (value_min, value_max), ...)``.
    presence_scores : array_like of float
        Predictions at evaluation presences.
    width_share, step_share, value_range
        As in :func:`splitter.evaluate.boyce_index`; the default range is the cells'
        min and max (``surface.value_min``, ``surface.value_max``).

    Returns
    -------
    BoyceResult

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> cells, presences = rng.random(20_000), np.sqrt(rng.random(500))
    >>> lo, hi = surface_range([cells])
    >>> s = summarise_surface([cells[:9000], cells[9000:]], surface_queries(boyce_range=(lo, hi)))
    >>> round(boyce_from_surface(s, presences).statistic, 1)
    1.0
    """
    pres = np.asarray(presence_scores, dtype=np.float64).ravel()
    if pres.size == 0:
        raise InputError("There are no evaluation presences; the Boyce index needs at least one.")
    if not np.all(np.isfinite(pres)):
        raise InputError("Some scores are missing or infinite; drop nodata cells and those records first.")
    lo, hi = (surface.value_min, surface.value_max) if value_range is None else value_range
    starts, ends, width = _windows(lo, hi, width_share, step_share)
    # Cells in [start, end] fill the slots from "equal to start" (2j + 1) to "equal
    # to end" (2k + 1). Each window sums its own slots (as boyce_index sums its own
    # pieces) rather than differencing running totals, which would cancel badly for
    # small windows; zero slots are left out so that windows holding the same cells
    # add the same numbers in the same order and tie exactly.
    first = 2 * surface._positions(starts, "Boyce window start") + 1
    last = 2 * surface._positions(ends, "Boyce window end") + 2
    slots = surface.slot_weights
    weight = np.array([_nonzero_sum(slots[a:b]) for a, b in zip(first, last)])
    expected = weight / surface.total_weight
    return _from_expected(pres, starts, ends, width, expected)


def _nonzero_sum(x: np.ndarray) -> float:
    return float(x[x != 0.0].sum())


def evaluate_surface(
    blocks,
    presence_scores,
    thresholds=(),
    *,
    omission: float = 0.05,
    replicates: int = 1000,
    sample_share: float = 0.5,
    seed=0,
    boyce: bool = True,
    width_share: float = 0.1,
    step_share: float = 0.01,
    value_range=None,
) -> SurfaceEvaluation:
    """Binomial area shares, partial ROC and Boyce index of a fold from streamed cells.

    Parameters
    ----------
    blocks : callable or iterable
        A zero-argument function returning the cell blocks afresh (e.g.
        ``lambda: valid_cells(path, region)``), or a list of blocks; see
        :func:`summarise_surface` for what a block is. Called twice when the Boyce
        index is asked for without ``value_range`` (a min/max pass, then the
        summary pass), otherwise once.
    presence_scores : array_like of float
        Predictions at the evaluation presences.
    thresholds : array_like of float
        Thresholds whose area share (cells ``>=`` threshold) is wanted.
    omission, replicates, sample_share, seed
        Partial ROC options, as in :func:`splitter.evaluate.partial_roc`.
    boyce : bool, default True
        Also compute the continuous Boyce index.
    width_share, step_share, value_range
        Boyce options, as in :func:`splitter.evaluate.boyce_index`.

    Returns
    -------
    SurfaceEvaluation

    Raises
    ------
    InputError
        As the in-memory functions: no valid cells, all cells equal, no presences,
        non-finite values, options out of range.

    Examples
    --------
    >>> rng = np.random.default_rng(2)
    >>> cells, presences = rng.random(8000), np.sqrt(rng.random(60))
    >>> r = evaluate_surface(lambda: (cells[i : i + 1000] for i in range(0, 8000, 1000)),
    ...                      presences, thresholds=[0.25], replicates=100)
    >>> round(float(r.area_shares[0]), 2), bool(r.boyce.statistic > 0.5)
    (0.75, True)
    """
    # Options are checked before any pass over a possibly large raster.
    omission, replicates, sample_share = _check_options(omission, replicates, sample_share)
    pres = _finite_scores(presence_scores, "evaluation presence scores", "records")
    if pres.size == 0:
        raise InputError("There are no evaluation presences; the partial ROC needs at least one.")
    thr = _finite_scores(thresholds, "thresholds", "thresholds")
    need_range = boyce and value_range is None
    source = _stream(blocks, 2 if need_range else 1)
    boyce_range = None
    if boyce:
        boyce_range = surface_range(source()) if need_range else tuple(value_range)
        if need_range and boyce_range[0] == boyce_range[1]:
            # Same message as the partial ROC gives, rather than the Boyce one about an empty range.
            raise InputError(
                "All cell values of the testing region are equal, so the prediction does not rank "
                "the region; check the prediction raster for this fold."
            )
    queries = surface_queries(pres, thr, boyce_range, width_share, step_share)
    surface = summarise_surface(source(), queries)
    proc = partial_roc_from_surface(surface, pres, omission, replicates, sample_share, seed)
    shares = np.array([surface.area_share_at(t) for t in thr])
    boyce_result = boyce_from_surface(surface, pres, width_share, step_share, boyce_range) if boyce else None
    return SurfaceEvaluation(thresholds=thr, area_shares=shares, partial_roc=proc, boyce=boyce_result,
                             surface=surface)
