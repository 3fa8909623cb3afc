"""Figures and the methods appendix built from a run's files."""
