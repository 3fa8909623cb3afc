"""Across folds: Holm's adjustment, the jackknife test, combining p-values and
summarising per-fold measures."""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from scipy import stats

from splitter.errors import InputError

__all__ = [
    "CombinedPValue",
    "FoldSummary",
    "JackknifeResult",
    "combine_pvalues_fisher",
    "holm_adjust",
    "jackknife_test",
    "summarise_folds",
]


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


def holm_adjust(pvalues) -> np.ndarray:
    """Holm's step-down adjusted p-values across the folds of one split.

    Method: "A simple sequentially rejective multiple test procedure", Scandinavian
    Journal of Statistics 6 (1979). With the k p-values sorted ascending,
    p_(i) becomes max_{j <= i} min(1, (k - j + 1) p_(j)); a fold is significant at
    level alpha when its adjusted p is <= alpha, which keeps the chance of calling
    any fold of a model with no skill significant at most alpha.

    Parameters
    ----------
    pvalues : array_like of float
        One p-value per fold; NaN (a fold without a test) is left out of k and
        stays NaN.

    Returns
    -------
    numpy.ndarray
        Adjusted p-values in the input order.

    Examples
    --------
    >>> holm_adjust([0.01, 0.04, 0.03, 0.20]).tolist()
    [0.04, 0.09, 0.09, 0.2]
    """
    p = np.asarray(pvalues, dtype=float).ravel()
    if np.any((p < 0.0) | (p > 1.0)):
        raise InputError("P-values must lie in [0, 1].")
    out = np.full(p.shape, np.nan)
    live = np.flatnonzero(~np.isnan(p))
    k = live.size
    if k == 0:
        return out
    order = live[np.argsort(p[live], kind="stable")]
    stepped = np.minimum(1.0, (k - np.arange(k)) * p[order])
    out[order] = np.maximum.accumulate(stepped)
    return out


@dataclass(frozen=True)
class JackknifeResult:
    """Result of :func:`jackknife_test`.

    Attributes
    ----------
    statistic : int
        Held-out presences predicted present (successes).
    pvalue : float
        P(X >= successes), X the sum of independent Bernoulli trials with the
        folds' shares predicted present (a Poisson-binomial upper tail, exact).
    n : int
        Folds (one held-out presence each).
    expected : float
        Successes expected under the null, the sum of the shares.
    """

    statistic: int
    pvalue: float
    n: int
    expected: float

    def to_dict(self) -> dict:
        """Plain dict for tables."""
        return asdict(self)


def jackknife_test(predicted_present, shares_present) -> JackknifeResult:
    """Jackknife test for species known from few records (one presence left out per fold).

    Method: "Predicting species distributions from small numbers of occurrence
    records: a test case using cryptic geckos in Madagascar", Journal of
    Biogeography 34 (2007). Each of the n presences is left out in turn, the model
    calibrated on the others predicts it present or not at the fold's threshold,
    and under the null of no predictive ability it falls in the predicted-present
    area by chance, with probability that fold's share of the area predicted
    present. The number of successes is then a sum of independent Bernoulli trials
    with unequal probabilities (Poisson-binomial), and p = P(X >= successes).

    Parameters
    ----------
    predicted_present : array_like of bool, shape (n,)
        Whether each fold's held-out presence was predicted present.
    shares_present : array_like of float, shape (n,)
        Each fold's share of the testing region (or background) predicted present.

    Returns
    -------
    JackknifeResult

    Notes
    -----
    The distribution is built exactly by convolving the n two-point distributions
    (O(n²), a loop over folds), so p is exact for any n this design is used for.

    Examples
    --------
    >>> r = jackknife_test([True, True, False], [0.5, 0.5, 0.5])
    >>> r.statistic, r.pvalue  # P(X >= 2) for X ~ Binomial(3, 0.5)
    (2, 0.5)
    """
    hits = np.asarray(predicted_present, dtype=bool).ravel()
    p = np.asarray(shares_present, dtype=float).ravel()
    if hits.size == 0:
        raise InputError("The jackknife test needs at least one fold with one held-out presence.")
    if hits.shape != p.shape:
        raise InputError(f"Got {hits.size} outcomes for {p.size} shares; give one per fold.")
    if not np.all((p >= 0.0) & (p <= 1.0)):
        raise InputError("Shares predicted present must lie in [0, 1].")
    pmf = np.ones(1)
    for q in p:  # a loop over folds, not records
        pmf = np.convolve(pmf, [1.0 - q, q])
    s = int(hits.sum())
    tail = float(np.clip(pmf[s:].sum(), 0.0, 1.0))
    return JackknifeResult(statistic=s, pvalue=tail, n=int(hits.size), expected=float(p.sum()))
