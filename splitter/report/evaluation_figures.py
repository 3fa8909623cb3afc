"""Figures of the per-fold evaluation: area-based ROC curves and AUC-ratio intervals."""

from __future__ import annotations

import numpy as np

from splitter.report.style import GREY, colour, new_figure


def plot_roc(fold_eval, omission: float, title: str | None = None):
    """The exact area-based ROC curve of one fold, with the null line and the E cut-off."""
    fig = new_figure(4.0, 3.8)
    ax = fig.add_subplot()
    roc = fold_eval.partial_roc
    ax.plot([0, 1], [0, 1], color=GREY, lw=1, ls="--", label="null (random)")
    ax.plot(fold_eval.curve_x, fold_eval.curve_y, color=colour(0), lw=1.6, label=f"model (AUC {roc.auc:.3f})")
    cut = 1.0 - omission
    ax.axhline(cut, color=colour(5), lw=1, ls=":", label=f"1 - E = {cut:.2f}")
    x, y = np.asarray(fold_eval.curve_x), np.asarray(fold_eval.curve_y)
    keep = y >= cut
    if keep.any():
        ax.fill_between(x, np.where(keep, y, np.nan), np.where(keep, x, np.nan), color=colour(0), alpha=0.15, lw=0,
                        label=f"partial area (ratio {roc.auc_ratio:.3f})")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1.02)
    ax.set_xlabel("share of testing area predicted present")
    ax.set_ylabel("share of evaluation presences predicted present")
    sig = "significant" if fold_eval.significant else "not significant: do not interpret"
    ax.set_title(title or f"fold {fold_eval.fold}: {sig}")
    ax.legend(loc="lower right", frameon=False)
    return fig


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
