"""What each fold's tests can show, known before any model is fitted.

A fold with few evaluation presences cannot reject "no predictive ability" however
good the model: if all n evaluation presences are predicted present, the cumulative
binomial test's p-value is a**n, where a is the share of the testing region
predicted present, so it can reject at level alpha only when a <= alpha**(1/n).
With Holm's adjustment across k folds the smallest p must pass alpha/k, so the
bound for the first step is (alpha/k)**(1/n). A fold whose bound is small forces
any model to predict a small area present to be found significant; one whose bound
is below 0.5 cannot be significant unless the model calls less than half of the
region suitable. The partial ROC's bootstrap samples round(0.5 n) presences; when
that times the omission tolerance E is below 1 no presence may be omitted.

A buffer removes calibration records near each fold's evaluation records; the
share it removes is what the independence costs the model in calibration data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from splitter.errors import InputError

__all__ = ["FoldCheck", "FoldChecks", "check_folds"]

# Conventions (ours): warn when a fold's binomial bound is below one half, or when the
# buffer takes more than half of a fold's calibration records.
LOW_BOUND = 0.5
HEAVY_BUFFER = 0.5


@dataclass(frozen=True)
class FoldCheck:
    """One fold's evaluation counts and the most its tests can show.

    Attributes
    ----------
    fold : int
    evaluation_presences, evaluation_absences, evaluation_background : int
    binomial_bound : float
        Largest share of area a model may predict present and still have the
        binomial test reject at ``alpha`` if every evaluation presence is hit:
        ``alpha ** (1 / n)`` (with Holm, ``(alpha / k) ** (1 / n)``); 0 with no presence.
    can_omit : bool
        Whether a partial-ROC bootstrap sample (round(0.5 n) presences) may omit one
        at the omission tolerance E.
    calibration_presences, calibration_records : int
        Kept for calibration after the buffer.
    buffer_presence_share, buffer_record_share : float
        Share of the fold's calibration presences / records that the buffer removed.
    """

    fold: int
    evaluation_presences: int
    evaluation_absences: int
    evaluation_background: int
    binomial_bound: float
    can_omit: bool
    calibration_presences: int
    calibration_records: int
    buffer_presence_share: float
    buffer_record_share: float

    def warnings(self) -> list[str]:
        out = []
        n = self.evaluation_presences
        if n and self.binomial_bound < LOW_BOUND:
            out.append(f"fold {self.fold} has {n} evaluation presence{'s' if n != 1 else ''}: the binomial test can "
                       f"reject only if the model predicts at most {self.binomial_bound:.0%} of the area present")
        if self.buffer_record_share > HEAVY_BUFFER:
            out.append(f"the buffer removes {self.buffer_record_share:.0%} of fold {self.fold}'s calibration records "
                       f"({self.buffer_presence_share:.0%} of its calibration presences)")
        return out


@dataclass(frozen=True)
class FoldChecks:
    """Per-fold testability of a design (see the module notes)."""

    folds: tuple
    alpha: float
    adjust: str
    omission: float

    def warnings(self) -> list[str]:
        return [w for f in self.folds for w in f.warnings()]

    def to_dict(self) -> dict:
        return {"alpha": self.alpha, "adjust": self.adjust, "omission": self.omission,
                "folds": [f.__dict__.copy() for f in self.folds], "warnings": self.warnings()}


def check_folds(assignment, alpha: float = 0.05, adjust: str = "holm", omission: float = 0.05) -> FoldChecks:
    """What each fold of ``assignment`` can show (see the module notes).

    Parameters
    ----------
    assignment : FoldAssignment
    alpha : float
        Significance level the folds will be tested at.
    adjust : {"holm", "none"}
        Whether fold p-values will be adjusted across folds (Holm).
    omission : float
        Partial ROC omission tolerance E.

    Returns
    -------
    FoldChecks

    Raises
    ------
    InputError
        A fold with no evaluation presence (it cannot be tested at all).

    Examples
    --------
    >>> from splitter.partition.assignment import FoldAssignment
    >>> a = FoldAssignment.from_folds(np.arange(1, 7), np.array(["presence"] * 6), np.array([1, 1, 1, 2, 2, 2]))
    >>> t = check_folds(a, alpha=0.05, adjust="none")
    >>> round(t.folds[0].binomial_bound, 3)  # 0.05 ** (1 / 3)
    0.368
    """
    if not 0 < alpha < 1:
        raise InputError(f"alpha={alpha}: give a level between 0 and 1 (e.g. 0.05).")
    if adjust not in ("holm", "none"):
        raise InputError(f"adjust={adjust!r}: give 'holm' (adjust fold p-values across folds) or 'none'.")
    if not 0 <= omission < 1:
        raise InputError(f"omission={omission}: give a share between 0 and 1 (e.g. 0.05).")
    k = len(assignment.folds)
    level = alpha / k if adjust == "holm" and k > 1 else alpha
    rows = []
    empty = []
    code = assignment.kind_codes  # 0 presence, 1 absence, 2 background
    for i in assignment.folds:
        ev = code[assignment.evaluation(i)]
        n = int(np.count_nonzero(ev == 0))
        if n == 0:
            empty.append(i)
        kept = assignment.calibration(i)
        gaps = assignment.gaps(i)
        before = kept.size + gaps.size
        pres_kept = int(np.count_nonzero(code[kept] == 0))
        pres_gap = int(np.count_nonzero(code[gaps] == 0))
        m = max(1, int(np.floor(0.5 * n + 0.5)))
        rows.append(FoldCheck(
            fold=int(i),
            evaluation_presences=n,
            evaluation_absences=int(np.count_nonzero(ev == 1)),
            evaluation_background=int(np.count_nonzero(ev == 2)),
            binomial_bound=float(level ** (1.0 / n)) if n else 0.0,
            can_omit=bool(n and np.floor(m * omission + 1e-9) >= 1),
            calibration_presences=pres_kept,
            calibration_records=int(kept.size),
            buffer_presence_share=pres_gap / (pres_kept + pres_gap) if pres_kept + pres_gap else 0.0,
            buffer_record_share=gaps.size / before if before else 0.0,
        ))
    if empty:
        names = ", ".join(str(i) for i in empty)
        raise InputError(f"fold{'s' if len(empty) > 1 else ''} {names} {'have' if len(empty) > 1 else 'has'} no "
                         "evaluation presence and cannot be tested; use fewer folds (folds="
                         f"{k} now), another block size (block_size) or another design.")
    return FoldChecks(folds=tuple(rows), alpha=alpha, adjust=adjust, omission=omission)
