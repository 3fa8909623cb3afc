"""Random re-splits of one fold's records: the null that audit measures are compared with.

A dependence measure (Schoener's D between calibration and evaluation records,
the share of evaluation records whose survey method also occurs in calibration)
has no fixed level that separates a designed split from a random one: kernel
densities of two large random halves overlap almost fully, and a random split
shares every common survey method. So each measure is compared with its values
over ``B`` random re-splits of the *same* records: the fold's calibration and
evaluation records are pooled and dealt again, at random, into sets of the same
two sizes. The designed split is better than random when nearly every re-split
is at least as dependent as it is.

Each re-split's evaluation set is a uniformly random subset of ``size`` of the
``n`` pooled records. The measures depend on it only through how many
evaluation records fall in each category (a survey method, a cell of the
environmental grid), and the category counts of a uniformly random subset
follow the multivariate hypergeometric distribution of the pooled counts; so
the re-splits are drawn as such counts
(``numpy.random.Generator.multivariate_hypergeometric``), at a cost that grows
with the number of categories, not of records.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from splitter.errors import InputError

#: Default number of random re-splits per fold. With B = 199 and the rule
#: "independent when at least 95 % of re-splits are at least as dependent", a
#: random designed split is called independent in exactly 10 / 200 = 5 % of
#: cases (rank argument below).
NULL_SPLITS = 199
#: Fewest re-splits that let the 95 % rule hold its 5 % level (19 -> 1 / 20).
MIN_NULL_SPLITS = 19
#: Rule level: the designed split must beat all but this share of re-splits.
NULL_LEVEL = 0.05

_TIE = 1e-9  # relative tolerance under which two measures count as equal


def check_null_splits(null_splits) -> int:
    """Validate the number of re-splits; name the Python parameter."""
    if isinstance(null_splits, bool) or not isinstance(null_splits, (int, np.integer)) or null_splits < MIN_NULL_SPLITS:
        raise InputError(
            f"null_splits={null_splits!r}: give an integer of at least {MIN_NULL_SPLITS} "
            f"(the default {NULL_SPLITS} gives the 95 % rule an exact 5 % level)."
        )
    return int(null_splits)


def resplit_counts(rng: np.random.Generator, counts, size: int, splits: int) -> np.ndarray:
    """Category counts of the evaluation sets of ``splits`` random re-splits.

    Parameters
    ----------
    rng : numpy.random.Generator
    counts : array_like of int, shape (m,)
        Pooled records per category (calibration and evaluation together).
    size : int
        Evaluation records per re-split.
    splits : int

    Returns
    -------
    ndarray of int, shape (splits, m)
        Row ``b``: evaluation records per category in re-split ``b``; the
        calibration set holds ``counts - row``.

    Examples
    --------
    >>> draws = resplit_counts(np.random.default_rng(0), [5, 0, 3], 4, 6)
    >>> draws.shape, bool((draws.sum(axis=1) == 4).all()), bool((draws[:, 1] == 0).all())
    ((6, 3), True, True)
    """
    counts = np.asarray(counts, dtype=np.int64)
    if not 0 <= size <= counts.sum():
        raise InputError(f"size={size} must lie between 0 and the {int(counts.sum())} pooled records.")
    return rng.multivariate_hypergeometric(counts, int(size), size=int(splits))


@dataclass(frozen=True, eq=False)
class NullComparison:
    """A fold's dependence measure against the same measure over random re-splits.

    Larger values of the measure mean more dependence (more environmental
    overlap, more shared survey methods).

    Attributes
    ----------
    statistic : float
        The measure for the designed split.
    null : ndarray
        The measure for each random re-split (NaN where a re-split left it
        undefined; such re-splits are not counted).

    Examples
    --------
    >>> c = NullComparison(0.5, np.array([0.6, 0.7, 0.5, 0.4]))
    >>> c.share, c.median
    (0.75, 0.55)
    """

    statistic: float
    null: np.ndarray

    @property
    def null_splits(self) -> int:
        return int(np.isfinite(self.null).sum())

    @property
    def median(self) -> float:
        v = self.null[np.isfinite(self.null)]
        return float(np.median(v)) if v.size else float("nan")

    @property
    def share(self) -> float:
        """Share of re-splits at least as dependent as the designed split (ties count as at least as dependent)."""
        v = self.null[np.isfinite(self.null)]
        if not v.size or not np.isfinite(self.statistic):
            return float("nan")
        tol = _TIE * max(1.0, abs(self.statistic))
        return float(np.mean(v >= self.statistic - tol))

    @property
    def degenerate(self) -> bool:
        """Every re-split gives the designed split's value: the measure cannot tell splits apart."""
        v = self.null[np.isfinite(self.null)]
        tol = _TIE * max(1.0, abs(self.statistic))
        return bool(v.size) and bool(np.all(np.abs(v - self.statistic) <= tol))

    def better_than_random(self, level: float = NULL_LEVEL) -> bool:
        """True when at least ``1 - level`` of the re-splits are at least as dependent."""
        return bool(self.share >= 1.0 - level - 1e-12)


@dataclass(frozen=True)
class NullSummary:
    """What an audit's JSON keeps of a :class:`NullComparison`: the measure, the re-splits'
    median and the share of them at least as dependent (the per-re-split values are not
    stored). ``AuditResult.from_dict`` fills ``schoener_d_null`` / ``shared_method_null``
    with these; they answer ``statistic``, ``median`` and ``share`` as a NullComparison does.
    """

    statistic: float
    median: float
    share: float


def shared_group_resplit(codes, evaluation, null_splits: int = NULL_SPLITS, seed=0) -> NullComparison:
    """Share of evaluation records whose group also occurs in calibration, designed and re-split.

    Parameters
    ----------
    codes : array_like of int, shape (n,)
        Group (survey method / source) code of each of the fold's records;
        negative = unknown (left out of the share's denominator).
    evaluation : array_like of bool, shape (n,)
        True for the fold's evaluation records, False for its calibration records.
    null_splits : int
    seed : int or numpy.random.Generator

    Returns
    -------
    NullComparison

    Examples
    --------
    >>> codes = np.tile([0, 1], 20)            # two methods, 20 records each
    >>> res = shared_group_resplit(codes, np.arange(40) < 10, null_splits=19)
    >>> res.statistic, res.share, res.degenerate   # 10 evaluation records never hold all 20 of a method
    (1.0, 1.0, True)
    """
    codes = np.asarray(codes)
    ev = np.asarray(evaluation, dtype=bool)
    if codes.shape != ev.shape or codes.ndim != 1:
        raise InputError("codes and evaluation must be 1-D arrays of the same length.")
    null_splits = check_null_splits(null_splits)
    rng = np.random.default_rng(seed)
    known = codes >= 0
    m = int(codes.max()) + 1 if known.any() else 1
    code = np.where(known, codes, m)  # unknown -> an extra category that is never counted
    total = np.bincount(code, minlength=m + 1)

    def shares(ev_counts: np.ndarray) -> np.ndarray:
        in_cal = (total[None, :m] - ev_counts[:, :m]) > 0
        n_known = ev_counts[:, :m].sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(n_known > 0, (ev_counts[:, :m] * in_cal).sum(axis=1) / n_known, np.nan)

    observed = float(shares(np.bincount(code[ev], minlength=m + 1)[None, :])[0])
    null = shares(resplit_counts(rng, total, int(ev.sum()), null_splits))
    return NullComparison(observed, null)
