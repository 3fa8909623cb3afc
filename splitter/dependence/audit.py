"""Audit of a calibration/evaluation split for residual dependence.

Each fold gets one verdict:

* ``insufficient`` — fewer than ``min_evaluation`` evaluation records, no
  calibration record, or none of the rules below could be applied (no range,
  no covariates, no groups given);
* ``dependent`` — at least one rule fires;
* ``independent`` — every rule that could be applied stays quiet.

Rules (thresholds are conventions, not laws; ``AuditResult.rules`` carries
them so every report prints them):

(i) **distance** — share of evaluation records closer than the
    autocorrelation range to a calibration record > 0.5. Common practice asks
    for blocks larger than the range, so that evaluation records lie beyond it;
    when most of them lie within it, most evaluation residuals are correlated
    with calibration residuals. Applied only when a range is given.
(ii) **environment** — Schoener's D between calibration and evaluation
    records > 0.9 *and* fewer than 5 % of evaluation records outside the
    calibration envelope (MESS < 0). The two sets then sample the same
    environments and the evaluation tests interpolation only, which says little
    about transfer. D estimated from kernel densities falls below 1 by sampling
    noise alone (two random halves of a few hundred records give about
    0.8–0.95), so 0.9 fires only when the sets are demonstrably alike; requiring
    no extrapolation as well keeps environmentally blocked folds, whose
    evaluation records sit at the edge of the calibrated space, out of it.
    Applied only when covariates are given.
(iii) **collection method** — share of evaluation records whose survey
    method/source also occurs among the fold's calibration records > 0.5. Records
    collected the same way share the same detection and sampling biases, so
    the model can score well by learning the bias. A holdout by method has
    share 0 and never fires. Applied only when groups are given.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from splitter.dependence.distance import DistanceDiagnostics, _num, check_folds, distance_diagnostics
from splitter.dependence.environment import covariate_ranges, mess, schoener_d
from splitter.errors import InputError
from splitter.geo import Points

#: Rule (i): share of evaluation records within the range above which a fold is dependent.
DISTANCE_SHARE = 0.5
#: Rule (ii): Schoener's D above which (with little extrapolation) a fold is dependent.
OVERLAP_D = 0.9
#: Rule (ii): share of evaluation records outside the calibration envelope below which ...
OUTSIDE_SHARE = 0.05
#: Rule (iii): share of evaluation records sharing a method with calibration above which ...
METHOD_SHARE = 0.5

RULES = (
    {
        "name": "distance",
        "rule": "share of evaluation records closer than the autocorrelation range to a calibration record > threshold",
        "threshold": DISTANCE_SHARE,
    },
    {
        "name": "environment",
        "rule": "Schoener's D (calibration vs evaluation, first two principal components) > threshold "
        f"and share of evaluation records outside the calibration envelope (MESS < 0) < {OUTSIDE_SHARE}",
        "threshold": OVERLAP_D,
    },
    {
        "name": "collection method",
        "rule": "share of evaluation records whose survey method/source also occurs in the calibration set > threshold",
        "threshold": METHOD_SHARE,
    },
)

COLUMNS = [
    "fold",
    "n_evaluation",
    "n_calibration",
    "nn_median_km",
    "nn_p10_km",
    "share_within_range",
    "range_km",
    "wasserstein_km",
    "schoener_d",
    "share_outside_envelope",
    "shared_method_share",
    "verdict",
    "reasons",
]


@dataclass(frozen=True, eq=False)
class AuditResult:
    """Per-fold dependence measures and verdicts.

    Attributes
    ----------
    fold_labels : tuple[str, ...]
    schoener_d, share_outside_envelope, shared_method_share : ndarray
        NaN where not computed.
    verdicts : tuple[str, ...]
        ``independent``, ``dependent`` or ``insufficient`` per fold.
    reasons : tuple[str, ...]
        Which rule(s) flagged the fold, with the values, or why it is insufficient.
    verdict : str
        Overall: ``dependent`` if any fold is, else ``independent`` if any fold
        is, else ``insufficient``.
    rules : list[dict]
        ``{name, rule, threshold}`` of every rule.
    distance : DistanceDiagnostics
        Distance measures (with raw distances for figures).
    ranges : tuple[CovariateRanges or None, ...]
        Per fold covariate extremes of calibration and evaluation records.
    min_evaluation : int
    """

    fold_labels: tuple
    schoener_d: np.ndarray
    share_outside_envelope: np.ndarray
    shared_method_share: np.ndarray
    verdicts: tuple
    reasons: tuple
    verdict: str
    rules: list
    distance: DistanceDiagnostics
    ranges: tuple
    min_evaluation: int

    def to_frame(self) -> pd.DataFrame:
        """One row per fold; columns as in ``COLUMNS``."""
        d = self.distance
        return pd.DataFrame(
            {
                "fold": list(self.fold_labels),
                "n_evaluation": d.n_evaluation,
                "n_calibration": d.n_calibration,
                "nn_median_km": d.nn_median_km,
                "nn_p10_km": d.nn_p10_km,
                "share_within_range": d.share_within_range,
                "range_km": np.full(len(self.fold_labels), np.nan if d.range_km is None else d.range_km),
                "wasserstein_km": d.wasserstein_km,
                "schoener_d": self.schoener_d,
                "share_outside_envelope": self.share_outside_envelope,
                "shared_method_share": self.shared_method_share,
                "verdict": list(self.verdicts),
                "reasons": list(self.reasons),
            },
            columns=COLUMNS,
        )

    def to_dict(self) -> dict:
        """JSON-ready: plain floats/ints/strings, NaN as None."""
        folds = [{k: _num(v) for k, v in row.items()} for row in self.to_frame().to_dict(orient="records")]
        return {
            "verdict": self.verdict,
            "min_evaluation": int(self.min_evaluation),
            "rules": [{k: _num(v) for k, v in r.items()} for r in self.rules],
            "range_km": _num(self.distance.range_km),
            "prediction_median_km": _num(self.distance.prediction_median_km),
            "record_median_km": _num(self.distance.record_median_km),
            "folds": folds,
            "covariate_ranges": {
                label: (r.to_dict()["covariates"] if r is not None else None)
                for label, r in zip(self.fold_labels, self.ranges)
            },
        }


def _group_codes(groups, n: int) -> np.ndarray:
    g = np.asarray(groups, dtype=object)
    if g.shape != (n,):
        raise InputError(f"groups has {g.size} values but there are {n} records; give one per record.")
    codes, _ = pd.factorize(pd.Series(g).replace("", np.nan), use_na_sentinel=True)
    return codes  # -1 = unknown method/source


def _shared_share(codes: np.ndarray, cal: np.ndarray, ev: np.ndarray) -> float:
    """Share of evaluation records (with a known group) whose group occurs in calibration."""
    ge = codes[ev]
    ge = ge[ge >= 0]
    if ge.size == 0:
        return float("nan")
    gc = np.unique(codes[cal])
    gc = gc[gc >= 0]
    return float(np.isin(ge, gc).mean())


def audit_split(
    points: Points,
    calibration,
    evaluation,
    fold_labels=None,
    env=None,
    env_names=None,
    env_reference=None,
    groups=None,
    range_km: float | None = None,
    prediction_points: Points | None = None,
    min_evaluation: int = 5,
) -> AuditResult:
    """Measure residual dependence between the calibration and evaluation sets of each fold.

    Parameters
    ----------
    points : Points
        All records.
    calibration, evaluation : list of array_like
        Per fold, indices (or boolean masks) of calibration and evaluation records.
    fold_labels : list of str, optional
        Default ``"1" .. "k"``.
    env : array_like, shape (n, p), optional
        Covariates at the records (NaN allowed; such records are left out of
        the environmental measures).
    env_names : list of str, optional
    env_reference : array_like, shape (m, p), optional
        Region/background covariate sample for standardisation and PCA.
    groups : array_like, shape (n,), optional
        Survey method or data source per record (None/NaN/"" = unknown).
    range_km : float, optional
        Autocorrelation range (e.g. ``estimate_range(...).suggested_block_km``).
    prediction_points : Points, optional
        Sample of prediction locations over the region.
    min_evaluation : int, default 5
        Fewer evaluation records than this makes a fold ``insufficient``.

    Returns
    -------
    AuditResult

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> p = Points.lonlat(rng.uniform(0, 1, 200), rng.uniform(0, 1, 200))
    >>> fold = rng.integers(0, 2, 200)
    >>> res = audit_split(p, [fold != 0, fold != 1], [fold == 0, fold == 1], range_km=50.0)
    >>> res.verdict
    'dependent'
    """
    if not isinstance(points, Points):
        raise InputError("points must be a splitter.geo.Points object.")
    n = len(points)
    cal, ev = check_folds(n, calibration, evaluation)
    k = len(cal)
    if fold_labels is None:
        fold_labels = [str(i + 1) for i in range(k)]
    fold_labels = [str(f) for f in fold_labels]
    if len(fold_labels) != k:
        raise InputError(f"There are {len(fold_labels)} fold labels for {k} folds.")
    if not isinstance(min_evaluation, (int, np.integer)) or min_evaluation < 1:
        raise InputError(f"min_evaluation must be a positive integer, got {min_evaluation!r}.")

    env_m = None
    if env is not None:
        env_m = np.asarray(env, dtype=float)
        if env_m.ndim == 1:
            env_m = env_m[:, None]
        if env_m.ndim != 2 or env_m.shape[0] != n:
            raise InputError(f"env must have one row per record ({n}), got shape {env_m.shape}.")
        if env_names is not None and len(env_names) != env_m.shape[1]:
            raise InputError(f"There are {len(env_names)} covariate names for {env_m.shape[1]} covariates.")
        if env_reference is not None:
            env_reference = np.asarray(env_reference, dtype=float)
            if env_reference.ndim == 1:
                env_reference = env_reference[:, None]
            if env_reference.ndim != 2 or env_reference.shape[1] != env_m.shape[1]:
                raise InputError(
                    f"env_reference must have the same {env_m.shape[1]} covariates as env, got shape {env_reference.shape}."
                )
    codes = _group_codes(groups, n) if groups is not None else None

    dist = distance_diagnostics(
        points, cal, ev, range_km=range_km, prediction_points=prediction_points, fold_labels=fold_labels
    )

    d_stat = np.full(k, np.nan)
    outside = np.full(k, np.nan)
    shared = np.full(k, np.nan)
    ranges = []
    verdicts, reasons = [], []
    for i in range(k):  # loop over folds (a handful), records are vectorised inside
        n_ev, n_cal = ev[i].size, cal[i].size
        enough = n_ev >= min_evaluation and n_cal > 0
        if env_m is not None:
            a, b = env_m[cal[i]], env_m[ev[i]]
            ranges.append(covariate_ranges(a, b, env_names) if n_cal and n_ev else None)
            if enough:
                try:
                    d_stat[i] = schoener_d(a, b, reference=env_reference).statistic
                except InputError:
                    pass  # too few complete records or no variation: D stays NaN
                a_ok = a[np.isfinite(a).all(axis=1)]
                if a_ok.shape[0]:
                    m = mess(a_ok, b)
                    m = m[np.isfinite(m)]
                    if m.size:
                        outside[i] = float(np.mean(m < 0))
        else:
            ranges.append(None)
        if codes is not None:
            shared[i] = _shared_share(codes, cal[i], ev[i])

        if not enough:
            verdicts.append("insufficient")
            reasons.append(
                f"{n_ev} evaluation record(s) < {min_evaluation}" if n_ev < min_evaluation else "no calibration records"
            )
            continue
        fired, applied = [], 0
        s = dist.share_within_range[i]
        if np.isfinite(s):
            applied += 1
            if s > DISTANCE_SHARE:
                fired.append(f"distance: {s:.0%} of evaluation records within {range_km:g} km > {DISTANCE_SHARE:.0%}")
        if np.isfinite(d_stat[i]) and np.isfinite(outside[i]):
            applied += 1
            if d_stat[i] > OVERLAP_D and outside[i] < OUTSIDE_SHARE:
                fired.append(
                    f"environment: Schoener's D {d_stat[i]:.2f} > {OVERLAP_D} with {outside[i]:.0%} outside the "
                    f"calibration envelope < {OUTSIDE_SHARE:.0%}"
                )
        if np.isfinite(shared[i]):
            applied += 1
            if shared[i] > METHOD_SHARE:
                fired.append(
                    f"collection method: {shared[i]:.0%} of evaluation records share a method with calibration > {METHOD_SHARE:.0%}"
                )
        if fired:
            verdicts.append("dependent")
            reasons.append("; ".join(fired))
        elif applied:
            verdicts.append("independent")
            reasons.append("no rule fired")
        else:
            verdicts.append("insufficient")
            reasons.append("no rule could be applied: give a range, covariates or groups")

    if "dependent" in verdicts:
        overall = "dependent"
    elif "independent" in verdicts:
        overall = "independent"
    else:
        overall = "insufficient"
    return AuditResult(
        fold_labels=tuple(fold_labels),
        schoener_d=d_stat,
        share_outside_envelope=outside,
        shared_method_share=shared,
        verdicts=tuple(verdicts),
        reasons=tuple(reasons),
        verdict=overall,
        rules=[dict(r) for r in RULES],
        distance=dist,
        ranges=tuple(ranges),
        min_evaluation=int(min_evaluation),
    )
