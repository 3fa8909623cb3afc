"""Write the result tables and JSON of audit, range and evaluation runs.

Tables only: the figures that go beside them are drawn by
:mod:`splitter.report.outputs`, which calls these writers.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from splitter.io.atomic import atomic_write
from splitter.io.foldtable import to_json
from splitter.io.journal import make_folder, remove


def write_csv(frame: pd.DataFrame, path) -> Path:
    path = Path(path)
    make_folder(path.parent)
    with atomic_write(path, "w") as f:
        frame.to_csv(f, index=False, lineterminator="\n")
    return path


def write_json(obj, path) -> Path:
    path = Path(path)
    make_folder(path.parent)
    with atomic_write(path, "w") as f:
        f.write(to_json(obj))
    return path


def write_evaluation_tables(result, out_dir, extra: dict | None = None) -> dict:
    """evaluation.csv, scores.csv (when there are per-record scores) and evaluation.json."""
    out_dir = Path(out_dir)
    paths = {"table": write_csv(result.to_frame(), out_dir / "evaluation.csv")}
    scores = [f.scores for f in result.folds if f.scores is not None]
    if scores:
        # Per record and fold: the prediction used, or why the record was left out.
        paths["scores"] = write_csv(pd.concat(scores, ignore_index=True), out_dir / "scores.csv")
    else:
        remove(out_dir / "scores.csv")  # an earlier run's, which would pass for this one's
    doc = result.to_dict()
    if extra:
        doc.update(extra)
    paths["json"] = write_json(doc, out_dir / "evaluation.json")
    return paths


def write_range_tables(estimate, out_dir, extra: dict | None = None) -> dict:
    """range.csv and range.json (with suggested_block_km)."""
    out_dir = Path(out_dir)
    paths = {"table": write_csv(estimate.to_frame(), out_dir / "range.csv")}
    doc = estimate.to_dict()
    doc["suggested_block_km"] = float(estimate.suggested_block_km)
    if extra:
        doc.update(extra)
    paths["json"] = write_json(doc, out_dir / "range.json")
    return paths


def audit_frame(result, context: dict) -> pd.DataFrame:
    """The rows of audit.csv: the result's table and, when the audit dated the records, the time gaps."""
    frame = result.to_frame()
    if context.get("time_gaps"):
        # Time apart (years): a description beside the rules, per fold in the same order.
        gaps = context["time_gaps"]
        for column, key in (("time_gap_median_years", "median_years"), ("time_gap_p10_years", "p10_years"),
                            ("time_later_share", "later_share")):
            frame[column] = np.array([g[key] for g in gaps], dtype=float)  # null read back from JSON -> NaN
    return frame


def write_audit_tables(result, context: dict, out_dir) -> dict:
    """audit.csv and audit.json (the range estimate, if any, is written by its own writer)."""
    out_dir = Path(out_dir)
    paths = {"table": write_csv(audit_frame(result, context), out_dir / "audit.csv")}
    doc = result.to_dict()
    doc["context"] = {k: v for k, v in context.items() if k not in ("range_estimate", "absences")}
    if context.get("absences") is not None:
        # Absences are evaluation data too: the same measures, absences to absences.
        paths["absences"] = write_csv(context["absences"].to_frame(), out_dir / "audit_absences.csv")
        doc["absences"] = context["absences"].to_dict()
    else:
        remove(out_dir / "audit_absences.csv")  # an earlier run's, which would pass for this one's
    paths["json"] = write_json(doc, out_dir / "audit.json")
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
