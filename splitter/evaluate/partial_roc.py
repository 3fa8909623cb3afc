"""Exact area-based partial ROC, tested against presences placed at random.

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
the area under the curve from x0 to 1, the null line's is the area under y = x over
the same range, (1 - x0²) / 2, and the AUC ratio is their quotient. With E = 1 the
ratio is the full AUC / 0.5.

Significance. The ratio exceeds 1 for *any* model when few presences may be
omitted: where y >= 1 - E the curve is at least 1 - E while the null line starts at
x0, so with 10 presences and E = 0.05 the ratio is 2 / (1 + x0) > 1 whatever the
model. Comparing bootstrap ratios with 1 is therefore no test against a model of no
predictive ability. The test here compares the observed ratio with B ratios of the
same number of presences placed at random in the testing region (cells drawn with
probability proportional to their area; without a raster, background or absence
records), the same E and the same exact curve, and reports the Monte Carlo p-value
p = (1 + #{null ratios >= observed}) / (1 + B), which is never 0 and whose floor
1 / (1 + B) shows how many replicates were run (common practice for Monte Carlo
tests; Davison & Hinkley, Bootstrap Methods and their Application, Cambridge
University Press 1997). The bootstrap of 50 % of the presences (with replacement)
is kept to describe the observed ratio's spread (its 2.5-97.5 percentiles), and the
conventional p (share of bootstrap ratios <= 1) is kept under its own name for
comparison with published studies only.

Computation. The cells are never sorted. One pass (see :mod:`splitter.evaluate.cells`)
gives, for every distinct value u that a presence takes, the area share of cells
strictly below u and equal to u; a second pass draws the null presences' cells by
area and a third places their values in the same way. A sample of presences (the
observed one, a bootstrap replicate or a null replicate) is then fully described
by those two shares per presence; its ratio follows by integrating in horizontal
strips, O(m log m) for m presences, with no further pass over the cells::

    partial area = (1 - E) (1 - x0) + integral_{1-E}^{1} (1 - x(y)) dy

where x(y) is piecewise linear: a group of k presences tied at u spans a height k/m
over which x runs linearly from x(u+) = 1 - below(u) - tied(u) to 1 - below(u).
The presences above the level (1 - E) m enter only by number, through (1 - E); so
the third pass places only each null replicate's lowest ~E n + 1 values (see
:func:`null_sample`), 26 of 500 at E = 0.05, and its lookup table stays in cache.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from splitter.errors import InputError
from splitter.evaluate.cells import SuitabilitySurface, as_cells, draw_cells, summarise_surface

__all__ = ["ROCCurve", "PartialROCResult", "partial_roc", "roc_curve_area"]

# Replicates are processed in chunks so that the (replicates x presences) work
# arrays stay near this many elements whatever the number of presences.
_CHUNK_ELEMENTS = 1_000_000


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
        Observed AUC ratio on all evaluation presences (the test statistic; same
        as ``auc_ratio``).
    pvalue : float
        Monte Carlo p-value against presences placed at random in the testing
        region: (1 + #{null ratios >= observed}) / (1 + B). Never 0; its floor
        1 / (1 + B) shows the number of null replicates.
    auc : float
        Full ROC AUC on all evaluation presences (null 0.5).
    auc_ratio : float
        Partial AUC ratio on all evaluation presences (observed).
    null_median : float
        Median of the null ratios: what a model of no predictive ability scores
        with this many presences and this E (often well above 1 for few presences).
    bootstrap_mean : float
        Mean of the bootstrap ratios (50 % of the presences per replicate); a
        description, not the statistic.
    ratio_low, ratio_high : float
        2.5 and 97.5 percentiles of the bootstrap ratios (numpy's default linear method).
    pvalue_bootstrap : float
        Conventional p: share of bootstrap ratios <= 1. For comparison with
        published studies only: it does not hold its size (a model of no skill is
        called significant far more often than alpha when presences are few).
    omission : float
        Omission tolerance E.
    replicates : int
        Bootstrap replicates and null replicates B (the same number of each).
    sample_size : int
        Presences drawn (with replacement) in each bootstrap replicate.
    n_presences : int
        Evaluation presences.
    n_cells : int
        Cells of the testing region with positive weight.
    can_omit : bool
        Whether a bootstrap replicate may omit at least one presence
        (``sample_size * omission >= 1``). When it may not, the partial area is
        the curve from the lowest presence upwards and the bootstrap ratios exceed
        1 for any model.
    ratios : numpy.ndarray
        The B bootstrap ratios.
    null_ratios : numpy.ndarray
        The B null ratios. Both are empty, and ``sample_size`` and ``n_cells`` None,
        in a fold read back from evaluation.json, which keeps only their summaries
        (``FoldEvaluation.from_row``).
    curve : ROCCurve
        The exact curve on all presences, for plotting.
    """

    statistic: float
    pvalue: float
    auc: float
    auc_ratio: float
    null_median: float
    bootstrap_mean: float
    ratio_low: float
    ratio_high: float
    pvalue_bootstrap: float
    omission: float
    replicates: int
    sample_size: int
    n_presences: int
    n_cells: int
    can_omit: bool
    ratios: np.ndarray = field(repr=False)
    null_ratios: np.ndarray = field(repr=False)
    curve: ROCCurve = field(repr=False)

    def to_dict(self) -> dict:
        """Scalars only (the ratio arrays are summarised)."""
        return {
            "statistic": self.statistic,
            "pvalue": self.pvalue,
            "auc": self.auc,
            "auc_ratio": self.auc_ratio,
            "null_median": self.null_median,
            "bootstrap_mean": self.bootstrap_mean,
            "ratio_low": self.ratio_low,
            "ratio_high": self.ratio_high,
            "ratio_sd": float(np.std(self.ratios, ddof=1)) if self.ratios.size > 1 else float("nan"),
            "pvalue_bootstrap": self.pvalue_bootstrap,
            "omission": self.omission,
            "replicates": self.replicates,
            "sample_size": self.sample_size,
            "n_presences": self.n_presences,
            "n_cells": self.n_cells,
            "can_omit": self.can_omit,
        }

    def to_frame(self):
        """One-row pandas DataFrame of :meth:`to_dict`."""
        import pandas as pd

        return pd.DataFrame([self.to_dict()])


# ----------------------------------------------------------------------------- checks


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
class _ValueTable:
    """Area share of cells strictly below and equal to each distinct value (ascending);
    NaN where a ratio never reads it (see :func:`null_sample`)."""

    values: np.ndarray
    below: np.ndarray
    tied: np.ndarray
    # At or above the lowest cell with positive weight, i.e. below + tied > 0.
    positive: np.ndarray


def _table(surface: SuitabilitySurface, values: np.ndarray, read: np.ndarray | None = None) -> _ValueTable:
    """Shares for ascending distinct ``values``; those where ``read`` is True (all when None)
    must be among the surface's query values."""
    read = np.ones(values.size, dtype=bool) if read is None else read
    pos = surface._positions(values[read], "presence score")
    total = surface.total_weight
    below, tied = np.full(values.size, np.nan), np.full(values.size, np.nan)
    below[read] = np.cumsum(surface.slot_weights)[0:-1:2][pos] / total
    tied[read] = surface.slot_weights[1::2][pos] / total
    return _ValueTable(values=values, below=below, tied=tied, positive=values >= surface.live_min)


def _first_read(omission: float, m: int) -> int:
    """The first strip, in presences sorted by value descending, whose area shares a ratio
    reads: the one holding the level (1 - E) m (the first when E = 1). The presences
    above it count only by number."""
    required = _required(omission, m)
    return 0 if required <= 0.0 else int(np.ceil(required)) - 1


def _ratios(keys: np.ndarray, table: _ValueTable, omission: float) -> np.ndarray:
    """AUC ratio of every row of ``keys`` (rows = samples of m presences; each entry
    the index of the presence's value in ``table``), by horizontal strips.

    In presence-count units y runs from 0 to m. With the presences sorted by value,
    descending, presence i spans heights [i, i + 1]; within a group of k presences
    tied at u that starts at height a, 1 - x falls linearly from below + tied (at
    a) to below (at a + k), so the strip of presence i adds
    ``below + tied - tied (i - a + 1/2) / k`` to the integral of (1 - x(y)). The
    level (1 - E) m lies in the strip of one presence j, the same for every row.
    """
    out = np.empty(keys.shape[0])
    m = keys.shape[1]
    chunk = max(1, _CHUNK_ELEMENTS // m)
    for start in range(0, keys.shape[0], chunk):
        out[start : start + chunk] = _ratio_rows(keys[start : start + chunk], table, omission)
    return out


def _ratio_rows(keys: np.ndarray, table: _ValueTable, omission: float) -> np.ndarray:
    rows, m = keys.shape
    required = _required(omission, m)
    j = _first_read(omission, m)  # the strip [j, j + 1] holding the level
    ks = np.sort(keys, axis=1)[:, ::-1]  # descending value
    pos = np.arange(m)
    first = np.ones(ks.shape, dtype=bool)
    first[:, 1:] = ks[:, 1:] != ks[:, :-1]
    last = np.ones(ks.shape, dtype=bool)
    last[:, :-1] = first[:, 1:]
    start = np.maximum.accumulate(np.where(first, pos, 0), axis=1)[:, j:]
    end = np.minimum.accumulate(np.where(last, pos + 1, m)[:, ::-1], axis=1)[:, ::-1][:, j:]
    size = end - start
    # Shares of the strips from j down only (column 0 below is strip j).
    below, tied = table.below[ks[:, j:]], table.tied[ks[:, j:]]
    upper = below + tied  # 1 - x where a presence's group starts
    strip = upper - tied * ((pos[j:] - start) + 0.5) / size
    if required <= 0.0:
        # E = 1: x0 = 0 and the model's area is the full AUC.
        one_minus_x0 = np.ones(rows)
        model = strip.sum(axis=1) / m
    else:
        a, k, up, t = start[:, 0], size[:, 0], upper[:, 0], tied[:, 0]
        one_minus_x0 = up - t * (required - a) / k
        cross = (j + 1 - required) * up - t * ((j + 1 - a) ** 2 - (required - a) ** 2) / (2.0 * k)
        top = cross + strip[:, 1:].sum(axis=1)
        model = (required / m) * one_minus_x0 + top / m
    null = one_minus_x0 * (2.0 - one_minus_x0) / 2.0  # (1 - x0²) / 2
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = model / null
    # x0 = 1: more than E of the sample scores below every cell, both areas vanish.
    # The ratio is then its limit for x0 -> 1, the curve's height just left of x = 1:
    # the share of the sample scoring at or above the lowest cell (at most 1 - E).
    degenerate = one_minus_x0 <= 0.0
    if np.any(degenerate):
        ratio[degenerate] = np.mean(table.positive[ks[degenerate]], axis=1)
    return ratio


def _curve(table: _ValueTable, keys: np.ndarray) -> ROCCurve:
    counts = np.bincount(keys, minlength=table.values.size)[::-1]  # descending value
    below, tied = table.below[::-1], table.tied[::-1]
    n = keys.size
    hi = np.cumsum(counts)
    lo = hi - counts
    x_start = 1.0 - (below + tied)
    x_end = 1.0 - below
    x = np.concatenate(([0.0], np.column_stack([x_start, x_end]).ravel(), [1.0]))
    y = np.concatenate(([0.0], np.column_stack([lo / n, hi / n]).ravel(), [1.0]))
    auc = float(np.sum(counts * (below + tied / 2.0)) / n)
    return ROCCurve(x=x, y=y, auc=auc)


def _presence_scores(presence_scores) -> np.ndarray:
    s = np.asarray(presence_scores, dtype=np.float64).ravel()
    if s.size == 0:
        raise InputError("There are no evaluation presences; the partial ROC needs at least one.")
    if not np.all(np.isfinite(s)):
        raise InputError("Some evaluation presence scores are missing or infinite; drop those records first.")
    return s


def _ranked_surface(source, s: np.ndarray, surface) -> SuitabilitySurface:
    if surface is None:
        surface = summarise_surface(source, np.unique(s))
    # All-equal cells leave nothing to rank: every threshold selects all or none of
    # the region, so the curve says nothing about the model.
    if surface.live_min == surface.live_max:
        raise InputError(
            "All cell values of the testing region are equal, so the prediction does not rank "
            "the region; check the prediction raster for this fold."
        )
    return surface


def roc_curve_area(cell_values, presence_scores, cell_weights=None) -> ROCCurve:
    """The exact area-based ROC curve of a prediction over a testing region.

    Parameters
    ----------
    cell_values : array_like of float, shape (N,), or CellSource
        Predictions of the valid cells of the testing region (or a
        :class:`~splitter.evaluate.cells.CellSource` streaming them).
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
    s = _presence_scores(presence_scores)
    surface = _ranked_surface(as_cells(cell_values, cell_weights), s, None)
    u, inverse = np.unique(s, return_inverse=True)
    return _curve(_table(surface, u), inverse.ravel())


def partial_roc(
    cell_values,
    presence_scores,
    cell_weights=None,
    omission: float = 0.05,
    replicates: int = 1000,
    sample_share: float = 0.5,
    seed=0,
    *,
    surface: SuitabilitySurface | None = None,
) -> PartialROCResult:
    """Partial ROC AUC ratio, tested against presences placed at random in the testing region.

    Parameters
    ----------
    cell_values : array_like of float, shape (N,), or CellSource
        Predictions of the valid cells of the testing region (nodata removed), or a
        :class:`~splitter.evaluate.cells.CellSource` streaming them from a raster.
        Only their order matters: values outside [0, 1] are fine. Without a raster,
        the predictions at evaluation background or absence records.
    presence_scores : array_like of float, shape (n,)
        Predictions at the evaluation presences.
    cell_weights : array_like of float, shape (N,), optional
        Cell areas (e.g. :func:`splitter.evaluate.cell_areas` per row) when ``cell_values``
        is an array; None weights cells equally. Zero-weight cells are ignored.
    omission : float, default 0.05
        Omission tolerance E in [0, 1]; only the curve where y >= 1 - E counts.
        E = 1 gives the full-curve ratio (2 x AUC).
    replicates : int, default 1000
        B: bootstrap replicates, and as many null replicates.
    sample_share : float, default 0.5
        Each bootstrap replicate draws ``floor(sample_share * n + 0.5)`` presences
        (at least one) with replacement.
    seed : int or numpy.random.Generator, default 0
        Seed of ``numpy.random.default_rng``. The bootstrap's presence indices are
        exactly ``rng.integers(0, n, size=(replicates, m))``; the null's cells are
        drawn from the same generator afterwards.
    surface : SuitabilitySurface, optional
        A summary of the cells already made for (at least) every presence score,
        which saves one pass over the cells.

    Returns
    -------
    PartialROCResult
        ``statistic`` = observed ratio, ``pvalue`` = Monte Carlo p against the
        null of presences placed at random, the bootstrap interval, the
        conventional bootstrap p (``pvalue_bootstrap``, for comparison only), the
        full AUC and the curve.

    Raises
    ------
    InputError
        No presences, no valid cells, all cell values equal, non-finite values, or
        options out of range.

    Notes
    -----
    Cost: three O(N) passes over the N cells (summary for the presence values,
    null draws, summary for the values the null reads), then O(B n log n). If more than E
    of a sample's presences score below every cell, x0 = 1 and both areas vanish;
    the ratio is then its limit, the share of presences at or above the lowest
    cell (which is below 1).

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> cells = rng.random(10_000)
    >>> skilled = np.sqrt(rng.random(30))  # skewed towards high suitability
    >>> r = partial_roc(cells, skilled, replicates=199, seed=2)
    >>> bool(r.statistic > r.null_median and r.pvalue < 0.05)
    True
    >>> r.pvalue >= 1 / 200  # never 0: its floor shows B
    True
    >>> blind = rng.choice(cells, 10)  # presences where a model of no skill puts them
    >>> r = partial_roc(cells, blind, replicates=199, seed=2)
    >>> bool(r.ratio_low > 1), bool(r.pvalue > 0.05)  # the bootstrap interval clears 1; the test does not
    (True, True)
    """
    omission, replicates, sample_share = _check_options(omission, replicates, sample_share)
    s = _presence_scores(presence_scores)
    source = as_cells(cell_values, cell_weights)
    surface = _ranked_surface(source, s, surface)
    m = _sample_size(s.size, sample_share)
    picks, drawn = null_draws(source, s.size, m, replicates, surface.total_weight, seed)
    null = null_sample(drawn, s.size, omission)
    null_surface = summarise_surface(source, null.read_values)
    return tested(s, surface, picks, null, null_surface, omission)


def null_draws(cells, n: int, m: int, replicates: int, total_weight: float, seed):
    """The random numbers of a partial ROC test, in their fixed order.

    Returns the bootstrap's presence indices, exactly ``rng.integers(0, n, size=(replicates, m))``,
    then the values of ``replicates * n`` cells drawn by area from the same generator
    (the null: presences placed at random). A caller that knows the cells' total
    weight before summarising them can draw first and summarise once for every value.
    """
    rng = np.random.default_rng(seed)
    picks = rng.integers(0, n, size=(replicates, m))
    return picks, draw_cells(cells, replicates * n, total_weight, rng)


@dataclass(frozen=True, eq=False)
class NullSample:
    """The null's drawn cell values as its ratios use them.

    Attributes
    ----------
    values : numpy.ndarray
        Distinct drawn values, ascending.
    keys : numpy.ndarray, shape (replicates, n)
        Index in ``values`` of every draw, one row per null replicate.
    read : numpy.ndarray of bool
        The values whose area shares some ratio reads: in every replicate, the
        presences from the level (1 - E) n down (about E n + 1 of n); those above
        it count only by number. A summary for these values alone gives the same
        ratios as one for all of them, at a fraction of its size.
    """

    values: np.ndarray
    keys: np.ndarray
    read: np.ndarray

    @property
    def read_values(self) -> np.ndarray:
        """The values to summarise the cells for, ascending."""
        return self.values[self.read]


def null_sample(drawn: np.ndarray, n: int, omission: float) -> NullSample:
    """:class:`NullSample` of the ``replicates * n`` values drawn by :func:`null_draws`.

    Examples
    --------
    >>> drawn = np.array([0.9, 0.1, 0.5, 0.7, 0.3, 0.8])  # two replicates of three
    >>> null = null_sample(drawn, 3, omission=0.05)
    >>> null.read_values.tolist()  # each replicate's lowest value: (1 - E) 3 lies in its strip
    [0.1, 0.3]
    """
    values, keys = np.unique(drawn, return_inverse=True)
    keys = keys.reshape(-1, n)
    lowest = n - _first_read(omission, n)  # strips j .. n - 1 of the descending order
    read = np.zeros(values.size, dtype=bool)
    read[np.partition(keys, lowest - 1, axis=1)[:, :lowest] if lowest < n else keys] = True
    return NullSample(values=values, keys=keys, read=read)


def tested(s: np.ndarray, surface: SuitabilitySurface, picks: np.ndarray, placed: NullSample,
           null_surface: SuitabilitySurface, omission: float) -> PartialROCResult:
    """The partial ROC result from summaries made for the presence scores ``s`` and for the
    values the null's ratios read (one summary may serve both), the bootstrap's ``picks``
    and the presences ``placed`` at random (:func:`null_draws`, :func:`null_sample`)."""
    _ranked_surface(None, s, surface)
    replicates, m = picks.shape
    n = s.size
    u, inverse = np.unique(s, return_inverse=True)
    inverse = inverse.ravel()
    table = _table(surface, u)
    curve = _curve(table, inverse)
    observed = float(_ratios(inverse[None, :], table, omission)[0])
    boot = _ratios(inverse[picks], table, omission)

    # The null: n presences placed at random in the testing region, B times.
    null = _ratios(placed.keys, _table(null_surface, placed.values, placed.read), omission)
    # Ratios equal to the observed one up to rounding count as "at least as
    # large" (the tolerance scipy.stats.monte_carlo_test uses).
    tolerance = 100 * np.finfo(float).eps * abs(observed)
    hits = int(np.count_nonzero(null >= observed - tolerance))

    low, high = np.percentile(boot, [2.5, 97.5])
    return PartialROCResult(
        statistic=observed,
        pvalue=(hits + 1) / (replicates + 1),
        auc=curve.auc,
        auc_ratio=observed,
        null_median=float(np.median(null)),
        bootstrap_mean=float(boot.mean()),
        ratio_low=float(low),
        ratio_high=float(high),
        pvalue_bootstrap=float(np.mean(boot <= 1.0)),
        omission=omission,
        replicates=replicates,
        sample_size=m,
        n_presences=n,
        n_cells=surface.n_cells,
        can_omit=bool(np.floor(m * omission + 1e-9) >= 1),
        ratios=boot,
        null_ratios=null,
        curve=curve,
    )
