"""A fold's binomial area share, partial ROC and Boyce index in as few passes as possible.

The significance and performance tests of a fold need from the prediction raster
only a handful of numbers:

* the cumulative binomial test: the area share of cells ``>= threshold``;
* the partial ROC (Ecological Modelling 213, 2008): for every distinct evaluation
  presence value u, the area share of cells strictly below u and equal to u (see
  :mod:`splitter.evaluate.partial_roc`; its bootstrap never looks at cells again);
  and for its null, presences placed at random by area, the same shares at the
  drawn cells' values;
* the continuous Boyce index ("Evaluating the ability of habitat suitability models
  to predict species presences", Ecological Modelling 2006): the area share of cells
  in each closed moving window ``[start, end]``, i.e. the area below each ``start``
  and at or below each ``end``.

So the cells (a :class:`~splitter.evaluate.cells.CellSource`: an array in memory
or a raster read in windows) pass three times, in blocks (e.g. the row windows of
:func:`splitter.io.rasters.valid_cells`):

1. the value range (where the Boyce windows lie) and the total area;
2. the partial ROC null's cells, drawn by area (which needs only the total);
3. one summary: each block is placed among the sorted *query values* (presence
   values, thresholds, Boyce window edges and the null's drawn values that its
   ratios read, each replicate's lowest; see :func:`~splitter.evaluate.partial_roc.null_sample`) with one
   lookup per cell; one weighted ``bincount`` per block adds the block's area to
   every "strictly between two query values" and "equal to a query value" slot.

Only the first pass reads a raster: a source keeps the cells it read in memory
when they fit (:data:`~splitter.evaluate.cells.KEEP_BYTES`; the raster's own float
type, areas run-length coded), so passes 2 and 3 never decode the file again;
larger rasters are read afresh. The result, :class:`SuitabilitySurface`, holds
the slot weights exactly (no binning of values): every number above is a sum of
slots.

The results equal ``area_predicted`` and ``boyce_index`` on all cells up to the
order in which floating-point areas are summed (about 1e-15 relative); the partial
ROC is the same function, given the summary so that it skips its first pass.

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
import numpy as np

from splitter.errors import InputError
from splitter.evaluate.boyce import BoyceResult, _windows, boyce_index
from splitter.evaluate.cells import (
    SuitabilitySurface,
    _finite_scores,
    as_cells,
    summarise_surface,
    surface_extent,
    surface_range,
)
from splitter.evaluate.partial_roc import (PartialROCResult, _check_options, _sample_size, null_draws, null_sample,
                                           tested)

__all__ = [
    "SuitabilitySurface",
    "SurfaceEvaluation",
    "surface_queries",
    "surface_range",
    "summarise_surface",
    "evaluate_surface",
]

# ----------------------------------------------------------------------------- results


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


# ----------------------------------------------------------------------------- tests


def evaluate_surface(
    cells,
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
    cells : CellSource, callable or list of blocks
        The testing region's cells (see :func:`splitter.evaluate.cells.as_cells`),
        e.g. ``lambda: valid_cells(path, region)``. Passed over three times (range
        and total area, the null's draws, one summary for every value asked about);
        a raster is read once when its cells fit in memory.
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
    source = as_cells(cells)
    lo, hi, total = surface_extent(source)
    boyce_range = None
    if boyce:
        boyce_range = (lo, hi) if value_range is None else tuple(value_range)
        if value_range is None and boyce_range[0] == boyce_range[1]:
            # Same message as the partial ROC gives, rather than the Boyce one about an empty range.
            raise InputError(
                "All cell values of the testing region are equal, so the prediction does not rank "
                "the region; check the prediction raster for this fold."
            )
    # The null's cells are drawn before any summary (they need only the total area),
    # so one summary answers for the presences, thresholds, Boyce edges and draws.
    picks, drawn = null_draws(source, pres.size, _sample_size(pres.size, sample_share), replicates,
                              total, seed)
    null = null_sample(drawn, pres.size, omission)
    queries = np.union1d(surface_queries(pres, thr, boyce_range, width_share, step_share), null.read_values)
    surface = summarise_surface(source, queries)
    proc = tested(pres, surface, picks, null, surface, omission)
    shares = np.array([surface.area_share_at(t) for t in thr])
    boyce_result = (boyce_index(pres, width_share=width_share, step_share=step_share, value_range=boyce_range,
                                surface=surface) if boyce else None)
    return SurfaceEvaluation(thresholds=thr, area_shares=shares, partial_roc=proc, boyce=boyce_result,
                             surface=surface)
