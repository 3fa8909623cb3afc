"""Per-fold evaluation: thresholds, significance tests and performance measures.

Pure numpy/scipy/scikit-learn; no file I/O. Significance comes first: a fold whose
binomial test or partial ROC is not significant should not be interpreted.
"""

from splitter.evaluate.area import cell_areas
from splitter.evaluate.baseline import fit_baseline, predict_suitability
from splitter.evaluate.binomial import BinomialResult, area_predicted, binomial_test
from splitter.evaluate.cells import CellSource, SuitabilitySurface, as_cells
from splitter.evaluate.boyce import BoyceResult, boyce_index
from splitter.evaluate.combine import (
    CombinedPValue,
    FoldSummary,
    JackknifeResult,
    combine_pvalues_fisher,
    holm_adjust,
    jackknife_test,
    summarise_folds,
)
from splitter.evaluate.measures import Measures, confusion_measures
from splitter.evaluate.optimism import OptimismFold, OptimismResult, split_optimism
from splitter.evaluate.partial_roc import (
    PartialROCResult,
    ROCCurve,
    partial_roc,
    roc_curve_area,
)
from splitter.evaluate.results import EvaluationResult, FoldEvaluation, SplitSummary
from splitter.evaluate.thresholds import Threshold, ThresholdRule, choose_threshold

__all__ = [
    "BinomialResult",
    "BoyceResult",
    "CellSource",
    "CombinedPValue",
    "EvaluationResult",
    "FoldEvaluation",
    "FoldSummary",
    "JackknifeResult",
    "Measures",
    "OptimismFold",
    "OptimismResult",
    "PartialROCResult",
    "ROCCurve",
    "SplitSummary",
    "SuitabilitySurface",
    "as_cells",
    "Threshold",
    "ThresholdRule",
    "area_predicted",
    "binomial_test",
    "boyce_index",
    "cell_areas",
    "choose_threshold",
    "combine_pvalues_fisher",
    "confusion_measures",
    "fit_baseline",
    "holm_adjust",
    "jackknife_test",
    "partial_roc",
    "predict_suitability",
    "roc_curve_area",
    "split_optimism",
    "summarise_folds",
]
