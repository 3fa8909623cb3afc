"""Empirical semivariograms, fitted variogram models and the autocorrelation range.

The autocorrelation range of a covariate is the distance beyond which two
locations no longer resemble each other more than two random locations do.
Common practice is to make spatial blocks larger than that range, so this
module estimates it per covariate from a sample of locations and suggests one
block size for all covariates.

Definitions
-----------
Empirical semivariance (classical Matheron estimator) for the distance class
``[e_k, e_{k+1})``::

    gamma_k = 1 / (2 N_k) * sum over pairs (i, j) in the class of (z_i - z_j)**2

over all ``n (n - 1) / 2`` unordered pairs of the sample. Classes are of equal
width from 0 up to ``max_lag_km`` (default: half the largest pairwise
distance, because semivariances at longer lags rest on few pairs near the edge
of the region). A class is closed on the left and open on the right, so a pair
exactly ``max_lag_km`` apart is not used. ``lags_km`` is the mean distance of
the pairs in each class (more faithful for fitting than the class centre).

Models, written with the **effective range** ``R`` as the parameter, the
partial sill ``c`` and the nugget ``c0`` (``gamma(0) = 0``; the nugget is the
limit at ``h -> 0+``)::

    spherical    gamma(h) = c0 + c * (1.5 h/R - 0.5 (h/R)**3)   for h <= R
                          = c0 + c                              for h >  R
    exponential  gamma(h) = c0 + c * (1 - exp(-3 h / R))

For the spherical model ``R`` is the distance at which the sill is reached.
The exponential model never reaches its sill; its effective range is the
distance at which 95 % of the partial sill is reached, ``R = 3 a`` for the
usual distance parameter ``a`` (``1 - exp(-3) = 0.950``). ``sill`` in the
results is the **total** sill ``c0 + c`` (the plateau of the curve, comparable
with the sample variance); ``partial_sill`` is ``c``.

Fitting is weighted least squares with the weights of Cressie ("Fitting
variogram models by weighted least squares", Mathematical Geology 1985):
minimise ``sum_k N_k * (gamma_k / gamma(h_k) - 1)**2``, i.e. weights
``N_k / gamma(h_k)**2``. They give classes with many pairs more say and,
through ``1/gamma**2``, put the emphasis on the short lags that decide the
range; plain ``N_k`` weights would let the long, flat lags (which have the most
pairs in a bounded region) dominate. Parameters are bounded: nugget and
partial sill non-negative, effective range between ``1e-3`` and ``3`` times the
largest lag; a fit that ends on the range bound is flagged (``range_at_bound``)
because its range is then not identified by the data. Several starting ranges
are tried and the best optimum kept, so the result does not depend on one
starting guess.

Of the two models, the one with the lower weighted residual sum of squares
(the Cressie objective above) is chosen per covariate.

The suggested block size is the **median of the chosen effective ranges** over
covariates whose range is identified (not on a bound; all covariates if none
is). The median represents a typical covariate and is robust to one covariate
with a region-wide trend, whose "range" is the extent of the region and would
leave too few blocks; the largest range would be the conservative choice and
is easy to read from ``to_frame()``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.optimize import least_squares
from scipy.spatial.distance import pdist

from splitter.errors import InputError

MODELS = ("spherical", "exponential")

#: Largest sample a semivariogram accepts; the pair arrays grow as n**2 / 2
#: (10 000 points -> 5e7 pairs, about 1.2 GB of work arrays).
MAX_POINTS = 10_000

_RANGE_BOUNDS = (1e-3, 3.0)  # effective range, in units of the largest lag


@dataclass(frozen=True)
class Semivariogram:
    """Empirical semivariogram of one variable.

    Attributes
    ----------
    lags_km : ndarray
        Mean pair distance in each distance class (NaN for an empty class).
    gamma : ndarray
        Matheron semivariance per class (NaN for an empty class).
    pair_counts : ndarray of int
        Number of point pairs per class.
    bin_edges_km : ndarray
        ``n_lags + 1`` class edges from 0 to ``max_lag_km``.
    n_points : int
        Number of points used (points with a non-finite value or coordinate
        are left out).
    """

    lags_km: np.ndarray
    gamma: np.ndarray
    pair_counts: np.ndarray
    bin_edges_km: np.ndarray
    n_points: int

    @property
    def max_lag_km(self) -> float:
        return float(self.bin_edges_km[-1])

    def to_frame(self) -> pd.DataFrame:
        """One row per distance class."""
        return pd.DataFrame(
            {
                "lower_km": self.bin_edges_km[:-1],
                "upper_km": self.bin_edges_km[1:],
                "lag_km": self.lags_km,
                "gamma": self.gamma,
                "pairs": self.pair_counts,
            }
        )


@dataclass(frozen=True)
class VariogramFit:
    """A variogram model fitted to an empirical semivariogram.

    Attributes
    ----------
    covariate : str
    model : {"spherical", "exponential"}
    range_km : float
        Effective range (see the module docstring).
    sill : float
        Total sill, ``nugget + partial_sill``.
    partial_sill : float
    nugget : float
    rmse : float
        Unweighted root-mean-square difference between the empirical and the
        model semivariances over non-empty classes.
    r2 : float
        ``1 - SS_res / SS_tot`` over non-empty classes, unweighted.
    weighted_sse : float
        Cressie objective at the optimum, used to choose between models.
    range_at_bound : bool
        True when the fitted range ended on a parameter bound.
    """

    covariate: str
    model: str
    range_km: float
    sill: float
    partial_sill: float
    nugget: float
    rmse: float
    r2: float
    weighted_sse: float
    range_at_bound: bool

    def predict(self, h_km) -> np.ndarray:
        """Model semivariance at distances ``h_km``."""
        return _model(self.model, np.asarray(h_km, float), self.nugget, self.partial_sill, self.range_km)

    def to_dict(self) -> dict:
        return {k: _jsonable(getattr(self, k)) for k in self.__dataclass_fields__}


@dataclass(frozen=True)
class RangeEstimate:
    """Autocorrelation range per covariate and a suggested block size.

    Attributes
    ----------
    semivariograms : dict[str, Semivariogram]
    fits : tuple[VariogramFit, ...]
        Both models for every covariate, in covariate order.
    best : dict[str, VariogramFit]
        The chosen model per covariate (lower weighted residual).
    suggested_block_km : float
        Median of the chosen effective ranges (see the module docstring).
    summary_rule : str
        One sentence saying how ``suggested_block_km`` was obtained.
    notes : tuple[str, ...]
        What the caller decided that a user should know (values left out, a
        subsample drawn).
    """

    semivariograms: dict
    fits: tuple
    best: dict
    suggested_block_km: float
    summary_rule: str = field(default="")
    notes: tuple = ()

    @property
    def covariates(self) -> list[str]:
        return list(self.semivariograms)

    def to_frame(self) -> pd.DataFrame:
        """One row per covariate and model."""
        rows = []
        for f in self.fits:
            rows.append(
                {
                    "covariate": f.covariate,
                    "model": f.model,
                    "range_km": f.range_km,
                    "sill": f.sill,
                    "nugget": f.nugget,
                    "rmse": f.rmse,
                    "r2": f.r2,
                    "chosen": self.best[f.covariate] is f,
                }
            )
        return pd.DataFrame(
            rows, columns=["covariate", "model", "range_km", "sill", "nugget", "rmse", "r2", "chosen"]
        )

    def to_dict(self) -> dict:
        return {
            "suggested_block_km": _jsonable(self.suggested_block_km),
            "summary_rule": self.summary_rule,
            "notes": list(self.notes),
            "fits": [dict(f.to_dict(), chosen=self.best[f.covariate] is f) for f in self.fits],
            "semivariograms": {
                name: {
                    "n_points": int(sv.n_points),
                    "bin_edges_km": [_jsonable(v) for v in sv.bin_edges_km],
                    "lags_km": [_jsonable(v) for v in sv.lags_km],
                    "gamma": [_jsonable(v) for v in sv.gamma],
                    "pair_counts": [int(v) for v in sv.pair_counts],
                }
                for name, sv in self.semivariograms.items()
            },
        }

    @classmethod
    def from_dict(cls, doc: dict) -> RangeEstimate:
        """Rebuild from :meth:`to_dict` (``range.json``, or a design sidecar's ``range_summary``;
        other keys, such as the command line, are not read). Null is read as NaN."""

        def arr(v):
            return np.array(v, dtype=float)  # None -> NaN

        svs = {
            name: Semivariogram(lags_km=arr(s["lags_km"]), gamma=arr(s["gamma"]),
                                pair_counts=np.asarray(s["pair_counts"], np.int64),
                                bin_edges_km=arr(s["bin_edges_km"]), n_points=int(s["n_points"]))
            for name, s in doc["semivariograms"].items()
        }
        # JSON keys come back sorted; the fits keep the covariates' own order.
        order = list(dict.fromkeys(f["covariate"] for f in doc["fits"] if f["covariate"] in svs))
        svs = {name: svs[name] for name in order + [n for n in svs if n not in order]}
        fits, best = [], {}
        for f in doc["fits"]:
            fit = VariogramFit(**{k: (np.nan if f[k] is None else f[k]) for k in VariogramFit.__dataclass_fields__})
            fits.append(fit)
            if f["chosen"]:
                best[fit.covariate] = fit
        for name in svs:
            if name not in best:
                best[name] = min((f for f in fits if f.covariate == name), key=lambda f: f.weighted_sse)
        return cls(semivariograms=svs, fits=tuple(fits), best=best, suggested_block_km=float(doc["suggested_block_km"]),
                   summary_rule=doc["summary_rule"], notes=tuple(doc["notes"]))


def _jsonable(v):
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        v = float(v)
        return v if math.isfinite(v) else None
    return v


def _check_coords(x_km, y_km) -> tuple[np.ndarray, np.ndarray]:
    x = np.asarray(x_km, dtype=float)
    y = np.asarray(y_km, dtype=float)
    if x.ndim != 1 or x.shape != y.shape:
        raise InputError("x_km and y_km must be 1-D arrays of the same length.")
    return x, y


def _check_lags(n_lags, max_lag_km):
    if not isinstance(n_lags, (int, np.integer)) or n_lags < 2:
        raise InputError(f"n_lags must be an integer of at least 2, got {n_lags!r}.")
    if max_lag_km is not None and not (np.isfinite(max_lag_km) and max_lag_km > 0):
        raise InputError(f"max_lag_km must be a positive number of kilometres, got {max_lag_km!r}.")


def _binned(dist: np.ndarray, sqdiff: np.ndarray, n_lags: int, max_lag_km, n_points: int) -> Semivariogram:
    """Matheron semivariances from condensed pair distances and squared differences."""
    if max_lag_km is None:
        max_lag_km = 0.5 * float(dist.max()) if dist.size else 0.0
        if not max_lag_km > 0:
            raise InputError("All sampled points share one location; sample points spread over the region.")
    edges = np.linspace(0.0, float(max_lag_km), n_lags + 1)
    # Class k holds edges[k] <= d < edges[k+1]; pairs at or beyond max_lag get index n_lags.
    k = np.searchsorted(edges, dist, side="right") - 1
    keep = k < n_lags
    k = k[keep]
    counts = np.bincount(k, minlength=n_lags)
    sum_sq = np.bincount(k, weights=sqdiff[keep], minlength=n_lags)
    sum_d = np.bincount(k, weights=dist[keep], minlength=n_lags)
    with np.errstate(invalid="ignore", divide="ignore"):
        gamma = np.where(counts > 0, sum_sq / (2.0 * counts), np.nan)
        lags = np.where(counts > 0, sum_d / counts, np.nan)
    return Semivariogram(lags, gamma, counts.astype(np.int64), edges, int(n_points))


def empirical_semivariogram(x_km, y_km, values, n_lags: int = 15, max_lag_km: float | None = None) -> Semivariogram:
    """Classical (Matheron) empirical semivariogram over all pairs of a sample.

    Parameters
    ----------
    x_km, y_km : array_like
        Planar coordinates in kilometres (e.g. from ``splitter.geo.planar_km``
        in an equal-area CRS).
    values : array_like
        Variable at the same points. Points with a non-finite value or
        coordinate are left out.
    n_lags : int, default 15
        Number of equal-width distance classes.
    max_lag_km : float, optional
        Upper edge of the last class; default half the largest pairwise distance.

    Returns
    -------
    Semivariogram

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x, y = rng.uniform(0, 100, (2, 300))
    >>> sv = empirical_semivariogram(x, y, x / 10, n_lags=5, max_lag_km=50)
    >>> sv.pair_counts.shape
    (5,)
    """
    x, y = _check_coords(x_km, y_km)
    z = np.asarray(values, dtype=float)
    if z.shape != x.shape:
        raise InputError("values must have one entry per point (same length as x_km and y_km).")
    _check_lags(n_lags, max_lag_km)
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(z)
    n = int(ok.sum())
    if n < 3:
        raise InputError("A semivariogram needs at least 3 points with finite coordinates and values.")
    if n > MAX_POINTS:
        raise InputError(
            f"{n} points give too many pairs for a semivariogram; sample at most {MAX_POINTS} points."
        )
    xy = np.column_stack([x[ok], y[ok]])
    dist = pdist(xy)
    sqdiff = pdist(z[ok, None], "sqeuclidean")
    return _binned(dist, sqdiff, int(n_lags), max_lag_km, n)


def _model(model: str, h: np.ndarray, nugget: float, psill: float, rng: float) -> np.ndarray:
    if model == "spherical":
        r = np.minimum(h / rng, 1.0)
        g = nugget + psill * (1.5 * r - 0.5 * r**3)
    elif model == "exponential":
        g = nugget + psill * (1.0 - np.exp(-3.0 * h / rng))
    else:
        raise InputError(f"Unknown variogram model {model!r}; use one of {', '.join(MODELS)}.")
    return np.where(h > 0, g, 0.0)


def fit_variogram(sv: Semivariogram, model: str = "spherical", covariate: str = "") -> VariogramFit:
    """Fit a spherical or exponential model by Cressie-weighted least squares.

    Parameters
    ----------
    sv : Semivariogram
    model : {"spherical", "exponential"}
    covariate : str, optional
        Name carried into the result.

    Returns
    -------
    VariogramFit
        ``range_km`` is the effective range; ``sill`` the total sill.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> x, y = rng.uniform(0, 100, (2, 400))
    >>> fit = fit_variogram(empirical_semivariogram(x, y, np.sin(x / 15)), "spherical")
    >>> fit.range_km > 0
    True
    """
    if model not in MODELS:
        raise InputError(f"Unknown variogram model {model!r}; use one of {', '.join(MODELS)}.")
    use = (sv.pair_counts > 0) & np.isfinite(sv.gamma) & np.isfinite(sv.lags_km)
    if use.sum() < 3:
        raise InputError(
            "Fewer than 3 distance classes hold point pairs; sample more points or use fewer lags."
        )
    h = sv.lags_km[use]
    g = sv.gamma[use]
    n = sv.pair_counts[use].astype(float)
    gmax = float(g.max())
    if not gmax > 0:
        raise InputError(
            f"Covariate {covariate or '(unnamed)'} is constant over the sample, so it has no range; drop it."
        )
    # Work in scaled units (distance / max lag, semivariance / max gamma) for conditioning.
    hmax = sv.max_lag_km
    hs, gs = h / hmax, g / gmax
    sqrt_n = np.sqrt(n)

    def resid(p):
        gm = _model(model, hs, p[0], p[1], p[2])
        return sqrt_n * (gs / np.maximum(gm, 1e-12) - 1.0)

    lo = [0.0, 1e-9, _RANGE_BOUNDS[0]]
    hi = [1.0, 5.0, _RANGE_BOUNDS[1]]
    nug0 = float(min(0.5 * gs[0], 0.9))
    best = None
    # Several starting ranges, because the Cressie objective can have more than one optimum.
    for r0 in (0.1, 0.25, 0.5, 1.0, 2.0):
        x0 = [nug0, max(1.0 - nug0, 1e-3), r0]
        res = least_squares(resid, x0, bounds=(lo, hi), method="trf", x_scale=[0.1, 0.1, 0.1])
        if best is None or res.cost < best.cost:
            best = res
    nug, psill, rng = (float(v) for v in best.x)
    nugget, partial_sill, range_km = nug * gmax, psill * gmax, rng * hmax
    pred = _model(model, h, nugget, partial_sill, range_km)
    ss_res = float(np.sum((g - pred) ** 2))
    ss_tot = float(np.sum((g - g.mean()) ** 2))
    at_bound = bool(rng >= _RANGE_BOUNDS[1] * (1 - 1e-3) or rng <= _RANGE_BOUNDS[0] * (1 + 1e-3))
    return VariogramFit(
        covariate=str(covariate),
        model=model,
        range_km=range_km,
        sill=nugget + partial_sill,
        partial_sill=partial_sill,
        nugget=nugget,
        rmse=math.sqrt(ss_res / g.size),
        r2=1.0 - ss_res / ss_tot if ss_tot > 0 else float("nan"),
        weighted_sse=2.0 * float(best.cost),
        range_at_bound=at_bound,
    )


def fit_ranges(
    coords_x_km,
    coords_y_km,
    covariate_values: dict,
    n_lags: int = 15,
    max_lag_km: float | None = None,
) -> RangeEstimate:
    """Autocorrelation range of each variable sampled at given points, and a suggested block size.

    The array core under ``splitter.estimate_range`` (which samples raster
    cells or reads records first).

    Parameters
    ----------
    coords_x_km, coords_y_km : array_like
        Planar coordinates (km) of a sample of locations in the region
        (the caller draws the sample, seeded).
    covariate_values : dict[str, array_like]
        Covariate name -> values at the same sampled locations.
    n_lags : int, default 15
    max_lag_km : float, optional
        Default: half the largest pairwise distance of the sample.

    Returns
    -------
    RangeEstimate

    Examples
    --------
    >>> rng = np.random.default_rng(2)
    >>> x, y = rng.uniform(0, 200, (2, 500))
    >>> est = fit_ranges(x, y, {"a": np.sin(x / 20), "b": np.cos(y / 30)})
    >>> list(est.to_frame().columns)[:3]
    ['covariate', 'model', 'range_km']
    """
    x, y = _check_coords(coords_x_km, coords_y_km)
    _check_lags(n_lags, max_lag_km)
    if not covariate_values:
        raise InputError("Give at least one covariate to estimate a range from.")
    arrays = {}
    for name, v in covariate_values.items():
        v = np.asarray(v, dtype=float)
        if v.shape != x.shape:
            raise InputError(
                f"Covariate {name!r} has {v.size} values but there are {x.size} sampled points."
            )
        arrays[str(name)] = v
    ok_xy = np.isfinite(x) & np.isfinite(y)
    if max_lag_km is None:
        # One max lag for all covariates (half the largest distance in the sample), so
        # their ranges are measured on the same distance classes.
        if ok_xy.sum() > MAX_POINTS:
            raise InputError(
                f"{int(ok_xy.sum())} points give too many pairs for a semivariogram; sample at most {MAX_POINTS}."
            )
        d_all = pdist(np.column_stack([x[ok_xy], y[ok_xy]]))
        if d_all.size == 0 or not d_all.max() > 0:
            raise InputError("The sampled points share one location; sample points spread over the region.")
        max_lag_km = 0.5 * float(d_all.max())
        del d_all

    semivariograms, fits, best = {}, [], {}
    for name, v in arrays.items():
        sv = empirical_semivariogram(x, y, v, n_lags=n_lags, max_lag_km=max_lag_km)
        semivariograms[name] = sv
        pair = [fit_variogram(sv, m, covariate=name) for m in MODELS]
        fits.extend(pair)
        best[name] = min(pair, key=lambda f: f.weighted_sse)

    chosen = list(best.values())
    identified = [f.range_km for f in chosen if not f.range_at_bound]
    pool = identified if identified else [f.range_km for f in chosen]
    suggested = float(np.median(pool))
    rule = (
        "median of the chosen models' effective ranges over "
        + (f"{len(identified)} covariate(s) whose range is identified" if identified
           else "all covariates (no range was identified within the fitted distances)")
    )
    return RangeEstimate(semivariograms, tuple(fits), best, suggested, rule)
