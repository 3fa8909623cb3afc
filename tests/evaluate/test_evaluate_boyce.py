"""Continuous Boyce index ("Evaluating the ability of habitat suitability models to
predict species presences", Ecological Modelling 2006)."""

import numpy as np
import pytest
from scipy import stats

from splitter.errors import InputError
from splitter.evaluate import boyce_index


def _rising_presences(n):
    # Invented, deterministic: quantiles of a density 2x on [0, 1] (more presences at
    # high suitability), so P/E rises in every window.
    return np.sqrt((np.arange(n) + 0.5) / n)


def test_monotone_rise_gives_one():
    cells = np.linspace(0.0, 1.0, 10_001)  # uniform expected distribution
    r = boyce_index(_rising_presences(100_000), cells)
    assert r.n_windows == 91  # analytic: width 0.1, step 0.01 -> (1 - 0.1)/0.01 + 1 windows
    assert r.n_used == 91  # analytic: every window holds cells
    assert np.all(np.diff(r.ratios) > 0)  # analytic: P grows as 2x, E is flat
    assert r.statistic == pytest.approx(1.0)  # analytic: Spearman of two increasing sequences


def test_monotone_fall_gives_minus_one():
    cells = np.linspace(0.0, 1.0, 10_001)
    r = boyce_index(1.0 - _rising_presences(100_000), cells)
    assert r.statistic == pytest.approx(-1.0)  # analytic: Spearman of increasing vs decreasing


def test_area_weights_change_expected_frequency():
    # Uniformly spread presences over cells whose area grows with suitability as 2x:
    # expected mass rises as fast as presences do, P/E about flat; with equal
    # weights the same presences would look like a perfect model.
    cells = np.linspace(0.0, 1.0, 10_001)
    presences = _rising_presences(100_000)
    weighted = boyce_index(presences, cells, reference_weights=2 * cells)
    unweighted = boyce_index(presences, cells)
    assert unweighted.statistic == pytest.approx(1.0)  # analytic: as above
    assert np.ptp(weighted.ratios) < 0.05  # analytic: P and E have the same density 2x
    assert np.ptp(unweighted.ratios) > 1.0  # analytic: P/E runs from about 0.1 to 1.9


def test_hand_computed_small_case():
    # Windows: width 0.5, step 0.125 over [0, 1] -> [0, .5], [.125, .625], [.25, .75],
    # [.375, .875], [.5, 1]; midpoints .25 .375 .5 .625 .75.
    ref = np.array([0.05, 0.15, 0.35, 0.45, 0.55, 0.65, 0.85, 0.95])
    weights = np.array([2, 1, 1, 1, 1, 1, 1, 2], dtype=float)  # total 10
    presences = np.array([0.1, 0.4, 0.6, 0.7, 0.8])
    # E per window: 5/10, 4/10, 4/10, 4/10, 5/10
    # P per window: 2/5, 2/5, 3/5, 4/5, 3/5
    # P/E: 0.8, 1.0, 1.5, 2.0, 1.2 -> ranks 1 2 4 5 3 against 1 2 3 4 5;
    # Spearman = 1 - 6 * (0 + 0 + 1 + 1 + 4) / (5 * 24) = 0.7
    r = boyce_index(presences, ref, weights, width_share=0.5, step_share=0.125, value_range=(0.0, 1.0))
    np.testing.assert_allclose(r.midpoints, [0.25, 0.375, 0.5, 0.625, 0.75])  # analytic
    np.testing.assert_allclose(r.ratios, [0.8, 1.0, 1.5, 2.0, 1.2])  # analytic: by hand above
    assert r.statistic == pytest.approx(0.7)  # analytic: by hand above
    assert r.statistic == pytest.approx(stats.spearmanr(r.midpoints, r.ratios).statistic)  # reference: scipy.stats.spearmanr


def test_windows_without_expected_mass_are_left_out():
    # No reference mass in (0.25, 0.75): windows of width 0.2 lying inside it are dropped.
    ref = np.r_[np.linspace(0.0, 0.25, 50), np.linspace(0.75, 1.0, 50)]
    presences = np.r_[np.full(5, 0.1), np.full(20, 0.9)]
    r = boyce_index(presences, ref, width_share=0.2, step_share=0.1)
    # analytic: starts 0 .. 0.8 by 0.1 (9 windows); [0.3, 0.5], [0.4, 0.6] and [0.5, 0.7]
    # hold no reference value
    assert r.n_windows == 9  # analytic: see above
    assert r.n_used == 6  # analytic: see above
    np.testing.assert_allclose(r.midpoints, [0.1, 0.2, 0.3, 0.7, 0.8, 0.9])  # analytic: see above
    assert np.isfinite(r.ratios).all()  # analytic: no division by zero mass


def test_result_to_dict_and_frame():
    r = boyce_index(_rising_presences(1000), np.linspace(0, 1, 1001))
    assert set(r.to_dict()) == {"statistic", "window_width", "n_windows", "n_used"}  # contract: scalars only
    assert list(r.to_frame().columns) == ["midpoint", "ratio"]  # contract: per-window table


def test_bad_input():
    with pytest.raises(InputError):
        boyce_index([], [0.1, 0.2])
    with pytest.raises(InputError):
        boyce_index([0.1], np.full(5, 0.3))
    with pytest.raises(InputError):
        boyce_index([0.1], [0.1, 0.5], width_share=0.0)
    with pytest.raises(InputError):
        boyce_index([0.1], [0.1, 0.5], reference_weights=[1.0])


def test_one_entry_point_for_cells_in_memory_and_streamed():
    # Consistency between our two paths (the outside checks of the Boyce value are above):
    # the same cells as one array, as a list of weighted blocks and as a CellSource give
    # the same index, and area_predicted likewise.
    from splitter.evaluate import area_predicted
    from splitter.evaluate.cells import CellSource

    rng = np.random.default_rng(5)
    cells, areas = rng.random(30_000), rng.uniform(0.5, 1.5, 30_000)
    presences = np.sqrt(rng.random(300))
    want = boyce_index(presences, cells, areas)
    blocks = [(cells[i:i + 7000], areas[i:i + 7000]) for i in range(0, cells.size, 7000)]
    for streamed in (blocks, CellSource.from_array(cells, areas, block=4096), lambda: iter(blocks)):
        got = boyce_index(presences, streamed)
        assert got.statistic == pytest.approx(want.statistic, abs=1e-12)
        assert np.allclose(got.ratios, want.ratios, rtol=1e-9)
        assert area_predicted(streamed, None, 0.4) == pytest.approx(area_predicted(cells, areas, 0.4), abs=1e-12)
