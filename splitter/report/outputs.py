"""A run's result files: the tables (written by :mod:`splitter.io.results`) and their figures.

The command line, the batch runner and the demo write every audit, range and
evaluation folder through these three functions, so the folders look the same
whoever wrote them.
"""

from __future__ import annotations

from pathlib import Path

from splitter.io.results import write_audit_tables, write_evaluation_tables, write_range_tables


def write_evaluation(result, out_dir, extra: dict | None = None) -> dict:
    """evaluation.csv, scores.csv, evaluation.json and the folds' ROC curves in one figure
    (``roc_curves``, PNG + SVG: one panel per fold, all curves in one panel above 30 folds)."""
    from splitter.report.evaluation_figures import plot_roc_panels
    from splitter.report.style import save

    out_dir = Path(out_dir)
    paths = write_evaluation_tables(result, out_dir, extra=extra)
    paths["figure"] = save(plot_roc_panels(result.folds, result.parameters["omission"]), out_dir / "roc_curves")[0]
    return paths


def write_range(estimate, out_dir, extra: dict | None = None) -> dict:
    """range.csv, range.json (with suggested_block_km) and the variogram figure, the
    suggested block size marked (the appendix reuses the figure when it marks the same)."""
    from splitter.report.dependence_figures import plot_variogram
    from splitter.report.style import save

    out_dir = Path(out_dir)
    paths = write_range_tables(estimate, out_dir, extra=extra)
    paths["figure"] = save(plot_variogram(estimate), out_dir / "variogram")[0]
    return paths


def write_audit(result, context: dict, out_dir) -> dict:
    """audit.csv, audit.json, the nearest-neighbour distance ECDF figure and, when the
    audit estimated the range itself, its range/ folder."""
    from splitter.report.dependence_figures import plot_distance_ecdf
    from splitter.report.style import save

    out_dir = Path(out_dir)
    paths = write_audit_tables(result, context, out_dir)
    fig = plot_distance_ecdf(result.distance, range_km=context.get("range_km"))
    paths["figure"] = save(fig, out_dir / "distance_ecdf")[0]
    if context.get("range_estimate") is not None:
        paths["range"] = write_range(context["range_estimate"], out_dir / "range")["json"]
    return paths
