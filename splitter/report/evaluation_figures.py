"""Figures of the per-fold evaluation: area-based ROC curves and AUC-ratio intervals.

The ROC curves are drawn from recorded results (the folds' exact curves as
evaluation.json keeps them), not from the model, so the appendix can redraw them from the
run folder alone.
"""

from __future__ import annotations

import math

import numpy as np

from splitter.report.style import GREY, colour, new_figure, styled

#: Above this many folds the curves share one panel instead of one panel each.
MAX_PANELS = 30
_UNIT_TICKS = (0.0, 0.2, 0.4, 0.6, 0.8, 1.0)


@styled
def plot_roc_panels(folds, omission: float, title: str = ""):
    """Per-fold exact area-based ROC curves as small multiples.

    Parameters
    ----------
    folds : sequence of FoldEvaluation
        The evaluation's folds (curve, significance, AUC and AUC ratio of each),
        as :meth:`~splitter.evaluate.results.EvaluationResult.from_dict` reads
        them back from evaluation.json.
    omission : float
        The omission tolerance E; the cut-off line is drawn at 1 - E.
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    cut = 1.0 - float(omission)
    k = len(folds)
    if k > MAX_PANELS:
        fig = new_figure(5.0, 4.4)
        ax = fig.add_subplot()
        ax.plot([0, 1], [0, 1], color=GREY, lw=1, ls="--", label="null (random)")
        for f in folds:
            ax.plot(f.curve_x, f.curve_y, color=colour(0) if f.significant else colour(5), lw=0.6, alpha=0.5)
        ax.axhline(cut, color=colour(5), lw=1, ls=":", label=f"1 - E = {cut:.2f}")
        ax.plot([], [], color=colour(0), label="significant fold")
        ax.plot([], [], color=colour(5), label="not significant: do not interpret")
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1.02)
        ax.set_xlabel("share of testing area predicted present")
        ax.set_ylabel("share of evaluation presences predicted present")
        ax.legend(loc="lower right", frameon=False)
        ax.set_title(title or f"{k} folds")
        return fig
    ncol = min(k, 5)
    nrow = math.ceil(k / ncol)
    fig = new_figure(2.1 * ncol + 0.6, 2.25 * nrow + 0.9)
    # Every panel has the same limits and ticks, set on each: shared axes would draw the same,
    # but make every axis measure its siblings' tick labels on each draw (a third of the cost).
    axes = fig.subplots(nrow, ncol, squeeze=False)
    for n, f in enumerate(folds):
        ax = axes[n // ncol][n % ncol]
        ax.set_xticks(_UNIT_TICKS)
        ax.set_yticks(_UNIT_TICKS)
        ax.tick_params(labelbottom=False, labelleft=n % ncol == 0)
        sig, lab, x, y = f.significant, f.fold, f.curve_x, f.curve_y
        ax.plot([0, 1], [0, 1], color=GREY, lw=0.9, ls="--")
        keep = y >= cut
        if keep.any():
            ax.fill_between(x, np.where(keep, y, np.nan), np.where(keep, x, np.nan),
                            color=colour(0) if sig else GREY, alpha=0.18, lw=0)
        ax.plot(x, y, color=colour(0) if sig else GREY, lw=1.4)
        ax.axhline(cut, color=colour(5), lw=0.9, ls=":")
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1.02)
        if sig:
            ax.set_title(f"fold {lab}: significant", fontsize=8.5)
            ax.text(0.97, 0.05, f"AUC {f.partial_roc.auc:.3f}\nAUC ratio (observed) {f.partial_roc.auc_ratio:.3f}",
                    ha="right", va="bottom", fontsize=7, transform=ax.transAxes)
        else:
            ax.set_title(f"fold {lab}: not significant", fontsize=8.5, color=colour(5))
            ax.text(0.97, 0.05, "do not interpret", ha="right", va="bottom", fontsize=7.5, color=colour(5),
                    transform=ax.transAxes)
        if n + ncol >= k:  # no panel below: this one carries the x axis
            ax.set_xlabel("area predicted present", fontsize=8)
            ax.tick_params(labelbottom=True)
        if n % ncol == 0:
            ax.set_ylabel("presences predicted present", fontsize=8)
    for n in range(k, nrow * ncol):
        axes[n // ncol][n % ncol].set_visible(False)
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color=colour(0), lw=1.4, label="model")]
    if not all(f.significant for f in folds):
        handles.append(Line2D([], [], color=GREY, lw=1.4, label="model, fold not significant"))
    handles += [Line2D([], [], color=GREY, lw=0.9, ls="--", label="null (random)"),
                Line2D([], [], color=colour(5), lw=0.9, ls=":", label=f"1 - E = {cut:.2f}")]
    if title:
        fig.suptitle(title, fontsize=9.5)
    fig.legend(handles=handles, loc="outside lower center", ncol=4, frameon=False, fontsize=7.5)
    return fig


@styled
def plot_ratio_intervals(results: dict, alpha: float = 0.05):
    """Per-fold AUC-ratio 95 % intervals against the null of 1, one series per split.

    ``results`` maps a split name to its EvaluationResult.
    """
    fig = new_figure(6.4, 3.9)
    ax = fig.add_subplot()
    n_series = len(results)
    width = 0.7 / max(n_series, 1)
    labels = []
    for s, (name, result) in enumerate(results.items()):
        rocs = [f.partial_roc for f in result.folds]
        pos = np.arange(len(rocs)) + (s - (n_series - 1) / 2) * width
        mean = np.array([r.auc_ratio for r in rocs], float)  # observed, on all presences
        null = np.array([r.null_median for r in rocs], float)
        lo = np.array([r.ratio_low for r in rocs], float)
        hi = np.array([r.ratio_high for r in rocs], float)
        sig = np.array([f.significant for f in result.folds], bool)
        ax.errorbar(pos, mean, yerr=[np.maximum(mean - lo, 0), np.maximum(hi - mean, 0)], fmt="none",
                    ecolor=colour(s), lw=1.4, capsize=3)
        ax.scatter(pos, null, color=GREY, marker="_", s=80, zorder=3,
                   label="median ratio of random presences" if s == 0 else None)
        ax.scatter(pos[sig], mean[sig], color=colour(s), marker="o", s=28, zorder=3,
                   label=f"{name}: significant (p < {alpha:g})")
        ax.scatter(pos[~sig], mean[~sig], facecolor="white", edgecolor=colour(s), marker="o", s=28, zorder=3,
                   label=f"{name}: not significant")
        labels = [f.fold for f in result.folds] if len(rocs) > len(labels) else labels
    ax.axhline(1.0, color=GREY, ls="--", lw=1, label="null ratio = 1")
    ax.set_xticks(np.arange(len(labels)))
    ax.set_xticklabels(labels)
    ax.set_xlabel("fold")
    ax.set_ylabel("partial AUC ratio (observed;\nbars: bootstrap 95% interval)")
    lo, hi = ax.get_ylim()
    ax.set_ylim(min(lo, 0.95), hi)  # keep the null line in view
    # Legend under the axes, so it never sits on the null line or an interval.
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=3, frameon=False, fontsize=7)
    return fig
