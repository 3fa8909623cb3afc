"""Streamed (windowed) evaluation of a prediction raster against the in-memory path.

The streamed summary must give the same binomial area share, partial ROC ("Rethinking
receiver operating characteristic analysis applications in ecological niche modeling",
Ecological Modelling 213, 2008) and continuous Boyce index ("Evaluating the ability of
habitat suitability models to predict species presences", Ecological Modelling 2006) as
the in-memory functions on all cells, which are themselves checked against scikit-learn
and scipy in their own test files; the full AUC is checked against scikit-learn here too.

All rasters and records are invented here, seeded: a longitude/latitude raster from
75 N to 30 N (so cell areas differ by row), values rounded to 0.01 (many ties between
cells and with presences), about 12 % nodata cells.
"""

from fractions import Fraction

import numpy as np
import pytest
import shapely
from rasterio.transform import from_origin
from scipy import stats
from sklearn.metrics import roc_auc_score

from splitter.errors import InputError
from splitter.evaluate import area_predicted, boyce_index, partial_roc
from splitter.evaluate.boyce import _windows
from splitter.evaluate.surface import (
    evaluate_surface,
    summarise_surface,
    surface_queries,
    surface_range,
)
from splitter.io.rasters import cell_values_and_areas, valid_cells, write_geotiff

ROWS, COLS = 45, 32
TRANSFORM = from_origin(-20.0, 75.0, 1.0, 1.0)  # 1-degree cells, 75 N to 30 N


@pytest.fixture(scope="module")
def raster(tmp_path_factory):
    rng = np.random.default_rng(42)
    yy, xx = np.mgrid[0:ROWS, 0:COLS]
    field = 0.5 + 0.35 * np.sin(xx / 5.0) * np.cos(yy / 7.0) + rng.normal(0, 0.08, (ROWS, COLS))
    values = np.round(np.clip(field, 0.0, 1.0), 2)
    values[rng.random((ROWS, COLS)) < 0.12] = np.nan
    path = tmp_path_factory.mktemp("surface") / "fold_1.tif"
    write_geotiff(path, values, TRANSFORM, "EPSG:4326")
    cells, areas = cell_values_and_areas(path)
    # Presences drawn at valid cells, favouring high suitability, so most tie with
    # cells (read back as float32, like scores sampled from the raster); plus scores
    # on no cell, above every cell and below every cell.
    pick = rng.choice(cells.size, size=70, p=cells**3 / np.sum(cells**3))
    presences = np.r_[cells[pick], 0.123456, 0.654321, 0.654321, cells.max() + 0.5, cells.min() - 0.5]
    thresholds = np.r_[np.quantile(cells[pick], 0.1), cells[pick][0], 0.5]
    return path, cells, areas, presences, thresholds


def _blocks(path, window_rows, region=None):
    return lambda: valid_cells(path, region, window_rows=window_rows)


def test_fixture_raster_is_split_into_many_windows(raster):
    path, cells, areas, _, _ = raster
    blocks = list(valid_cells(path, window_rows=3))
    # analytic: 45 rows in windows of 3 rows = 15 windows, none wholly nodata
    assert len(blocks) == 15  # analytic: ceil(45 / 3)
    assert sum(len(b) for b in blocks) == cells.size  # reference: cell_values_and_areas (same cells)
    # Precondition of the test: area weights really differ (lon/lat cells shrink northwards).
    assert areas.max() / areas.min() > 2.0  # analytic: cos(30°) / cos(75°) ≈ 3.3


@pytest.mark.parametrize("window_rows", [1, 3, 7, None])
@pytest.mark.parametrize("omission", [0.0, 0.05, 0.2, 1.0])
def test_streamed_evaluation_equals_in_memory(raster, window_rows, omission):
    path, cells, areas, presences, thresholds = raster
    got = evaluate_surface(_blocks(path, window_rows), presences, thresholds, omission=omission,
                           replicates=300, seed=7)
    # reference: the in-memory path on all cells (cell_values_and_areas)
    want = partial_roc(cells, presences, areas, omission=omission, replicates=300, seed=7)
    proc = got.partial_roc
    for name in ("statistic", "pvalue", "auc", "auc_ratio", "ratio_low", "ratio_high", "null_median"):
        assert getattr(proc, name) == pytest.approx(getattr(want, name), abs=1e-12), name  # reference: partial_roc in memory
    np.testing.assert_allclose(proc.ratios, want.ratios, rtol=0, atol=1e-12)  # reference: partial_roc in memory
    # consistency: the null draws cells by area in the same cell order, whatever the windows
    np.testing.assert_allclose(proc.null_ratios, want.null_ratios, rtol=0, atol=1e-12)
    np.testing.assert_allclose(proc.curve.x, want.curve.x, rtol=0, atol=1e-12)  # reference: partial_roc in memory
    np.testing.assert_allclose(proc.curve.y, want.curve.y, rtol=0, atol=0)  # reference: partial_roc in memory
    counts = (proc.n_cells, proc.sample_size, proc.n_presences)
    assert counts == (want.n_cells, want.sample_size, want.n_presences)  # reference: partial_roc in memory
    for t, share in zip(thresholds, got.area_shares):
        assert share == pytest.approx(area_predicted(cells, areas, t), abs=1e-12)  # reference: area_predicted in memory
    b_want = boyce_index(presences, cells, areas)
    assert got.boyce.statistic == pytest.approx(b_want.statistic, abs=1e-12)  # reference: boyce_index in memory
    np.testing.assert_allclose(got.boyce.ratios, b_want.ratios, rtol=1e-12)  # reference: boyce_index in memory
    np.testing.assert_array_equal(got.boyce.midpoints, b_want.midpoints)  # reference: boyce_index in memory
    assert got.surface.value_min == cells.min() and got.surface.value_max == cells.max()  # reference: numpy min/max in memory


def test_streamed_full_auc_equals_weighted_sklearn_auc(raster):
    path, cells, areas, presences, _ = raster
    r = partial_roc(_blocks(path, 3), presences, replicates=10)
    y = np.r_[np.ones(presences.size), np.zeros(cells.size)]
    w = np.r_[np.ones(presences.size), areas]
    # reference: sklearn.metrics.roc_auc_score with cell areas as sample weights
    assert r.auc == pytest.approx(roc_auc_score(y, np.r_[presences, cells], sample_weight=w), abs=1e-12)


def test_region_and_zero_weight_cells(raster):
    path, _, _, presences, thresholds = raster
    region = shapely.Polygon([(-18, 72), (8, 70), (10, 35), (-15, 40)])
    cells, areas = cell_values_and_areas(path, region)
    got = evaluate_surface(_blocks(path, 4, region), presences, thresholds, replicates=100, seed=3)
    want = partial_roc(cells, presences, areas, replicates=100, seed=3)
    np.testing.assert_allclose(got.partial_roc.ratios, want.ratios, rtol=0, atol=1e-12)  # reference: partial_roc in memory
    assert got.boyce.statistic == pytest.approx(boyce_index(presences, cells, areas).statistic, abs=1e-12)  # reference: boyce_index in memory

    # Zero-weight cells (e.g. rows beyond a pole) count in neither area nor cell count.
    rng = np.random.default_rng(5)
    weights = np.where(rng.random(cells.size) < 0.2, 0.0, areas)
    blocks = [(cells[i : i + 100], weights[i : i + 100]) for i in range(0, cells.size, 100)]
    s = summarise_surface(blocks, surface_queries(presences, thresholds))
    want = partial_roc(cells, presences, weights, replicates=50, seed=1)
    got = partial_roc(blocks, presences, replicates=50, seed=1, surface=s)
    np.testing.assert_allclose(got.ratios, want.ratios, rtol=0, atol=1e-12)  # reference: partial_roc in memory
    assert got.n_cells == want.n_cells == np.count_nonzero(weights)  # reference: numpy count_nonzero
    assert s.area_share_at(thresholds[0]) == pytest.approx(area_predicted(cells, weights, thresholds[0]), abs=1e-12)  # reference: area_predicted


def test_slot_weights_equal_direct_sums():
    rng = np.random.default_rng(9)
    cells = np.round(rng.random(5000), 2).astype(np.float32)  # float32 blocks are read exactly
    weights = rng.uniform(0.1, 2.0, cells.size)
    queries = np.r_[np.round(rng.random(30), 2), -1.0, 2.0].astype(np.float32).astype(np.float64)
    blocks = [(cells[i : i + 333], weights[i : i + 333]) for i in range(0, cells.size, 333)]
    s = summarise_surface(blocks, queries)
    c = cells.astype(np.float64)[:, None]
    q = s.query_values[None, :]
    # reference: direct masked sums over all cells (definition of the slots)
    np.testing.assert_allclose(s.weight_below, (weights[:, None] * (c < q)).sum(0), rtol=1e-12)
    np.testing.assert_allclose(s.weight_equal, (weights[:, None] * (c == q)).sum(0), rtol=1e-12)
    np.testing.assert_allclose(s.weight_above, (weights[:, None] * (c > q)).sum(0), rtol=1e-12, atol=1e-12)
    assert s.total_weight == pytest.approx(weights.sum(), rel=1e-12)  # reference: numpy sum
    assert surface_range(blocks) == (float(cells.min()), float(cells.max()))  # reference: numpy min/max


def test_unweighted_blocks_and_one_shot_iterator():
    rng = np.random.default_rng(11)
    cells = np.round(rng.random(6000), 3)
    presences = np.round(np.sqrt(rng.random(50)), 3)
    got = evaluate_surface([cells[i : i + 500] for i in range(0, 6000, 500)], presences, [0.4],
                           replicates=80, seed=2, value_range=(0.0, 1.0))
    want = partial_roc(cells, presences, replicates=80, seed=2)
    np.testing.assert_allclose(got.partial_roc.ratios, want.ratios, rtol=0, atol=1e-12)  # reference: partial_roc in memory
    assert got.area_shares[0] == pytest.approx(area_predicted(cells, None, 0.4), abs=1e-12)  # reference: area_predicted
    b_want = boyce_index(presences, cells, value_range=(0.0, 1.0))
    assert got.boyce.statistic == pytest.approx(b_want.statistic, abs=1e-12)  # reference: boyce_index in memory
    # A one-shot generator cannot serve the null's extra passes.
    with pytest.raises(InputError, match="streamed only once"):
        evaluate_surface((cells[i : i + 500] for i in range(0, 6000, 500)), presences, value_range=(0.0, 1.0))


def test_boyce_ties_are_ties_whatever_the_summation_order():
    # Equal weights: windows with the same number of cells and presences have exactly
    # equal P/E, which floating-point sums in different orders must not split.
    rng = np.random.default_rng(4)
    cells = np.round(rng.random(3000), 3)
    presences = np.round(rng.random(80) ** 0.5, 3)
    starts, ends, _ = _windows(cells.min(), cells.max(), 0.1, 0.01)
    expected = [int(np.sum((cells >= a) & (cells <= b))) for a, b in zip(starts, ends)]
    predicted = [int(np.sum((presences >= a) & (presences <= b))) for a, b in zip(starts, ends)]
    exact = [Fraction(p * cells.size, e * presences.size) for p, e in zip(predicted, expected) if e > 0]
    mids = (starts + ends)[np.array(expected) > 0] / 2.0
    levels = sorted(set(exact))
    # reference: scipy.stats.spearmanr on the exactly (rationally) computed P/E ratios
    ref = stats.spearmanr(mids, [levels.index(r) for r in exact]).statistic
    assert len(levels) < len(exact)  # precondition: the data do contain exact ties
    assert boyce_index(presences, cells).statistic == pytest.approx(ref, abs=1e-12)  # reference: scipy spearmanr, exact ratios
    s = summarise_surface([cells[i : i + 700] for i in range(0, 3000, 700)],
                          surface_queries(boyce_range=(cells.min(), cells.max())))
    assert boyce_index(presences, surface=s).statistic == pytest.approx(ref, abs=1e-12)  # reference: as above


def test_bad_input_raises_clear_errors():
    cells = np.linspace(0.0, 1.0, 100)
    s = summarise_surface([cells], surface_queries([0.5, 0.7], [0.3]))
    with pytest.raises(InputError, match="not one of the values"):
        s.area_share_at(0.31)
    with pytest.raises(InputError, match="not one of the values"):
        partial_roc([cells], [0.5, 0.71], surface=s)
    with pytest.raises(InputError, match="not one of the values"):
        boyce_index([0.5], surface=s)  # summarised without the Boyce windows
    with pytest.raises(InputError, match="all cell values of the testing region are equal".capitalize()):
        evaluate_surface([np.full(10, 0.4)], [0.4])
    with pytest.raises(InputError, match="No cell values"):
        evaluate_surface(lambda: iter([]), [0.4])
    with pytest.raises(InputError, match="missing or infinite"):
        summarise_surface([np.array([0.1, np.nan])], [0.1])
    with pytest.raises(InputError, match="not negative"):
        summarise_surface([(np.array([0.1, 0.2]), np.array([1.0, -1.0]))], [0.1])
    with pytest.raises(InputError, match="sum to zero"):
        summarise_surface([(np.array([0.1, 0.2]), np.zeros(2))], [0.1])
    with pytest.raises(InputError, match="one weight per cell"):
        summarise_surface([(np.array([0.1, 0.2]), np.ones(3))], [0.1])
    with pytest.raises(InputError, match="no evaluation presences"):
        evaluate_surface([cells], [])
    with pytest.raises(InputError, match="Omission tolerance"):
        evaluate_surface([cells], [0.5], omission=1.5)


def test_result_to_dict_and_frame(raster):
    path, _, _, presences, thresholds = raster
    r = evaluate_surface(_blocks(path, 10), presences, thresholds, replicates=20)
    d = r.to_dict()
    assert d["partial_roc_auc"] == r.partial_roc.auc and d["boyce"] == r.boyce.statistic  # common practice: flat export
    assert d["area_shares"] == r.area_shares.tolist() and len(r.to_frame()) == 1  # common practice: one-row frame
