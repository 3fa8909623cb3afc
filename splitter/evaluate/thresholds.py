"""Thresholds that turn continuous suitability into predicted presence.

A threshold is chosen **only from calibration data** (the records the model was
fitted on, or the calibration set of a fold). Evaluation predictions are never an
argument of :func:`choose_threshold`, so a threshold cannot leak information from
the data it is later tested on.

Rules (text form in brackets, as accepted by :meth:`ThresholdRule.parse`):

* lowest calibration presence (``lowest``): the smallest calibration presence score,
  so that every calibration presence is predicted present;
* calibration-presence quantile (``quantile:Q``, ``0 <= Q < 1``): the Q-quantile of
  calibration presence scores, computed with ``numpy.quantile(..., method="lower")``.
  The "lower" method returns the order statistic ``sorted[floor(Q * (n - 1))]``, so
  at most ``floor(Q * (n - 1))`` presences score strictly below it, i.e. a share of
  at most Q of calibration presences is omitted (fewer when n is small or scores tie;
  the rule never omits more than Q);
* fixed value (``value:V``): V itself;
* maximum TSS (``max-tss``): the threshold maximising sensitivity + specificity - 1
  on calibration presences against calibration background (or true absences).

In every case a record is predicted present when its score is ``>= threshold``.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from splitter.errors import InputError

__all__ = ["ThresholdRule", "Threshold", "choose_threshold"]

_KINDS = ("lowest", "quantile", "value", "max-tss")


@dataclass(frozen=True)
class ThresholdRule:
    """How to pick a threshold from calibration data.

    Parameters
    ----------
    kind : {"lowest", "quantile", "value", "max-tss"}
        The rule.
    parameter : float or None
        Q for ``"quantile"`` (``0 <= Q < 1``), V for ``"value"``; None otherwise.

    Examples
    --------
    >>> ThresholdRule.parse("quantile:0.1")
    ThresholdRule(kind='quantile', parameter=0.1)
    >>> str(ThresholdRule.parse("max-tss"))
    'max-tss'
    """

    kind: str
    parameter: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in _KINDS:
            raise InputError(
                f"Unknown threshold rule {self.kind!r}; use one of lowest, quantile:Q, value:V, max-tss."
            )
        if self.kind in ("quantile", "value"):
            if self.parameter is None or not np.isfinite(self.parameter):
                raise InputError(
                    f"Threshold rule {self.kind!r} needs a finite number, e.g. {self.kind}:0.1."
                )
            if self.kind == "quantile" and not (0.0 <= self.parameter < 1.0):
                raise InputError(
                    f"Quantile threshold {self.parameter} is outside [0, 1); give the share of "
                    "calibration presences that may be omitted, e.g. quantile:0.1."
                )
        elif self.parameter is not None:
            raise InputError(f"Threshold rule {self.kind!r} takes no number; write just {self.kind}.")

    @classmethod
    def parse(cls, text: str) -> "ThresholdRule":
        """Read a rule from its text form.

        Parameters
        ----------
        text : str
            ``"lowest"``, ``"quantile:Q"``, ``"value:V"`` or ``"max-tss"``.

        Returns
        -------
        ThresholdRule

        Raises
        ------
        InputError
            For any other text, or a quantile outside ``[0, 1)``.
        """
        if not isinstance(text, str):
            raise InputError(f"Threshold rule must be text such as 'quantile:0.1', got {text!r}.")
        raw = text.strip().lower()
        name, sep, number = raw.partition(":")
        name = name.strip()
        if name in ("lowest", "max-tss"):
            if sep:
                raise InputError(f"Threshold rule {name!r} takes no number; write just {name}.")
            return cls(name)
        if name in ("quantile", "value") and sep:
            try:
                value = float(number)
            except ValueError:
                raise InputError(
                    f"Threshold rule {text!r} needs a number after the colon, e.g. {name}:0.1."
                ) from None
            return cls(name, value)
        raise InputError(
            f"Unknown threshold rule {text!r}; use one of lowest, quantile:Q, value:V, max-tss."
        )

    def __str__(self) -> str:
        if self.parameter is None:
            return self.kind
        return f"{self.kind}:{self.parameter:g}"


@dataclass(frozen=True)
class Threshold:
    """A chosen threshold.

    Attributes
    ----------
    rule : str
        Text form of the rule that produced it (e.g. ``"quantile:0.1"``).
    value : float
        Scores ``>= value`` are predicted present.
    """

    rule: str
    value: float

    def to_dict(self) -> dict:
        """Plain dict for tables."""
        return asdict(self)


def _scores(values, name: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float).ravel()
    if arr.size == 0:
        raise InputError(f"No {name} were given; a threshold needs at least one score.")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"Some {name} are missing or infinite; remove them before choosing a threshold.")
    return arr


def _max_tss_threshold(presence: np.ndarray, other: np.ndarray) -> float:
    # TSS only changes where the threshold passes a data value, so every distinct
    # value of the pooled scores is a candidate (predicted present = score >= t).
    candidates = np.unique(np.concatenate([presence, other]))
    pres_sorted = np.sort(presence)
    other_sorted = np.sort(other)
    # searchsorted(..., "left") counts scores strictly below t: omitted presences
    # and correctly rejected background/absences.
    n_p, n_o = pres_sorted.size, other_sorted.size
    kept = n_p - np.searchsorted(pres_sorted, candidates, side="left")
    rejected = np.searchsorted(other_sorted, candidates, side="left")
    # TSS * n_p * n_o in whole numbers, so that equal TSS values compare equal
    # (in floating point, ties could be broken by rounding noise).
    scaled_tss = kept * n_o + rejected * n_p - n_p * n_o
    # argmax takes the first maximum, i.e. the lowest threshold among ties, which
    # omits the fewest calibration presences.
    return float(candidates[int(np.argmax(scaled_tss))])


def choose_threshold(rule, calibration_presence, calibration_background=None) -> Threshold:
    """Choose a threshold from calibration data only.

    Parameters
    ----------
    rule : ThresholdRule or str
        The rule (text is parsed with :meth:`ThresholdRule.parse`).
    calibration_presence : array_like of float
        Predicted suitability at calibration presences.
    calibration_background : array_like of float, optional
        Predicted suitability at calibration background points or true absences;
        required by ``max-tss`` and ignored by the other rules.

    Returns
    -------
    Threshold

    Raises
    ------
    InputError
        On empty or non-finite scores, or ``max-tss`` without background/absences.

    Notes
    -----
    There is deliberately no argument for evaluation predictions: thresholds from
    evaluation data would make the later significance tests optimistic.
    ``quantile:Q`` uses ``numpy.quantile(method="lower")`` so that at most a share Q
    of calibration presences falls below the threshold. ``max-tss`` breaks ties by
    taking the lowest threshold.

    Examples
    --------
    >>> choose_threshold("lowest", [0.2, 0.5, 0.9]).value
    0.2
    >>> choose_threshold("quantile:0.5", [0.1, 0.2, 0.3, 0.4]).value
    0.2
    """
    if not isinstance(rule, ThresholdRule):
        rule = ThresholdRule.parse(rule)
    presence = _scores(calibration_presence, "calibration presence scores")
    if rule.kind == "lowest":
        value = float(presence.min())
    elif rule.kind == "quantile":
        value = float(np.quantile(presence, rule.parameter, method="lower"))
    elif rule.kind == "value":
        value = float(rule.parameter)
    else:  # max-tss
        if calibration_background is None:
            raise InputError(
                "The max-tss threshold needs calibration background or absence scores; "
                "give them or choose another rule."
            )
        other = _scores(calibration_background, "calibration background/absence scores")
        value = _max_tss_threshold(presence, other)
    return Threshold(rule=str(rule), value=value)
