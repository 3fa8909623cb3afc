"""Performance measures from the confusion matrix at a threshold.

A record is predicted present when its score is ``>= threshold``. Presences are the
positive class; the other class is either true absences (surveyed, not found) or
background points (the available environment, which may contain the species). With
background, "specificity" is only a pseudo-specificity and "commission" a
pseudo-commission: a background point predicted present is not known to be wrong.

True skill statistic: "Assessing the accuracy of species distribution models:
prevalence, kappa and the true skill statistic", Journal of Applied Ecology (2006).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from splitter.errors import InputError

__all__ = ["Measures", "confusion_measures"]

_KINDS = ("background", "absence")


@dataclass(frozen=True)
class Measures:
    """Confusion-matrix measures at one threshold.

    Attributes
    ----------
    tp, fn : int
        Presences predicted present / absent.
    fp, tn : int
        Other records (background or absences) predicted present / absent.
    sensitivity : float
        tp / (tp + fn).
    omission_rate : float
        1 - sensitivity.
    specificity : float
        tn / (tn + fp). With ``other_kind="background"`` this is the
        **pseudo-specificity** (background is not known to be unoccupied).
    commission_rate : float
        1 - specificity (a pseudo-commission rate with background).
    correct_classification_rate : float
        (tp + tn) / all records.
    tss : float
        True skill statistic, sensitivity + specificity - 1.
    kappa : float
        Cohen's kappa (NaN when chance agreement is 1, i.e. one class only predicted and observed).
    other_kind : str
        ``"background"`` or ``"absence"``.
    """

    tp: int
    fn: int
    fp: int
    tn: int
    sensitivity: float
    omission_rate: float
    specificity: float
    commission_rate: float
    correct_classification_rate: float
    tss: float
    kappa: float
    other_kind: str

    def to_dict(self) -> dict:
        """Plain dict; with background it notes that specificity is a pseudo-specificity."""
        out = asdict(self)
        if self.other_kind == "background":
            out["specificity_note"] = "pseudo-specificity: measured on background points, not surveyed absences"
        else:
            out["specificity_note"] = "specificity: measured on surveyed absences"
        return out

    def to_frame(self):
        """One-row pandas DataFrame."""
        import pandas as pd

        return pd.DataFrame([self.to_dict()])


def _scores(values, name: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float).ravel()
    if arr.size == 0:
        raise InputError(f"There are no {name}; the confusion matrix needs at least one of each class.")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"Some {name} are missing or infinite; drop those records first.")
    return arr


def confusion_measures(presence_scores, other_scores, threshold, other_kind: str = "background") -> Measures:
    """Confusion-matrix measures of presences against background or absences.

    Parameters
    ----------
    presence_scores : array_like of float
        Predictions at evaluation presences.
    other_scores : array_like of float
        Predictions at evaluation background points or true absences.
    threshold : float or Threshold
        Scores ``>= threshold`` are predicted present (a
        :class:`splitter.evaluate.Threshold` is accepted).
    other_kind : {"background", "absence"}
        What ``other_scores`` are; with background, specificity is a pseudo-specificity.

    Returns
    -------
    Measures

    Examples
    --------
    >>> m = confusion_measures([0.9, 0.8, 0.2], [0.1, 0.6, 0.3, 0.05], 0.5)
    >>> m.tp, m.fn, m.fp, m.tn
    (2, 1, 1, 3)
    >>> round(m.tss, 3)
    0.417
    """
    if other_kind not in _KINDS:
        raise InputError(f"other_kind must be 'background' or 'absence', got {other_kind!r}.")
    t = float(getattr(threshold, "value", threshold))
    if not np.isfinite(t):
        raise InputError(f"The threshold {t} is not a finite number.")
    pres = _scores(presence_scores, "presence scores")
    other = _scores(other_scores, f"{other_kind} scores")
    tp = int(np.count_nonzero(pres >= t))
    fn = pres.size - tp
    fp = int(np.count_nonzero(other >= t))
    tn = other.size - fp
    total = tp + fn + fp + tn
    sensitivity = tp / (tp + fn)
    specificity = tn / (tn + fp)
    observed = (tp + tn) / total
    # Chance agreement: both say "present" or both say "absent" independently.
    chance = ((tp + fn) * (tp + fp) + (fp + tn) * (fn + tn)) / total**2
    kappa = (observed - chance) / (1.0 - chance) if chance < 1.0 else float("nan")
    return Measures(
        tp=tp,
        fn=fn,
        fp=fp,
        tn=tn,
        sensitivity=float(sensitivity),
        omission_rate=float(1.0 - sensitivity),
        specificity=float(specificity),
        commission_rate=float(1.0 - specificity),
        correct_classification_rate=float(observed),
        tss=float(sensitivity + specificity - 1.0),
        kappa=float(kappa),
        other_kind=other_kind,
    )
