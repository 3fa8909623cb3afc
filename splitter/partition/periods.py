"""Time splits: contiguous time windows, a one-way earlier/later holdout, and
space-and-time designs (evaluate the later period inside held-out blocks).

Times are years (``2016``), decimal years or ISO dates (``2016-05-31``); they
are compared as decimal years. Records without a time (typically background
points) are not tied to a period: they are dealt at random (seeded), like
records without a group value.
"""

from __future__ import annotations

import numpy as np

from splitter.errors import InputError
from splitter.columns import find_column
from splitter.partition.base import FoldRule, RuleFolds, RuleInput, check_fold_count

YEAR = "year"  # the time column when none is named
# When no "year" column is there: Darwin Core's term for the date, then a plain "date".
DATE_NAMES = ("eventDate", "date")


def time_column_of(table, time_column: str) -> str:
    """The column holding the times: ``time_column`` in any case; for the default
    ``year``, else an ``eventDate`` or ``date`` column."""
    return find_column(table, time_column, "time_column", DATE_NAMES if time_column == YEAR else ())


def _times(data: RuleInput, time_column: str) -> tuple[np.ndarray, str]:
    """Decimal years of the usable rows, and the column they came from."""
    col = time_column_of(data.table, time_column)
    return decimal_years(data.table[col].to_numpy(object)[data.rows], f"time_column={col!r}"), col


def decimal_years(values, parameter: str = "time_column") -> np.ndarray:
    """Times as decimal years (NaN where blank).

    Examples
    --------
    >>> decimal_years(["2016", "", "2020.5", "2021-07-02"]).round(3).tolist()
    [2016.0, nan, 2020.5, 2021.499]
    """
    import pandas as pd

    raw = pd.Series(np.asarray(values, object))
    s = raw.astype(str).str.strip()
    blank = raw.isna() | s.isna() | s.isin(["", "nan", "NaN", "None", "<NA>", "NaT"])
    num = pd.to_numeric(s.where(~blank), errors="coerce")
    bad = num.isna() & ~blank
    if bad.any():
        dates = pd.to_datetime(s.where(bad), errors="coerce", format="ISO8601")
        still = dates.isna() & bad
        if still.any():
            first = int(np.flatnonzero(still.to_numpy())[0])
            raise InputError(f"{parameter}: value {s.iloc[first]!r} (row {first + 1} of the usable records) is not a year "
                             "or an ISO date (YYYY-MM-DD).")
        start = pd.to_datetime(dates.dt.year.astype("Int64").astype(str) + "-01-01", errors="coerce")
        length = np.where(dates.dt.is_leap_year, 366.0, 365.0)
        frac = (dates - start).dt.total_seconds() / (length * 86400.0)
        num = num.where(~bad, dates.dt.year + frac)
    return num.to_numpy(float)


def time_windows(times, is_presence, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Cut times into ``k`` contiguous windows with presence counts as even as possible.

    Cuts fall between distinct time values (records of one year share a
    window), placed so the presence counts per window are as even as possible
    (see ``_even_cuts``).

    Returns
    -------
    window : ndarray of int, 1..k (0 for records without a time)
    edges : ndarray of float, the k - 1 cut times (window j+1 starts at edges[j])

    Examples
    --------
    >>> w, edges = time_windows([2001, 2001, 2002, 2002, 2004, 2004, np.nan], [True] * 7, 3)
    >>> w.tolist(), edges.tolist()
    ([1, 1, 2, 2, 3, 3, 0], [2002.0, 2004.0])
    """
    t = np.asarray(times, float)
    pres = np.asarray(is_presence, bool)
    known = np.isfinite(t)
    tp = np.sort(t[pres & known])
    distinct = np.unique(tp)
    if distinct.size < k:
        raise InputError(f"periods={k}: the presences span only {distinct.size} distinct time value(s); "
                         "use fewer periods.")
    # For each candidate cut (a distinct value), how many presences fall before it.
    before = np.searchsorted(tp, distinct, side="left")
    edges = _even_cuts(before, tp.size, k)
    edges = distinct[edges]
    edges = np.asarray(edges, float)
    window = np.zeros(t.size, np.int64)
    window[known] = np.searchsorted(edges, t[known], side="right") + 1
    return window, edges


def _even_cuts(before: np.ndarray, n: int, k: int, exhaustive: int = 20_000) -> np.ndarray:
    """Indices (into the distinct times) where windows 2..k start.

    Every choice is tried when there are few (up to ``exhaustive``), keeping the
    one with the smallest spread of presence counts (then the smallest sum of
    squared deviations); otherwise each cut goes to the distinct time nearest
    the j/k share of presences.
    """
    from itertools import combinations
    from math import comb

    m = before.size
    if comb(m - 1, k - 1) <= exhaustive:
        cuts = np.array(list(combinations(range(1, m), k - 1)), np.int64)
        bounds = np.column_stack([np.zeros(len(cuts), np.int64), before[cuts], np.full(len(cuts), n)])
        counts = np.diff(bounds, axis=1)
        score = np.lexsort((((counts - n / k) ** 2).sum(axis=1), counts.max(axis=1) - counts.min(axis=1)))
        return cuts[score[0]]
    out, lo = [], 1
    for j, target in enumerate(n * np.arange(1, k) / k):
        cand = np.arange(lo, m - (k - 2 - j))  # leave a distinct value for every later window
        best = int(cand[np.argmin(np.abs(before[cand] - target))])
        out.append(best)
        lo = best + 1
    return np.asarray(out, np.int64)


def _deal(n: int, k: int, seed: int) -> np.ndarray:
    return (np.random.default_rng(seed).permutation(n) % k) + 1


class Periods(FoldRule):
    """Folds are ``periods`` contiguous time windows of ``time_column`` (a year or
    a date), cut so presence counts per window are as even as possible; records
    without a time are dealt to the windows at random (seeded).

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import Periods  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": range(6), "y": [0] * 6,
    ...                     "year": [2001, 2001, 2002, 2003, 2004, 2004]})
    >>> rule = Periods(time_column="year", periods=3)
    >>> rule
    Periods(periods=3)
    >>> a = rule.assign(pts, crs="EPSG:3035")
    >>> a.fold.tolist(), a.parameters.fold_periods
    ([1, 1, 2, 2, 3, 3], {'1': [2001.0, 2001.0], '2': [2002.0, 2003.0], '3': [2004.0, 2004.0]})
    """

    method = "period"

    def __init__(self, time_column="year", periods=5, buffer=0.0, seed=0, env=(), covariates=()):
        if not time_column:
            raise InputError("time_column=None: name the column that holds each record's year or date.")
        self.time_column = str(time_column)
        try:
            self.periods = check_fold_count(periods)
        except InputError:
            raise InputError(f"periods={periods!r}: need a whole number of at least 2 periods.") from None
        self._common(buffer, seed, env, covariates)

    @property
    def folds(self) -> int:
        return self.periods

    def _folds(self, data: RuleInput) -> RuleFolds:
        t, col = _times(data, self.time_column)
        window, edges = time_windows(t, data.is_presence, self.periods)
        blank = np.flatnonzero(~np.isfinite(t))
        window[blank] = _deal(blank.size, self.periods, self.seed)
        spans = {}
        for q in range(1, self.periods + 1):
            tq = t[(window == q) & np.isfinite(t)]
            spans[str(q)] = [float(tq.min()), float(tq.max())] if tq.size else []
        return RuleFolds(window, self.periods, measured={"time_column": col, "fold_periods": spans})


def _cut(value) -> float:
    try:
        return float(decimal_years([value], "calibrate_before")[0])
    except InputError:
        raise InputError(f"calibrate_before={value!r}: give a year (e.g. 2018) or an ISO date.") from None


class HoldoutPeriod(FoldRule):
    """One-way design in time: calibrate on records before ``calibrate_before``
    (fold 0), evaluate on the rest (fold 1). Records without a time are split
    evenly at random between the two sides (seeded).

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import HoldoutPeriod  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": range(4), "y": [0] * 4, "year": [2010, 2015, 2019, 2021]})
    >>> HoldoutPeriod(time_column="year", calibrate_before=2018).assign(pts, crs="EPSG:3035").fold.tolist()
    [0, 0, 1, 1]
    """

    method = "holdout-period"
    one_way = True

    def __init__(self, time_column="year", calibrate_before=None, buffer=0.0, seed=0, env=(), covariates=()):
        if not time_column:
            raise InputError("time_column=None: name the column that holds each record's year or date.")
        if calibrate_before is None:
            raise InputError("calibrate_before=None: give the year (or date) where evaluation starts.")
        self.time_column = str(time_column)
        self.calibrate_before = calibrate_before
        self._cut = _cut(calibrate_before)
        if not np.isfinite(self._cut):
            raise InputError(f"calibrate_before={calibrate_before!r}: give a year (e.g. 2018) or an ISO date.")
        self._common(buffer, seed, env, covariates)

    def _folds(self, data: RuleInput) -> RuleFolds:
        t, col = _times(data, self.time_column)
        fold = np.where(t < self._cut, 0, 1).astype(np.int64)
        blank = np.flatnonzero(~np.isfinite(t))
        fold[blank] = _deal(blank.size, 2, self.seed) - 1
        pres = data.is_presence
        for side, name in ((0, "before"), (1, "from")):
            if not np.any(pres & (fold == side) & np.isfinite(t)):
                raise InputError(f"calibrate_before={self.calibrate_before!r}: no presence record dates {name} it; "
                                 "choose a year inside the records' time span.")
        return RuleFolds(fold, 1, measured={"time_column": col, "calibrate_before": self._cut})


class LaterPeriod(FoldRule):
    """A space-and-time design: ``rule``'s folds, evaluated on the later period.

    Fold i evaluates the records of ``rule``'s fold i dated from
    ``calibrate_before`` on, and calibrates on the earlier records outside fold
    i; the rest (earlier records inside fold i, later records of other folds)
    is left out of fold i's calibration set, as buffer gaps are. Records
    without a time keep ``rule``'s fold.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import LaterPeriod  # the public class reads data frames
    >>> from splitter import Groups
    >>> pts = pd.DataFrame({"x": range(4), "y": [0] * 4, "site": ["a", "a", "b", "b"],
    ...                     "year": [2010, 2020, 2010, 2020]})
    >>> rule = LaterPeriod(Groups("site"), time_column="year", calibrate_before=2015)
    >>> a = rule.assign(pts, crs="EPSG:3035")
    >>> a.evaluation(1).tolist(), a.calibration(1).tolist()
    ([1], [2])
    """

    one_way = False

    def __init__(self, rule, time_column="year", calibrate_before=None):
        if not isinstance(rule, FoldRule) or isinstance(rule, (LaterPeriod, HoldoutPeriod, Periods)) or rule.one_way:
            raise InputError(f"rule={rule!r}: give a rule with k folds (blocks, hexagons, checkerboard, clusters, "
                             "groups, random) to evaluate on the later period.")
        self.rule = rule
        self._time = HoldoutPeriod(time_column, calibrate_before)
        self.time_column = self._time.time_column
        self.calibrate_before = calibrate_before
        self.method = rule.method
        self.buffer, self.seed = rule.buffer, rule.seed
        self.env, self.covariates = rule.env, rule.covariates

    @property
    def folds(self):
        return getattr(self.rule, "folds", None)

    def design_parameters(self, n_folds: int):
        return self.rule.design_parameters(n_folds).replace(rule=self)

    def _folds(self, data: RuleInput) -> RuleFolds:
        inner = self.rule._folds(data)
        t, col = _times(data, self.time_column)
        dated = np.isfinite(t)
        later = dated & (t >= self._time._cut)
        earlier = dated & ~later
        fold = inner.fold.copy()
        fold[earlier & (fold >= 1)] = 0
        for q in range(1, inner.n_folds + 1):
            if not np.any((fold == q) & data.is_presence):
                raise InputError(f"calibrate_before={self.calibrate_before!r}: fold {q} has no presence records from "
                                 "that time on; choose an earlier year or fewer folds.")
        rows, folds_ = [inner.gap_rows], [inner.gap_folds]
        home = inner.fold
        for q in range(1, inner.n_folds + 1):
            out = np.flatnonzero((earlier & (home == q)) | (later & (fold >= 1) & (fold != q)))
            rows.append(out)
            folds_.append(np.full(out.size, q, np.int64))
        measured = {k: v for k, v in inner.measured.items() if not k.endswith("_imbalance")}  # re-measured on the final folds
        measured.update(time_column=col, calibrate_before=self._time._cut)
        return RuleFolds(fold, inner.n_folds, reason=inner.reason, measured=measured, geometry_crs=inner.geometry_crs,
                         gap_rows=np.concatenate(rows).astype(np.int64), gap_folds=np.concatenate(folds_).astype(np.int64))
