"""Size and power of the per-fold significance tests.

Size: for a model with no predictive ability (evaluation presences placed at random
in the testing region, each place as likely as its area) a test at level alpha
may reject at most a share alpha of the time. Over S seeds the observed rejection
rate has Monte Carlo standard error sqrt(alpha (1 - alpha) / S), so we allow
alpha + 3 standard errors (a one-sided check that fails about once in 740 runs
of a test that is exactly at its size; common practice for simulation checks).

Power: a model with real skill is still found.
"""

import numpy as np
import pytest
from scipy import stats

from splitter.evaluate import binomial_test, partial_roc

ALPHA = 0.05


def _allowed(seeds: int) -> float:
    return ALPHA + 3 * np.sqrt(ALPHA * (1 - ALPHA) / seeds)


def _region(seed=0, n_cells=1500):
    # Invented testing region: cell values of a model, cell areas that differ by a
    # factor of 3 (as rows of a longitude/latitude raster do far from the equator).
    rng = np.random.default_rng(seed)
    return rng.random(n_cells), rng.uniform(1.0, 3.0, n_cells)


def _random_presences(rng, values, areas, n):
    # No skill: presences fall anywhere, each cell as likely as its area.
    return values[rng.choice(values.size, n, p=areas / areas.sum())]


@pytest.mark.parametrize("n", [10, 30, 100])
def test_partial_roc_holds_its_size_for_a_model_of_no_skill(n):
    values, areas = _region()
    seeds, replicates = 300, 99
    pvalues = np.array([
        partial_roc(values, _random_presences(np.random.default_rng(10_000 + s), values, areas, n), areas,
                    omission=0.05, replicates=replicates, seed=s).pvalue
        for s in range(seeds)
    ])
    # analytic: a Monte Carlo p-value (1 + hits) / (1 + B) is never 0 and takes the values k / (B + 1)
    assert pvalues.min() >= 1 / (replicates + 1)
    assert np.mean(pvalues <= ALPHA) <= _allowed(seeds)  # size: alpha + 3 Monte Carlo SE (module notes)


def test_conventional_bootstrap_p_does_not_hold_its_size():
    # Why the null of random presences is needed: with 10 presences and E = 0.05 a
    # bootstrap sample of 5 cannot omit any presence, so every ratio is 2 / (1 + x0) > 1
    # and the share of bootstrap ratios <= 1 is 0 for a model of no skill.
    values, areas = _region()
    seeds = 100
    results = [
        partial_roc(values, _random_presences(np.random.default_rng(20_000 + s), values, areas, 10), areas,
                    replicates=99, seed=s)
        for s in range(seeds)
    ]
    assert not results[0].can_omit  # analytic: round(0.5 * 10) * 0.05 = 0.25 < 1
    conventional = np.mean([r.pvalue_bootstrap <= ALPHA for r in results])
    assert conventional > 0.5  # far above alpha: the failure the null test fixes
    assert np.mean([r.pvalue <= ALPHA for r in results]) <= _allowed(seeds)  # size, as above


def test_partial_roc_finds_a_model_with_skill():
    # Presences twice as likely at the top of the suitability range as at the bottom
    # (density 2u on [0, 1]: AUC 2/3, analytic). With n = 30 the test finds it in most
    # draws; measured 87 of 100 at B = 199 (our run), so 70 % leaves room for seeds.
    values = np.random.default_rng(0).random(1500)
    seeds = 100
    found = 0
    for s in range(seeds):
        presences = np.sqrt(np.random.default_rng(30_000 + s).random(30))  # inverse CDF of density 2u
        found += partial_roc(values, presences, replicates=199, seed=s).pvalue <= ALPHA
    assert found / seeds >= 0.70  # power at n = 30


def test_partial_roc_p_counts_null_ratios_at_least_as_large():
    values, areas = _region(3)
    presences = _random_presences(np.random.default_rng(5), values, areas, 25)
    r = partial_roc(values, presences, areas, replicates=199, seed=9)
    hits = np.count_nonzero(r.null_ratios >= r.statistic)
    # reference: Monte Carlo p-value (1 + hits) / (1 + B) (Davison & Hinkley, Bootstrap
    # Methods and their Application, 1997; scipy.stats.monte_carlo_test uses the same rule)
    assert r.pvalue == pytest.approx((1 + hits) / (1 + 199))
    assert r.null_ratios.shape == (199,)
    assert r.null_median == pytest.approx(np.median(r.null_ratios))


@pytest.mark.parametrize("n", [10, 30, 100])
def test_binomial_test_holds_its_size_for_a_model_of_no_skill(n):
    # The threshold comes from calibration presences (here also placed at random: the
    # 10 % quantile of 40 of them), the test from evaluation presences; the area
    # share predicted present is exact. Binomial p-values are discrete, so the test is
    # at or below its size (conservative).
    values, areas = _region(1)
    seeds = 400
    rejections = 0
    for s in range(seeds):
        rng = np.random.default_rng(40_000 + s)
        calibration = _random_presences(rng, values, areas, 40)
        threshold = np.quantile(calibration, 0.1, method="lower")
        share = areas[values >= threshold].sum() / areas.sum()
        evaluation = _random_presences(rng, values, areas, n)
        result = binomial_test(int(np.sum(evaluation >= threshold)), n, share)
        # reference: scipy.stats.binomtest, one-sided, gives the same p
        assert result.pvalue == pytest.approx(
            stats.binomtest(int(np.sum(evaluation >= threshold)), n, share, alternative="greater").pvalue,
            rel=1e-9)
        rejections += result.pvalue <= ALPHA
    assert rejections / seeds <= _allowed(seeds)  # size: alpha + 3 Monte Carlo SE


def test_binomial_test_finds_a_model_with_skill():
    # A model that puts 95 % of presences in the top 30 % of its range: at the threshold
    # of the 10 % calibration quantile the region share predicted present is about 0.7
    # and nearly every evaluation presence is hit.
    values = np.random.default_rng(2).random(1500)
    seeds, found = 100, 0
    for s in range(seeds):
        rng = np.random.default_rng(50_000 + s)
        skilled = lambda k: np.where(rng.random(k) < 0.95, rng.uniform(0.7, 1.0, k), rng.random(k))  # noqa: E731
        threshold = np.quantile(skilled(40), 0.1, method="lower")
        share = float(np.mean(values >= threshold))
        evaluation = skilled(30)
        found += binomial_test(int(np.sum(evaluation >= threshold)), 30, share).pvalue <= ALPHA
    assert found / seeds >= 0.9  # power at n = 30
