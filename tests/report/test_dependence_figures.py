"""Tests for splitter.report.dependence_figures."""

import io

import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.figure import Figure

from splitter.dependence.distance import distance_diagnostics
from splitter.dependence.variogram import fit_ranges
from splitter.report.dependence_figures import OKABE_ITO, plot_distance_ecdf, plot_variogram
from splitter.errors import InputError
from splitter.geo import Points


@pytest.fixture
def range_estimate():
    rng = np.random.default_rng(0)
    x, y = rng.uniform(0, 120, (2, 400))
    covs = {
        "temp": np.sin(x / 15) + 0.1 * rng.standard_normal(400),
        "rain": np.cos(y / 25) + 0.1 * rng.standard_normal(400),
        "soil": np.sin((x + y) / 20) + 0.1 * rng.standard_normal(400),
        "slope": rng.standard_normal(400) + x / 50,
    }
    return fit_ranges(x, y, covs, n_lags=10)


def test_variogram_figure(range_estimate):
    before = plt.get_fignums()
    fig = plot_variogram(range_estimate, chosen_block_km=30.0)
    assert isinstance(fig, Figure)
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == 4  # one panel per covariate
    for ax in visible:
        # empirical points, spherical fit, exponential fit, block-size line
        assert len(ax.get_lines()) == 4
        assert ax.get_lines()[-1].get_xdata()[0] == 30.0
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    assert buf.getvalue()[:4] == b"\x89PNG"
    after = plt.get_fignums()
    assert before == after  # no figure registered with pyplot


def test_distance_ecdf_figure():
    rng = np.random.default_rng(1)
    pts = Points.lonlat(rng.uniform(0, 5, 300), rng.uniform(40, 45, 300))
    fold = rng.integers(0, 4, 300)
    cal = [fold != i for i in range(4)]
    ev = [fold == i for i in range(4)]
    pred = Points.lonlat(rng.uniform(0, 5, 200), rng.uniform(40, 45, 200))
    dd = distance_diagnostics(pts, cal, ev, range_km=20.0, prediction_points=pred)
    fig = plot_distance_ecdf(dd)
    ax = fig.axes[0]
    # 4 folds + prediction->record + record->record + range line
    assert len(ax.get_lines()) == 7
    colours = {line.get_color().upper() for line in ax.get_lines()[:4]}
    assert colours <= {c.upper() for c in OKABE_ITO}  # colour-blind-safe palette
    fig.savefig(io.BytesIO(), format="svg")

    dd2 = distance_diagnostics(pts, cal, ev)
    assert len(plot_distance_ecdf(dd2).axes[0].get_lines()) == 5  # 4 folds + record->record


def test_wrong_object_raises():
    with pytest.raises(InputError):
        plot_variogram({"not": "an estimate"})
    with pytest.raises(InputError):
        plot_distance_ecdf(None)
