"""Streamed (windowed) evaluation of a prediction raster against the in-memory path.

Outside references here: cell areas from pyproj.Geod (tests/reference_areas.py), area
shares as plain numpy sums, the full AUC from scikit-learn, the observed partial AUC ratio
from the plain polyline in tests/evaluate/reference_partial_roc.py ("Rethinking receiver
operating characteristic analysis applications in ecological niche modeling", Ecological
Modelling 213, 2008), and the continuous Boyce index from ``reference_boyce`` below, a plain
implementation of "Evaluating the ability of habitat suitability models to predict species
presences" (Ecological Modelling 2006) with scipy.stats.spearmanr. Beside them, consistency
checks (named so) hold the streamed path equal to the in-memory functions on all cells,
bootstrap and null draws included.

All rasters and records are invented here, seeded: a longitude/latitude raster from
75 N to 30 N (so cell areas differ by row), values rounded to 0.01 (many ties between
cells and with presences), about 12 % nodata cells.
"""

from fractions import Fraction

import numpy as np
import pytest
import rasterio
import shapely
from rasterio.transform import from_origin
from scipy import stats
from sklearn.metrics import roc_auc_score

from splitter.errors import InputError
from splitter.evaluate import area_predicted, boyce_index, partial_roc
from splitter.evaluate.surface import (
    evaluate_surface,
    summarise_surface,
    surface_queries,
    surface_range,
)
from splitter.io.rasters import cell_values_and_areas, valid_cells, write_geotiff
from tests.evaluate.reference_partial_roc import partial_roc_reference
from tests.reference_areas import geodesic_row_areas_km2

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


def boyce_windows(lo, hi, width_share=0.1, step_share=0.01):
    """Window edges as splitter.evaluate.boyce's module notes define them (not its private helper):
    starts evenly spaced from lo to hi - width, at most step_share * span apart; closed windows."""
    n = int(np.ceil(round((1.0 - width_share) / step_share, 9))) + 1  # 91 for the defaults
    starts = lo + np.linspace(0.0, 1.0 - width_share, n) * (hi - lo)
    return starts, starts + width_share * (hi - lo)


def reference_boyce(presences, cells, weights=None, value_range=None):
    """Plain continuous Boyce index (Ecological Modelling 2006): per window, P = share of presences,
    E = (area-)weighted share of cells; Spearman (scipy.stats.spearmanr) of midpoints against P/E
    over windows with E > 0. P/E equal to 1e-9 relative are one tie (the module's rule: equal up to
    floating-point rounding); with exact ties this is the Spearman of the exact ratios."""
    presences, cells = np.asarray(presences, float), np.asarray(cells, float)
    w = np.ones_like(cells) if weights is None else np.asarray(weights, float)
    lo, hi = value_range if value_range is not None else (cells.min(), cells.max())
    starts, ends = boyce_windows(lo, hi)
    e = np.array([w[(cells >= a) & (cells <= b)].sum() for a, b in zip(starts, ends)]) / w.sum()
    p = np.array([np.sum((presences >= a) & (presences <= b)) for a, b in zip(starts, ends)]) / presences.size
    used = e > 0
    ratio = p[used] / e[used]
    order = np.sort(ratio)
    level = np.r_[0, np.cumsum(np.diff(order) > 1e-9 * np.maximum(np.abs(order[1:]), 1e-300))]
    tied = level[np.searchsorted(order, ratio, side="left")]
    mids = ((starts + ends) / 2.0)[used]
    return stats.spearmanr(mids, tied).statistic, mids, ratio


def _blocks(path, window_rows, region=None):
    return lambda: valid_cells(path, region, window_rows=window_rows)


def test_fixture_raster_is_split_into_many_windows(raster):
    path, cells, areas, _, _ = raster
    blocks = list(valid_cells(path, window_rows=3))
    # analytic: 45 rows in windows of 3 rows = 15 windows, none wholly nodata
    assert len(blocks) == 15  # analytic: ceil(45 / 3)
    with rasterio.open(path) as src:  # reference: rasterio's own read and nodata mask
        a = src.read(1, masked=True)
    rows, _ = np.nonzero(~a.mask)
    np.testing.assert_array_equal(cells, a.compressed())  # row-major valid cells, as rasterio reads them
    assert sum(len(b) for b in blocks) == cells.size
    # reference: pyproj.Geod.polygon_area_perimeter of each row's cell (tests/reference_areas.py);
    # rtol=1e-8: the densified outline matches the exact zone area to ~1e-9
    np.testing.assert_allclose(areas, geodesic_row_areas_km2(TRANSFORM, ROWS)[rows], rtol=1e-8)
    # Precondition of the test: area weights really differ (lon/lat cells shrink northwards).
    assert areas.max() / areas.min() > 2.0  # analytic: cos(30°) / cos(75°) ≈ 3.3


@pytest.mark.parametrize("window_rows", [1, 3, 7, None])
@pytest.mark.parametrize("omission", [0.0, 0.05, 0.2, 1.0])
def test_streamed_evaluation_equals_in_memory(raster, window_rows, omission):
    path, cells, areas, presences, thresholds = raster
    got = evaluate_surface(_blocks(path, window_rows), presences, thresholds, omission=omission,
                           replicates=300, seed=7)
    proc = got.partial_roc
    # reference: the plain polyline (tests/evaluate/reference_partial_roc.py) for the observed ratio
    observed = partial_roc_reference(cells, presences, np.arange(presences.size)[None, :], areas, omission)[0]
    assert proc.auc_ratio == pytest.approx(observed, abs=1e-9)  # abs: float sums in another order
    y = np.r_[np.ones(presences.size), np.zeros(cells.size)]
    # reference: sklearn.metrics.roc_auc_score with cell areas as negative-class weights
    assert proc.auc == pytest.approx(roc_auc_score(y, np.r_[presences, cells],
                                                   sample_weight=np.r_[np.ones(presences.size), areas]), abs=1e-12)
    for t, share in zip(thresholds, got.area_shares):
        # reference: plain numpy, area of cells with value >= t over all area (the binomial test's p)
        assert share == pytest.approx(areas[cells >= t].sum() / areas.sum(), abs=1e-12)
    b_ref, mids, ratios = reference_boyce(presences, cells, areas)
    assert got.boyce.statistic == pytest.approx(b_ref, abs=1e-12)  # reference: reference_boyce (above)
    np.testing.assert_allclose(got.boyce.midpoints, mids, rtol=0, atol=1e-12)  # reference: as above
    np.testing.assert_allclose(got.boyce.ratios, ratios, rtol=1e-9)  # reference: as above
    assert got.boyce.n_windows == 91 and got.boyce.n_used == mids.size  # analytic: (1 - 0.1) / 0.01 + 1

    # Consistency checks: the streamed path equals the in-memory path on all cells.
    want = partial_roc(cells, presences, areas, omission=omission, replicates=300, seed=7)
    for name in ("statistic", "pvalue", "auc", "auc_ratio", "ratio_low", "ratio_high", "null_median"):
        assert getattr(proc, name) == pytest.approx(getattr(want, name), abs=1e-12), name  # consistency
    np.testing.assert_allclose(proc.ratios, want.ratios, rtol=0, atol=1e-12)  # consistency
    # consistency: the null draws cells by area in the same cell order, whatever the windows
    np.testing.assert_allclose(proc.null_ratios, want.null_ratios, rtol=0, atol=1e-12)
    np.testing.assert_allclose(proc.curve.x, want.curve.x, rtol=0, atol=1e-12)  # consistency
    np.testing.assert_allclose(proc.curve.y, want.curve.y, rtol=0, atol=0)  # consistency
    counts = (proc.n_cells, proc.sample_size, proc.n_presences)
    assert counts == (want.n_cells, want.sample_size, want.n_presences)  # consistency
    assert proc.n_cells == cells.size  # reference: rasterio's valid-cell count (fixture test)
    for t, share in zip(thresholds, got.area_shares):
        assert share == pytest.approx(area_predicted(cells, areas, t), abs=1e-12)  # consistency: in memory
    b_want = boyce_index(presences, cells, areas)
    assert got.boyce.statistic == pytest.approx(b_want.statistic, abs=1e-12)  # consistency: in memory
    np.testing.assert_allclose(got.boyce.ratios, b_want.ratios, rtol=1e-12)  # consistency: in memory
    np.testing.assert_array_equal(got.boyce.midpoints, b_want.midpoints)  # consistency: in memory
    assert got.surface.value_min == cells.min() and got.surface.value_max == cells.max()  # reference: numpy min/max


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
    np.testing.assert_allclose(got.partial_roc.ratios, want.ratios, rtol=0, atol=1e-12)  # consistency: in memory
    assert got.boyce.statistic == pytest.approx(boyce_index(presences, cells, areas).statistic, abs=1e-12)  # consistency
    # reference: reference_boyce (above) on the cells whose centres lie in the region (cell_values_and_areas
    # clipped them; the same cells as rasterio's mask and shapely.contains_xy would give)
    assert got.boyce.statistic == pytest.approx(reference_boyce(presences, cells, areas)[0], abs=1e-12)

    # Zero-weight cells (e.g. rows beyond a pole) count in neither area nor cell count.
    rng = np.random.default_rng(5)
    weights = np.where(rng.random(cells.size) < 0.2, 0.0, areas)
    blocks = [(cells[i : i + 100], weights[i : i + 100]) for i in range(0, cells.size, 100)]
    s = summarise_surface(blocks, surface_queries(presences, thresholds))
    want = partial_roc(cells, presences, weights, replicates=50, seed=1)
    got = partial_roc(blocks, presences, replicates=50, seed=1, surface=s)
    np.testing.assert_allclose(got.ratios, want.ratios, rtol=0, atol=1e-12)  # consistency: in memory
    assert got.n_cells == want.n_cells == np.count_nonzero(weights)  # reference: numpy count_nonzero
    # reference: plain numpy area share (zero-weight cells add nothing)
    t0 = thresholds[0]
    assert s.area_share_at(t0) == pytest.approx(weights[cells >= t0].sum() / weights.sum(), abs=1e-12)


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
    np.testing.assert_allclose(got.partial_roc.ratios, want.ratios, rtol=0, atol=1e-12)  # consistency: in memory
    assert got.area_shares[0] == pytest.approx(np.mean(cells >= 0.4), abs=1e-12)  # reference: numpy share of cells
    b_want = reference_boyce(presences, cells, value_range=(0.0, 1.0))[0]
    assert got.boyce.statistic == pytest.approx(b_want, abs=1e-12)  # reference: reference_boyce (above)
    # A one-shot generator cannot serve the null's extra passes.
    with pytest.raises(InputError, match="streamed only once"):
        evaluate_surface((cells[i : i + 500] for i in range(0, 6000, 500)), presences, value_range=(0.0, 1.0))


def test_boyce_ties_are_ties_whatever_the_summation_order():
    # Equal weights: windows with the same number of cells and presences have exactly
    # equal P/E, which floating-point sums in different orders must not split.
    rng = np.random.default_rng(4)
    cells = np.round(rng.random(3000), 3)
    presences = np.round(rng.random(80) ** 0.5, 3)
    starts, ends = boyce_windows(cells.min(), cells.max())  # the module notes' definition, above
    expected = [int(np.sum((cells >= a) & (cells <= b))) for a, b in zip(starts, ends)]
    predicted = [int(np.sum((presences >= a) & (presences <= b))) for a, b in zip(starts, ends)]
    exact = [Fraction(p * cells.size, e * presences.size) for p, e in zip(predicted, expected) if e > 0]
    mids = (starts + ends)[np.array(expected) > 0] / 2.0
    levels = sorted(set(exact))
    # reference: scipy.stats.spearmanr on the exactly (rationally) computed P/E ratios
    ref = stats.spearmanr(mids, [levels.index(r) for r in exact]).statistic
    assert len(levels) < len(exact)  # precondition: the data do contain exact ties
    got = boyce_index(presences, cells)
    assert got.statistic == pytest.approx(ref, abs=1e-12)  # reference: scipy spearmanr, exact ratios
    # the public BoyceResult fields describe the same windows
    assert got.n_windows == starts.size and got.window_width == pytest.approx(ends[0] - starts[0], abs=1e-15)
    np.testing.assert_allclose(got.midpoints, mids, rtol=0, atol=1e-15)
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
