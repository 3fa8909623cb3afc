"""Figures the appendix draws from recorded results: ROC small multiples, the variogram.

They are redrawn from the numbers in the run's JSON files (the curves of
evaluation.json, the semivariograms of range.json), not from the model, so the
appendix can be rebuilt from the run folder alone.
"""

from __future__ import annotations

import math

import numpy as np

from splitter.report.style import GREY, colour, new_figure

#: Above this many folds the curves share one panel instead of one panel each.
MAX_PANELS = 30


def _truthy(v) -> bool:
    return str(v).strip().lower() in ("true", "1", "yes")


def plot_roc_panels(curves: dict, rows: list, omission: float, title: str = ""):
    """Per-fold exact area-based ROC curves as small multiples.

    Parameters
    ----------
    curves : dict
        Fold label -> {"x": [...], "y": [...]} as stored in evaluation.json.
    rows : list of dict
        The evaluation's fold rows (fold, significant, auc, auc_ratio).
    omission : float
        The omission tolerance E; the cut-off line is drawn at 1 - E.
    title : str

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> fig = plot_roc_panels({"1": {"x": [0, 0.2, 1], "y": [0, 0.9, 1]}},
    ...                       [{"fold": "1", "significant": True, "auc": 0.8, "auc_ratio": 1.3}], 0.05)
    >>> len(fig.axes)
    1
    """
    labels = [str(r.get("fold")) for r in rows if str(r.get("fold")) in curves]
    by_label = {str(r.get("fold")): r for r in rows}
    cut = 1.0 - float(omission)
    k = len(labels)
    if k == 0:
        fig = new_figure(4.0, 2.0)
        ax = fig.add_subplot()
        ax.text(0.5, 0.5, "no ROC curves recorded", ha="center", va="center")
        ax.set_axis_off()
        return fig
    if k > MAX_PANELS:
        fig = new_figure(5.0, 4.4)
        ax = fig.add_subplot()
        ax.plot([0, 1], [0, 1], color=GREY, lw=1, ls="--", label="null (random)")
        for lab in labels:
            sig = _truthy(by_label[lab].get("significant"))
            c = curves[lab]
            ax.plot(c["x"], c["y"], color=colour(0) if sig else colour(5), lw=0.6, alpha=0.5)
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
    axes = np.atleast_2d(fig.subplots(nrow, ncol, sharex=True, sharey=True, squeeze=False))
    for n, lab in enumerate(labels):
        ax = axes[n // ncol][n % ncol]
        row = by_label[lab]
        sig = _truthy(row.get("significant"))
        x = np.asarray(curves[lab]["x"], float)
        y = np.asarray(curves[lab]["y"], float)
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
            ax.text(0.97, 0.05, f"AUC {float(row.get('auc')):.3f}\nAUC ratio (observed) {float(row.get('auc_ratio')):.3f}",
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
    if not all(_truthy(by_label[lab].get("significant")) for lab in labels):
        handles.append(Line2D([], [], color=GREY, lw=1.4, label="model, fold not significant"))
    handles += [Line2D([], [], color=GREY, lw=0.9, ls="--", label="null (random)"),
                Line2D([], [], color=colour(5), lw=0.9, ls=":", label=f"1 - E = {cut:.2f}")]
    if title:
        fig.suptitle(title, fontsize=9.5)
    fig.legend(handles=handles, loc="outside lower center", ncol=4, frameon=False, fontsize=7.5)
    return fig


def range_estimate_from_dict(doc: dict):
    """Rebuild a RangeEstimate from its ``to_dict()`` form (range.json)."""
    from splitter.dependence.variogram import RangeEstimate, Semivariogram, VariogramFit

    def arr(v):
        return np.array([np.nan if a is None else a for a in v], float)

    svs = {
        name: Semivariogram(lags_km=arr(s["lags_km"]), gamma=arr(s["gamma"]),
                            pair_counts=np.asarray(s["pair_counts"], np.int64),
                            bin_edges_km=arr(s["bin_edges_km"]), n_points=int(s["n_points"]))
        for name, s in doc["semivariograms"].items()
    }
    # JSON keys come back sorted; the fits keep the covariates' own order.
    order = list(dict.fromkeys(f["covariate"] for f in doc["fits"] if f["covariate"] in svs))
    svs = {name: svs[name] for name in order + [n for n in svs if n not in order]}
    fields = VariogramFit.__dataclass_fields__
    fits, best = [], {}
    for f in doc["fits"]:
        fit = VariogramFit(**{k: (np.nan if f.get(k) is None else f.get(k)) for k in fields})
        fits.append(fit)
        if f.get("chosen"):
            best[fit.covariate] = fit
    for name in svs:
        if name not in best:
            cands = [f for f in fits if f.covariate == name]
            best[name] = min(cands, key=lambda f: f.weighted_sse)
    return RangeEstimate(semivariograms=svs, fits=tuple(fits), best=best,
                         suggested_block_km=float(doc["suggested_block_km"]),
                         summary_rule=doc.get("summary_rule", ""))
