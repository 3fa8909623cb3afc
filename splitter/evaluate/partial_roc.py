"""Exact area-based partial ROC with a bootstrap of evaluation presences.

Method: "Rethinking receiver operating characteristic analysis applications in
ecological niche modeling", Ecological Modelling 213 (2008). For a threshold t,

* x(t) = area-weighted share of the testing region's cells with value >= t
  (the area predicted present),
* y(t) = share of evaluation presences with score >= t (1 - omission).

The curve is the exact polyline through the points (x(t), y(t)) for t running down
over every distinct value of cells and presences: where no presence lies between
two values it runs flat (only area is added), a presence whose value no cell shares
adds a vertical step, and presences tied with cells add a diagonal. Its full area
equals the weighted Mann-Whitney AUC (scikit-learn's ``roc_auc_score`` with cell
areas as negative-class weights). A curve drawn only through the evaluation values
and joined by straight lines would be biased upward.

With omission tolerance E, only the part of the curve with y >= 1 - E counts:
x0 = the smallest x on the curve where y reaches 1 - E, the model's partial area is
the area under the curve from x0 to 1, the null's is the area under y = x over the
same range, (1 - x0²) / 2, and the AUC ratio is their quotient (1 = random,
maximum 2). With E = 1 the ratio is the full AUC / 0.5.

Computation. All cells are passed over once: each cell is placed among the sorted
distinct evaluation-presence values (a lookup table on a fine monotone bucketing of
the value range, with a binary search only for cells near a presence value), and
one weighted ``bincount`` gives, for every distinct presence value u, the area share
of cells strictly below u (``below``) and equal to u (``tied``). A bootstrap replicate
is then fully described by how many times it drew each distinct value; its ratio
follows from those counts in O(number of distinct values), by integrating in
horizontal strips::

    partial area = (1 - E) (1 - x0) + integral_{1-E}^{1} (1 - x(y)) dy

where x(y) is piecewise linear: a group of k sampled presences tied at value u spans
a height k/m over which x runs linearly from x(u+) = 1 - below(u) - tied(u) to
1 - below(u). No replicate touches the cells again.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from splitter.errors import InputError

__all__ = [
    "ROCCurve",
    "PartialROCResult",
    "partial_roc",
    "roc_curve_area",
    "partial_roc_reference",
]

# Replicates are processed in chunks so that the (replicates x distinct values)
# work arrays stay near this many elements whatever the number of presences.
_CHUNK_ELEMENTS = 2_000_000


# ----------------------------------------------------------------------------- results


@dataclass(frozen=True, eq=False)
class ROCCurve:
    """The exact area-based ROC curve.

    Attributes
    ----------
    x : numpy.ndarray
        Area share predicted present at each vertex (non-decreasing, 0 to 1).
    y : numpy.ndarray
        Share of presences predicted present at each vertex (non-decreasing, 0 to 1).
    auc : float
        Area under the curve.

    Notes
    -----
    Only the vertices where presences enter are stored (plus both ends): between them
    the curve is flat, so the cells in between lie on the straight segments and are
    not needed to draw it exactly.
    """

    x: np.ndarray
    y: np.ndarray
    auc: float

    def to_dict(self) -> dict:
        """The curve as lists (for JSON)."""
        return {"x": self.x.tolist(), "y": self.y.tolist(), "auc": self.auc}


@dataclass(frozen=True, eq=False)
class PartialROCResult:
    """Result of :func:`partial_roc`.

    Attributes
    ----------
    statistic : float
        Mean AUC ratio over bootstrap replicates.
    pvalue : float
        Share of replicates with AUC ratio <= 1 (no better than random).
    auc : float
        Full ROC AUC on all evaluation presences (null 0.5).
    auc_ratio : float
        Partial AUC ratio on all evaluation presences (observed).
    ratio_low, ratio_high : float
        2.5 and 97.5 percentiles of the bootstrap ratios (numpy's default linear method).
    omission : float
        Omission tolerance E.
    replicates : int
        Bootstrap replicates B.
    sample_size : int
        Presences drawn (with replacement) in each replicate.
    n_presences : int
        Evaluation presences.
    n_cells : int
        Cells of the testing region with positive weight.
    ratios : numpy.ndarray
        The B bootstrap ratios.
    curve : ROCCurve
        The exact curve on all presences, for plotting.
    """

    statistic: float
    pvalue: float
    auc: float
    auc_ratio: float
    ratio_low: float
    ratio_high: float
    omission: float
    replicates: int
    sample_size: int
    n_presences: int
    n_cells: int
    ratios: np.ndarray = field(repr=False)
    curve: ROCCurve = field(repr=False)

    def to_dict(self) -> dict:
        """Scalars only (the ratios are summarised by mean, percentiles and p)."""
        return {
            "statistic": self.statistic,
            "pvalue": self.pvalue,
            "auc": self.auc,
            "auc_ratio": self.auc_ratio,
            "ratio_low": self.ratio_low,
            "ratio_high": self.ratio_high,
            "ratio_sd": float(np.std(self.ratios, ddof=1)) if self.ratios.size > 1 else float("nan"),
            "omission": self.omission,
            "replicates": self.replicates,
            "sample_size": self.sample_size,
            "n_presences": self.n_presences,
            "n_cells": self.n_cells,
        }

    def to_frame(self):
        """One-row pandas DataFrame of :meth:`to_dict`."""
        import pandas as pd

        return pd.DataFrame([self.to_dict()])


# ----------------------------------------------------------------------------- checks


def _as_values(values) -> np.ndarray:
    # Keep float32 rasters as they are (no 10^7-element copy); everything else is
    # read as float64. Comparisons are later made in float64, where float32 is exact.
    arr = np.asarray(values)
    if arr.dtype.kind != "f":
        arr = arr.astype(np.float64)
    return arr.ravel()


def _check_inputs(cell_values, presence_scores, cell_weights):
    v = _as_values(cell_values)
    s = np.asarray(presence_scores, dtype=np.float64).ravel()
    if v.size == 0:
        raise InputError("No cell values were given; the testing region has no valid cells.")
    if s.size == 0:
        raise InputError("There are no evaluation presences; the partial ROC needs at least one.")
    # min and max propagate NaN and show infinities: two fast reductions instead of
    # an isfinite mask over every cell.
    vmin, vmax = v.min(), v.max()
    if not (np.isfinite(vmin) and np.isfinite(vmax)):
        raise InputError("Some cell values are missing or infinite; drop nodata cells before the partial ROC.")
    if not np.all(np.isfinite(s)):
        raise InputError("Some evaluation presence scores are missing or infinite; drop those records first.")
    w = None
    if cell_weights is not None:
        w = np.asarray(cell_weights, dtype=np.float64).ravel()
        if w.shape != v.shape:
            raise InputError(f"Got {w.size} cell weights for {v.size} cell values; give one weight per cell.")
        wmin, total = w.min(), w.sum()
        if not (np.isfinite(total) and wmin >= 0):
            raise InputError("Cell weights must be finite and not negative.")
        if total <= 0:
            raise InputError("Cell weights sum to zero; give cell areas.")
        if wmin == 0:
            live = v[w > 0]
            vmin, vmax = live.min(), live.max()
    # All-equal cells leave nothing to rank: every threshold selects all or none of
    # the region, so the curve says nothing about the model.
    if vmin == vmax:
        raise InputError(
            "All cell values of the testing region are equal, so the prediction does not rank "
            "the region; check the prediction raster for this fold."
        )
    return v, s, w


def _check_options(omission, replicates, sample_share):
    try:
        omission, sample_share = float(omission), float(sample_share)
        whole = not isinstance(replicates, bool) and int(replicates) == replicates
    except (TypeError, ValueError):
        raise InputError("Omission, replicates and sample share must be numbers, e.g. 0.05, 1000, 0.5.") from None
    if not (0.0 <= omission <= 1.0):
        raise InputError(f"Omission tolerance {omission} must lie in [0, 1], e.g. 0.05.")
    if not whole or int(replicates) < 1:
        raise InputError(f"Bootstrap replicates must be a whole number >= 1, got {replicates!r}.")
    if not (0.0 < sample_share <= 1.0):
        raise InputError(f"Bootstrap sample share {sample_share} must lie in (0, 1], e.g. 0.5.")
    return omission, int(replicates), sample_share


def _sample_size(n: int, sample_share: float) -> int:
    # Round half up (not Python's round-half-even), and draw at least one presence.
    return max(1, int(np.floor(sample_share * n + 0.5)))


def _required(omission: float, m: int) -> float:
    # Presences that must be predicted present, (1 - E) m, rounded to 1e-9 so that
    # e.g. E = 0.05 of 20 presences is exactly 19 despite binary floating point.
    return round((1.0 - omission) * m, 9)


# ----------------------------------------------------------------------------- core


@dataclass(frozen=True, eq=False)
class _Prepared:
    """Per distinct presence value (in descending order of value)."""

    values: np.ndarray  # distinct presence values, descending
    below: np.ndarray  # area share of cells strictly below the value
    tied: np.ndarray  # area share of cells equal to the value
    group: np.ndarray  # for each presence (input order): index into `values`
    n_cells: int


def _bucket(x: np.ndarray, low: float, scale: float, buckets: int) -> np.ndarray:
    """Monotone bucket number in -1..buckets (shifted to 0..buckets+1) of float values.

    Every step (subtract, multiply, clip, floor) is monotone in floating point, so
    x1 <= x2 implies bucket(x1) <= bucket(x2); that is all the exactness needs.
    """
    y = np.subtract(x, low, dtype=np.float64)
    y *= scale
    np.clip(y, -1.0, float(buckets), out=y)  # before the cast: huge values stay finite
    np.floor(y, out=y)
    return y.astype(np.intp) + 1


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

    Used by :func:`partial_roc` on cells in memory and by
    :mod:`splitter.evaluate.surface` on cells streamed from a raster.
    """

    def __init__(self, u: np.ndarray):
        # u: ascending distinct finite float64 query values.
        self.edges = np.column_stack([u, np.nextafter(u, np.inf)]).ravel()
        self.n_keys = 2 * u.size + 1
        low = float(self.edges[0])
        span = float(self.edges[-1]) - low  # > 0: u_0+ > u_0
        buckets = int(min(1 << 20, max(1 << 16, 64 * self.n_keys)))
        with np.errstate(over="ignore", divide="ignore"):
            scale = buckets / span
        self.use_table = bool(np.isfinite(span) and np.isfinite(scale) and scale > 0)
        self.low, self.scale, self.buckets = low, scale, buckets
        if self.use_table:
            edge_bucket = _bucket(self.edges, low, scale, buckets)
            self.table = np.searchsorted(edge_bucket, np.arange(buckets + 2), side="left")  # edges in lower buckets
            self.shared = np.zeros(buckets + 2, dtype=bool)
            self.shared[edge_bucket] = True

    def __call__(self, vb: np.ndarray) -> np.ndarray:
        """Key (0 .. n_keys - 1) of every value of the block ``vb``."""
        if self.use_table:
            with np.errstate(over="ignore"):  # overflow to inf is clipped to the top bucket
                b = _bucket(vb, self.low, self.scale, self.buckets)
            key = self.table[b]
            near = np.flatnonzero(self.shared[b])
            if near.size:
                key[near] = np.searchsorted(self.edges, vb[near].astype(np.float64), side="right")
            return key
        # Query values span less than ~1e-300, or more than the float range:
        # a plain binary search for every cell.
        return np.searchsorted(self.edges, vb.astype(np.float64), side="right")


def _prepare(v: np.ndarray, s: np.ndarray, w: np.ndarray | None) -> _Prepared:
    """The single pass over the cells (see :class:`_CellKeys`), in blocks that stay in cache."""
    u, inverse = np.unique(s, return_inverse=True)  # ascending distinct presence values
    keys = _CellKeys(u)
    mass = np.zeros(keys.n_keys)
    block = 1 << 18
    for start in range(0, v.size, block):
        key = keys(v[start : start + block])
        if w is None:
            mass += np.bincount(key, minlength=keys.n_keys)
        else:
            mass += np.bincount(key, weights=w[start : start + block], minlength=keys.n_keys)
    n_cells = v.size if w is None else int(np.count_nonzero(w))
    return _prepared_from_mass(u, inverse, mass, n_cells)


def _prepared_from_mass(u: np.ndarray, inverse: np.ndarray, mass: np.ndarray, n_cells: int) -> _Prepared:
    """Area below and tied with each distinct presence value from the key masses.

    ``mass`` (length 2d + 1, keys as in :class:`_CellKeys` for the ascending
    distinct presence values ``u``) holds the raw cell weight of every key.
    """
    d = u.size
    mass = mass / mass.sum()
    cum = np.cumsum(mass)
    # Prefix sums of non-negative masses are exactly 0 below the lowest cell, which
    # the degenerate-case handling relies on.
    below = cum[0 : 2 * d : 2]  # cum[2j] = mass of keys 0..2j, i.e. of cells < u[j]
    tied = mass[1 : 2 * d : 2]
    # Flip to descending order of value: the curve is traced from the top threshold down.
    order = np.arange(d)[::-1]
    group = (d - 1) - np.asarray(inverse).ravel()
    return _Prepared(values=u[order], below=below[order], tied=tied[order], group=group, n_cells=n_cells)


def _ratios_from_counts(counts: np.ndarray, prep: _Prepared, m: int, omission: float) -> np.ndarray:
    """AUC ratio per row of ``counts`` (rows = replicates, columns = distinct values,
    descending) for samples of m presences, by horizontal strips.

    In presence-count units y runs from 0 to m. A group of k presences tied at u,
    with `lo` presences above it, spans heights [lo, lo + k] over which 1 - x falls
    linearly from `below + tied` to `below`, so a group wholly above the level
    `required` adds k (below + tied / 2) to the strip integral of (1 - x(y)), and
    only the group straddling the level (the first whose cumulative count reaches
    it) needs its partial strip. Each replicate thus costs a few cumulative sums
    over the distinct values.
    """
    required = _required(omission, m)
    rows = np.arange(counts.shape[0])
    hi = np.cumsum(counts, axis=1)  # presences scoring >= the group's value
    strip = np.cumsum(counts * (prep.below + prep.tied / 2.0), axis=1)  # whole-group strips, top down
    total = strip[:, -1]
    if required <= 0.0:
        # E = 1: x0 = 0 and the model area is the full AUC.
        one_minus_x0 = np.ones(counts.shape[0])
        model = total / m
    else:
        # The straddling group: the first whose cumulative count reaches the level. It
        # holds at least one presence (the previous cumulative count is below the level).
        j = np.count_nonzero(hi < required, axis=1)
        k = counts[rows, j].astype(float)
        lo = hi[rows, j] - k
        upper = (prep.below + prep.tied)[j]  # 1 - x where the group's diagonal starts
        tied = prep.tied[j]
        one_minus_x0 = upper - tied * (required - lo) / k
        # Strip of the straddling group above the level: 1 - x from one_minus_x0 down to below.
        cross = (lo + k - required) * upper - tied * (k * k - (required - lo) ** 2) / (2.0 * k)
        top = (total - strip[rows, j]) + cross
        model = ((required / m) * one_minus_x0) + top / m
    null = one_minus_x0 * (2.0 - one_minus_x0) / 2.0  # (1 - x0²) / 2
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = model / null
    # x0 = 1: more than E of the sample scores below every cell, both areas vanish.
    # The ratio is then defined by continuity as its limit for x0 -> 1, the curve's
    # height just left of x = 1: the share of sampled presences scoring at or above
    # the lowest cell (at most 1 - E, so such a replicate never counts as better
    # than random).
    degenerate = one_minus_x0 <= 0.0
    if np.any(degenerate):
        reached = counts[degenerate] @ (prep.below + prep.tied > 0.0).astype(float) / m
        ratio[degenerate] = reached
    return ratio


def _curve(prep: _Prepared, n: int, counts: np.ndarray) -> ROCCurve:
    hi = np.cumsum(counts)
    lo = hi - counts
    x_start = 1.0 - (prep.below + prep.tied)
    x_end = 1.0 - prep.below
    x = np.concatenate(([0.0], np.column_stack([x_start, x_end]).ravel(), [1.0]))
    y = np.concatenate(([0.0], np.column_stack([lo / n, hi / n]).ravel(), [1.0]))
    auc = float(np.sum(counts * (prep.below + prep.tied / 2.0)) / n)
    return ROCCurve(x=x, y=y, auc=auc)


def roc_curve_area(cell_values, presence_scores, cell_weights=None) -> ROCCurve:
    """The exact area-based ROC curve of a prediction over a testing region.

    Parameters
    ----------
    cell_values : array_like of float, shape (N,)
        Predictions of the valid cells of the testing region.
    presence_scores : array_like of float, shape (n,)
        Predictions at the evaluation presences.
    cell_weights : array_like of float, shape (N,), optional
        Cell areas; None weights cells equally.

    Returns
    -------
    ROCCurve
        Vertices x (area predicted present), y (presences predicted present) and the
        full AUC, equal to the weighted Mann-Whitney statistic.

    Examples
    --------
    >>> c = roc_curve_area([0.1, 0.2, 0.3, 0.4], [0.35, 0.4])
    >>> c.auc  # one presence above 3 of 4 cells, one tied with the top cell
    0.8125
    """
    v, s, w = _check_inputs(cell_values, presence_scores, cell_weights)
    prep = _prepare(v, s, w)
    counts = np.bincount(prep.group, minlength=prep.values.size)
    return _curve(prep, s.size, counts)


def partial_roc(
    cell_values,
    presence_scores,
    cell_weights=None,
    omission: float = 0.05,
    replicates: int = 1000,
    sample_share: float = 0.5,
    seed=0,
) -> PartialROCResult:
    """Partial ROC AUC ratio with a bootstrap of evaluation presences.

    Parameters
    ----------
    cell_values : array_like of float, shape (N,)
        Predictions of the valid cells of the testing region (nodata removed). Only
        their order matters: values outside [0, 1] are fine.
    presence_scores : array_like of float, shape (n,)
        Predictions at the evaluation presences.
    cell_weights : array_like of float, shape (N,), optional
        Cell areas (e.g. :func:`splitter.evaluate.cell_areas` per row); None weights
        cells equally. Zero-weight cells are ignored.
    omission : float, default 0.05
        Omission tolerance E in [0, 1]; only the curve where y >= 1 - E counts.
        E = 1 gives the full-curve ratio (2 x AUC).
    replicates : int, default 1000
        Bootstrap replicates B.
    sample_share : float, default 0.5
        Each replicate draws ``floor(sample_share * n + 0.5)`` presences (at least
        one) with replacement.
    seed : int or numpy.random.Generator, default 0
        Seed of ``numpy.random.default_rng``. The replicates' presence indices are
        exactly ``np.random.default_rng(seed).integers(0, n, size=(replicates, m))``.

    Returns
    -------
    PartialROCResult
        ``statistic`` = mean bootstrap ratio, ``pvalue`` = share of replicates with
        ratio <= 1, the 95 % percentile interval, the observed ratio and full AUC on
        all presences, and the curve.

    Raises
    ------
    InputError
        No presences, no valid cells, all cell values equal, non-finite values, or
        options out of range.

    Notes
    -----
    Cost: one O(N) pass over the N cells (placing each among the distinct presence
    values, then a weighted bincount), then O(B x n) for the bootstrap; about 0.1 s
    for 10^7 cells, 500 presences and 1000 replicates on one core (see
    tests/benchmarks/bench_partial_roc.py). If more than E of a
    replicate's presences score below every cell, x0 = 1 and both areas vanish;
    the ratio is then its limit, the share of presences at or above the lowest
    cell (which is below 1).

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> cells = rng.random(10_000)
    >>> presences = np.sqrt(rng.random(200))  # skewed towards high suitability
    >>> r = partial_roc(cells, presences, replicates=200, seed=2)
    >>> bool(r.statistic > 1 and r.pvalue < 0.05)
    True
    """
    omission, replicates, sample_share = _check_options(omission, replicates, sample_share)
    v, s, w = _check_inputs(cell_values, presence_scores, cell_weights)
    return _result(_prepare(v, s, w), s.size, omission, replicates, sample_share, seed)


def _result(prep: _Prepared, n: int, omission: float, replicates: int, sample_share: float, seed) -> PartialROCResult:
    """Observed curve and ratio, then the bootstrap, from the prepared cell summary alone.

    Shared by :func:`partial_roc` and :func:`splitter.evaluate.surface.partial_roc_from_surface`,
    so the in-memory and streamed paths draw the same replicates for the same seed.
    """
    d = prep.values.size

    all_counts = np.bincount(prep.group, minlength=d)
    curve = _curve(prep, n, all_counts)
    observed = float(_ratios_from_counts(all_counts[None, :], prep, n, omission)[0])

    m = _sample_size(n, sample_share)
    rng = np.random.default_rng(seed)
    indices = rng.integers(0, n, size=(replicates, m))
    ratios = np.empty(replicates)
    chunk = max(1, _CHUNK_ELEMENTS // max(d, m))
    for start in range(0, replicates, chunk):
        block = prep.group[indices[start : start + chunk]]  # (rows, m) group of each draw
        rows = block.shape[0]
        flat = block + d * np.arange(rows)[:, None]
        counts = np.bincount(flat.ravel(), minlength=rows * d).reshape(rows, d)
        ratios[start : start + rows] = _ratios_from_counts(counts, prep, m, omission)

    low, high = np.percentile(ratios, [2.5, 97.5])
    return PartialROCResult(
        statistic=float(ratios.mean()),
        pvalue=float(np.mean(ratios <= 1.0)),
        auc=curve.auc,
        auc_ratio=observed,
        ratio_low=float(low),
        ratio_high=float(high),
        omission=omission,
        replicates=replicates,
        sample_size=m,
        n_presences=n,
        n_cells=prep.n_cells,
        ratios=ratios,
        curve=curve,
    )


# ----------------------------------------------------------------------------- reference


def partial_roc_reference(cell_values, presence_scores, indices, cell_weights=None, omission=0.05) -> np.ndarray:
    """Plain per-replicate partial ROC ratios (slow; a check on :func:`partial_roc`).

    For every row of ``indices`` it builds the full polyline over all cells and the
    sampled presences (every distinct value a vertex) and integrates y dx from x0 to
    1 by trapezoids. It passes over all cells once per replicate.

    Parameters
    ----------
    cell_values, presence_scores, cell_weights
        As in :func:`partial_roc`.
    indices : array_like of int, shape (B, m)
        Presence indices of each replicate (use ``np.arange(n)[None, :]`` for the
        observed ratio on all presences).
    omission : float
        Omission tolerance E.

    Returns
    -------
    numpy.ndarray, shape (B,)
        AUC ratio per replicate.
    """
    omission = _check_options(omission, 1, 0.5)[0]
    v, s, w = _check_inputs(cell_values, presence_scores, cell_weights)
    if w is None:
        w = np.ones_like(v)
    keep = w > 0
    v, w = v[keep], w[keep] / w[keep].sum()
    indices = np.atleast_2d(np.asarray(indices))
    out = np.empty(indices.shape[0])
    for b, row in enumerate(indices):
        sample = s[row]
        m = sample.size
        required = _required(omission, m)
        values, inv = np.unique(np.concatenate([v, sample]), return_inverse=True)
        inv = inv.ravel()
        k = values.size
        width = np.bincount(inv[: v.size], weights=w, minlength=k)[::-1]  # descending values
        rise = np.bincount(inv[v.size :], minlength=k)[::-1].astype(float)
        # Vertices P_0 = (0, 0), P_j after threshold value j (descending). Keep 1 - x
        # (area strictly below the threshold) to avoid cancellation near x = 1.
        rest = np.concatenate([np.cumsum(width[::-1])[::-1][1:], [0.0]])  # 1 - x at P_j, j >= 1
        rest = np.concatenate([[1.0], rest])
        height = np.concatenate([[0.0], np.cumsum(rise)])  # presence counts at P_j
        widths = np.concatenate([[0.0], width])
        if required <= 0.0:
            j = 0
            one_minus_x0 = 1.0
            area = 0.0
        else:
            j = int(np.argmax(height >= required))  # first vertex at or above the level
            frac = (required - height[j - 1]) / (height[j] - height[j - 1])
            one_minus_x0 = rest[j - 1] - frac * widths[j]
            # Trapezoid from x0 to P_j: width (1 - x0) - (1 - x_j), heights required and height[j].
            area = (one_minus_x0 - rest[j]) * (required + height[j]) / 2.0
        area += np.sum(widths[j + 1 :] * (height[j:-1] + height[j + 1 :]) / 2.0)
        area /= m
        if one_minus_x0 <= 0.0:
            # Limit for x0 -> 1 (see partial_roc): height just left of x = 1.
            lowest = np.flatnonzero(width > 0)[-1]  # the lowest cell value, descending index
            out[b] = height[lowest + 1] / m
        else:
            out[b] = area / (one_minus_x0 * (2.0 - one_minus_x0) / 2.0)
    return out
