"""Audit of a calibration/evaluation split for residual dependence.

Each fold gets one verdict:

* ``insufficient`` — fewer than ``min_evaluation`` evaluation records, no
  calibration record, or none of the rules below could be applied (no range,
  no covariates, no groups given);
* ``dependent`` — at least one rule fires;
* ``independent`` — every rule that could be applied stays quiet.

Rules (``AuditResult.rules`` carries each one's one-line statement, so every
report prints it):

(i) **distance** — a physical threshold: the share of evaluation records
    closer than the autocorrelation range to a calibration record > 0.5.
    Common practice asks for blocks larger than the range, so that evaluation
    records lie beyond it; when most of them lie within it, most evaluation
    residuals are correlated with calibration residuals. Applied only when a
    range is given.
(ii) **environment** — Schoener's D between the calibration and evaluation
    records' densities in environmental space, against random re-splits of the
    same records (``splitter.dependence.resplit``). Kernel-smoothed D of two
    random halves of a large sample is near 1 and of small samples well below
    it, so no fixed level of D separates a designed split from a random one;
    the fold's own re-splits do. Fires when fewer than 95 % of the re-splits
    have a D at least as high as the designed split's (the designed split
    separates environments no better than chance). Applied when covariates are
    given and no autocorrelation range is: environmental likeness stands in
    for closeness only when closeness cannot be measured. With a range the
    distance rule decides, because evaluation records beyond the range of
    every calibration record are not dependent on them through place however
    alike their environments (spatial blocks typically sample the same
    environments as a random split: that makes the evaluation one of
    interpolation, not a dependent one); D and its null are reported all the
    same, so a reader can see whether a fold tests transfer to new
    environments.
(iii) **collection method** — the share of evaluation records whose survey
    method/source also occurs among the fold's calibration records, against
    the same re-splits; fires when fewer than 95 % of them share at least as
    much. Records collected the same way share detection and sampling biases;
    the rule asks whether the split keeps methods apart better than chance.
    Ties count as at least as dependent, so a split whose sharing no
    re-split could lower (two methods mixed over the whole region: every
    fold, whatever its records, holds both) is not blamed for it, and a
    holdout by method (share 0) never fires. Applied only when groups are
    given.

Level of the re-split rules: when the designed split is itself a random split
of the fold's records (exchangeable with the re-splits) and the measure has no
ties, the number of re-splits at least as dependent is uniform on 0..B, so the
rule calls it independent with probability ``(B + 1 - ceil(0.95 B)) / (B + 1)``
= 5 % for B = 19, 99 or 199 (the default).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from splitter.dependence.distance import DistanceDiagnostics, _float, _num, check_folds, distance_searches
from splitter.dependence.environment import (ComponentSpace, CovariateRanges, covariate_ranges, mess,
                                             schoener_d_resplit)
from splitter.dependence.resplit import (
    NULL_LEVEL,
    NULL_SPLITS,
    NullComparison,
    NullSummary,
    check_null_splits,
    shared_group_resplit,
)
from splitter.errors import InputError
from splitter.geo import Points
from splitter.threads import side_by_side, threads

#: Rule (i): share of evaluation records within the range above which a fold is dependent.
DISTANCE_SHARE = 0.5
#: Rules (ii) and (iii): share of re-splits at least as dependent needed for ``independent``.
NULL_SHARE = 1.0 - NULL_LEVEL


def rule_table(null_splits: int = NULL_SPLITS) -> list[dict]:
    """``{name, rule, threshold}`` of every rule; ``rule`` is its one-line statement."""
    resplit = f"{null_splits} random re-splits of the fold's records (same sizes, seeded)"
    return [
        {
            "name": "distance",
            "rule": "dependent when more than the threshold share of evaluation records lie within the "
            "autocorrelation range of a calibration record (a physical threshold)",
            "threshold": DISTANCE_SHARE,
        },
        {
            "name": "environment",
            "rule": f"used when no range is given: dependent when fewer than the threshold share of {resplit} "
            "have a Schoener's D at least as high (environments separated no better than chance)",
            "threshold": NULL_SHARE,
        },
        {
            "name": "collection method",
            "rule": f"dependent when fewer than the threshold share of {resplit} share survey methods between "
            "calibration and evaluation at least as much (ties count as at least as much)",
            "threshold": NULL_SHARE,
        },
    ]


RULES = tuple(rule_table())

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
    "schoener_d_null_median",
    "schoener_d_null_share",
    "shared_method_null_median",
    "shared_method_null_share",
]


@dataclass(frozen=True)
class RuleOutcome:
    """One rule applied to one fold.

    Attributes
    ----------
    rule : str
        ``distance``, ``environment`` or ``collection method``.
    measure : str
        Column of the measured value (``share_within_range``, ``schoener_d``,
        ``shared_method_share``).
    value : float
        The measured value for the designed split.
    fired : bool
        True when the rule marks the fold dependent.
    threshold : float
        Distance rule: the share of evaluation records within the range above
        which it fires. Re-split rules: the share of re-splits at least as
        dependent below which it fires.
    range_km : float or None
        Distance rule: the autocorrelation range.
    null_median, null_share : float or None
        Re-split rules: the re-splits' median and the share of them at least as
        dependent as the split.
    null_splits : int
        Re-splits the null rests on (0 for the distance rule).
    degenerate : bool
        Every re-split gave the split's own value: the measure cannot tell
        splits of these records apart.
    """

    rule: str
    measure: str
    value: float
    fired: bool
    threshold: float
    range_km: float | None = None
    null_median: float | None = None
    null_share: float | None = None
    null_splits: int = 0
    degenerate: bool = False

    def describe(self) -> str:
        """One line, e.g. ``environment: Schoener's D 0.97, 41% of 199 random re-splits at least as high < 95%``."""
        if self.rule == "distance":
            rel = ">" if self.fired else "<="
            return (f"distance: {self.value:.0%} of evaluation records within {self.range_km:g} km "
                    f"{rel} {self.threshold:.0%}")
        what = {"schoener_d": f"Schoener's D {self.value:.2f}",
                "shared_method_share": f"{self.value:.0%} of evaluation records share a method with calibration"}[self.measure]
        rel = "<" if self.fired else ">="
        text = (f"{self.rule}: {what}; {self.null_share:.0%} of {self.null_splits} random re-splits at least as "
                f"dependent (median {self.null_median:.2f}) {rel} {self.threshold:.0%}")
        if self.degenerate:
            text += ", every re-split gives the same value"
        return text

    def to_dict(self) -> dict:
        return {k: _num(getattr(self, k)) for k in self.__dataclass_fields__}

    @classmethod
    def from_dict(cls, doc: dict) -> RuleOutcome:
        """Rebuild from :meth:`to_dict` (null stays None for the optional fields)."""
        return cls(**{k: doc[k] for k in cls.__dataclass_fields__})


@dataclass(frozen=True, eq=False)
class AuditResult:
    """Per-fold dependence measures and verdicts.

    Attributes
    ----------
    fold_labels : tuple[str, ...]
    schoener_d, share_outside_envelope, shared_method_share : ndarray
        NaN where not computed.
    schoener_d_null, shared_method_null : tuple[NullComparison or None, ...]
        Per fold, the measure against random re-splits of the fold's records
        (NullSummary after :meth:`from_dict`: the re-split values are not stored).
    verdicts : tuple[str, ...]
        ``independent``, ``dependent`` or ``insufficient`` per fold.
    outcomes : tuple[tuple[RuleOutcome, ...], ...]
        Per fold, every rule that was applied, with its value and threshold or
        null summary.
    notes : tuple[str, ...]
        Per fold, why it is ``insufficient`` ("" otherwise).
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
    null_splits : int
    seed : int
    """

    fold_labels: tuple
    schoener_d: np.ndarray
    share_outside_envelope: np.ndarray
    shared_method_share: np.ndarray
    schoener_d_null: tuple
    shared_method_null: tuple
    verdicts: tuple
    outcomes: tuple
    notes: tuple
    verdict: str
    rules: list
    distance: DistanceDiagnostics
    ranges: tuple
    min_evaluation: int
    null_splits: int
    seed: int

    def fired(self, i: int) -> tuple:
        """Names of the rules that flag fold ``i`` (position, not label)."""
        return tuple(o.rule for o in self.outcomes[i] if o.fired)

    @property
    def reasons(self) -> tuple:
        """Per fold, one line: the rules that fired with their values, or why the fold is insufficient."""
        out = []
        for verdict, outs, note in zip(self.verdicts, self.outcomes, self.notes):
            if verdict == "insufficient":
                out.append(note)
            elif verdict == "dependent":
                out.append("; ".join(o.describe() for o in outs if o.fired))
            else:
                out.append("no rule fired")
        return tuple(out)

    def to_frame(self) -> pd.DataFrame:
        """One row per fold; columns as in ``COLUMNS``."""
        d = self.distance

        def summary(nulls, attr):
            return [getattr(c, attr) if c is not None else np.nan for c in nulls]

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
                "schoener_d_null_median": summary(self.schoener_d_null, "median"),
                "schoener_d_null_share": summary(self.schoener_d_null, "share"),
                "shared_method_null_median": summary(self.shared_method_null, "median"),
                "shared_method_null_share": summary(self.shared_method_null, "share"),
            },
            columns=COLUMNS,
        )

    def to_dict(self) -> dict:
        """JSON-ready: plain floats/ints/strings, NaN as None."""
        folds = [{k: _num(v) for k, v in row.items()} for row in self.to_frame().to_dict(orient="records")]
        for row, outs in zip(folds, self.outcomes):
            row["outcomes"] = [o.to_dict() for o in outs]
        return {
            "verdict": self.verdict,
            "min_evaluation": int(self.min_evaluation),
            "null_splits": int(self.null_splits),
            "seed": int(self.seed),
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

    @classmethod
    def from_dict(cls, doc: dict) -> AuditResult:
        """Rebuild an audit from :meth:`to_dict` (what ``audit.json`` holds).

        ``audit.json`` also holds keys the audit step writes beside the result
        (``context``, ``absences``): they are not read here.

        What the JSON never held stays empty rather than made up: the raw
        nearest-neighbour distances (see :meth:`DistanceDiagnostics.from_dict`),
        and the re-split values behind the environment and collection-method
        comparisons: ``schoener_d_null`` / ``shared_method_null`` hold a
        :class:`~splitter.dependence.resplit.NullSummary` (the measure, the
        re-splits' median and share) where a median or share was recorded, else
        None. The outcomes carry each applied rule's re-split count and
        whether the measure was degenerate. ``to_dict``, ``to_frame`` and
        ``reasons`` of the result equal the original's.
        """
        rows = doc["folds"]
        distance = DistanceDiagnostics.from_dict(doc)

        def column(key):
            return np.array([r[key] for r in rows], dtype=float)  # None -> NaN

        def nulls(measure, prefix):
            return tuple(
                None if r[f"{prefix}_null_median"] is None and r[f"{prefix}_null_share"] is None
                else NullSummary(_float(r[measure]), _float(r[f"{prefix}_null_median"]), _float(r[f"{prefix}_null_share"]))
                for r in rows)

        verdicts = tuple(str(r["verdict"]) for r in rows)
        ranges = doc["covariate_ranges"]
        return cls(
            fold_labels=distance.fold_labels,
            schoener_d=column("schoener_d"),
            share_outside_envelope=column("share_outside_envelope"),
            shared_method_share=column("shared_method_share"),
            schoener_d_null=nulls("schoener_d", "schoener_d"),
            shared_method_null=nulls("shared_method_share", "shared_method"),
            verdicts=verdicts,
            outcomes=tuple(tuple(RuleOutcome.from_dict(o) for o in r["outcomes"]) for r in rows),
            # The reasons column is the note for an insufficient fold; otherwise it is written from the outcomes.
            notes=tuple(str(r["reasons"]) if v == "insufficient" else "" for r, v in zip(rows, verdicts)),
            verdict=str(doc["verdict"]),
            rules=[dict(r) for r in doc["rules"]],
            distance=distance,
            ranges=tuple(None if ranges[label] is None else CovariateRanges.from_dict({"covariates": ranges[label]})
                         for label in distance.fold_labels),
            min_evaluation=int(doc["min_evaluation"]),
            null_splits=int(doc["null_splits"]),
            seed=int(doc["seed"]),
        )


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


def _null_outcome(rule: str, measure: str, comp: NullComparison) -> RuleOutcome:
    return RuleOutcome(
        rule=rule, measure=measure, value=float(comp.statistic), fired=not comp.better_than_random(NULL_LEVEL),
        threshold=NULL_SHARE, null_median=comp.median, null_share=comp.share, null_splits=comp.null_splits,
        degenerate=comp.degenerate,
    )


def _fold_measures(cal, ev, env_m, env_names, d_space, codes, min_evaluation, null_splits, seed):
    """Per fold: Schoener's D and its re-splits, the share outside the envelope, covariate
    ranges, and the shared survey-method share and its re-splits (NaN/None where not measured).

    ``d_space`` is the fitted reference, None for each fold's pooled records, or False when
    the reference cannot be standardised (D stays NaN). Returns ``(tasks, collect)``: one
    callable per fold (numpy releases the GIL; each fold's re-splits have their own seed)
    and a function that turns their results, in order, into the per-fold columns.
    """
    k = len(cal)

    def one_fold(i):
        d_stat = outside = shared = np.nan
        d_null = m_null = ranges = None
        n_ev, n_cal = ev[i].size, cal[i].size
        enough = n_ev >= min_evaluation and n_cal > 0
        pool = np.concatenate([cal[i], ev[i]])
        is_ev = np.zeros(pool.size, dtype=bool)
        is_ev[n_cal:] = True
        if env_m is not None:
            a, b = env_m[cal[i]], env_m[ev[i]]
            ranges = covariate_ranges(a, b, env_names) if n_cal and n_ev else None
            if enough and d_space is not False:
                try:
                    d_null = schoener_d_resplit(env_m[pool], is_ev, reference=d_space,
                                                null_splits=null_splits, seed=[seed, i, 0])
                    d_stat = d_null.statistic
                except InputError:
                    pass  # too few complete records or no variation: D stays NaN
                a_ok = a[np.isfinite(a).all(axis=1)]
                if a_ok.shape[0]:
                    m = mess(a_ok, b)
                    m = m[np.isfinite(m)]
                    if m.size:
                        outside = float(np.mean(m < 0))
        if codes is not None:
            shared = _shared_share(codes, cal[i], ev[i])
            if enough and np.isfinite(shared):
                m_null = shared_group_resplit(codes[pool], is_ev, null_splits=null_splits, seed=[seed, i, 1])
        return d_stat, outside, shared, d_null, m_null, ranges

    def collect(per_fold):
        d_stat, outside, shared, d_null, m_null, ranges = (list(c) for c in zip(*per_fold)) if k else ([],) * 6
        return (np.array(d_stat, dtype=float), np.array(outside, dtype=float), np.array(shared, dtype=float),
                d_null, m_null, ranges)

    return [lambda i=i: one_fold(i) for i in range(k)], collect


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
    null_splits: int = NULL_SPLITS,
    seed: int = 0,
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
        Autocorrelation range (e.g. ``splitter.estimate_range(...).suggested_block_km``).
    prediction_points : Points, optional
        Sample of prediction locations over the region.
    min_evaluation : int, default 5
        Fewer evaluation records than this makes a fold ``insufficient``.
    null_splits : int, default 199
        Random re-splits per fold for the environment and collection-method
        rules (at least 19).
    seed : int, default 0
        Seed of the re-splits (fold ``i`` and rule draw from
        ``numpy.random.default_rng([seed, i, rule])``).

    Returns
    -------
    AuditResult

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> p = Points.lonlat(rng.uniform(0, 1, 200), rng.uniform(0, 1, 200))
    >>> fold = rng.integers(0, 2, 200)
    >>> res = audit_split(p, [fold != 0, fold != 1], [fold == 0, fold == 1], range_km=50.0)
    >>> res.verdict, res.fired(0)
    ('dependent', ('distance',))
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
    null_splits = check_null_splits(null_splits)
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed must be a non-negative integer, got {seed!r}.")

    env_m = None
    if env is not None:
        env_m = np.asfortranarray(env, dtype=float)  # column by column: see environment._matrix
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

    # Schoener's D standardises on the reference: fitted once for every fold that shares
    # it, else (None) on each fold's own pooled records.
    d_space = None
    if env_m is not None and env_reference is not None:
        try:
            d_space = ComponentSpace.fit(env_reference)
        except InputError:
            d_space = False  # too few complete records or no variation: D stays NaN in every fold
    searches, assemble = distance_searches(points, cal, ev, range_km=range_km, prediction_points=prediction_points,
                                           fold_labels=fold_labels)
    measures, collect = _fold_measures(cal, ev, env_m, env_names, d_space, codes, min_evaluation, null_splits, seed)
    # The distance searches (trees, geodesics) and each fold's environmental measures (numpy
    # on the covariates) share nothing: one pool of one thread per core takes them, largest
    # first, each search on one thread (three threads on two cores cost a fifth more CPU).
    one = 1 if threads() > 1 else None
    done = side_by_side([*(lambda f=f: f(one) for f in searches), *measures])
    dist, measures = assemble(done[: len(searches)]), collect(done[len(searches):])
    d_stat, outside, shared, d_null, m_null, ranges = measures

    verdicts, outcomes, notes = [], [], []
    for i in range(k):  # loop over folds (a handful)
        n_ev, n_cal = ev[i].size, cal[i].size
        if not (n_ev >= min_evaluation and n_cal > 0):
            verdicts.append("insufficient")
            outcomes.append(())
            notes.append(
                f"{n_ev} evaluation record(s) < {min_evaluation}" if n_ev < min_evaluation else "no calibration records"
            )
            continue
        applied = []
        s = dist.share_within_range[i]
        if np.isfinite(s):
            applied.append(RuleOutcome(rule="distance", measure="share_within_range", value=float(s),
                                       fired=bool(s > DISTANCE_SHARE), threshold=DISTANCE_SHARE, range_km=float(range_km)))
        if d_null[i] is not None and np.isfinite(d_null[i].share) and not np.isfinite(s):
            applied.append(_null_outcome("environment", "schoener_d", d_null[i]))
        if m_null[i] is not None and np.isfinite(m_null[i].share):
            applied.append(_null_outcome("collection method", "shared_method_share", m_null[i]))
        outcomes.append(tuple(applied))
        if any(o.fired for o in applied):
            verdicts.append("dependent")
            notes.append("")
        elif applied:
            verdicts.append("independent")
            notes.append("")
        else:
            verdicts.append("insufficient")
            notes.append("no rule could be applied: give a range, covariates or groups")

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
        schoener_d_null=tuple(d_null),
        shared_method_null=tuple(m_null),
        verdicts=tuple(verdicts),
        outcomes=tuple(outcomes),
        notes=tuple(notes),
        verdict=overall,
        rules=rule_table(null_splits),
        distance=dist,
        ranges=tuple(ranges),
        min_evaluation=int(min_evaluation),
        null_splits=null_splits,
        seed=int(seed),
    )
