"""Across folds: combining p-values and summarising per-fold measures."""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from scipy import stats

from splitter.errors import InputError

__all__ = ["CombinedPValue", "FoldSummary", "combine_pvalues_fisher", "summarise_folds"]


@dataclass(frozen=True)
class CombinedPValue:
    """Result of :func:`combine_pvalues_fisher`.

    Attributes
    ----------
    statistic : float
        Fisher's statistic, -2 * sum(log p).
    pvalue : float
        Chi-square (2k degrees of freedom) upper tail of the statistic.
    n : int
        Number of p-values combined (missing ones left out).
    method : str
        ``"fisher"``.
    """

    statistic: float
    pvalue: float
    n: int
    method: str = "fisher"

    def to_dict(self) -> dict:
        """Plain dict for tables."""
        return asdict(self)


@dataclass(frozen=True)
class FoldSummary:
    """Mean, sample standard deviation (ddof=1), min and max over folds, NaN left out.

    ``n`` is the number of folds with a value; with none every field is NaN, with one
    the standard deviation is NaN.
    """

    mean: float
    sd: float
    min: float
    max: float
    n: int

    def to_dict(self) -> dict:
        """Plain dict for tables."""
        return asdict(self)


def combine_pvalues_fisher(pvalues) -> CombinedPValue:
    """Fisher's combination of per-fold p-values.

    Parameters
    ----------
    pvalues : array_like of float
        One p-value per fold, in [0, 1]; NaN (a fold without a test) is left out.

    Returns
    -------
    CombinedPValue
        As ``scipy.stats.combine_pvalues(p, method="fisher")``.

    Notes
    -----
    Fisher's method assumes independent tests. Folds share the model's training
    data in part, so the combined p-value is a summary, not an exact test.

    Examples
    --------
    >>> r = combine_pvalues_fisher([0.01, 0.2, 0.3])
    >>> round(r.pvalue, 4)
    0.0216
    """
    p = np.asarray(pvalues, dtype=float).ravel()
    p = p[~np.isnan(p)]
    if p.size == 0:
        raise InputError("No p-values to combine; every fold is missing its test result.")
    if np.any((p < 0.0) | (p > 1.0)):
        raise InputError("P-values must lie in [0, 1].")
    with np.errstate(divide="ignore"):  # p = 0 gives an infinite statistic and p = 0, as it should
        res = stats.combine_pvalues(p, method="fisher")
    return CombinedPValue(statistic=float(res.statistic), pvalue=float(res.pvalue), n=int(p.size))


def summarise_folds(values) -> FoldSummary:
    """Summary of one measure over folds, ignoring NaN.

    Parameters
    ----------
    values : array_like of float
        One value per fold (NaN for folds without it).

    Returns
    -------
    FoldSummary

    Examples
    --------
    >>> round(summarise_folds([0.8, float("nan"), 0.6, 0.7]).mean, 6)
    0.7
    """
    x = np.asarray(values, dtype=float).ravel()
    if np.any(np.isinf(x)):
        raise InputError("Fold values must be finite numbers (NaN for a missing fold).")
    x = x[~np.isnan(x)]
    n = int(x.size)
    if n == 0:
        nan = float("nan")
        return FoldSummary(mean=nan, sd=nan, min=nan, max=nan, n=0)
    sd = float(np.std(x, ddof=1)) if n > 1 else float("nan")
    return FoldSummary(mean=float(np.mean(x)), sd=sd, min=float(np.min(x)), max=float(np.max(x)), n=n)
