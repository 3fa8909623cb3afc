"""Figures for the autocorrelation range and the distance diagnostics.

Both functions return a ``matplotlib.figure.Figure`` in the house style (no
pyplot, so no global figure state and no display needed); the caller saves it
with :func:`splitter.report.style.save`. Colours are the Okabe–Ito palette, which stays
distinguishable for the common colour-vision deficiencies; folds beyond the
palette's length also change line style.
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib.figure import Figure

from splitter.dependence.distance import DistanceDiagnostics
from splitter.dependence.variogram import RangeEstimate
from splitter.errors import InputError
from splitter.report.style import PALETTE, new_figure, styled

#: Okabe–Ito colours (black first, then the seven hues).
OKABE_ITO = ("#000000", *PALETTE[:7])
_HUES = tuple(PALETTE[:7])
_STYLES = ("-", "--", ":", "-.")
_FONT = 9  # points; readable at a journal's column width


@styled
def plot_variogram(range_estimate: RangeEstimate, chosen_block_km: float | None = None) -> Figure:
    """Empirical semivariances and both fitted models, one panel per covariate.

    Parameters
    ----------
    range_estimate : RangeEstimate
    chosen_block_km : float, optional
        Block size to mark with a vertical line; default the suggested block size.

    Returns
    -------
    matplotlib.figure.Figure
        Each panel holds four lines: empirical points, spherical fit,
        exponential fit, block size.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x, y = rng.uniform(0, 100, (2, 300))
    >>> from splitter.dependence.variogram import fit_ranges
    >>> fig = plot_variogram(fit_ranges(x, y, {"a": np.sin(x / 10)}))
    >>> len(fig.axes)
    1
    """
    if not isinstance(range_estimate, RangeEstimate):
        raise InputError("plot_variogram needs a RangeEstimate (from estimate_range).")
    block = range_estimate.suggested_block_km if chosen_block_km is None else float(chosen_block_km)
    names = range_estimate.covariates
    ncol = min(3, len(names))
    nrow = math.ceil(len(names) / ncol)
    fig = new_figure(3.3 * ncol, 3.4 * nrow)
    axes = fig.subplots(nrow, ncol, squeeze=False)
    fits = {(f.covariate, f.model): f for f in range_estimate.fits}
    for j, name in enumerate(names):
        ax = axes[j // ncol][j % ncol]
        sv = range_estimate.semivariograms[name]
        ok = sv.pair_counts > 0
        ax.plot(sv.lags_km[ok], sv.gamma[ok], "o", color=OKABE_ITO[0], ms=3.5, label="empirical")
        # Start just right of 0: with a nugget the model jumps from 0 at h = 0 exactly.
        h = np.linspace(sv.max_lag_km / 400, sv.max_lag_km, 200)
        chosen = range_estimate.best[name]
        for model, colour, style in (("spherical", _HUES[0], "-"), ("exponential", _HUES[1], "--")):
            f = fits[(name, model)]
            mark = " (chosen)" if f is chosen else ""
            what = "range not reached" if f.range_at_bound else f"range {f.range_km:.3g} km"
            ax.plot(h, f.predict(h), style, color=colour, lw=1.4, label=f"{model}, {what}{mark}")
        ax.axvline(block, color=_HUES[5], lw=1.0, ls=":", label=f"block {block:.3g} km")
        ax.set_title(name, fontsize=_FONT + 1)
        ax.set_xlabel("distance (km)", fontsize=_FONT)
        ax.set_ylabel("semivariance", fontsize=_FONT)
        ax.set_xlim(0, sv.max_lag_km * 1.02)
        ax.set_ylim(bottom=0)
        ax.tick_params(labelsize=_FONT - 1)
        # Legend under the panel so it never hides the semivariances.
        ax.legend(fontsize=_FONT - 2, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=1)
    for j in range(len(names), nrow * ncol):
        axes[j // ncol][j % ncol].set_visible(False)
    return fig


def _ecdf_line(ax, d: np.ndarray, **kw):
    d = np.sort(d[np.isfinite(d)])
    if d.size == 0:
        return None
    y = np.arange(1, d.size + 1) / d.size
    return ax.step(d, y, where="post", **kw)[0]


@styled
def plot_distance_ecdf(diagnostics: DistanceDiagnostics, range_km: float | None = None) -> Figure:
    """Cumulative distributions of nearest-neighbour distances.

    One curve per fold (evaluation -> nearest calibration record), one for
    prediction locations -> nearest record (when available), one for record ->
    nearest other record, and a vertical line at the autocorrelation range.
    The distance axis is logarithmic when the distances span more than two
    orders of magnitude.

    Parameters
    ----------
    diagnostics : DistanceDiagnostics
    range_km : float, optional
        Default the range stored on ``diagnostics``.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> from splitter.geo import Points
    >>> from splitter.dependence.distance import distance_diagnostics
    >>> p = Points.lonlat([0.0, 0.1, 1.0, 1.1], [0.0, 0.0, 0.0, 0.0])
    >>> fig = plot_distance_ecdf(distance_diagnostics(p, [[0, 1]], [[2, 3]]))
    >>> len(fig.axes)
    1
    """
    if not isinstance(diagnostics, DistanceDiagnostics):
        raise InputError("plot_distance_ecdf needs DistanceDiagnostics (from distance_diagnostics).")
    rng = diagnostics.range_km if range_km is None else float(range_km)
    fig = new_figure(5.0, 3.4)
    ax = fig.subplots()
    everything = []
    for i, (label, d) in enumerate(zip(diagnostics.fold_labels, diagnostics.evaluation_to_calibration_km)):
        colour = _HUES[i % len(_HUES)]
        style = _STYLES[(i // len(_HUES)) % len(_STYLES)]
        if _ecdf_line(ax, d, color=colour, ls=style, lw=1.2, label=f"fold {label}: evaluation → calibration") is not None:
            everything.append(d)
    if diagnostics.prediction_to_record_km is not None:
        d = diagnostics.prediction_to_record_km
        if _ecdf_line(ax, d, color=OKABE_ITO[0], lw=2.2, label="prediction location → record") is not None:
            everything.append(d)
    d = diagnostics.record_to_record_km
    if _ecdf_line(ax, d, color="#777777", ls="--", lw=1.6, label="record → other record") is not None:
        everything.append(d)
    if rng is not None and np.isfinite(rng):
        ax.axvline(rng, color=_HUES[5], ls=":", lw=1.2, label=f"autocorrelation range {rng:.3g} km")
    if everything:
        allv = np.concatenate(everything)
        pos = allv[np.isfinite(allv) & (allv > 0)]
        if pos.size and np.percentile(pos, 95) / max(np.percentile(pos, 5), 1e-12) > 100:
            ax.set_xscale("log", nonpositive="clip")
    ax.set_xlabel("distance to nearest record (km)", fontsize=_FONT)
    ax.set_ylabel("cumulative share", fontsize=_FONT)
    ax.set_ylim(0, 1.02)
    ax.tick_params(labelsize=_FONT - 1)
    ax.grid(alpha=0.3, lw=0.5)
    ax.legend(fontsize=_FONT - 2, frameon=False, loc="lower right")
    return fig
