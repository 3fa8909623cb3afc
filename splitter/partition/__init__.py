"""Partition methods: each turns record coordinates, kinds, covariates or times into folds.

One rule class per method on a shared base (:class:`FoldRule`); ``RULES`` maps
the ``design()`` method names to them.
"""

from splitter.partition.assignment import FoldAssignment, FoldSplitter
from splitter.partition.balance import Balance, balance_cells
from splitter.partition.base import DesignParameters, FoldRule
from splitter.partition.blocks import CellFolds, Hexagons, SpatialBlocks, cell_folds
from splitter.partition.buffer import buffer_gaps
from splitter.partition.checkerboard import Checkerboard, checkerboard_folds
from splitter.partition.clusters import EnvironmentClusters, cluster_folds
from splitter.partition.groups import (
    Groups, HoldoutGroup, LeaveOneOut, RandomFolds, group_folds, holdout_folds, leave_one_out_folds, random_folds,
)
from splitter.partition.periods import HoldoutPeriod, LaterPeriod, Periods

RULES = {
    "blocks": SpatialBlocks, "hexagons": Hexagons, "checkerboard": Checkerboard, "clusters": EnvironmentClusters,
    "groups": Groups, "holdout-group": HoldoutGroup, "period": Periods, "holdout-period": HoldoutPeriod,
    "random": RandomFolds, "leave-one-out": LeaveOneOut,
}
METHODS = tuple(RULES)

__all__ = [
    "FoldAssignment", "FoldSplitter", "Balance", "balance_cells", "CellFolds", "cell_folds",
    "buffer_gaps", "checkerboard_folds", "cluster_folds", "group_folds", "holdout_folds",
    "leave_one_out_folds", "random_folds", "METHODS", "RULES", "FoldRule", "DesignParameters",
    "SpatialBlocks", "Hexagons", "Checkerboard", "EnvironmentClusters", "Groups", "HoldoutGroup",
    "RandomFolds", "LeaveOneOut", "Periods", "HoldoutPeriod", "LaterPeriod",
]
