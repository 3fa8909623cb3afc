"""splitter: independent evaluation data for species distribution models."""

__version__ = "0.1.0"

from splitter.design import design
from splitter.errors import InputError
from splitter.geo import Points
from splitter.io.foldtable import read_fold_table, write_design
from splitter.io.records import Records, read_records
from splitter.partition import FoldAssignment

__all__ = [
    "design", "InputError", "Points", "read_fold_table", "write_design", "Records",
    "read_records", "FoldAssignment", "__version__",
]
