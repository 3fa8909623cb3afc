"""Folds from a grouping column (survey method, data source, observer), random folds and leave-one-out.

The functions take arrays; ``Groups``, ``HoldoutGroup``, ``RandomFolds`` and ``LeaveOneOut`` are the rules.
"""

from __future__ import annotations

import numpy as np

from splitter.errors import InputError
from splitter.partition.base import FoldRule, RuleFolds, RuleInput, check_fold_count, names


def _deal_evenly(n: int, k: int, rng) -> np.ndarray:
    """Values 1..k in a seeded order with counts differing by at most one."""
    return (rng.permutation(n) % k) + 1


def group_folds(groups: np.ndarray, is_presence: np.ndarray, seed: int = 0) -> tuple[np.ndarray, list[str]]:
    """One fold per group value (leave-one-group-out).

    Folds are numbered by presence count, largest first (name breaks ties).
    Records with an empty group value (typically background points, which
    have no survey method) are not tied to any group: they are dealt to the
    folds evenly at random (seeded), so every fold has background in both
    its calibration and evaluation sets.

    Returns
    -------
    fold : ndarray of int (1..k)
    names : list of str, the group value of each fold
    """
    g = np.asarray(groups, object).astype(str)
    g = np.char.strip(g.astype(str))
    pres = np.asarray(is_presence, bool)
    has = g != ""
    names = np.unique(g[has & pres]) if (has & pres).any() else np.unique(g[has])
    if names.size < 2:
        raise InputError(f"the group column has {names.size} value(s) among presences; leave-one-group-out needs at least 2.")
    counts = np.array([np.sum(pres & (g == v)) for v in names])
    order = np.lexsort((names, -counts))
    names = names[order]
    fold = np.zeros(g.size, np.int64)
    known = np.isin(g, names)
    by_name = np.argsort(names)
    fold[known] = by_name[np.searchsorted(names[by_name], g[known])] + 1
    rest = np.flatnonzero(~known)
    fold[rest] = _deal_evenly(rest.size, names.size, np.random.default_rng(seed))
    return fold, [str(v) for v in names]


def holdout_folds(groups: np.ndarray, calibrate_on: list[str], evaluate_on: list[str], seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """One-way design: calibrate on some groups (fold 0), evaluate on others (fold 1).

    Records in neither list are dropped (reason ``not-in-holdout-groups``);
    records with an empty group value (background) are split evenly at random
    between calibration and evaluation (seeded).

    Returns
    -------
    fold : ndarray of int (0, 1 or -1 for dropped)
    dropped : ndarray of str
    """
    g = np.char.strip(np.asarray(groups, object).astype(str))
    cal = set(calibrate_on)
    ev = set(evaluate_on)
    if not cal or not ev:
        raise InputError("holdout-group needs calibrate_on and evaluate_on (group values).")
    if cal & ev:
        raise InputError(f"calibrate_on and evaluate_on share {', '.join(sorted(cal & ev))}; a group cannot be on both sides.")
    present = set(g.tolist())
    for opt, vals in (("calibrate_on", cal), ("evaluate_on", ev)):
        missing = sorted(vals - present)
        if missing:
            raise InputError(f"{opt}={sorted(vals)!r}: no record has group value {', '.join(missing)}; values are: {', '.join(sorted(present - {''}))}.")
    fold = np.full(g.size, -1, np.int64)
    fold[np.isin(g, list(cal))] = 0
    fold[np.isin(g, list(ev))] = 1
    blank = np.flatnonzero(g == "")
    fold[blank] = _deal_evenly(blank.size, 2, np.random.default_rng(seed)) - 1
    dropped = np.where(fold < 0, "not-in-holdout-groups", "").astype(object)
    return fold, dropped


def random_folds(kind: np.ndarray, k: int, seed: int = 0) -> np.ndarray:
    """Plain k-fold: records dealt at random, each kind separately so counts are even.

    This is the dependent baseline: neighbours land in different folds.
    """
    kind = np.asarray(kind, object)
    rng = np.random.default_rng(seed)
    fold = np.zeros(kind.size, np.int64)
    for k_name in sorted(set(kind.tolist())):
        idx = np.flatnonzero(kind == k_name)
        fold[idx] = _deal_evenly(idx.size, k, rng)
    return fold


def leave_one_out_folds(is_presence: np.ndarray, max_folds: int = 1000) -> np.ndarray:
    """Each presence is its own fold; everything else is calibration only (fold 0).

    With a buffer this is spatial leave-one-out: records near the held-out
    presence are left out of its calibration set.
    """
    pres = np.asarray(is_presence, bool)
    n = int(pres.sum())
    if n < 2:
        raise InputError("leave-one-out needs at least 2 presences.")
    if n > max_folds:
        raise InputError(f"leave-one-out on {n} presences makes {n} folds; it is meant for small samples (<= {max_folds}). Use blocks instead.")
    fold = np.zeros(pres.size, np.int64)
    fold[pres] = np.arange(1, n + 1)
    return fold


def _group_values(rule, data: RuleInput) -> np.ndarray:
    if rule.group_column is None:
        if data.groups is None:
            raise InputError(f"{rule.method} needs group_column (e.g. the survey method or data source column).")
        return np.asarray(data.groups, object).astype(str)
    return data.column(rule.group_column, "group_column").astype(str)


class Groups(FoldRule):
    """Leave-one-group-out: one fold per value of ``group_column`` (survey
    method, data source, observer). Records with no group value (background)
    are dealt to the folds at random (seeded). From scikit-learn, ``groups``
    given to ``split`` stands in for the column.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import Groups  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": range(5), "y": [0] * 5,
    ...                     "method": ["trap", "trap", "net", "trap", "net"]})
    >>> rule = Groups(group_column="method")
    >>> rule
    Groups(group_column='method')
    >>> a = rule.assign(pts, crs="EPSG:3035")
    >>> a.fold.tolist(), a.parameters.fold_groups
    ([1, 1, 2, 1, 2], {'1': 'trap', '2': 'net'})
    """

    method = "groups"

    def __init__(self, group_column=None, buffer=0.0, seed=0, env=(), covariates=()):
        self.group_column = None if group_column is None else str(group_column)
        self._common(buffer, seed, env, covariates)

    def _folds(self, data: RuleInput) -> RuleFolds:
        fold, labels = group_folds(_group_values(self, data), data.is_presence, seed=self.seed)
        measured = {"fold_groups": {str(i + 1): n for i, n in enumerate(labels)}}
        if self.group_column is not None:
            measured["group_column"] = self.group_column
        return RuleFolds(fold, len(labels), measured=measured)


class HoldoutGroup(FoldRule):
    """One-way design: calibrate on the groups ``calibrate_on``, evaluate on
    ``evaluate_on`` (values of ``group_column``). Records in neither are
    dropped (``not-in-holdout-groups``); records with no group value are split
    evenly at random between the two sides (seeded).

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import HoldoutGroup  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": range(5), "y": [0] * 5,
    ...                     "source": ["museum", "survey", "survey", "museum", "atlas"]})
    >>> a = HoldoutGroup("source", calibrate_on="museum", evaluate_on="survey").assign(pts, crs="EPSG:3035")
    >>> a.fold.tolist(), a.dropped.tolist()
    ([0, 1, 1, 0, -1], ['', '', '', '', 'not-in-holdout-groups'])
    """

    method = "holdout-group"
    one_way = True

    def __init__(self, group_column=None, calibrate_on=(), evaluate_on=(), buffer=0.0, seed=0, env=(), covariates=()):
        self.group_column = None if group_column is None else str(group_column)
        self.calibrate_on = names(calibrate_on, "calibrate_on")
        self.evaluate_on = names(evaluate_on, "evaluate_on")
        if not self.calibrate_on or not self.evaluate_on:
            raise InputError("holdout-group needs calibrate_on and evaluate_on (group values, comma-separated).")
        both = sorted(set(self.calibrate_on) & set(self.evaluate_on))
        if both:
            raise InputError(f"calibrate_on and evaluate_on share {', '.join(both)}; a group cannot be on both sides.")
        self._common(buffer, seed, env, covariates)

    def _folds(self, data: RuleInput) -> RuleFolds:
        fold, why = holdout_folds(_group_values(self, data), list(self.calibrate_on), list(self.evaluate_on), seed=self.seed)
        if not np.any((fold == 1) & data.is_presence):
            raise InputError(f"evaluate_on={list(self.evaluate_on)!r}: the evaluation groups hold no presence records.")
        measured = {"calibrate_on": self.calibrate_on, "evaluate_on": self.evaluate_on}
        if self.group_column is not None:
            measured["group_column"] = self.group_column
        return RuleFolds(fold, 1, reason=why, measured=measured)


class RandomFolds(FoldRule):
    """Plain k-fold: records dealt at random, each kind separately so counts are
    even. The dependent baseline a spatial design is compared against.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import RandomFolds  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": range(6), "y": [0] * 6})
    >>> a = RandomFolds(folds=3, seed=1).assign(pts, crs="EPSG:3035")
    >>> sorted(a.fold.tolist())
    [1, 1, 2, 2, 3, 3]
    """

    method = "random"

    def __init__(self, folds=5, buffer=0.0, seed=0, env=(), covariates=()):
        self.folds = check_fold_count(folds)
        self._common(buffer, seed, env, covariates)

    def _folds(self, data: RuleInput) -> RuleFolds:
        return RuleFolds(random_folds(data.kind, self.folds, seed=self.seed), self.folds)


class LeaveOneOut(FoldRule):
    """Each presence is its own fold; everything else is calibration only. With
    a ``buffer`` this is spatial leave-one-out. Meant for small samples.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import LeaveOneOut  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": [0, 10e3, 20e3, 5e3], "y": [0] * 4,  # metres
    ...                     "kind": ["presence", "presence", "presence", "background"]})
    >>> a = LeaveOneOut(buffer=6).assign(pts, crs="EPSG:3035")
    >>> a.fold.tolist(), a.gaps(1).tolist()
    ([1, 2, 3, 0], [3])
    """

    method = "leave-one-out"

    def __init__(self, buffer=0.0, seed=0, env=(), covariates=(), max_folds=1000):
        self.max_folds = int(max_folds)
        self._common(buffer, seed, env, covariates)

    def _folds(self, data: RuleInput) -> RuleFolds:
        fold = leave_one_out_folds(data.is_presence, self.max_folds)
        return RuleFolds(fold, int(fold.max()))
