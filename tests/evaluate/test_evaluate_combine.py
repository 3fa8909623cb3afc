"""Combining p-values and summarising folds."""

import numpy as np
import pytest
from scipy import stats

from splitter.errors import InputError
from splitter.evaluate import combine_pvalues_fisher, summarise_folds


def test_fisher_equals_scipy_and_chi_square_formula():
    p = np.array([0.01, 0.2, 0.3, 0.04, 0.5])
    r = combine_pvalues_fisher(p)
    ref = stats.combine_pvalues(p, method="fisher")  # reference: scipy.stats.combine_pvalues
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)  # reference: scipy.stats.combine_pvalues
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-12)  # reference: scipy.stats.combine_pvalues
    # analytic: X = -2 sum log p ~ chi-square with 2k degrees of freedom
    x = -2 * np.log(p).sum()
    assert r.statistic == pytest.approx(x, rel=1e-12)  # analytic: Fisher's statistic
    assert r.pvalue == pytest.approx(stats.chi2.sf(x, 2 * p.size), rel=1e-12)  # reference: scipy.stats.chi2
    assert r.n == 5  # analytic: five p-values


def test_fisher_leaves_out_missing_and_rejects_bad():
    r = combine_pvalues_fisher([0.1, np.nan, 0.2])
    assert r.n == 2  # analytic: the NaN is left out
    assert r.pvalue == pytest.approx(stats.combine_pvalues([0.1, 0.2], method="fisher").pvalue)  # reference: scipy
    with pytest.raises(InputError):
        combine_pvalues_fisher([np.nan])
    with pytest.raises(InputError):
        combine_pvalues_fisher([0.1, 1.2])


def test_summarise_folds_ignores_nan():
    s = summarise_folds([0.8, np.nan, 0.6, 0.7])
    x = np.array([0.8, 0.6, 0.7])
    assert s.mean == pytest.approx(np.mean(x))  # reference: numpy mean
    assert s.sd == pytest.approx(np.std(x, ddof=1))  # reference: numpy sample sd (ddof=1)
    assert (s.min, s.max, s.n) == (0.6, 0.8, 3)  # analytic: by inspection
    one = summarise_folds([0.4, np.nan])
    assert one.mean == 0.4 and np.isnan(one.sd) and one.n == 1  # analytic: sd needs two values (ddof=1)
    none = summarise_folds([np.nan])
    assert none.n == 0 and np.isnan(none.mean)  # analytic: nothing to summarise


# ----------------------------------------------------------------------------- Holm and jackknife

from itertools import product  # noqa: E402

from statsmodels.stats.multitest import multipletests  # noqa: E402

from splitter.evaluate import holm_adjust, jackknife_test  # noqa: E402


@pytest.mark.parametrize("seed", range(5))
def test_holm_equals_statsmodels(seed):
    rng = np.random.default_rng(seed)
    p = rng.random(rng.integers(2, 12)) ** 3
    # reference: statsmodels.stats.multitest.multipletests(method="holm") ("A simple
    # sequentially rejective multiple test procedure", Scandinavian Journal of Statistics 1979)
    want = multipletests(p, method="holm")[1]
    np.testing.assert_allclose(holm_adjust(p), want, rtol=1e-12)


def test_holm_leaves_missing_folds_out():
    got = holm_adjust([0.01, np.nan, 0.04])
    # analytic: k = 2, so 0.01 -> 0.02 and 0.04 -> max(0.02, 0.04)
    np.testing.assert_allclose(got[[0, 2]], [0.02, 0.04])
    assert np.isnan(got[1])


def test_holm_keeps_the_familywise_error_rate():
    # Five folds of a model of no skill: independent uniform p-values. Holm rejects any
    # at most alpha of the time (FWER); 3 Monte Carlo SE of allowance for 4000 draws.
    rng = np.random.default_rng(0)
    p = rng.random((4000, 5))
    any_rejected = np.array([np.any(holm_adjust(row) <= 0.05) for row in p])
    assert any_rejected.mean() <= 0.05 + 3 * np.sqrt(0.05 * 0.95 / 4000)


def _poisson_binomial_tail_by_enumeration(shares, s):
    # reference: brute force over all 2^n outcomes (independent Bernoulli trials)
    total = 0.0
    for outcome in product([0, 1], repeat=len(shares)):
        if sum(outcome) >= s:
            total += np.prod([q if o else 1 - q for q, o in zip(shares, outcome)])
    return total


@pytest.mark.parametrize("seed", range(6))
def test_jackknife_equals_enumeration(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 11))
    shares = rng.uniform(0.05, 0.6, n)
    hits = rng.random(n) < 0.7
    r = jackknife_test(hits, shares)
    assert r.statistic == hits.sum()
    assert r.pvalue == pytest.approx(_poisson_binomial_tail_by_enumeration(shares, hits.sum()), rel=1e-12)
    assert r.expected == pytest.approx(shares.sum())


def test_jackknife_with_equal_shares_is_the_binomial_tail():
    # analytic: equal shares make the Poisson-binomial a binomial; reference scipy.stats.binom
    r = jackknife_test(np.r_[np.ones(18, bool), np.zeros(7, bool)], np.full(25, 0.3))
    assert r.pvalue == pytest.approx(stats.binom.sf(17, 25, 0.3), rel=1e-10)


def test_jackknife_holds_its_size_and_finds_skill():
    # No skill: each held-out presence is predicted present with its fold's share.
    # Skill: with twice that chance (capped). n = 15 folds, 2000 draws; 3 Monte Carlo SE.
    rng = np.random.default_rng(3)
    shares = rng.uniform(0.1, 0.4, 15)
    null = np.array([jackknife_test(rng.random(15) < shares, shares).pvalue for _ in range(2000)])
    assert np.mean(null <= 0.05) <= 0.05 + 3 * np.sqrt(0.05 * 0.95 / 2000)
    skilled = np.array([jackknife_test(rng.random(15) < np.minimum(1, 2.5 * shares), shares).pvalue for _ in range(200)])
    assert np.mean(skilled <= 0.05) >= 0.8  # power; measured about 0.95 with these shares


def test_jackknife_bad_input():
    with pytest.raises(InputError, match="one per fold"):
        jackknife_test([True], [0.2, 0.3])
    with pytest.raises(InputError, match="at least one fold"):
        jackknife_test([], [])
