"""What a random split would have claimed: one flexible model, two splits, side by side.

A model that has learned *place* rather than *environment* looks good whenever its
evaluation records sit next to its calibration records, as they do in a random split.
Here the same flexible model (scikit-learn's histogram gradient boosting, seeded and
deterministic) is fitted on each fold's calibration records under two splits of the
same records, using the covariates *and the coordinates* (in km on a projected or
equal-area plane, so that it can learn place), and scored on each fold's evaluation
records:

* ``auc``: full ROC AUC, presences against evaluation background/absences
  (scikit-learn's ``roc_auc_score``);
* ``auc_ratio``: the partial AUC ratio (omission tolerance E) of
  :func:`splitter.evaluate.partial_roc`, with the evaluation background/absence
  scores as the cells of the testing region;
* ``omission_rate``: share of evaluation presences below the threshold chosen from
  calibration presences (default: their 10 % quantile).

The difference ``compared - reference`` of the means over folds (e.g. random minus
spatial blocks) is the share of apparent skill that the reference split does not
confirm: skill that comes from evaluation records sitting next to calibration
records. Significance is not tested here; the per-fold tests of a split stay with
:func:`splitter.evaluate` on the user's own model.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from splitter.errors import InputError
from splitter.evaluate.partial_roc import partial_roc
from splitter.evaluate.thresholds import ThresholdRule, choose_threshold

__all__ = ["OptimismFold", "OptimismResult", "split_optimism", "optimism_model"]

#: Measures compared between the two splits (columns of :meth:`OptimismResult.to_frame`).
OPTIMISM_MEASURES = ("auc", "auc_ratio", "omission_rate")
#: Label of the mean rows and of the difference row in the ``fold`` column.
MEAN = "mean"


def optimism_model(seed: int = 0, max_iter: int = 100):
    """The flexible model both splits are fitted with.

    ``HistGradientBoostingClassifier(max_iter=max_iter, early_stopping=False,
    random_state=seed)``: without early stopping no validation subset is drawn, so
    the fit depends only on the data; the seed only matters for binning samples
    larger than 200,000 records.
    """
    from sklearn.ensemble import HistGradientBoostingClassifier

    return HistGradientBoostingClassifier(max_iter=int(max_iter), early_stopping=False, random_state=int(seed))


@dataclass(frozen=True)
class OptimismFold:
    """One fold of one split, scored with the flexible model.

    Attributes
    ----------
    split : str
        Split name (e.g. ``"blocks"``).
    fold : str
        Fold label.
    n_presence, n_other : int
        Evaluation presences and background/absences scored.
    other_kind : str
        ``"absence"`` or ``"background"``.
    threshold : float
        From calibration presences (rule in :attr:`OptimismResult.threshold_rule`).
    auc, auc_ratio, omission_rate : float
        NaN when the fold has no evaluation presences or no background/absences.
    """

    split: str
    fold: str
    n_presence: int
    n_other: int
    other_kind: str
    threshold: float
    auc: float
    auc_ratio: float
    omission_rate: float

    def to_row(self) -> dict:
        return {"split": self.split, "fold": self.fold, "n_presence": self.n_presence, "n_other": self.n_other,
                "other_kind": self.other_kind, "threshold": self.threshold,
                **{m: getattr(self, m) for m in OPTIMISM_MEASURES}}


@dataclass(frozen=True)
class OptimismResult:
    """The same model under two splits of the same records.

    Attributes
    ----------
    reference, compared : str
        Split names; differences are ``compared - reference`` (e.g. random minus blocks).
    folds : tuple of OptimismFold
        The reference split's folds, then the compared split's.
    means : dict
        ``{split: {measure: mean over folds}}`` (folds with a finite value).
    differences : dict
        ``{measure: means[compared][measure] - means[reference][measure]}``.
    model : str
        The model's description.
    features : tuple of str
        Covariate names, then ``x_km``, ``y_km``.
    threshold_rule : str
    omission : float
        Partial ROC omission tolerance E.
    seed : int
    """

    reference: str
    compared: str
    folds: tuple
    means: dict
    differences: dict
    model: str
    features: tuple
    threshold_rule: str
    omission: float
    seed: int

    @property
    def difference_label(self) -> str:
        return f"{self.compared} - {self.reference}"

    def to_frame(self) -> pd.DataFrame:
        """Per fold and split, then each split's mean and the difference row.

        Columns: ``split, fold, n_presence, n_other, other_kind, threshold, auc,
        auc_ratio, omission_rate``. Mean rows have ``fold = "mean"``; the last row
        has ``split = "<compared> - <reference>"`` and holds the differences.
        """
        rows = [f.to_row() for f in self.folds]
        for name in (self.reference, self.compared):
            own = [f for f in self.folds if f.split == name]
            rows.append({"split": name, "fold": MEAN, "n_presence": sum(f.n_presence for f in own),
                         "n_other": sum(f.n_other for f in own), "other_kind": own[0].other_kind if own else "",
                         "threshold": np.nan, **self.means[name]})
        rows.append({"split": self.difference_label, "fold": MEAN, "n_presence": np.nan, "n_other": np.nan,
                     "other_kind": "", "threshold": np.nan, **self.differences})
        df = pd.DataFrame(rows)
        for c in ("n_presence", "n_other"):
            df[c] = pd.array([None if pd.isna(v) else int(v) for v in df[c]], dtype="Int64")
        return df

    def to_dict(self) -> dict:
        return {"reference": self.reference, "compared": self.compared, "model": self.model,
                "features": list(self.features), "threshold_rule": self.threshold_rule, "omission": self.omission,
                "seed": self.seed, "means": self.means, "differences": self.differences,
                "folds": [f.to_row() for f in self.folds]}


def _coordinates_km(points, n: int) -> tuple[np.ndarray, np.ndarray]:
    """x, y in km: a Points object is projected (equal-area plane if geographic); an (n, 2) array is taken as km."""
    from splitter.geo import Points, equal_area_crs, planar_km

    if isinstance(points, Points):
        crs = equal_area_crs(points) if points.geographic else points.crs
        x, y = planar_km(points, crs)
    else:
        arr = np.asarray(points, float)
        if arr.ndim != 2 or arr.shape[1] != 2:
            raise InputError("points must be splitter.geo.Points or an (n, 2) array of planar coordinates in km.")
        x, y = arr[:, 0], arr[:, 1]
    if x.size != n:
        raise InputError(f"points has {x.size} rows but the fold assignments have {n}; give one point per record.")
    x, y = np.asarray(x, float).copy(), np.asarray(y, float).copy()
    bad = ~(np.isfinite(x) & np.isfinite(y))
    x[bad], y[bad] = np.nan, np.nan
    return x, y


def _check_same_records(reference, compared) -> None:
    same = (len(reference) == len(compared)
            and np.array_equal(reference.record_id.astype(str), compared.record_id.astype(str))
            and np.array_equal(reference.kind.astype(str), compared.kind.astype(str)))
    if not same:
        raise InputError("reference and compared must be splits of the same records (same record_id and kind, "
                         "row by row); design both from one records table.")


def _score_fold(assignment, i, X, model, rule, omission, replicates, seed, split, label) -> OptimismFold:
    from sklearn.base import clone
    from sklearn.metrics import roc_auc_score

    kind = assignment.kind.astype(str)
    cal, ev = assignment.calibration(i), assignment.evaluation(i)
    cal_p = cal[kind[cal] == "presence"]
    cal_o = cal[kind[cal] != "presence"]
    ev_p = ev[kind[ev] == "presence"]
    ev_a = ev[kind[ev] == "absence"]
    ev_o = ev_a if ev_a.size else ev[kind[ev] == "background"]
    other_kind = "absence" if ev_a.size else "background"
    if cal_p.size == 0 or cal_o.size == 0:
        raise InputError(f"split {split}, fold {label}: its calibration set needs presences and background or "
                         "absences to fit the model.")
    est = clone(model)
    est.fit(X[cal], (kind[cal] == "presence").astype(float))  # rows in table order
    thr = choose_threshold(rule, est.predict_proba(X[cal_p])[:, 1]).value
    nan = float("nan")
    if ev_p.size == 0 or ev_o.size == 0:
        return OptimismFold(split, label, int(ev_p.size), int(ev_o.size), other_kind, thr, nan, nan, nan)
    s = est.predict_proba(X[np.concatenate([ev_p, ev_o])])[:, 1]
    s_p, s_o = s[: ev_p.size], s[ev_p.size:]
    auc = float(roc_auc_score(np.r_[np.ones(s_p.size), np.zeros(s_o.size)], s))
    if np.ptp(s_o) > 0:
        ratio = float(partial_roc(s_o, s_p, omission=omission, replicates=replicates, seed=seed).auc_ratio)
    else:  # every evaluation background/absence scored alike: no curve to integrate
        ratio = nan
    return OptimismFold(split, label, int(s_p.size), int(s_o.size), other_kind, thr, auc, ratio,
                        float(np.mean(s_p < thr)))


def split_optimism(
    reference,
    compared,
    covariates,
    points,
    *,
    covariate_names=None,
    names=None,
    fold_names=None,
    threshold="quantile:0.1",
    omission: float = 0.05,
    replicates: int = 19,
    seed: int = 0,
    max_iter: int = 100,
) -> OptimismResult:
    """Fit the same flexible model per fold under two splits of the same records and compare.

    Parameters
    ----------
    reference, compared : FoldAssignment
        Two splits of the same records (same ``record_id`` and ``kind`` row by row),
        e.g. spatial blocks (reference) and a random split (compared). Buffer gaps of
        either are honoured (a gap record is not calibration for that fold).
    covariates : array_like, shape (n, p)
        Covariates at the records (NaN allowed: the model handles missing values).
    points : splitter.geo.Points or array_like, shape (n, 2)
        Record locations. Points are projected to km (an equal-area plane centred on
        the records when geographic); an array is taken as planar km already.
    covariate_names : sequence of str, optional
    names : (str, str), optional
        Split names; default the assignments' ``method``.
    fold_names : (dict, dict), optional
        Fold number -> label for each split; default the fold numbers.
    threshold : str or ThresholdRule, default "quantile:0.1"
        From calibration presences' in-sample scores.
    omission : float, default 0.05
        Partial ROC omission tolerance E.
    replicates : int, default 19
        Passed to :func:`partial_roc`; only its observed ratio is kept here, which
        does not depend on the replicates.
    seed : int, default 0
        The model's ``random_state`` and the partial ROC's seed.
    max_iter : int, default 100
        Boosting iterations.

    Returns
    -------
    OptimismResult

    Raises
    ------
    InputError
        Splits of different records, mismatched shapes, or a fold whose calibration
        set lacks presences or background/absences.

    Examples
    --------
    >>> from splitter.partition.assignment import FoldAssignment
    >>> rng = np.random.default_rng(0)
    >>> xy = rng.uniform(0, 100, size=(800, 2))
    >>> kind = np.where(rng.random(800) < 0.5, "presence", "absence")
    >>> ids = np.arange(800).astype(str)
    >>> blocks = FoldAssignment.from_folds(ids, kind, 1 + (xy[:, 0] // 50).astype(int) + 2 * (xy[:, 1] // 50).astype(int), method="blocks")
    >>> random = FoldAssignment.from_folds(ids, kind, rng.permutation(np.arange(800) % 4) + 1, method="random")
    >>> r = split_optimism(blocks, random, rng.normal(size=(800, 1)), xy)
    >>> list(r.to_frame()["split"].unique())
    ['blocks', 'random', 'random - blocks']
    """
    rule = threshold if isinstance(threshold, ThresholdRule) else ThresholdRule.parse(threshold)
    _check_same_records(reference, compared)
    n = len(reference)
    X = np.asarray(covariates, float)
    if X.ndim == 1:
        X = X[:, None]
    if X.ndim != 2 or X.shape[0] != n:
        raise InputError(f"covariates must have one row per record ({n}), got shape {X.shape}.")
    p = X.shape[1]
    cov_names = tuple(covariate_names) if covariate_names is not None else tuple(f"covariate_{j + 1}" for j in range(p))
    if len(cov_names) != p:
        raise InputError(f"covariate_names has {len(cov_names)} names for {p} covariate columns.")
    x, y = _coordinates_km(points, n)
    X = np.column_stack([X, x, y])
    ref_name, cmp_name = names if names is not None else (reference.method, compared.method)
    if str(ref_name) == str(cmp_name):
        raise InputError(f"names: both splits are called {ref_name!r}; give two names, e.g. names=('blocks', 'random').")
    labels = fold_names or ({}, {})
    model = optimism_model(seed, max_iter)
    folds = []
    # One OpenMP thread: on a shared or busy machine the boosting's threads wait on
    # each other far longer than the small fits take (tens of times slower), and the
    # result does not depend on the thread count.
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="openmp"):
        for assignment, name, lab in ((reference, str(ref_name), labels[0]), (compared, str(cmp_name), labels[1])):
            for i in assignment.folds:
                folds.append(_score_fold(assignment, i, X, model, rule, omission, replicates, seed, name,
                                         str(lab.get(i, i))))
    means = {}
    for name in (str(ref_name), str(cmp_name)):
        own = [f for f in folds if f.split == name]
        means[name] = {m: _mean([getattr(f, m) for f in own]) for m in OPTIMISM_MEASURES}
    diffs = {m: means[str(cmp_name)][m] - means[str(ref_name)][m] for m in OPTIMISM_MEASURES}
    return OptimismResult(
        reference=str(ref_name), compared=str(cmp_name), folds=tuple(folds), means=means, differences=diffs,
        model=(f"HistGradientBoostingClassifier(max_iter={int(max_iter)}, early_stopping=False, "
               f"random_state={int(seed)}) on the covariates and the coordinates (km)"),
        features=cov_names + ("x_km", "y_km"), threshold_rule=str(rule), omission=float(omission), seed=int(seed),
    )


def _mean(values) -> float:
    v = np.asarray(values, float)
    ok = np.isfinite(v)
    return float(v[ok].mean()) if ok.any() else float("nan")
