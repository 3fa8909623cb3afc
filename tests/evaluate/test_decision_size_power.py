"""Size and power of the decisions evaluate makes: per fold (both tests must reject) and
for the split (the ``all`` row: Holm across folds, or the jackknife for one-presence folds).

The rule, as evaluation.py documents and tests/test_evaluation_verdicts.py checks end to end
(p_fold against max(binomial, partial ROC), Holm against statsmodels.multipletests): a fold is
significant when Holm's adjusted max(p_binomial, p_partial_roc) is below alpha; the split when
its smallest adjusted p is (or, when every fold holds one presence, the jackknife p is).
Here the pieces are the public functions (binomial_test, partial_roc, holm_adjust,
jackknife_test) run over many seeds of invented data on a small region.

Size bounds follow tests/evaluate/test_significance_size_power.py: over S draws the observed
rejection rate has Monte Carlo standard error sqrt(alpha (1 - alpha) / S), and we allow alpha
+ 3 standard errors (one-sided; a test exactly at its size fails about once in 740 runs).
Binomial and partial ROC size and power one test at a time live in that file, not here.
"""

import numpy as np
import pytest

from splitter.evaluate import binomial_test, partial_roc
from splitter.evaluate.combine import holm_adjust, jackknife_test

ALPHA = 0.05


def _allowed(draws: int) -> float:
    return ALPHA + 3 * np.sqrt(ALPHA * (1 - ALPHA) / draws)


def _region(seed=0, n_cells=1000):
    # Invented testing region: model values per cell, areas differing by a factor of 3.
    rng = np.random.default_rng(seed)
    return rng.random(n_cells), rng.uniform(1.0, 3.0, n_cells)


def _draw(rng, values, areas, n, skilled):
    # No skill: each cell as likely as its area. Skill: also as likely as its value cubed.
    w = areas * (values**3 if skilled else 1.0)
    return values[rng.choice(values.size, n, p=w / w.sum())]


def _fold_pvalues(skilled, seeds, n=20, replicates=99):
    """p_binomial and p_partial_roc, shape (seeds, folds): calibration presences (40) set the
    threshold (10 % quantile, numpy 'lower'), n evaluation presences are tested."""
    values, areas = _region()
    pb = np.empty((seeds, len(skilled)))
    pr = np.empty_like(pb)
    for s in range(seeds):
        rng = np.random.default_rng(60_000 + s)
        for f, sk in enumerate(skilled):
            t = np.quantile(_draw(rng, values, areas, 40, sk), 0.1, method="lower")
            share = areas[values >= t].sum() / areas.sum()
            ev = _draw(rng, values, areas, n, sk)
            pb[s, f] = binomial_test(int(np.sum(ev >= t)), n, share).pvalue
            pr[s, f] = partial_roc(values, ev, areas, omission=0.05, replicates=replicates, seed=10 * s + f).pvalue
    return pb, pr


def _decide(pb, pr):
    """The documented rule: p_fold = max of the two, Holm across the folds of each seed."""
    p_fold = np.maximum(pb, pr)
    return p_fold, np.array([holm_adjust(row) for row in p_fold])


@pytest.fixture(scope="module")
def no_skill():
    return _decide(*_fold_pvalues([False, False, False], seeds=200))


@pytest.fixture(scope="module")
def one_skilled_fold():
    return _decide(*_fold_pvalues([True, False, False], seeds=200))


def test_per_fold_rule_holds_its_size(no_skill):
    p_fold, adjusted = no_skill
    # 200 seeds x 3 folds = 600 independent folds of a model with no skill
    assert np.mean(p_fold <= ALPHA) <= _allowed(p_fold.size)  # unadjusted, both tests must reject
    assert np.mean(adjusted <= ALPHA) <= _allowed(adjusted.size)  # after Holm


def test_all_row_holds_its_size(no_skill):
    _, adjusted = no_skill
    # The split is significant when its smallest adjusted p is: at most alpha of 200 no-skill splits.
    assert np.mean(adjusted.min(axis=1) <= ALPHA) <= _allowed(adjusted.shape[0])


def test_holm_keeps_null_folds_quiet_beside_a_skilled_one(one_skilled_fold):
    _, adjusted = one_skilled_fold
    # Strong control (Holm 1979, Scandinavian Journal of Statistics): with fold 1 skilled, the chance
    # of calling fold 2 or 3 significant stays at most alpha.
    assert np.mean((adjusted[:, 1:] <= ALPHA).any(axis=1)) <= _allowed(adjusted.shape[0])


def test_per_fold_rule_and_all_row_find_a_skilled_fold(one_skilled_fold):
    p_fold, adjusted = one_skilled_fold
    # Skilled presences fall in a cell with probability proportional to area x value^3: measured
    # 199 of 200 folds found unadjusted and 195 after Holm (our run); 0.9 leaves room for seeds.
    assert np.mean(p_fold[:, 0] <= ALPHA) >= 0.9
    assert np.mean(adjusted[:, 0] <= ALPHA) >= 0.9
    assert np.mean(adjusted.min(axis=1) <= ALPHA) >= 0.9  # the all row


def test_holm_all_row_has_its_analytic_size_on_uniform_pvalues():
    # Exact null p-values of continuous tests are Uniform(0, 1). For k = 4 independent folds the
    # smallest Holm-adjusted p is 4 * min p, so P(reject) = 1 - (1 - alpha / 4) ** 4 = 0.0491
    # (analytic); without adjustment it would be 1 - 0.95 ** 4 = 0.185.
    draws = 20_000
    p = np.random.default_rng(7).random((draws, 4))
    rate = np.mean([holm_adjust(row).min() <= ALPHA for row in p])
    se = np.sqrt(0.0491 * (1 - 0.0491) / draws)  # 0.0015
    assert rate == pytest.approx(1 - (1 - ALPHA / 4) ** 4, abs=3 * se)


def _jackknife_rates(shift, draws=2000, n=25):
    """Rejection rate of the jackknife test: n one-presence folds, fold i's share predicted present
    q_i (0.2..0.6); the held-out presence is predicted present with probability q_i (no skill) or
    q_i + shift (skill). Vectorised draws, one jackknife_test per draw."""
    rng = np.random.default_rng(11)
    q = rng.uniform(0.2, 0.6, n)
    hits = rng.random((draws, n)) < np.minimum(q + shift, 1.0)
    return np.mean([jackknife_test(h, q).pvalue <= ALPHA for h in hits])


def test_jackknife_all_row_holds_its_size():
    # The Poisson-binomial tail is exact and discrete: the test is at or below alpha.
    assert _jackknife_rates(0.0) <= _allowed(2000)


def test_jackknife_all_row_finds_skill():
    # Each held-out presence 0.35 more likely predicted present than its fold's share: expected
    # successes rise from 9.8 to 18.5 of 25 (sd about 2.2); measured 1942 of 2000 rejected (0.971,
    # our run), so 0.9 leaves room for seeds. (At a shift of 0.15 it is 0.36: a real but weak test.)
    assert _jackknife_rates(0.35) >= 0.9
