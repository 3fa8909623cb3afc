"""Thresholds come from calibration data only."""

import inspect

import numpy as np
import pytest
from sklearn.metrics import balanced_accuracy_score, confusion_matrix, recall_score

from splitter.errors import InputError
from splitter.evaluate import Threshold, ThresholdRule, choose_threshold


def test_parse_accepts_the_four_rules():
    # contract: the four text forms of DESIGN §4 "Thresholds"
    assert ThresholdRule.parse("lowest") == ThresholdRule("lowest")
    assert ThresholdRule.parse(" Quantile:0.1 ") == ThresholdRule("quantile", 0.1)
    assert ThresholdRule.parse("value:0.3") == ThresholdRule("value", 0.3)
    assert ThresholdRule.parse("max-tss") == ThresholdRule("max-tss")
    assert str(ThresholdRule.parse("quantile:0.1")) == "quantile:0.1"


@pytest.mark.parametrize(
    "text",
    ["", "highest", "quantile", "quantile:", "quantile:abc", "quantile:1", "quantile:1.5",
     "quantile:-0.1", "value:nan", "lowest:0.1", "max-tss:2", "maxtss"],
)
def test_parse_rejects_anything_else(text):
    with pytest.raises(InputError):
        ThresholdRule.parse(text)


def test_rule_is_frozen():
    rule = ThresholdRule.parse("lowest")
    with pytest.raises(AttributeError):
        rule.kind = "value"


def test_signature_takes_no_evaluation_predictions():
    # The threshold cannot depend on evaluation data because it cannot receive them.
    params = list(inspect.signature(choose_threshold).parameters)
    assert params == ["rule", "calibration_presence", "calibration_background"]  # contract: DESIGN §4


def test_threshold_ignores_order_of_the_calibration_data():
    rng = np.random.default_rng(11)
    calib = rng.random(80)
    background = rng.random(300)
    first = choose_threshold("max-tss", calib, background)
    for _ in range(3):
        again = choose_threshold("max-tss", rng.permutation(calib), rng.permutation(background))
        assert again == first  # analytic: a threshold of two sets does not depend on their order


@pytest.mark.parametrize("rule", ["lowest", "quantile:0.1", "max-tss"])
def test_evaluation_predictions_change_the_tests_but_not_the_threshold(tmp_path, rule):
    """Through evaluate(): new predictions at a fold's evaluation records are passed in and change
    that fold's binomial test, while its threshold (from calibration predictions) stays."""
    import pandas as pd

    import splitter
    from tests.conftest import write_records_csv

    src = write_records_csv(tmp_path / "r.csv", n_presence=120, n_background=120, seed=3)
    folds = splitter.design(src, method="random", folds=3, seed=1)
    recs = pd.read_csv(src, dtype={"record_id": str})
    rng = np.random.default_rng(4)
    base = np.where(recs.kind == "presence", 0.6, 0.4) + rng.uniform(-0.3, 0.3, len(recs))
    evaluation_1 = np.isin(np.arange(len(recs)), folds.evaluation(1))

    def run(scores_at_fold1_evaluation, name):
        rows = []
        for f in (1, 2, 3):
            pred = base.copy()
            if f == 1:
                pred[evaluation_1] = scores_at_fold1_evaluation
            rows.append(pd.DataFrame({"record_id": recs.record_id, "fold": f, "prediction": pred}))
        path = tmp_path / f"{name}.csv"
        pd.concat(rows).to_csv(path, index=False)
        frame = splitter.evaluate(folds, prediction_table=path, threshold=rule, replicates=20, seed=1).to_frame()
        return frame[frame.fold.astype(str) == "1"].iloc[0]

    a = run(base[evaluation_1], "same")
    b = run(rng.uniform(0.0, 1.0, evaluation_1.sum()), "new")  # new evaluation predictions
    assert a.threshold == b.threshold  # calibration data only: the threshold does not move
    # ... while the evaluation data did reach the tests: the binomial successes changed
    assert a.successes != b.successes


def test_lowest_and_value():
    calib = np.array([0.4, 0.2, 0.9, 0.35])
    assert choose_threshold("lowest", calib) == Threshold("lowest", 0.2)  # reference: min by inspection
    assert choose_threshold("value:0.3", calib).value == 0.3  # reference: the fixed value itself


def test_quantile_uses_numpy_lower_method():
    rng = np.random.default_rng(3)
    calib = rng.random(37)
    for q in (0.0, 0.05, 0.1, 0.5, 0.9):
        got = choose_threshold(f"quantile:{q}", calib).value
        # reference: numpy.quantile(method="lower")
        assert got == np.quantile(calib, q, method="lower")  # reference: numpy.quantile


def test_quantile_omits_at_most_share_q():
    rng = np.random.default_rng(5)
    for n in (1, 2, 5, 10, 19, 100, 333):
        calib = np.round(rng.random(n), 2)  # rounding makes ties
        for q in (0.0, 0.05, 0.1, 0.25, 0.5, 0.99):
            t = choose_threshold(f"quantile:{q}", calib).value
            omitted = np.mean(calib < t)
            # analytic: "lower" takes sorted[floor(q (n - 1))], so at most floor(q (n-1)) < q n lie below
            assert omitted <= q + 1e-12  # analytic: see above


def test_quantile_hand_example():
    calib = np.arange(1, 11) / 10.0  # 0.1 .. 1.0
    # analytic: floor(0.1 * 9) = 0 -> sorted[0] = 0.1; floor(0.5 * 9) = 4 -> sorted[4] = 0.5
    assert choose_threshold("quantile:0.1", calib).value == 0.1  # analytic: see above
    assert choose_threshold("quantile:0.5", calib).value == 0.5  # analytic: see above


def _brute_force_max_tss(presence, other):
    y_true = np.r_[np.ones(presence.size, int), np.zeros(other.size, int)]
    scores = np.r_[presence, other]
    best_t, best = None, -np.inf
    for t in np.unique(scores):
        y_pred = (scores >= t).astype(int)
        tn, fp, fn, tp = confusion_matrix(y_true, y_pred, labels=[0, 1]).ravel()
        sens = recall_score(y_true, y_pred)
        tss = sens + tn / (tn + fp) - 1
        # reference: sklearn.metrics.balanced_accuracy_score (TSS = 2 BA - 1)
        assert tss == pytest.approx(2 * balanced_accuracy_score(y_true, y_pred) - 1, abs=1e-12)  # reference: above
        if tss > best + 1e-9:  # strict: keeps the lowest threshold among ties (TSS steps are >= 1/(40*120))
            best_t, best = t, tss
    return best_t, best


@pytest.mark.parametrize("seed", range(6))
def test_max_tss_matches_brute_force(seed):
    rng = np.random.default_rng(seed)
    presence = np.round(rng.normal(0.6, 0.15, 40), 2)
    other = np.round(rng.normal(0.4, 0.2, 120), 2)
    expected_t, expected_tss = _brute_force_max_tss(presence, other)  # reference: sklearn.metrics brute force
    got = choose_threshold("max-tss", presence, other).value
    assert got == expected_t  # reference: sklearn.metrics brute force
    sens = np.mean(presence >= got)
    spec = np.mean(other < got)
    assert sens + spec - 1 == pytest.approx(expected_tss, abs=1e-12)  # reference: sklearn.metrics brute force


def test_max_tss_needs_background():
    with pytest.raises(InputError, match="background"):
        choose_threshold("max-tss", [0.1, 0.5])


@pytest.mark.parametrize("bad", [[], [0.1, np.nan], [np.inf]])
def test_bad_calibration_scores(bad):
    with pytest.raises(InputError):
        choose_threshold("lowest", bad)
