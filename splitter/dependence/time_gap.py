"""How far apart in time a fold's evaluation and calibration records are.

A split can be independent in space and still evaluate on records from the same
seasons and years the model was calibrated on; a model that learned a year's
conditions then looks better than it will be on later data. For each evaluation
record with a date, the gap is the time to the nearest dated calibration record
(years; 0 when one shares its date); a fold is summarised by the median and 10th
percentile of those gaps, and by the share of its evaluation records dated after
every calibration record (1 for a "calibrate on the past, evaluate on the future"
design). It is a description, not a rule: no threshold of ours says how many years
make records independent.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["TimeGaps", "time_gaps"]


@dataclass(frozen=True)
class TimeGaps:
    """Per fold (in fold order): median and 10th percentile gap in years, share of evaluation
    records later than every calibration record, and how many evaluation records had a date."""

    median_years: np.ndarray
    p10_years: np.ndarray
    later_share: np.ndarray
    n_dated: np.ndarray


def time_gaps(times, calibration, evaluation) -> TimeGaps:
    """Time gaps of each fold's evaluation records to its calibration records.

    Parameters
    ----------
    times : array_like of float
        Decimal years per record (NaN = no date: left out).
    calibration, evaluation : list of index arrays
        Per fold, the calibration and evaluation records.

    Examples
    --------
    >>> t = np.array([2001, 2002, 2003, 2010, 2011, np.nan])
    >>> g = time_gaps(t, [np.array([0, 1, 2])], [np.array([3, 4, 5])])
    >>> g.median_years.tolist(), g.later_share.tolist(), g.n_dated.tolist()
    ([7.5], [1.0], [2])
    """
    t = np.asarray(times, dtype=float)
    k = len(evaluation)
    med, p10, later, dated = (np.full(k, np.nan), np.full(k, np.nan), np.full(k, np.nan), np.zeros(k, np.int64))
    for i, (cal, ev) in enumerate(zip(calibration, evaluation)):
        tc = np.sort(t[np.asarray(cal, dtype=np.int64)])
        tc = tc[np.isfinite(tc)]
        te = t[np.asarray(ev, dtype=np.int64)]
        te = te[np.isfinite(te)]
        dated[i] = te.size
        if tc.size == 0 or te.size == 0:
            continue
        # Nearest calibration date: the neighbours on either side in the sorted dates.
        j = np.searchsorted(tc, te)
        below = np.abs(te - tc[np.clip(j - 1, 0, tc.size - 1)])
        above = np.abs(tc[np.clip(j, 0, tc.size - 1)] - te)
        gap = np.minimum(below, above)
        med[i], p10[i] = np.median(gap), np.percentile(gap, 10)
        later[i] = float(np.mean(te > tc[-1]))
    return TimeGaps(median_years=med, p10_years=p10, later_share=later, n_dated=dated)
