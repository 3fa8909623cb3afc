"""splitter: independent evaluation data for species distribution models.

Design folds that do not share neighbourhoods or biases, measure the dependence
left between calibration and evaluation data, test each fold's predictions for
significance, then measure performance, and write a methods appendix.

Examples
--------
>>> import splitter
>>> folds = splitter.design("demo_data/records_with_background.csv", method="blocks",
...                         folds=5, block_size=120, buffer=120, seed=1)  # doctest: +SKIP
>>> from sklearn.model_selection import cross_val_score  # doctest: +SKIP
>>> cross_val_score(model, X, y, cv=folds.as_cv())  # doctest: +SKIP
"""

__version__ = "0.1.0"

from splitter.auditor import audit
from splitter.fold_design import add_background, design
from splitter.errors import InputError
from splitter.evaluation import evaluate
from splitter.geo import Points
from splitter.io.foldtable import read_fold_table, write_design
from splitter.io.records import Records, read_records
from splitter.partition import FoldAssignment
from splitter.rangefinder import estimate_range

__all__ = [
    "design", "add_background", "audit", "evaluate", "estimate_range", "build_appendix", "run_demo",
    "run_batch", "InputError", "Points", "read_fold_table", "write_design", "Records", "read_records",
    "FoldAssignment", "__version__", *(_RULE_NAMES := (
        "FoldRule", "SpatialBlocks", "Hexagons", "Checkerboard", "EnvironmentClusters", "Groups", "HoldoutGroup",
        "Periods", "HoldoutPeriod", "LaterPeriod", "RandomFolds", "LeaveOneOut", "DesignParameters")),
]


def __getattr__(name):  # heavier pieces load on first use
    if name == "build_appendix":
        from splitter.report.appendix import build_appendix

        return build_appendix
    if name == "run_demo":
        from splitter.demo import run_demo

        return run_demo
    if name in _RULE_NAMES:  # split rules: splitter.SpatialBlocks(folds=5, block_size=120)
        import splitter.partition

        return getattr(splitter.partition, name)
    if name == "run_batch":
        from splitter.batch import run_batch

        return run_batch
    raise AttributeError(f"module 'splitter' has no attribute {name!r}")
