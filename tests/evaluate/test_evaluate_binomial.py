"""Cumulative binomial test and predicted-area share."""

import numpy as np
import pytest
from scipy import stats

from splitter.errors import InputError
from splitter.evaluate import BinomialResult, area_predicted, binomial_test


@pytest.mark.parametrize("n", [1, 2, 8, 25, 200])
@pytest.mark.parametrize("p", [0.0, 0.01, 0.15, 0.5, 0.93, 1.0])
def test_matches_scipy_binomtest_over_a_grid(n, p):
    for s in range(0, n + 1, max(1, n // 9)):
        got = binomial_test(s, n, p)
        # reference: scipy.stats.binomtest(alternative="greater")
        ref = stats.binomtest(s, n, p, alternative="greater").pvalue
        assert got.pvalue == pytest.approx(ref, rel=1e-10, abs=1e-300)  # reference: scipy.stats.binomtest
        assert got.statistic == s and got.n == n and got.p == p  # contract: inputs echoed


def test_common_practice_check_value():
    # common practice worked check: p = 0.15, n = 8, s = 7 gives about 1.19e-5.
    # analytic: C(8,7) 0.15^7 0.85 + 0.15^8 = 1.16186e-5 + 2.5629e-7 = 1.18749e-5
    r = binomial_test(7, 8, 0.15)
    assert r.pvalue == pytest.approx(8 * 0.15**7 * 0.85 + 0.15**8, rel=1e-12)  # analytic
    # rel=5e-3: the quoted value has three figures, so it stands for 1.185e-5..1.195e-5 (+-0.42 %)
    assert r.pvalue == pytest.approx(1.19e-5, rel=5e-3)  # common practice


def test_tiny_pvalues_are_kept():
    # analytic: P(X >= 300) = P(X = 300) = 0.1^300 = 1e-300, far below 1 - cdf's resolution
    assert binomial_test(300, 300, 0.1).pvalue == pytest.approx(1e-300, rel=1e-9)  # analytic
    # reference: scipy.stats.binomtest for a small but representable tail
    assert binomial_test(60, 100, 0.1).pvalue == pytest.approx(
        stats.binomtest(60, 100, 0.1, alternative="greater").pvalue, rel=1e-9
    )


def test_result_is_frozen_and_tabular():
    r = binomial_test(3, 10, 0.2)
    assert isinstance(r, BinomialResult)  # contract: scipy-style result
    with pytest.raises(AttributeError):
        r.pvalue = 0.5
    assert set(r.to_dict()) == {"statistic", "pvalue", "n", "p"}  # contract: named fields
    assert r.to_frame().shape == (1, 4)  # contract: one-row table


@pytest.mark.parametrize("args", [(1, 0, 0.5), (5, 4, 0.5), (-1, 4, 0.5), (1, 4, 1.5), (1, 4, -0.1), (1.5, 4, 0.5)])
def test_bad_input(args):
    with pytest.raises(InputError):
        binomial_test(*args)


def test_area_predicted_weighted_and_unweighted():
    values = np.array([0.1, 0.5, 0.7, 0.2, 0.9])
    weights = np.array([1.0, 2.0, 3.0, 4.0, 0.0])
    # analytic: cells >= 0.5 carry weights 2 + 3 + 0 of 10
    assert area_predicted(values, weights, 0.5) == pytest.approx(0.5)  # analytic
    # analytic: 3 of 5 cells are >= 0.5 (the threshold itself counts as present)
    assert area_predicted(values, None, 0.5) == pytest.approx(0.6)  # analytic


def test_area_predicted_bad_input():
    with pytest.raises(InputError):
        area_predicted([0.1, np.nan], None, 0.5)
    with pytest.raises(InputError):
        area_predicted([0.1, 0.2], [1.0], 0.5)
    with pytest.raises(InputError):
        area_predicted([], None, 0.5)
