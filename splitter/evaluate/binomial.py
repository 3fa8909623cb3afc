"""Cumulative binomial test of thresholded predictions.

Null hypothesis: the model has no predictive ability, so each evaluation presence
falls in the predicted-present area with probability p, the share of the testing
region (area-weighted) or of background points predicted present. With n evaluation
presences of which s are predicted present, the one-tailed p-value is
P(X >= s), X ~ Binomial(n, p).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from numbers import Integral

import numpy as np
from scipy import stats

from splitter.errors import InputError

__all__ = ["BinomialResult", "binomial_test", "area_predicted"]


@dataclass(frozen=True)
class BinomialResult:
    """Result of :func:`binomial_test`.

    Attributes
    ----------
    statistic : int
        Evaluation presences predicted present (s).
    pvalue : float
        One-tailed P(X >= s) for X ~ Binomial(n, p).
    n : int
        Evaluation presences.
    p : float
        Share of the testing region (or of background) predicted present.
    """

    statistic: int
    pvalue: float
    n: int
    p: float

    def to_dict(self) -> dict:
        """Plain dict for tables."""
        return asdict(self)

    def to_frame(self):
        """One-row pandas DataFrame."""
        import pandas as pd

        return pd.DataFrame([self.to_dict()])


def _count(value, name: str) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (Integral, np.integer)):
        if isinstance(value, (float, np.floating)) and float(value).is_integer():
            return int(value)
        raise InputError(f"{name} must be a whole number, got {value!r}.")
    return int(value)


def binomial_test(successes, n, p) -> BinomialResult:
    """One-tailed cumulative binomial test.

    Parameters
    ----------
    successes : int
        Evaluation presences predicted present (s).
    n : int
        Evaluation presences (at least 1).
    p : float
        Probability of a presence falling in the predicted-present area under the
        null, in ``[0, 1]``.

    Returns
    -------
    BinomialResult
        ``pvalue = P(X >= s) = scipy.stats.binom.sf(s - 1, n, p)``, exact in the
        tail (no subtraction from 1), so very small p-values are kept.

    Raises
    ------
    InputError
        If n < 1, s outside ``0..n``, or p outside ``[0, 1]``.

    Examples
    --------
    >>> r = binomial_test(7, 8, 0.15)
    >>> f"{r.pvalue:.3g}"
    '1.19e-05'
    """
    s = _count(successes, "The number of presences predicted present")
    n = _count(n, "The number of evaluation presences")
    if n < 1:
        raise InputError("The fold has no evaluation presences; the binomial test needs at least one.")
    if not 0 <= s <= n:
        raise InputError(f"Presences predicted present ({s}) must lie between 0 and the number of presences ({n}).")
    p = float(p)
    if not (0.0 <= p <= 1.0):
        raise InputError(f"The predicted-present share p = {p} must lie in [0, 1].")
    pvalue = float(stats.binom.sf(s - 1, n, p))
    return BinomialResult(statistic=s, pvalue=min(max(pvalue, 0.0), 1.0), n=n, p=p)


def area_predicted(values, weights, threshold: float) -> float:
    """Weighted share of cells predicted present (value >= threshold).

    One entry point for cells in memory and cells streamed from a raster.

    Parameters
    ----------
    values : array_like of float, or cells
        Predicted suitability of the valid cells of the testing region (nodata
        removed); or a :class:`~splitter.evaluate.cells.CellSource`, a function
        returning blocks or a list of blocks (a raster read in windows), streamed
        once (``weights`` then come with the blocks).
    weights : array_like of float or None
        Cell areas (e.g. from :func:`splitter.evaluate.cell_areas`), same length;
        None gives every cell the same weight.
    threshold : float
        Cells with ``value >= threshold`` count as predicted present.

    Returns
    -------
    float
        The area share in ``[0, 1]``: the binomial test's p.

    Examples
    --------
    >>> area_predicted([0.1, 0.6, 0.9], [1.0, 1.0, 2.0], 0.5)
    0.75
    >>> area_predicted([(np.array([0.1, 0.6]), None), (np.array([0.9]), None)], None, 0.5)  # two blocks
    0.6666666666666666
    """
    from splitter.evaluate.cells import is_streamed

    if is_streamed(values):
        from splitter.evaluate.cells import as_cells, summarise_surface

        return float(summarise_surface(as_cells(values), np.array([float(threshold)])).area_share_at(threshold))
    v = np.asarray(values, dtype=float).ravel()
    if v.size == 0:
        raise InputError("No cell values were given; the testing region has no valid cells.")
    if not np.all(np.isfinite(v)):
        raise InputError("Some cell values are missing or infinite; drop nodata cells first.")
    hit = v >= float(threshold)
    if weights is None:
        return float(np.count_nonzero(hit) / v.size)
    w = np.asarray(weights, dtype=float).ravel()
    if w.shape != v.shape:
        raise InputError(f"Got {w.size} cell weights for {v.size} cell values; give one weight per cell.")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise InputError("Cell weights must be finite and not negative.")
    total = float(w.sum())
    if total <= 0.0:
        raise InputError("Cell weights sum to zero; give cell areas.")
    return float(w[hit].sum() / total)
