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
