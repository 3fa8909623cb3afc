"""Folds from a grouping column: survey method, data source, observer or period."""

from __future__ import annotations

import numpy as np

from splitter.errors import InputError


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
        raise InputError("holdout-group needs --calibrate-on and --evaluate-on (group values, comma-separated).")
    if cal & ev:
        raise InputError(f"--calibrate-on and --evaluate-on share {', '.join(sorted(cal & ev))}; a group cannot be on both sides.")
    present = set(g.tolist())
    for opt, vals in (("--calibrate-on", cal), ("--evaluate-on", ev)):
        missing = sorted(vals - present)
        if missing:
            raise InputError(f"{opt}: no record has group value {', '.join(missing)}; values are: {', '.join(sorted(present - {''}))}.")
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
