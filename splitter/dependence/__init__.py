"""Residual dependence between calibration and evaluation data.

Autocorrelation range (``variogram``), geographic nearest-neighbour distances
(``distance``), environmental overlap and extrapolation (``environment``), the
per-fold audit with verdicts (``audit``). Arrays in, frozen result dataclasses
out; nothing here reads files or draws (the figures are in
``splitter.report.dependence_figures``).
"""

from splitter.dependence.audit import RULES, AuditResult, audit_split
from splitter.dependence.distance import DistanceDiagnostics, distance_diagnostics, nearest_other_km
from splitter.dependence.environment import (
    CovariateRanges,
    OverlapResult,
    covariate_ranges,
    mess,
    schoener_d,
)
from splitter.dependence.variogram import (
    RangeEstimate,
    Semivariogram,
    VariogramFit,
    empirical_semivariogram,
    fit_ranges,
    fit_variogram,
)

__all__ = [
    "AuditResult",
    "CovariateRanges",
    "DistanceDiagnostics",
    "OverlapResult",
    "RULES",
    "RangeEstimate",
    "Semivariogram",
    "VariogramFit",
    "audit_split",
    "covariate_ranges",
    "distance_diagnostics",
    "empirical_semivariogram",
    "fit_ranges",
    "fit_variogram",
    "mess",
    "nearest_other_km",
    "schoener_d",
]
