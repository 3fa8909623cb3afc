"""Geographic nearest-neighbour diagnostics of a split.

For each fold, how far is each evaluation record from the nearest record the
model was calibrated on? If most evaluation records sit closer to a calibration
record than the autocorrelation range, the evaluation data are not independent
of the calibration data (common practice: blocks larger than the range).

The same distances are compared with the distances a *map* asks the model to
bridge: from prediction locations (sampled over the region) to the nearest
record. Nearest neighbour distance matching (Milà, Mateu, Pebesma & Meyer,
"Nearest neighbour distance matching Leave-One-Out Cross-Validation for map
validation", Methods in Ecology and Evolution 2022) judges a split by how well
the two distance distributions agree; we report their Wasserstein-1 distance
(``scipy.stats.wasserstein_distance``, in km): near 0 means the evaluation
mimics the prediction task, a large value means evaluation is much easier (or
harder) than mapping.

Distances are geodesic on WGS84 for geographic points and Euclidean for a
projected CRS, via ``splitter.geo.NeighbourIndex`` (exact nearest neighbour).
The record-to-record distances leave each record out of its own search
(nearest *other* record; a duplicate location counts as distance 0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.stats import wasserstein_distance

from splitter.errors import InputError
from splitter.geo import NeighbourIndex, Points
from splitter.threads import side_by_side, threads



@dataclass(frozen=True, eq=False)
class DistanceDiagnostics:
    """Per-fold nearest-neighbour distances between evaluation and calibration records.

    Attributes
    ----------
    fold_labels : tuple[str, ...]
    n_evaluation, n_calibration : ndarray of int
    nn_median_km, nn_p10_km : ndarray
        Median and 10th percentile of the evaluation -> nearest calibration
        distances per fold (NaN for a fold without evaluation or calibration records).
    share_within_range : ndarray
        Share of a fold's evaluation records closer than ``range_km`` to a
        calibration record (NaN without a range).
    wasserstein_km : ndarray
        Wasserstein-1 distance between the fold's evaluation -> calibration
        distances and the prediction -> record distances (NaN without
        prediction points).
    range_km : float or None
    evaluation_to_calibration_km : tuple[ndarray, ...]
        Raw distances per fold, for figures (not in ``to_dict``).
    prediction_to_record_km : ndarray or None
        Prediction location -> nearest kept record.
    record_to_record_km : ndarray
        Kept record -> nearest other kept record.
    prediction_median_km, record_median_km : float
        Medians of the two arrays above (NaN without them); fields, not
        properties of the arrays, so that a summary read back by
        :meth:`from_dict` keeps them without the raw distances.
    """

    fold_labels: tuple
    n_evaluation: np.ndarray
    n_calibration: np.ndarray
    nn_median_km: np.ndarray
    nn_p10_km: np.ndarray
    share_within_range: np.ndarray
    wasserstein_km: np.ndarray
    range_km: float | None
    evaluation_to_calibration_km: tuple
    prediction_to_record_km: np.ndarray | None
    record_to_record_km: np.ndarray
    prediction_median_km: float
    record_median_km: float

    def to_frame(self) -> pd.DataFrame:
        """One row per fold."""
        return pd.DataFrame(
            {
                "fold": list(self.fold_labels),
                "n_evaluation": self.n_evaluation,
                "n_calibration": self.n_calibration,
                "nn_median_km": self.nn_median_km,
                "nn_p10_km": self.nn_p10_km,
                "share_within_range": self.share_within_range,
                "range_km": np.full(len(self.fold_labels), np.nan if self.range_km is None else self.range_km),
                "wasserstein_km": self.wasserstein_km,
            }
        )

    def to_dict(self) -> dict:
        """JSON-ready summary (raw distance arrays left out)."""
        rows = self.to_frame().to_dict(orient="records")
        return {
            "range_km": _num(self.range_km),
            "prediction_median_km": _num(self.prediction_median_km),
            "record_median_km": _num(self.record_median_km),
            "folds": [{k: _num(v) for k, v in r.items()} for r in rows],
        }

    @classmethod
    def from_dict(cls, doc: dict) -> DistanceDiagnostics:
        """Rebuild the summary from :meth:`to_dict` (an audit's JSON holds the same keys).

        The raw distances were never stored: ``evaluation_to_calibration_km`` holds an
        empty array per fold, ``prediction_to_record_km`` is None and
        ``record_to_record_km`` is empty. Every per-fold measure and both medians are
        the stored ones.
        """
        rows = doc["folds"]

        def column(key, dtype=float):
            return np.array([r[key] for r in rows], dtype=dtype)  # None -> NaN for floats

        return cls(
            fold_labels=tuple(str(r["fold"]) for r in rows),
            n_evaluation=column("n_evaluation", np.int64),
            n_calibration=column("n_calibration", np.int64),
            nn_median_km=column("nn_median_km"),
            nn_p10_km=column("nn_p10_km"),
            share_within_range=column("share_within_range"),
            wasserstein_km=column("wasserstein_km"),
            range_km=None if doc["range_km"] is None else float(doc["range_km"]),
            evaluation_to_calibration_km=tuple(np.zeros(0) for _ in rows),
            prediction_to_record_km=None,
            record_to_record_km=np.zeros(0),
            prediction_median_km=_float(doc["prediction_median_km"]),
            record_median_km=_float(doc["record_median_km"]),
        )


def _float(v) -> float:
    """A number read back from JSON: null (how :func:`_num` writes NaN) is NaN again."""
    return float("nan") if v is None else float(v)


def _num(v):
    if v is None or isinstance(v, str):
        return v
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    v = float(v)
    return v if math.isfinite(v) else None


def as_index(sel, n: int, what: str) -> np.ndarray:
    """Index array from an index array or a boolean mask over ``n`` records."""
    a = np.asarray(sel)
    if a.dtype == bool:
        if a.shape != (n,):
            raise InputError(f"{what} is a boolean mask of length {a.size}, but there are {n} records.")
        return np.flatnonzero(a)
    if a.size == 0:
        return np.zeros(0, dtype=np.int64)
    if a.ndim != 1 or not np.issubdtype(a.dtype, np.integer):
        raise InputError(f"{what} must be a 1-D array of integer record indices or a boolean mask.")
    if a.min() < 0 or a.max() >= n:
        raise InputError(f"{what} holds record indices outside 0..{n - 1}.")
    return a.astype(np.int64, copy=False)


def check_folds(n: int, calibration, evaluation) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Validate per-fold calibration/evaluation selections; return index arrays."""
    if len(calibration) != len(evaluation):
        raise InputError(
            f"There are {len(calibration)} calibration sets but {len(evaluation)} evaluation sets; give one of each per fold."
        )
    if len(calibration) == 0:
        raise InputError("Give at least one fold.")
    cal = [as_index(c, n, f"Calibration set of fold {i + 1}") for i, c in enumerate(calibration)]
    ev = [as_index(e, n, f"Evaluation set of fold {i + 1}") for i, e in enumerate(evaluation)]
    return cal, ev


def nearest_other_km(points: Points) -> np.ndarray:
    """Distance (km) from each point to its nearest *other* point (leave-self-out).

    Exact geodesic distance on WGS84 for geographic points (sphere KD-tree for
    candidates, then every candidate within the sphere/ellipsoid slack is
    measured on the ellipsoid), Euclidean for a projected CRS. A point sharing
    its location with another gets 0; a lone point gets NaN.

    Examples
    --------
    >>> p = Points.lonlat([0.0, 0.0, 1.0], [0.0, 0.0, 0.0])
    >>> nearest_other_km(p).round(1).tolist()
    [0.0, 0.0, 111.3]
    """
    if len(points) < 2:
        return np.full(len(points), np.nan)
    return NeighbourIndex(points).nearest_other()[0]


def _check_points(points: Points, idx: np.ndarray, what: str):
    if idx.size and not (np.isfinite(points.x[idx]).all() and np.isfinite(points.y[idx]).all()):
        raise InputError(f"Some {what} have missing coordinates; drop them before computing distances.")


def distance_diagnostics(
    points: Points,
    calibration,
    evaluation,
    range_km: float | None = None,
    prediction_points: Points | None = None,
    fold_labels=None,
) -> DistanceDiagnostics:
    """Nearest-neighbour distances between the evaluation and calibration sets of each fold.

    Parameters
    ----------
    points : Points
        All records.
    calibration, evaluation : list of array_like
        Per fold, the indices (or boolean masks) of its calibration and
        evaluation records.
    range_km : float, optional
        Autocorrelation range; gives ``share_within_range``.
    prediction_points : Points, optional
        Locations where the model will be used (a sample over the region);
        gives prediction -> record distances and the Wasserstein-1 distance.
    fold_labels : list of str, optional
        Default ``"1" .. "k"``.

    Returns
    -------
    DistanceDiagnostics

    Examples
    --------
    >>> p = Points.lonlat([0.0, 0.1, 5.0, 5.1], [0.0, 0.0, 0.0, 0.0])
    >>> dd = distance_diagnostics(p, [[0, 1]], [[2, 3]], range_km=100.0)
    >>> round(float(dd.nn_median_km[0]))
    551
    >>> float(dd.share_within_range[0])
    0.0
    """
    searches, assemble = distance_searches(points, calibration, evaluation, range_km, prediction_points, fold_labels)
    outer = min(threads(), len(searches))
    return assemble(side_by_side([lambda f=f: f(1 if outer > 1 else None) for f in searches], outer))


def distance_searches(points: Points, calibration, evaluation, range_km: float | None = None,
                      prediction_points: Points | None = None, fold_labels=None):
    """The independent searches behind :func:`distance_diagnostics`, for a caller that runs
    them beside other work on the same threads.

    Returns ``(searches, assemble)``: callables taking the threads each may use (None =
    all), the largest first (the record-to-record part, then one per fold; tree building,
    queries and geodesics all release the GIL), and a function that turns their results,
    in that order, into the :class:`DistanceDiagnostics`. Inputs are checked here.
    """
    if not isinstance(points, Points):
        raise InputError("points must be a splitter.geo.Points object.")
    n = len(points)
    cal, ev = check_folds(n, calibration, evaluation)
    k = len(cal)
    if fold_labels is None:
        fold_labels = [str(i + 1) for i in range(k)]
    if len(fold_labels) != k:
        raise InputError(f"There are {len(fold_labels)} fold labels for {k} folds.")
    if range_km is not None and not (np.isfinite(range_km) and range_km > 0):
        raise InputError(f"range_km must be a positive number of kilometres, got {range_km!r}.")

    used = np.zeros(n, bool)
    for rows in cal + ev:
        used[rows] = True
    kept = np.flatnonzero(used)
    _check_points(points, kept, "records used in the folds")

    query = None
    if prediction_points is not None:
        if not isinstance(prediction_points, Points):
            raise InputError("prediction_points must be a splitter.geo.Points object.")
        ok = np.isfinite(prediction_points.x) & np.isfinite(prediction_points.y)
        if not ok.any():
            raise InputError("No prediction location has usable coordinates.")
        query = prediction_points.take(np.flatnonzero(ok))

    def records_part(workers):
        if not kept.size:
            return None, np.zeros(0)
        index = NeighbourIndex(points.take(kept), workers=workers)
        return (None if query is None else index.nearest(query)[0]), index.nearest_other()[0]

    def fold_part(i, workers):
        if ev[i].size == 0 or cal[i].size == 0:
            return np.zeros(0)
        return NeighbourIndex(points.take(cal[i]), workers=workers).nearest(points.take(ev[i]))[0]

    searches = [records_part, *(lambda workers, i=i: fold_part(i, workers) for i in range(k))]
    return searches, lambda results: _assembled(results, cal, ev, k, fold_labels, range_km)


def _assembled(results, cal, ev, k, fold_labels, range_km) -> DistanceDiagnostics:
    (d_pred, d_rec), *raw = results
    n_ev = np.array([e.size for e in ev], dtype=np.int64)
    n_cal = np.array([c.size for c in cal], dtype=np.int64)
    med = np.full(k, np.nan)
    p10 = np.full(k, np.nan)
    share = np.full(k, np.nan)
    w1 = np.full(k, np.nan)
    for i, d in enumerate(raw):  # loop over folds (a handful), not over records
        if not d.size:
            continue
        med[i] = np.median(d)
        p10[i] = np.percentile(d, 10)
        if range_km is not None:
            share[i] = np.mean(d < range_km)
        if d_pred is not None and d_pred.size:
            w1[i] = wasserstein_distance(d, d_pred)
    return DistanceDiagnostics(
        fold_labels=tuple(str(f) for f in fold_labels),
        n_evaluation=n_ev,
        n_calibration=n_cal,
        nn_median_km=med,
        nn_p10_km=p10,
        share_within_range=share,
        wasserstein_km=w1,
        range_km=None if range_km is None else float(range_km),
        evaluation_to_calibration_km=tuple(raw),
        prediction_to_record_km=d_pred,
        record_to_record_km=d_rec,
        prediction_median_km=float(np.median(d_pred)) if d_pred is not None and d_pred.size else float("nan"),
        record_median_km=float(np.median(d_rec[np.isfinite(d_rec)])) if np.isfinite(d_rec).any() else float("nan"),
    )
