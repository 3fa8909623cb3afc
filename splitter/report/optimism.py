"""The appendix section "the same model under both splits": what a random split would have claimed.

Reads ``optimism.csv`` (and ``optimism.json`` when present) from the run folder,
as written by :func:`splitter.io.results.write_optimism` (the demo writes them),
and returns the section's blocks: a short table of each split's mean AUC, AUC
ratio and omission rate with their difference, and one sentence saying what the
difference shows. Every number is read from those files.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from splitter.errors import InputError
from splitter.report.document import Heading, Table, Text

__all__ = ["OptimismRun", "load_optimism", "optimism_section"]

MEASURES = (("auc", "AUC (full ROC)"), ("auc_ratio", "partial AUC ratio"), ("omission_rate", "omission rate"))
REQUIRED = {"split", "fold", *(m for m, _ in MEASURES)}


@dataclass(frozen=True)
class OptimismRun:
    """``optimism.csv`` of a run folder, read as text (the appendix prints the run's values)."""

    table_path: Path
    table: pd.DataFrame = field(repr=False)
    doc: dict = field(default_factory=dict, repr=False)

    @property
    def reference(self) -> str:
        return str(self.doc.get("reference") or self._splits()[0])

    @property
    def compared(self) -> str:
        return str(self.doc.get("compared") or self._splits()[1])

    def _splits(self) -> list:
        names = [s for s in dict.fromkeys(self.table["split"]) if " - " not in s]
        return names + [""] * (2 - len(names))

    def row(self, split: str, fold: str = "mean") -> pd.Series | None:
        hit = self.table[(self.table["split"] == split) & (self.table["fold"] == fold)]
        return hit.iloc[0] if len(hit) else None

    @property
    def difference(self) -> pd.Series | None:
        return self.row(f"{self.compared} - {self.reference}")

    def n_folds(self, split: str) -> int:
        return int(((self.table["split"] == split) & (self.table["fold"] != "mean")).sum())


def load_optimism(run_folder) -> OptimismRun | None:
    """Read ``optimism.csv`` (+ ``optimism.json``) of a run folder; None when there is none."""
    folder = Path(run_folder)
    path = folder / "optimism.csv"
    if not path.exists():
        return None
    table = pd.read_csv(path, dtype=str, keep_default_na=False)
    missing = REQUIRED - set(table.columns)
    if missing:
        raise InputError(f"{path}: missing column(s) {', '.join(sorted(missing))}; re-run the step that wrote it.")
    doc = {}
    if (folder / "optimism.json").exists():
        try:
            doc = json.loads((folder / "optimism.json").read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, json.JSONDecodeError):
            raise InputError(f"{folder / 'optimism.json'}: cannot be read as JSON; re-run the step that wrote it.") from None
    return OptimismRun(path, table, doc)


def _num(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return math.nan


def _fmt(v, signed: bool = False) -> str:
    x = _num(v)
    if not math.isfinite(x):
        return ""
    return f"{x:+.3f}" if signed else f"{x:.3f}"


def _compare(diff: float, ref: float, cmp: float, reference: str) -> str:
    """``0.121 higher than split `blocks` (0.829 against 0.708)``, or ``the same as ...``."""
    if not (math.isfinite(diff) and math.isfinite(ref) and math.isfinite(cmp)):
        return "not comparable (a split has no value)"
    if round(diff, 3) == 0:
        return f"the same as split `{reference}` ({cmp:.3f})"
    return f"{abs(diff):.3f} {'higher' if diff > 0 else 'lower'} than split `{reference}` ({cmp:.3f} against {ref:.3f})"


def optimism_section(opt: OptimismRun | None, table_writer) -> list:
    """The section's blocks.

    Parameters
    ----------
    opt : OptimismRun or None
        From :func:`load_optimism`; None gives a short note saying how to make one.
    table_writer : callable(DataFrame, name) -> str
        Writes a table under the appendix's ``tables/`` and returns its relative path.
    """
    out = [Heading(1, "The same model under both splits", "optimism")]
    if opt is None:
        out.append(Text(
            "No `optimism.csv` in the run folder: the same flexible model was not fitted under these splits. "
            "`splitter.evaluate.optimism.split_optimism` makes one from two splits of the same records and "
            "`splitter.io.results.write_optimism` writes it."))
        return out
    ref, cmp = opt.reference, opt.compared
    rows, diffs = [], {}
    r_mean, c_mean, d = opt.row(ref), opt.row(cmp), opt.difference
    if r_mean is None or c_mean is None or d is None:
        raise InputError(f"{opt.table_path}: needs the mean rows of {ref!r} and {cmp!r} and their difference row; "
                         "re-run the step that wrote it.")
    for m, label in MEASURES:
        diffs[m] = _num(d[m])
        rows.append((label, _fmt(r_mean[m]), _fmt(c_mean[m]), _fmt(d[m], signed=True)))
    src = table_writer(opt.table, "optimism")
    k_ref, k_cmp = opt.n_folds(ref), opt.n_folds(cmp)
    model = f"`{opt.doc['model']}`" if opt.doc.get("model") else "a flexible model using the covariates and the coordinates"
    rule = opt.doc.get("threshold_rule")
    omission = opt.doc.get("omission")
    other = (opt.table["other_kind"].iloc[0] if "other_kind" in opt.table.columns and len(opt.table) else "") or \
        "background/absence"
    method = (f"To show what each split would claim for a model that can learn place as well as environment, one "
              f"model, {model}, was fitted on each fold's calibration records under both splits (`{ref}`, "
              f"{k_ref} folds; `{cmp}`, {k_cmp} folds) and scored on that fold's evaluation records: the full ROC AUC "
              f"(evaluation presences against evaluation {other} records), the partial AUC ratio "
              + (f"(E = {_num(omission):g}, " if omission is not None else "(")
              + f"the evaluation {other} records taken as the testing region) and the omission rate at the "
              + (f"`{rule}` threshold of calibration presences' scores" if rule else "calibration-presence threshold")
              + ". The threshold comes from the model's scores at its own calibration presences, which a flexible "
              "model fits closely, so it is high and omits many evaluation presences under both splits alike. "
              "These figures describe that model, not the model evaluated above, and carry no significance test.")
    out.append(Text(method, "methods"))
    out.append(Table(
        caption=f"Means over folds of the same model under split `{ref}` and split `{cmp}`, and the difference "
                f"`{cmp}` minus `{ref}`.",
        columns=("measure", f"`{ref}`", f"`{cmp}`", f"`{cmp}` - `{ref}`"),
        rows=tuple(rows), css_class="optimism", element_id="optimism", source=src))
    auc = diffs["auc"]
    parts = {m: _compare(diffs[m], _num(r_mean[m]), _num(c_mean[m]), ref) for m, _ in MEASURES}
    said = f"For the same model, split `{cmp}` reports an AUC {parts['auc']}"
    if math.isfinite(auc) and round(auc, 3) > 0:
        said += (": the share of apparent skill that comes from evaluation records sitting next to calibration "
                 f"records, which split `{ref}` keeps apart.")
    else:
        said += f": split `{cmp}` shows no extra apparent skill for this model."
    said += f" Its AUC ratio is {parts['auc_ratio']}; its omission rate is {parts['omission_rate']}."
    out.append(Text(said))
    return out
