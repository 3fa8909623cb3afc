"""Partition methods: each turns record coordinates, kinds or covariates into folds."""

from splitter.partition.assignment import FoldAssignment, FoldSplitter
from splitter.partition.balance import Balance, balance_cells
from splitter.partition.blocks import CellFolds, cell_folds
from splitter.partition.buffer import buffer_gaps
from splitter.partition.checkerboard import checkerboard_folds
from splitter.partition.clusters import cluster_folds
from splitter.partition.groups import group_folds, holdout_folds, leave_one_out_folds, random_folds

METHODS = ("blocks", "hexagons", "checkerboard", "clusters", "groups", "holdout-group", "random", "leave-one-out")

__all__ = [
    "FoldAssignment", "FoldSplitter", "Balance", "balance_cells", "CellFolds", "cell_folds",
    "buffer_gaps", "checkerboard_folds", "cluster_folds", "group_folds", "holdout_folds",
    "leave_one_out_folds", "random_folds", "METHODS",
]
