"""Write result tables, JSON and figures of audit, range and evaluation runs."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from splitter.io.atomic import atomic_write
from splitter.io.foldtable import to_json


def write_csv(frame: pd.DataFrame, path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_write(path, "w") as f:
        frame.to_csv(f, index=False, lineterminator="\n")
    return path


def write_json(obj, path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_write(path, "w") as f:
        f.write(to_json(obj))
    return path


def write_evaluation(result, out_dir, extra: dict | None = None) -> dict:
    """evaluation.csv, evaluation.json and one ROC figure per fold (PNG + SVG)."""
    from splitter.report.evaluation_figures import plot_roc
    from splitter.report.style import save

    out_dir = Path(out_dir)
    paths = {"table": write_csv(result.to_frame(), out_dir / "evaluation.csv")}
    scores = [f.scores for f in result.folds if f.scores is not None]
    if scores:
        # Per record and fold: the prediction used, or why the record was left out.
        paths["scores"] = write_csv(pd.concat(scores, ignore_index=True), out_dir / "scores.csv")
    doc = result.to_dict()
    if extra:
        doc.update(extra)
    paths["json"] = write_json(doc, out_dir / "evaluation.json")
    figs = []
    for f in result.folds:
        fig = plot_roc(f, result.parameters["omission"])
        figs += save(fig, out_dir / "figures" / f"roc_fold_{f.row['fold']}")
    paths["figures"] = out_dir / "figures"
    return paths


def write_range(estimate, out_dir, extra: dict | None = None, chosen_block_km=None) -> dict:
    """range.csv, range.json (with suggested_block_km) and the variogram figure."""
    from splitter.dependence.figures import plot_variogram
    from splitter.report.style import save

    out_dir = Path(out_dir)
    paths = {"table": write_csv(estimate.to_frame(), out_dir / "range.csv")}
    doc = estimate.to_dict()
    doc["suggested_block_km"] = float(estimate.suggested_block_km)
    if extra:
        doc.update(extra)
    paths["json"] = write_json(doc, out_dir / "range.json")
    fig = plot_variogram(estimate, chosen_block_km=chosen_block_km or estimate.suggested_block_km)
    paths["figure"] = save(fig, out_dir / "variogram")[0]
    return paths


def write_audit(result, context: dict, out_dir) -> dict:
    """audit.csv, audit.json and the nearest-neighbour distance ECDF figure."""
    from splitter.dependence.figures import plot_distance_ecdf
    from splitter.report.style import save

    out_dir = Path(out_dir)
    paths = {"table": write_csv(result.to_frame(), out_dir / "audit.csv")}
    doc = result.to_dict()
    doc["context"] = {k: v for k, v in context.items() if k != "range_estimate"}
    paths["json"] = write_json(doc, out_dir / "audit.json")
    fig = plot_distance_ecdf(result.distance, range_km=context.get("range_km"))
    paths["figure"] = save(fig, out_dir / "distance_ecdf")[0]
    if context.get("range_estimate") is not None:
        paths["range"] = write_range(context["range_estimate"], out_dir / "range")["json"]
    return paths


def write_optimism(result, out_dir, extra: dict | None = None) -> dict:
    """optimism.csv (per fold and split, the means and the difference row) and optimism.json."""
    out_dir = Path(out_dir)
    paths = {"table": write_csv(result.to_frame(), out_dir / "optimism.csv")}
    doc = result.to_dict()
    if extra:
        doc.update(extra)
    paths["json"] = write_json(doc, out_dir / "optimism.json")
    return paths
