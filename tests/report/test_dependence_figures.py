"""Tests for splitter.report.dependence_figures."""

import io
import xml.etree.ElementTree as ET

import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.figure import Figure

from splitter.dependence.distance import distance_diagnostics
from splitter.dependence.variogram import fit_ranges
from splitter.report.dependence_figures import OKABE_ITO, plot_distance_ecdf, plot_variogram
from splitter.errors import InputError
from splitter.geo import Points
from tests.images import drawn_share, pixels


def _png(fig) -> np.ndarray:
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return pixels(buf.getvalue())


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
    img = _png(fig)
    w, h = fig.get_size_inches() * fig.dpi
    assert img.shape[:2] == (round(h), round(w))  # reference: figure size x dpi (matplotlib savefig)
    assert drawn_share(img) > 0.02  # four panels of points and curves, not a blank page
    # Distinct inputs give distinct pixels: the block-size line moves.
    other = _png(plot_variogram(range_estimate, chosen_block_km=60.0))
    assert other.shape == img.shape and np.any(other != img)
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
    svg = io.BytesIO()
    fig.savefig(svg, format="svg")
    root = ET.fromstring(svg.getvalue())  # reference: xml.etree parses a well-formed SVG document
    ns = "{http://www.w3.org/2000/svg}"
    assert root.tag == f"{ns}svg" and len(root.findall(f".//{ns}path")) >= 7  # at least one path per line

    dd2 = distance_diagnostics(pts, cal, ev)
    fig2 = plot_distance_ecdf(dd2)
    assert len(fig2.axes[0].get_lines()) == 5  # 4 folds + record->record
    a, b = _png(fig), _png(fig2)
    assert drawn_share(a) > 0.02
    assert a.shape == b.shape and np.any(a != b)  # distinct inputs, distinct pixels


def test_wrong_object_raises():
    with pytest.raises(InputError):
        plot_variogram({"not": "an estimate"})
    with pytest.raises(InputError):
        plot_distance_ecdf(None)


def test_a_figure_looks_the_same_whatever_was_drawn_before_and_leaves_the_callers_settings(range_estimate, tmp_path):
    """The house style is applied around drawing and saving (splitter.report.style), so a
    figure's bytes do not depend on the figures drawn before it in the process, and a user's
    own matplotlib settings (a notebook's) are neither used nor changed."""
    import matplotlib

    from splitter.report.evaluation_figures import plot_ratio_intervals
    from splitter.report.style import save

    mine = {"svg.fonttype": "path", "font.size": 14.0}
    with matplotlib.rc_context(mine):
        first = save(plot_variogram(range_estimate), tmp_path / "first")
        save(plot_ratio_intervals({}), tmp_path / "other")  # another of our figures in between
        again = save(plot_variogram(range_estimate), tmp_path / "again")
        assert {k: matplotlib.rcParams[k] for k in mine} == mine  # the caller's settings, untouched
    for a, b in zip(first, again):
        assert a.read_bytes() == b.read_bytes(), a.name
    svg = first[1].read_text(encoding="utf-8")
    assert "<text" in svg  # house style: SVG text stays text (svg.fonttype "none"), not the caller's paths
