"""A split's evaluation as results: one FoldEvaluation per fold, the ``all`` row, the whole.

Made by :func:`splitter.workflow.evaluation.evaluate`; written to evaluation.csv
(``to_frame``) and evaluation.json (``to_dict``), and read back from that JSON by
``from_dict`` (the appendix's loader), which returns the same objects: their
``to_dict`` and ``to_frame`` equal the original's. Here, in the core, because the
report reads them and never imports the workflow.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from splitter.evaluate.binomial import BinomialResult
from splitter.evaluate.combine import JackknifeResult
from splitter.evaluate.measures import Measures
from splitter.evaluate.partial_roc import PartialROCResult, ROCCurve
from splitter.evaluate.thresholds import Threshold

COLUMNS = [
    "fold", "significant", "interpretation", "p_adjusted", "p_fold", "n_evaluation", "threshold_rule", "threshold",
    "area_predicted", "successes", "binomial_p", "auc", "auc_ratio", "auc_ratio_null_median", "partial_roc_p",
    "auc_ratio_mean", "auc_ratio_low", "auc_ratio_high", "partial_roc_p_bootstrap", "partial_roc_note",
    "omission", "replicates",
    "omission_rate", "sensitivity", "specificity", "commission_rate",
    "correct_classification_rate", "tss", "kappa", "specificity_name", "commission_name", "boyce", "n_other",
    "other_kind",
    "area_source", "dropped_no_prediction", "warnings",
]
#: What the ``all`` row averages over the interpretable folds (with an SD column each).
MEASURES = ["area_predicted", "auc", "auc_ratio", "auc_ratio_mean", "omission_rate", "sensitivity",
            "specificity", "commission_rate", "correct_classification_rate", "tss", "kappa", "boyce"]
# One note for every fold whose bootstrap samples cannot omit a presence.
CANNOT_OMIT = "cannot omit any presence (round(0.5 n) x E < 1): bootstrap ratios exceed 1 for any model"


@dataclass(frozen=True)
class FoldEvaluation:
    """Everything measured on one fold: significance first, then performance.

    Attributes
    ----------
    fold : str
        Fold label.
    n_evaluation : int
        Evaluation presences with a prediction.
    threshold : Threshold
        From calibration presences (never evaluation data).
    area_predicted : float
        Share of the testing region (or of evaluation background/absences)
        predicted present: the binomial test's p.
    binomial : BinomialResult
    partial_roc : PartialROCResult
    p_fold : float
        The larger of the binomial and partial-ROC p-values (both must reject).
    p_adjusted : float
        ``p_fold`` adjusted across the split's folds (Holm), or equal to it with
        ``adjust="none"``.
    significant : bool
        ``p_adjusted < alpha``.
    measures : Measures or None
        Confusion-matrix measures (None without evaluation background/absences).
    boyce : float
        Continuous Boyce index.
    n_other, other_kind, area_source, dropped_no_prediction, warnings
        What the tests compared presences with, and what was left out.
    scores : pandas.DataFrame
        Every record the fold's tests looked at, with its prediction.
    """

    fold: str
    n_evaluation: int
    threshold: Threshold
    area_predicted: float
    binomial: BinomialResult
    partial_roc: PartialROCResult = field(repr=False)
    p_fold: float
    p_adjusted: float
    significant: bool
    measures: Measures | None
    boyce: float
    n_other: int
    other_kind: str
    area_source: str
    dropped_no_prediction: int
    warnings: tuple = ()
    scores: pd.DataFrame | None = field(default=None, repr=False)
    # Area of the testing region in km² (raster cells only; NaN otherwise): the extent
    # check reads it here instead of passing over the raster again. Not in the row.
    region_km2: float = field(default=float("nan"), repr=False)

    @property
    def interpretation(self) -> str:
        return "interpret" if self.significant else "do not interpret"

    @property
    def curve_x(self) -> np.ndarray:
        return self.partial_roc.curve.x

    @property
    def curve_y(self) -> np.ndarray:
        return self.partial_roc.curve.y

    @property
    def ratios(self) -> np.ndarray:
        return self.partial_roc.ratios

    def to_row(self) -> dict:
        """One row of ``evaluation.csv``."""
        proc = self.partial_roc
        meas = self.measures.to_dict() if self.measures is not None else {}
        return {
            "fold": self.fold,
            "significant": self.significant,
            "interpretation": self.interpretation,
            "p_adjusted": self.p_adjusted,
            "p_fold": self.p_fold,
            "n_evaluation": self.n_evaluation,
            "threshold_rule": self.threshold.rule,
            "threshold": self.threshold.value,
            "area_predicted": self.area_predicted,
            "successes": self.binomial.statistic,
            "binomial_p": self.binomial.pvalue,
            "auc": proc.auc,
            "auc_ratio": proc.auc_ratio,
            "auc_ratio_null_median": proc.null_median,
            "partial_roc_p": proc.pvalue,
            "auc_ratio_mean": proc.bootstrap_mean,
            "auc_ratio_low": proc.ratio_low,
            "auc_ratio_high": proc.ratio_high,
            "partial_roc_p_bootstrap": proc.pvalue_bootstrap,
            "partial_roc_note": "" if proc.can_omit else CANNOT_OMIT,
            "omission": proc.omission,
            "replicates": proc.replicates,
            **{k: meas.get(k, np.nan) for k in ("omission_rate", "sensitivity", "specificity", "commission_rate",
                                                 "correct_classification_rate", "tss", "kappa")},
            "specificity_name": ("" if self.measures is None else
                                 "pseudo-specificity" if self.other_kind == "background" else "specificity"),
            "commission_name": ("" if self.measures is None else
                                "pseudo-commission rate" if self.other_kind == "background" else "commission rate"),
            "boyce": self.boyce,
            "n_other": self.n_other,
            "other_kind": self.other_kind,
            "area_source": self.area_source,
            "dropped_no_prediction": self.dropped_no_prediction,
            "warnings": "; ".join(self.warnings),
        }

    @property
    def row(self) -> dict:
        return self.to_row()

    @classmethod
    def from_row(cls, row: dict, curve: dict, warnings: tuple = ()) -> FoldEvaluation:
        """Rebuild a fold from its row of ``evaluation.json`` and its ``curves`` entry.

        The JSON never held the per-record scores, the bootstrap and null ratios, the
        bootstrap sample size or the testing region's cell count: ``scores`` is None,
        ``partial_roc.ratios`` / ``null_ratios`` are empty and ``sample_size`` /
        ``n_cells`` are None. The confusion counts are recovered from what was stored
        (``tp`` = successes, ``tn`` = specificity x n_other rounded, both exact), and
        ``warnings`` are given by the caller (the row joins them with "; ", which a
        warning may itself contain). ``to_row`` of the result equals the row.
        """
        n, successes, n_other = int(row["n_evaluation"]), int(row["successes"]), int(row["n_other"])
        area, auc = _float(row["area_predicted"]), _float(row["auc"])
        measures = None
        if row["specificity_name"]:  # empty exactly when no measures were computed
            tn = int(round(_float(row["specificity"]) * n_other))
            measures = Measures(
                tp=successes, fn=n - successes, fp=n_other - tn, tn=tn,
                **{k: _float(row[k]) for k in ("sensitivity", "omission_rate", "specificity", "commission_rate",
                                               "correct_classification_rate", "tss", "kappa")},
                other_kind=str(row["other_kind"]))
        proc = PartialROCResult(
            statistic=_float(row["auc_ratio"]), pvalue=_float(row["partial_roc_p"]), auc=auc,
            auc_ratio=_float(row["auc_ratio"]), null_median=_float(row["auc_ratio_null_median"]),
            bootstrap_mean=_float(row["auc_ratio_mean"]), ratio_low=_float(row["auc_ratio_low"]),
            ratio_high=_float(row["auc_ratio_high"]), pvalue_bootstrap=_float(row["partial_roc_p_bootstrap"]),
            omission=_float(row["omission"]), replicates=int(row["replicates"]), sample_size=None,
            n_presences=n, n_cells=None, can_omit=row["partial_roc_note"] == "",
            ratios=np.zeros(0), null_ratios=np.zeros(0),
            curve=ROCCurve(x=np.array(curve["x"], dtype=float), y=np.array(curve["y"], dtype=float), auc=auc))
        return cls(
            fold=str(row["fold"]), n_evaluation=n,
            threshold=Threshold(rule=str(row["threshold_rule"]), value=_float(row["threshold"])),
            area_predicted=area, binomial=BinomialResult(statistic=successes, pvalue=_float(row["binomial_p"]), n=n, p=area),
            partial_roc=proc, p_fold=_float(row["p_fold"]), p_adjusted=_float(row["p_adjusted"]),
            significant=bool(row["significant"]), measures=measures, boyce=_float(row["boyce"]), n_other=n_other,
            other_kind=str(row["other_kind"]), area_source=str(row["area_source"]),
            dropped_no_prediction=int(row["dropped_no_prediction"]), warnings=tuple(warnings))


@dataclass(frozen=True)
class SplitSummary:
    """The ``all`` row: one verdict for the split, from a stated combined test.

    Attributes
    ----------
    combined_test : str
        ``"holm"``: the split is significant when at least one fold is after Holm's
        adjustment (p = the smallest adjusted p, a test of "no fold has skill" that
        holds its size); ``"jackknife"``: every fold holds exactly one evaluation
        presence, and the jackknife test decides.
    pvalue : float
        The combined test's p-value.
    significant : bool
    n_folds, n_significant_folds, n_interpretable : int
        Folds, folds significant on their own rule, and folds whose measures enter
        the means (the significant ones).
    n_evaluation, successes : int
        Summed over folds.
    means, sds : dict
        Performance means and standard deviations over interpretable folds only.
    binomial_fisher_p, partial_roc_fisher_p : float
        Fisher-combined p-values of the folds' tests, as a description (the folds
        are not fully independent).
    jackknife : JackknifeResult or None
    """

    combined_test: str
    pvalue: float
    significant: bool
    n_folds: int
    n_significant_folds: int
    n_interpretable: int
    n_evaluation: int
    successes: int
    means: dict
    sds: dict
    binomial_fisher_p: float
    partial_roc_fisher_p: float
    threshold_rule: str
    omission: float
    replicates: int
    jackknife: JackknifeResult | None = None

    @property
    def interpretation(self) -> str:
        return "interpret" if self.significant else "do not interpret"

    def to_row(self) -> dict:
        """The ``all`` row of ``evaluation.csv``."""
        row = {
            "fold": "all",
            "significant": self.significant,
            "interpretation": self.interpretation,
            "p_adjusted": self.pvalue,
            "n_evaluation": self.n_evaluation,
            "successes": self.successes,
            "binomial_p": self.binomial_fisher_p,
            "partial_roc_p": self.partial_roc_fisher_p,
            "threshold_rule": self.threshold_rule,
            "omission": self.omission,
            "replicates": self.replicates,
            "combined_test": self.combined_test,
            "n_interpretable": self.n_interpretable,
            "n_significant_folds": self.n_significant_folds,
            "jackknife_successes": self.jackknife.statistic if self.jackknife else np.nan,
            "jackknife_n": self.jackknife.n if self.jackknife else np.nan,
            "jackknife_p": self.jackknife.pvalue if self.jackknife else np.nan,
        }
        for m in MEASURES:
            row[m] = self.means.get(m, np.nan)
            row[f"{m}_sd"] = self.sds.get(m, np.nan)
        test = ("jackknife test over the one-presence folds" if self.combined_test == "jackknife"
                else "Holm's adjustment across folds (smallest adjusted p)")
        row["warnings"] = (f"verdict from {test}; measures are means over the {self.n_interpretable} "
                           f"interpretable fold(s) (SD in *_sd); binomial_p and partial_roc_p here are "
                           "Fisher-combined, a description only")
        return row

    @classmethod
    def from_row(cls, row: dict, folds) -> SplitSummary:
        """Rebuild the ``all`` row of ``evaluation.json`` (``folds``: the split's FoldEvaluations).

        The jackknife's expected successes, not in the row, is the sum of the folds'
        shares predicted present, as :func:`splitter.evaluate.jackknife_test` computes it.
        """
        jack = None
        if row["jackknife_n"] is not None:
            jack = JackknifeResult(statistic=int(row["jackknife_successes"]), pvalue=_float(row["jackknife_p"]),
                                   n=int(row["jackknife_n"]),
                                   expected=float(np.sum([f.area_predicted for f in folds], dtype=float)))
        return cls(
            combined_test=str(row["combined_test"]), pvalue=_float(row["p_adjusted"]),
            significant=bool(row["significant"]), n_folds=len(folds),
            n_significant_folds=int(row["n_significant_folds"]), n_interpretable=int(row["n_interpretable"]),
            n_evaluation=int(row["n_evaluation"]), successes=int(row["successes"]),
            means={m: _float(row[m]) for m in MEASURES}, sds={m: _float(row[f"{m}_sd"]) for m in MEASURES},
            binomial_fisher_p=_float(row["binomial_p"]), partial_roc_fisher_p=_float(row["partial_roc_p"]),
            threshold_rule=str(row["threshold_rule"]), omission=_float(row["omission"]),
            replicates=int(row["replicates"]), jackknife=jack)


@dataclass(frozen=True)
class EvaluationResult:
    """Per-fold significance and performance, plus an ``all`` row.

    Attributes
    ----------
    folds : tuple of FoldEvaluation
    summary : SplitSummary
    parameters : dict
    warnings : tuple of str
    """

    folds: tuple
    summary: SplitSummary
    parameters: dict
    warnings: tuple

    def to_frame(self) -> pd.DataFrame:
        rows = [f.to_row() for f in self.folds] + [self.summary.to_row()]
        df = pd.DataFrame(rows)
        cols = COLUMNS + [c for c in df.columns if c not in COLUMNS]
        return df.reindex(columns=cols)

    def to_dict(self) -> dict:
        def clean(v):
            if isinstance(v, (np.floating, float)):
                return None if not np.isfinite(v) else float(v)
            if isinstance(v, np.integer):
                return int(v)
            if isinstance(v, np.bool_):
                return bool(v)
            if isinstance(v, dict):
                return {k: clean(x) for k, x in v.items()}
            if isinstance(v, (list, tuple)):
                return [clean(x) for x in v]
            return v

        return clean({
            "parameters": self.parameters,
            "warnings": list(self.warnings),
            "folds": [f.to_row() for f in self.folds],
            "all": self.summary.to_row(),
            "curves": {f.fold: {"x": f.curve_x.tolist(), "y": f.curve_y.tolist()} for f in self.folds},
        })

    @classmethod
    def from_dict(cls, doc: dict) -> EvaluationResult:
        """Rebuild an evaluation from :meth:`to_dict` (what ``evaluation.json`` holds; keys the
        evaluation step writes beside it, such as ``command``, are not read here).

        See :meth:`FoldEvaluation.from_row` for what the JSON never held and stays empty.
        ``to_dict`` and ``to_frame`` of the result equal the original's.
        """
        rows, warnings = doc["folds"], tuple(doc["warnings"])
        folds = tuple(FoldEvaluation.from_row(r, doc["curves"][str(r["fold"])], w)
                      for r, w in zip(rows, _fold_warnings([r["warnings"] for r in rows], warnings)))
        return cls(folds=folds, summary=SplitSummary.from_row(doc["all"], folds), parameters=dict(doc["parameters"]),
                   warnings=warnings)


def _float(v) -> float:
    """A number read back from JSON, where NaN was written as null."""
    return float("nan") if v is None else float(v)


def _fold_warnings(texts: list, warnings: tuple) -> list:
    """Each fold's warnings, from its row's text and the split's list.

    A row joins its fold's warnings with "; ", which a warning may itself contain, so
    the text is not split on it: the folds' warnings enter the split's list fold by
    fold, in order, so a row's text is the join of the next few. A text found nowhere
    (a hand-edited file) stays one warning.
    """
    out, start = [], 0
    for text in texts:
        own = (text,) if text else ()
        for end in range(start + 1, len(warnings) + 1) if text else ():
            if "; ".join(warnings[start:end]) == text:
                own, start = tuple(warnings[start:end]), end
                break
        out.append(own)
    return out
