"""Exact area-based partial ROC and its vectorised bootstrap.

Method: "Rethinking receiver operating characteristic analysis applications in
ecological niche modeling", Ecological Modelling 213 (2008).
"""

import numpy as np
import pytest
from scipy import stats
from scipy.stats import rankdata
from sklearn.metrics import roc_auc_score

from splitter.errors import InputError
from splitter.evaluate import partial_roc, roc_curve_area

from reference_partial_roc import partial_roc_reference


def _landscape(seed, n_cells=3000, n_pres=60, decimals=2):
    # Invented: rounded values make many presence-cell and presence-presence ties.
    rng = np.random.default_rng(seed)
    cells = np.round(rng.random(n_cells), decimals)
    weights = rng.uniform(0.2, 1.0, n_cells)
    presences = np.round(rng.random(n_pres) ** 0.5, decimals)
    return cells, weights, presences


def _sklearn_auc(cells, presences, weights=None):
    # reference: sklearn.metrics.roc_auc_score with cell areas as negative-class weights
    y = np.r_[np.ones(presences.size), np.zeros(cells.size)]
    w = np.r_[np.ones(presences.size), np.ones(cells.size) if weights is None else weights]
    return roc_auc_score(y, np.r_[presences, cells], sample_weight=w)


@pytest.mark.parametrize("seed", range(4))
def test_full_auc_equals_weighted_sklearn_auc(seed):
    cells, weights, presences = _landscape(seed)
    r = partial_roc(cells, presences, weights, omission=0.05, replicates=5, seed=seed)
    assert r.auc == pytest.approx(_sklearn_auc(cells, presences, weights), abs=1e-12)  # reference: sklearn roc_auc_score
    assert roc_curve_area(cells, presences, weights).auc == pytest.approx(r.auc, abs=1e-15)  # reference: as above


def test_full_auc_equals_mann_whitney_for_equal_weights():
    cells, _, presences = _landscape(7)
    auc = roc_curve_area(cells, presences).auc
    # reference: scipy.stats.mannwhitneyu, AUC = U / (n1 n2) ("The meaning and use of the
    # area under a receiver operating characteristic (ROC) curve", Radiology 1982)
    u = stats.mannwhitneyu(presences, cells).statistic
    assert auc == pytest.approx(u / (presences.size * cells.size), abs=1e-12)  # reference: scipy mannwhitneyu
    assert auc == pytest.approx(_sklearn_auc(cells, presences), abs=1e-12)  # reference: sklearn roc_auc_score


def test_full_ratio_is_twice_auc():
    cells, weights, presences = _landscape(3)
    r = partial_roc(cells, presences, weights, omission=1.0, replicates=5)
    assert r.auc_ratio == pytest.approx(2 * r.auc, abs=1e-12)  # analytic: null area 0.5 when x0 = 0


@pytest.mark.parametrize("omission", [0.0, 0.05, 0.1, 0.37, 1.0])
@pytest.mark.parametrize("weighted", [False, True])
def test_vectorised_bootstrap_equals_plain_reference(omission, weighted):
    cells, weights, presences = _landscape(11, n_cells=1500, n_pres=41)
    # Presences above every cell and below every cell exercise both ends of the curve.
    presences = np.r_[presences, 1.5, 1.5, -0.5, -0.25]
    w = weights if weighted else None
    seed, replicates = 123, 60
    r = partial_roc(cells, presences, w, omission=omission, replicates=replicates, seed=seed)
    n = presences.size
    m = int(np.floor(0.5 * n + 0.5))
    # The documented draw, repeated here once and given to the plain implementation.
    indices = np.random.default_rng(seed).integers(0, n, size=(replicates, m))
    ref = partial_roc_reference(cells, presences, indices, w, omission=omission)
    # reference: plain per-replicate polyline integration over all cells (vertical strips)
    np.testing.assert_allclose(r.ratios, ref, rtol=0, atol=1e-12)  # reference: plain polyline implementation
    observed = partial_roc_reference(cells, presences, np.arange(n)[None, :], w, omission=omission)
    assert r.auc_ratio == pytest.approx(observed[0], abs=1e-12)  # reference: plain polyline implementation


@pytest.mark.parametrize("omission", [0.0, 0.05, 0.37, 1.0])
@pytest.mark.parametrize("decimals", [6, 1])
def test_null_ratios_equal_plain_reference_on_the_drawn_cells(omission, decimals):
    # The null is summarised only at the values its ratios read (each replicate's lowest
    # ~E n + 1): the ratios must still be those of the whole polyline of every drawn cell.
    cells, weights, presences = _landscape(12, n_cells=1200, n_pres=17, decimals=decimals)
    seed, replicates = 7, 40
    r = partial_roc(cells, presences, weights, omission=omission, replicates=replicates, seed=seed)
    rng = np.random.default_rng(seed)
    rng.integers(0, presences.size, size=(replicates, 9))  # the bootstrap's draw comes first
    # The documented null draw: uniform targets on [0, total area), each the cell whose
    # cumulative area first exceeds it.
    targets = rng.random(replicates * presences.size) * weights.sum()
    drawn = cells[np.minimum(np.searchsorted(np.cumsum(weights), targets, side="right"), cells.size - 1)]
    rows = np.arange(drawn.size).reshape(replicates, presences.size)
    ref = partial_roc_reference(cells, drawn, rows, weights, omission=omission)
    np.testing.assert_allclose(r.null_ratios, ref, rtol=0, atol=1e-12)  # reference: plain polyline implementation


@pytest.mark.parametrize("omission", [0.0, 0.05, 0.2, 0.5, 1.0])
@pytest.mark.parametrize("n", [1, 3, 20, 101])
def test_null_reads_areas_only_where_it_says(omission, n):
    # The values null_sample leaves out get NaN shares: a ratio that read one would be NaN.
    from splitter.evaluate.cells import summarise_surface
    from splitter.evaluate.partial_roc import _ratios, _table, null_sample

    rng = np.random.default_rng(n)
    cells = np.round(rng.random(3000), 2)
    drawn = rng.choice(cells, size=50 * n)
    null = null_sample(drawn, n, omission)
    full = summarise_surface(cells, null.values)
    everything = _ratios(null.keys, _table(full, null.values), omission)
    only_read = _ratios(null.keys, _table(full, null.values, null.read), omission)
    assert np.all(np.isfinite(only_read))
    np.testing.assert_array_equal(only_read, everything)  # contract: same surface, same ratios
    lowest = n - (0 if omission == 1.0 else int(np.ceil(round((1 - omission) * n, 9))) - 1)
    assert null.read.sum() <= 50 * lowest  # analytic: at most the lowest (E n + 1) of each replicate


def _float_traps(seed):
    # Invented values that are hard on the one-pass cell lookup: float32 cells, presences
    # equal to cells, presences one float64 step away from cells, clusters of presences
    # far closer than the lookup's bucket width, and cells far outside the presences' range.
    rng = np.random.default_rng(seed)
    cells = rng.random(5000).astype(np.float32)
    cells[:50] = np.float32(0.5)
    cells[50:60] = np.float32(3e38)
    cells[60:70] = np.float32(-3e38)
    exact = cells[rng.integers(0, 5000, 30)].astype(np.float64)
    near = np.nextafter(exact[:10], np.inf)
    cluster = 0.5 + np.arange(12) * 1e-15
    presences = np.r_[exact, near, np.nextafter(exact[10:20], -np.inf), cluster]
    weights = rng.uniform(0.5, 2.0, cells.size)
    return cells, weights, presences


@pytest.mark.parametrize("seed", range(3))
def test_cell_lookup_is_exact_on_float_traps(seed):
    cells, weights, presences = _float_traps(seed)
    r = partial_roc(cells, presences, weights, omission=0.1, replicates=40, seed=seed)
    # reference: sklearn roc_auc_score with cell weights (float64 comparisons of all values)
    assert r.auc == pytest.approx(_sklearn_auc(cells.astype(np.float64), presences, weights), abs=1e-12)
    n = presences.size
    idx = np.random.default_rng(seed).integers(0, n, size=(40, int(np.floor(0.5 * n + 0.5))))
    ref = partial_roc_reference(cells, presences, idx, weights, omission=0.1)  # reference: plain polyline
    np.testing.assert_allclose(r.ratios, ref, rtol=0, atol=1e-12)  # reference: plain polyline implementation


@pytest.mark.parametrize(
    "presences",
    [
        np.array([0.0, 5e-324, 5e-324]),  # presence values spanning one subnormal step
        np.array([-1e308, 0.3, 1e308]),  # a span beyond the float range
    ],
)
def test_cell_lookup_extreme_spans(presences):
    cells = np.r_[np.linspace(-1.0, 1.0, 101), 0.0, 5e-324, -1e308, 1e308]
    curve = roc_curve_area(cells, presences)
    assert curve.auc == pytest.approx(_sklearn_auc(cells, presences), abs=1e-12)  # reference: sklearn roc_auc_score


def test_integer_predictions():
    rng = np.random.default_rng(4)
    cells = rng.integers(0, 1000, 4000)  # e.g. suitability stored as 0-1000 integers
    presences = rng.integers(300, 1000, 80)
    r = partial_roc(cells, presences, replicates=20)
    assert r.auc == pytest.approx(_sklearn_auc(cells, presences), abs=1e-12)  # reference: sklearn roc_auc_score


def test_hand_integrated_partial_ratio():
    # Five cells of equal area 0.2 at 0.9, 0.7, 0.5, 0.3, 0.1; 20 presences:
    # 10 at 0.9 (tied with a cell), 9 at 0.6 (no cell), 1 at 0.3 (tied with a cell).
    cells = np.array([0.9, 0.7, 0.5, 0.3, 0.1])
    presences = np.r_[np.full(10, 0.9), np.full(9, 0.6), 0.3]
    # Curve vertices (x, y), thresholds descending:
    #   (0, 0) -0.9-> (0.2, 0.5) diagonal; -0.7-> (0.4, 0.5) flat; -0.6-> (0.4, 0.95) vertical;
    #   -0.5-> (0.6, 0.95) flat; -0.3-> (0.8, 1.0) diagonal; -0.1-> (1.0, 1.0) flat.
    # Full area: 0.2*0.25 + 0.2*0.5 + 0.2*0.95 + 0.2*0.975 + 0.2*1.0 = 0.735.
    # E = 0.05: y reaches 0.95 first at x0 = 0.4. Model area over [0.4, 1]:
    #   0.2*0.95 + 0.2*(0.95 + 1.0)/2 + 0.2*1.0 = 0.19 + 0.195 + 0.2 = 0.585;
    #   null area (1 - 0.4^2)/2 = 0.42; ratio = 0.585 / 0.42 = 1.392857...
    # E = 0.6: y reaches 0.4 inside the first diagonal, at x0 = 0.2 * 0.4/0.5 = 0.16.
    #   Model area = 0.04*(0.4 + 0.5)/2 + (0.735 - 0.05) = 0.018 + 0.685 = 0.703;
    #   null area (1 - 0.0256)/2 = 0.4872; ratio = 0.703 / 0.4872.
    # E = 0: y reaches 1 at the end of the 0.3 diagonal, x0 = 0.8. Model area = 0.2 * 1.0;
    #   null (1 - 0.64)/2 = 0.18; ratio = 0.2 / 0.18.
    curve = roc_curve_area(cells, presences)
    assert curve.auc == pytest.approx(0.735, abs=1e-12)  # analytic: hand integration above
    for omission, expected in [(0.05, 0.585 / 0.42), (0.6, 0.703 / 0.4872), (0.0, 0.2 / 0.18)]:
        r = partial_roc(cells, presences, omission=omission, replicates=3)
        assert r.auc_ratio == pytest.approx(expected, abs=1e-12)  # analytic: hand integration above


def test_limit_when_too_many_presences_score_below_every_cell():
    # 8 presences at 0.6 and 2 below every cell (0.0): with E = 0.05 the curve reaches
    # y = 0.95 only on the vertical step at x = 1, so x0 = 1 and both areas vanish.
    # analytic: the ratio's limit as x0 -> 1 is the curve's height just left of x = 1, 0.8.
    cells = np.array([0.9, 0.7, 0.5, 0.3, 0.1])
    presences = np.r_[np.full(8, 0.6), 0.0, 0.0]
    r = partial_roc(cells, presences, omission=0.05, replicates=50, seed=1)
    assert r.auc_ratio == pytest.approx(0.8, abs=1e-12)  # analytic: limit above
    n, m = 10, 5
    idx = np.random.default_rng(1).integers(0, n, size=(50, m))
    # reference: plain polyline implementation
    np.testing.assert_allclose(r.ratios, partial_roc_reference(cells, presences, idx, omission=0.05), atol=1e-12)
    # analytic: a replicate that drew k >= 1 of the low presences (k/5 > E) has the limit
    # (5 - k)/5; one that drew none has x0 = 0.4 and ratio 0.6 / 0.42 (all at 0.6).
    k = (presences[idx] == 0.0).sum(axis=1)
    expected = np.where(k > 0, (m - k) / m, 0.6 / 0.42)
    np.testing.assert_allclose(r.ratios, expected, atol=1e-12)  # analytic: see above


def test_random_model_has_auc_half_and_ratio_one():
    # common practice: a model with no skill has AUC 0.5 and AUC ratio 1.
    rng = np.random.default_rng(2024)
    cells = rng.random(20_000)
    presences = rng.choice(cells, 300, replace=False)  # presences placed at random in the region
    r = partial_roc(cells, presences, omission=0.05, replicates=300, seed=5)
    # AUC standard error for n = 300 is about sqrt(1/(12*300)) = 0.017
    assert abs(r.auc - 0.5) < 0.05  # common practice: AUC 0.5 for no skill
    # the observed ratio of 300 random presences: the null ratios' spread is about 0.02
    assert abs(r.statistic - r.null_median) < 0.06  # 3 x the null's spread, measured on this seed family
    assert r.pvalue > 0.05  # common practice: no skill is not significant


def test_perfect_model_reaches_the_maximum_two():
    cells = np.linspace(0.0, 0.8, 500)
    presences = np.linspace(0.85, 1.0, 40)  # every presence above every cell
    for omission in (0.0, 0.05, 1.0):
        r = partial_roc(cells, presences, omission=omission, replicates=100)
        # analytic: x0 = 0 and y = 1 on (0, 1], so model area 1 over null 1/2
        assert r.auc_ratio == pytest.approx(2.0, abs=1e-12)  # analytic: see above
        assert r.bootstrap_mean == pytest.approx(2.0, abs=1e-12)  # analytic: every replicate is perfect too
        assert r.pvalue_bootstrap == 0.0  # analytic: no bootstrap replicate has ratio <= 1
        # analytic: presences placed at random are cells, tied with at least their own cell,
        # so no null ratio reaches 2 and p takes its floor 1 / (B + 1)
        assert np.all(r.null_ratios < 2.0)
        assert r.pvalue == pytest.approx(1 / 101)
    assert r.auc == pytest.approx(1.0)  # analytic


def test_ratio_never_exceeds_two():
    rng = np.random.default_rng(9)
    for _ in range(20):
        cells = np.round(rng.normal(size=rng.integers(5, 400)), 1)
        if cells.min() == cells.max():
            continue
        presences = np.round(rng.normal(rng.normal(), 1.0, rng.integers(1, 40)), 1)
        for omission in (1.0, 0.05, 0.0):
            r = partial_roc(cells, presences, omission=omission, replicates=50, seed=int(rng.integers(1000)))
            # analytic: y <= 1 so model area <= 1 - x0 and ratio <= 2 / (1 + x0) <= 2
            assert np.all(r.ratios <= 2.0 + 1e-12)  # analytic: see above
            assert r.auc_ratio <= 2.0 + 1e-12  # analytic: see above


def test_only_ranks_matter():
    cells, weights, presences = _landscape(5)
    cells = cells * 40.0 - 17.0  # predictions far outside [0, 1]
    presences = presences * 40.0 - 17.0
    ranks = rankdata(np.r_[cells, presences], method="dense")
    a = partial_roc(cells, presences, weights, replicates=40, seed=8)
    b = partial_roc(ranks[: cells.size], ranks[cells.size :], weights, replicates=40, seed=8)
    # analytic: the curve depends only on the order of values, which dense ranks keep
    np.testing.assert_allclose(a.ratios, b.ratios, rtol=0, atol=1e-12)  # analytic: see above
    assert a.auc == pytest.approx(b.auc, abs=1e-12)  # analytic: see above


def test_curve_is_exact_and_monotone():
    cells, weights, presences = _landscape(1)
    c = roc_curve_area(cells, presences, weights)
    assert c.x[0] == 0.0 and c.y[0] == 0.0 and c.x[-1] == 1.0 and c.y[-1] == 1.0  # analytic: ROC ends
    assert np.all(np.diff(c.x) >= -1e-15) and np.all(np.diff(c.y) >= 0)  # analytic: shares grow as t falls
    # reference: numpy trapezoid over the vertices = the weighted AUC (sklearn roc_auc_score)
    assert np.trapezoid(c.y, c.x) == pytest.approx(_sklearn_auc(cells, presences, weights), abs=1e-12)  # reference: see above


def test_result_fields_and_determinism():
    cells, weights, presences = _landscape(2, n_pres=5)
    r = partial_roc(cells, presences, weights, replicates=200, seed=4)
    assert r.sample_size == 3  # analytic: 0.5 * 5 = 2.5 rounds half up to 3
    assert r.ratios.shape == (200,)  # contract: one ratio per replicate
    assert r.statistic == r.auc_ratio  # contract: the statistic is the observed ratio
    assert r.bootstrap_mean == pytest.approx(r.ratios.mean())  # analytic: definition
    assert r.pvalue_bootstrap == pytest.approx(np.mean(r.ratios <= 1))  # analytic: definition
    assert r.pvalue == pytest.approx((1 + np.sum(r.null_ratios >= r.statistic)) / 201)  # analytic: definition
    assert r.can_omit is False  # analytic: 3 * 0.05 < 1
    assert (r.ratio_low, r.ratio_high) == tuple(np.percentile(r.ratios, [2.5, 97.5]))  # reference: numpy percentile
    d = r.to_dict()
    assert all(np.isscalar(v) for v in d.values())  # contract: arrays kept out of to_dict
    again = partial_roc(cells, presences, weights, replicates=200, seed=4)
    np.testing.assert_array_equal(r.ratios, again.ratios)  # contract: same seed, same result
    np.testing.assert_array_equal(r.null_ratios, again.null_ratios)  # contract: same seed, same result
    other = partial_roc(cells, presences, weights, replicates=200, seed=5)
    assert not np.array_equal(r.ratios, other.ratios)  # contract: the seed is used


def test_zero_weight_cells_are_ignored():
    cells, weights, presences = _landscape(6)
    weights[:500] = 0.0
    a = partial_roc(cells, presences, weights, replicates=30, seed=2)
    b = partial_roc(cells[500:], presences, weights[500:], replicates=30, seed=2)
    np.testing.assert_allclose(a.ratios, b.ratios, atol=1e-12)  # analytic: zero area adds nothing
    assert a.n_cells == cells.size - 500  # analytic: 500 cells have zero area


@pytest.mark.parametrize(
    "kwargs, message",
    [
        (dict(cell_values=np.full(10, 0.3), presence_scores=[0.5]), "equal"),
        (dict(cell_values=np.linspace(0, 1, 10), presence_scores=[]), "no evaluation presences"),
        (dict(cell_values=[], presence_scores=[0.5]), "no valid cells"),
        (dict(cell_values=[0.1, np.nan, 0.4], presence_scores=[0.5]), "nodata"),
        (dict(cell_values=[0.1, 0.4], presence_scores=[np.inf]), "presence"),
        (dict(cell_values=[0.1, 0.4], presence_scores=[0.5], cell_weights=[1.0]), "weight"),
        (dict(cell_values=[0.1, 0.4], presence_scores=[0.5], omission=1.5), "Omission"),
        (dict(cell_values=[0.1, 0.4], presence_scores=[0.5], replicates=0), "replicates"),
        (dict(cell_values=[0.1, 0.4], presence_scores=[0.5], sample_share=0.0), "share"),
    ],
)
def test_degenerate_input_raises_clear_error(kwargs, message):
    with pytest.raises(InputError, match=message):
        partial_roc(**kwargs)


def test_hand_worked_area_weighted_case():
    # Worked by hand. Cells 0.9, 0.6, 0.3 with areas 1, 2, 1 (area shares 1/4, 1/2, 1/4);
    # presences 0.9, 0.9, 0.6, 0.3, each tied with a cell, so the curve is three diagonals:
    # (0, 0) -> (1/4, 1/2) -> (3/4, 3/4) -> (1, 1).
    # E = 0.5: y reaches 1/2 first at x0 = 1/4. Model area from 1/4 to 1:
    # (1/2)(1/2 + 3/4)/2 + (1/4)(3/4 + 1)/2 = 5/16 + 7/32 = 17/32; null area (1 - 1/16)/2 = 15/32.
    # Ratio 17/15. Full AUC = 17/32 + (1/4)(1/2)/2 = 19/32.
    cells, areas = np.array([0.9, 0.6, 0.3]), np.array([1.0, 2.0, 1.0])
    presences = np.array([0.9, 0.9, 0.6, 0.3])
    r = partial_roc(cells, presences, areas, omission=0.5, replicates=10)
    assert r.auc_ratio == pytest.approx(17 / 15, abs=1e-12)  # analytic: worked above
    assert r.auc == pytest.approx(19 / 32, abs=1e-12)  # analytic: worked above
    assert r.auc == pytest.approx(_sklearn_auc(cells, presences, areas), abs=1e-12)  # reference: sklearn roc_auc_score
    # With equal areas the same records give other shares (1/3 each): the weights are used.
    assert partial_roc(cells, presences, omission=0.5, replicates=10).auc_ratio != pytest.approx(17 / 15)
