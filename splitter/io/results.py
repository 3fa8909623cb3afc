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
        frame.to_csv(f, index=False, lineterminator="\n", float_format="%.10g")
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
