"""splitter: independent evaluation data for species distribution models.

Design folds that do not share neighbourhoods or biases, measure the dependence
left between calibration and evaluation data, test each fold's predictions for
significance, then measure performance, and write a methods appendix.

``import splitter`` is light: every name below is loaded on first use, so
pandas, matplotlib, dask and the rest are imported only by the functions that
need them.

Examples
--------
>>> import numpy as np
>>> import splitter
>>> folds = splitter.design("demo_data/records_with_background.csv", method="blocks",
...                         folds=5, block_size=120, buffer=120, seed=1)
>>> folds.n_folds
5

The folds plug into scikit-learn as its ``cv`` argument (here a model of
presence against background on the coordinates alone, to keep it short):

>>> from sklearn.linear_model import LogisticRegression
>>> from sklearn.model_selection import cross_val_score
>>> X = np.column_stack([folds.records.points.x, folds.records.points.y])
>>> y = folds.kind == "presence"
>>> scores = cross_val_score(LogisticRegression(), X, y, cv=folds.as_cv(), scoring="roc_auc")
>>> len(scores)
5
"""

import importlib
import types

from splitter._version import __version__

# Public name -> (module, attribute). Nothing is imported until the name is used.
_EXPORTS = {
    "design": ("splitter.workflow.design", "design"),
    "add_background": ("splitter.workflow.design", "add_background"),
    "audit": ("splitter.workflow.audit", "audit"),
    "evaluate": ("splitter.workflow.evaluation", "evaluate"),
    "estimate_range": ("splitter.workflow.range_estimate", "estimate_range"),
    "build_appendix": ("splitter.report.appendix", "build_appendix"),
    "run_demo": ("splitter.demo", "run_demo"),
    "run_batch": ("splitter.batch", "run_batch"),
    "InputError": ("splitter.errors", "InputError"),
    "Points": ("splitter.geo", "Points"),
    "read_fold_table": ("splitter.io.foldtable", "read_fold_table"),
    "write_design": ("splitter.io.foldtable", "write_design"),
    "Records": ("splitter.io.records", "Records"),
    "read_records": ("splitter.io.records", "read_records"),
    "FoldAssignment": ("splitter.partition.assignment", "FoldAssignment"),
    # split rules: splitter.SpatialBlocks(folds=5, block_size=120)
    # (the core rules in splitter.partition, with reading records added by the shell)
    **{name: ("splitter.workflow.design", name) for name in (
        "SpatialBlocks", "Hexagons", "Checkerboard", "EnvironmentClusters", "Groups", "HoldoutGroup",
        "Periods", "HoldoutPeriod", "LaterPeriod", "RandomFolds", "LeaveOneOut")},
    "FoldRule": ("splitter.partition", "FoldRule"),
    "DesignParameters": ("splitter.partition", "DesignParameters"),
}
# Subpackages reachable as attributes (``splitter.io.records``) without an explicit import.
_SUBPACKAGES = ("dependence", "io", "partition", "report")

__all__ = [*_EXPORTS, "__version__"]


def __getattr__(name):
    if name in _EXPORTS:
        module, attr = _EXPORTS[name]
        value = getattr(importlib.import_module(module), attr)
        globals()[name] = value  # later look-ups skip this function
        return value
    if name in _SUBPACKAGES:
        return importlib.import_module(f"splitter.{name}")
    raise AttributeError(f"module 'splitter' has no attribute {name!r}")


def __dir__():
    return sorted({*globals(), *_EXPORTS, *_SUBPACKAGES})


class _Package(types.ModuleType):
    """``splitter.evaluate`` is the function, though a subpackage has the same name.

    Importing a subpackage sets it as an attribute of its parent; the exported
    function of the same name must win whichever is imported first. The
    subpackage stays importable as ``splitter.evaluate.<module>``.
    """

    def __setattr__(self, name, value):
        if isinstance(value, types.ModuleType) and name in _EXPORTS:
            return
        super().__setattr__(name, value)


import sys as _sys  # noqa: E402

_sys.modules[__name__].__class__ = _Package
del _sys
