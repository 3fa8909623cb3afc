"""Continuous Boyce index (presence-only performance).

Method: "Evaluating the ability of habitat suitability models to predict species
presences", Ecological Modelling (2006). A window of fixed width moves over the
suitability range; in each window the predicted frequency P (share of evaluation
presences in it) is divided by the expected frequency E (area-weighted share of the
testing region's cells, or share of background points, in it). A good model has
P/E rising with suitability; the index is the Spearman rank correlation between the
windows' midpoints and their P/E ratios (from -1 to 1; near 0 = random).

Windows (defaults): width = 1/10 of the suitability range; starts evenly spaced from
the bottom of the range to (top - width) with a step of 1/100 of the range, so 91
windows, the first starting at the bottom and the last ending at the top. Windows
are closed intervals [start, start + width]. Windows without expected mass are left
out (P/E is undefined there).
P/E ratios that are equal up to floating-point rounding (e.g. windows holding
different cells of the same total area) are ranked as ties.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from splitter.errors import InputError

__all__ = ["BoyceResult", "boyce_index"]


@dataclass(frozen=True, eq=False)
class BoyceResult:
    """Result of :func:`boyce_index`.

    Attributes
    ----------
    statistic : float
        Continuous Boyce index (Spearman correlation of window midpoints with P/E);
        NaN when fewer than 3 windows have expected mass or P/E is constant.
    window_width : float
        Window width in suitability units.
    n_windows : int
        Windows laid over the range.
    n_used : int
        Windows with expected mass (used in the correlation).
    midpoints : numpy.ndarray
        Midpoints of the used windows.
    ratios : numpy.ndarray
        P/E of the used windows.

    Notes
    -----
    No p-value is given: overlapping windows share presences, so the windows are
    not independent and Spearman's p-value would be far too small.
    """

    statistic: float
    window_width: float
    n_windows: int
    n_used: int
    midpoints: np.ndarray = field(repr=False)
    ratios: np.ndarray = field(repr=False)

    def to_dict(self) -> dict:
        """Scalars only."""
        return {
            "statistic": self.statistic,
            "window_width": self.window_width,
            "n_windows": self.n_windows,
            "n_used": self.n_used,
        }

    def to_frame(self):
        """Per-window table: midpoint and P/E ratio."""
        import pandas as pd

        return pd.DataFrame({"midpoint": self.midpoints, "ratio": self.ratios})


def _window_mass(sorted_values: np.ndarray, cum_mass: np.ndarray, starts: np.ndarray, ends: np.ndarray):
    # Mass in closed windows [start, end] from a cumulative sum over sorted values:
    # two binary searches per window, no pass over the data per window.
    upper = np.searchsorted(sorted_values, ends, side="right")
    lower = np.searchsorted(sorted_values, starts, side="left")
    cum = np.concatenate(([0.0], cum_mass))
    return cum[upper] - cum[lower]


def _merge_rounding_ties(ratios: np.ndarray, rel: float = 1e-10) -> np.ndarray:
    """Ratios that differ only by floating-point rounding, made exactly equal.

    Two windows holding different cells of equal total area (e.g. cells of one row
    of a longitude/latitude raster) and the same presences have equal P/E in exact
    arithmetic, but the summed areas can differ in the last bits depending on the
    order they were added (sorted in memory, or streamed window by window).
    Spearman's ranks would split such a true tie at random; so neighbours (in
    sorted order) within a relative 1e-10 are given the smaller one's value before
    ranking. Ratios of real data that differ by less than that are not told apart.
    """
    if ratios.size < 2:
        return ratios
    order = np.argsort(ratios, kind="stable")
    r = ratios[order]
    starts_group = np.r_[True, np.diff(r) > rel * np.abs(r[1:])]
    group = np.cumsum(starts_group) - 1
    out = np.empty_like(ratios)
    out[order] = r[starts_group][group]
    return out


def boyce_index(
    presence_scores,
    reference_values=None,
    reference_weights=None,
    width_share: float = 0.1,
    step_share: float = 0.01,
    value_range=None,
    *,
    surface=None,
) -> BoyceResult:
    """Continuous Boyce index of evaluation presences against the testing region.

    One entry point for cells in memory and cells streamed from a raster.

    Parameters
    ----------
    presence_scores : array_like of float
        Predictions at evaluation presences.
    reference_values : array_like of float, or cells
        Predictions over the testing region (cells) or at background points: the
        expected distribution. Also a :class:`~splitter.evaluate.cells.CellSource`,
        a function returning blocks or a list of blocks (a raster read in windows,
        e.g. ``lambda: valid_cells(path)``): then the cells are streamed, once for
        their range (unless ``value_range`` is given) and once for the windows.
    reference_weights : array_like of float, optional
        Cell areas for raster cells given as an array; None weights them equally.
    width_share : float, default 0.1
        Window width as a share of the suitability range, in (0, 1].
    step_share : float, default 0.01
        Step between window starts as a share of the range (the last window is
        aligned to end at the top of the range, so the step may shrink slightly).
    value_range : (float, float), optional
        Suitability range; default the min and max of the reference values.
    surface : SuitabilitySurface, optional
        The cells already summarised for the window edges (by
        :func:`splitter.evaluate.surface.evaluate_surface`, which shares one pass
        among the tests); the cells are then not read again.

    Returns
    -------
    BoyceResult

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> cells = rng.random(20_000)
    >>> presences = np.sqrt(rng.random(500))  # more presences where suitability is high
    >>> round(boyce_index(presences, cells).statistic, 1)
    1.0
    >>> blocks = [cells[:9000], cells[9000:]]  # the same cells, streamed in two blocks
    >>> round(boyce_index(presences, blocks).statistic, 1)
    1.0
    """
    pres = np.asarray(presence_scores, dtype=float).ravel()
    if pres.size == 0:
        raise InputError("There are no evaluation presences; the Boyce index needs at least one.")
    if not np.all(np.isfinite(pres)):
        raise InputError("Some scores are missing or infinite; drop nodata cells and those records first.")
    from splitter.evaluate.cells import is_streamed

    if surface is not None or is_streamed(reference_values):
        return _boyce_streamed(pres, reference_values, width_share, step_share, value_range, surface)
    ref = np.asarray(reference_values, dtype=float).ravel()
    if ref.size == 0:
        raise InputError("There are no reference values (cells or background) for the Boyce index.")
    if not np.all(np.isfinite(ref)):
        raise InputError("Some scores are missing or infinite; drop nodata cells and those records first.")
    if reference_weights is None:
        w = np.ones_like(ref)
    else:
        w = np.asarray(reference_weights, dtype=float).ravel()
        if w.shape != ref.shape:
            raise InputError(f"Got {w.size} weights for {ref.size} reference values; give one per value.")
        if not np.all(np.isfinite(w)) or np.any(w < 0) or not np.any(w > 0):
            raise InputError("Reference weights must be finite, not negative, and not all zero.")
    lo, hi = (float(ref.min()), float(ref.max())) if value_range is None else map(float, value_range)
    starts, ends, width = _windows(lo, hi, width_share, step_share)
    order = np.argsort(ref, kind="stable")
    ref_sorted = ref[order]
    expected = _window_weight(ref_sorted, w[order], starts, ends) / w.sum()
    return _from_expected(pres, starts, ends, width, expected)


def _boyce_streamed(pres, cells, width_share, step_share, value_range, surface) -> BoyceResult:
    from splitter.evaluate.cells import as_cells, summarise_surface, surface_range

    if surface is None:
        source = as_cells(cells)
        lo, hi = surface_range(source) if value_range is None else value_range
        starts, ends, width = _windows(lo, hi, width_share, step_share)
        surface = summarise_surface(source, np.unique(np.concatenate([starts, ends])))
    else:
        lo, hi = (surface.value_min, surface.value_max) if value_range is None else value_range
        starts, ends, width = _windows(lo, hi, width_share, step_share)
    # Cells in [start, end] fill the slots from "equal to start" (2j + 1) to "equal
    # to end" (2k + 1). Each window sums its own slots (as the in-memory path sums its
    # own pieces) rather than differencing running totals, which would cancel badly for
    # small windows; zero slots are left out so that windows holding the same cells
    # add the same numbers in the same order and tie exactly.
    first = 2 * surface._positions(starts, "Boyce window start") + 1
    last = 2 * surface._positions(ends, "Boyce window end") + 2
    slots = surface.slot_weights
    weight = np.array([_nonzero_sum(slots[a:b]) for a, b in zip(first, last)])
    return _from_expected(pres, starts, ends, width, weight / surface.total_weight)


def _nonzero_sum(x: np.ndarray) -> float:
    return float(x[x != 0.0].sum())


def _window_weight(sorted_values: np.ndarray, sorted_weights: np.ndarray, starts: np.ndarray, ends: np.ndarray):
    """Summed weight in closed windows [start, end] of values sorted ascending.

    Each window is summed from the pieces of the sorted array between consecutive
    window edges (pairwise sums of non-negative numbers), not as the difference of
    two running totals: over 10^8 raster cells a running total drifts by ~1e-9 of
    the whole, which the difference would pass on to a small window's share. The
    loops run over the pieces and windows (a few hundred), never over the cells.
    """
    lower = np.searchsorted(sorted_values, starts, side="left")
    upper = np.searchsorted(sorted_values, ends, side="right")
    cuts = np.unique(np.concatenate([lower, upper]))
    pieces = np.array([sorted_weights[a:b].sum() for a, b in zip(cuts[:-1], cuts[1:])])
    first, last = np.searchsorted(cuts, lower), np.searchsorted(cuts, upper)
    # An empty window (lower == upper) sums no piece: exactly 0.
    return np.array([pieces[i:j].sum() for i, j in zip(first, last)])


def _windows(lo: float, hi: float, width_share, step_share) -> tuple[np.ndarray, np.ndarray, float]:
    """Starts, ends and width of the closed moving windows over [lo, hi] (see the module notes).

    Shared with :mod:`splitter.evaluate.surface`, which needs the window edges
    before it streams the cells.
    """
    width_share = float(width_share)
    step_share = float(step_share)
    if not (0.0 < width_share <= 1.0):
        raise InputError(f"Window width share {width_share} must lie in (0, 1], e.g. 0.1.")
    if not (0.0 < step_share <= 1.0):
        raise InputError(f"Window step share {step_share} must lie in (0, 1], e.g. 0.01.")
    lo, hi = float(lo), float(hi)
    if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
        raise InputError(
            f"The suitability range [{lo}, {hi}] is empty; the reference values must not all be equal."
        )
    span = hi - lo
    # Number of windows so that starts run from lo to hi - width with steps of at
    # most step_share * span; the 1e-9 absorbs binary rounding of the quotient.
    n_windows = int(np.ceil((1.0 - width_share) / step_share - 1e-9)) + 1
    starts = lo + np.linspace(0.0, 1.0 - width_share, n_windows) * span
    width = width_share * span
    return starts, starts + width, width


def _from_expected(
    pres: np.ndarray, starts: np.ndarray, ends: np.ndarray, width: float, expected: np.ndarray
) -> BoyceResult:
    """P/E per window and their Spearman correlation, given each window's expected share.

    ``expected`` is the weighted share of the reference (cells or background) in
    each window; the presences' shares are counted here.
    """
    n_windows = starts.size
    pres_sorted = np.sort(pres)
    predicted = _window_mass(pres_sorted, np.arange(1, pres.size + 1) / pres.size, starts, ends)
    used = expected > 0
    ratios = predicted[used] / expected[used]
    mids = (starts + ends)[used] / 2.0
    ranked = _merge_rounding_ties(ratios)
    if ranked.size < 3 or np.all(ranked == ranked[0]):
        statistic = float("nan")
    else:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            statistic = float(stats.spearmanr(mids, ranked).statistic)
    return BoyceResult(
        statistic=statistic,
        window_width=float(width),
        n_windows=n_windows,
        n_used=int(used.sum()),
        midpoints=mids,
        ratios=ratios,
    )
