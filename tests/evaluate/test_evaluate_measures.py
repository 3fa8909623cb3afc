"""Confusion-matrix measures against scikit-learn."""

import numpy as np
import pytest
from sklearn.metrics import balanced_accuracy_score, cohen_kappa_score, confusion_matrix

from splitter.errors import InputError
from splitter.evaluate import Threshold, confusion_measures


@pytest.mark.parametrize("seed", range(5))
@pytest.mark.parametrize("threshold", [0.2, 0.45, 0.7])
def test_against_sklearn(seed, threshold):
    rng = np.random.default_rng(seed)
    pres = np.round(rng.beta(4, 2, 60), 2)
    other = np.round(rng.beta(2, 3, 150), 2)
    m = confusion_measures(pres, other, threshold, other_kind="absence")
    y_true = np.r_[np.ones(pres.size, int), np.zeros(other.size, int)]
    y_pred = (np.r_[pres, other] >= threshold).astype(int)
    tn, fp, fn, tp = confusion_matrix(y_true, y_pred, labels=[0, 1]).ravel()  # reference: sklearn confusion_matrix
    assert (m.tp, m.fn, m.fp, m.tn) == (tp, fn, fp, tn)  # reference: sklearn confusion_matrix
    assert m.kappa == pytest.approx(cohen_kappa_score(y_true, y_pred), abs=1e-12)  # reference: sklearn cohen_kappa_score
    # reference: TSS = 2 * balanced accuracy - 1 (sklearn balanced_accuracy_score;
    # "Assessing the accuracy of species distribution models: prevalence, kappa and the
    # true skill statistic", Journal of Applied Ecology 2006)
    assert m.tss == pytest.approx(2 * balanced_accuracy_score(y_true, y_pred) - 1, abs=1e-12)  # reference: see above
    assert m.sensitivity + m.omission_rate == pytest.approx(1.0)  # analytic: complements
    assert m.specificity + m.commission_rate == pytest.approx(1.0)  # analytic: complements
    assert m.correct_classification_rate == pytest.approx((tp + tn) / y_true.size)  # analytic: definition


def test_hand_example_and_threshold_object():
    # Presences 0.9, 0.8 in, 0.2 out; background 0.6 in, 0.1 0.3 0.05 out.
    m = confusion_measures([0.9, 0.8, 0.2], [0.1, 0.6, 0.3, 0.05], Threshold("value:0.5", 0.5))
    assert (m.tp, m.fn, m.fp, m.tn) == (2, 1, 1, 3)  # analytic: counted by hand
    assert m.tss == pytest.approx(2 / 3 + 3 / 4 - 1)  # analytic: 0.41667
    # analytic: po = 5/7, pe = (3*3 + 4*4)/49 = 25/49, kappa = (35/49 - 25/49)/(24/49) = 10/24
    assert m.kappa == pytest.approx(10 / 24)  # analytic: by hand above


def test_score_equal_to_threshold_is_present():
    m = confusion_measures([0.5], [0.5], 0.5)
    assert (m.tp, m.fp) == (1, 1)  # common practice: predicted present means score >= threshold


def test_background_is_labelled_pseudo_specificity():
    bg = confusion_measures([0.9], [0.1, 0.8], 0.5).to_dict()
    assert "pseudo-specificity" in bg["specificity_note"]  # common practice: background is not absence
    ab = confusion_measures([0.9], [0.1, 0.8], 0.5, other_kind="absence").to_dict()
    assert "pseudo" not in ab["specificity_note"]  # common practice: surveyed absences give true specificity


def test_bad_input():
    with pytest.raises(InputError):
        confusion_measures([], [0.1], 0.5)
    with pytest.raises(InputError):
        confusion_measures([0.2], [np.nan], 0.5)
    with pytest.raises(InputError):
        confusion_measures([0.2], [0.1], 0.5, other_kind="pseudo")
