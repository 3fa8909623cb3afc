"""splitter: independent evaluation data for species distribution models."""

__version__ = "0.1.0"
