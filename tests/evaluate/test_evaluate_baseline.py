"""The built-in quadratic logistic presence-background baseline."""

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.preprocessing import PolynomialFeatures, StandardScaler
from sklearn.svm import LinearSVC

from splitter.errors import InputError
from splitter.evaluate import fit_baseline, predict_suitability


def _invented_data(seed=0):
    # Invented: presences sit at high values of covariate 1; covariates 2-3 are noise.
    rng = np.random.default_rng(seed)
    background = rng.normal(0.0, 1.0, size=(2000, 3))
    presence = np.column_stack([rng.normal(1.5, 0.5, 200), rng.normal(0, 1, (200, 2))])
    return presence, background


def test_pipeline_is_the_documented_model():
    presence, background = _invented_data()
    model = fit_baseline(presence, background, seed=0)
    steps = [type(step) for _, step in model.steps]
    assert steps == [StandardScaler, PolynomialFeatures, LogisticRegression]  # contract: the documented model
    poly = model.named_steps["terms"]
    assert poly.degree == 2 and poly.include_bias is False  # contract: the documented model
    logistic = model.named_steps["logistic"]
    assert logistic.class_weight == "balanced" and logistic.C == 1.0  # contract: the documented model


def test_presences_score_higher_than_background():
    presence, background = _invented_data()
    model = fit_baseline(presence, background, seed=0)
    p_pres = predict_suitability(model, presence)
    p_back = predict_suitability(model, background)
    assert np.all((p_pres >= 0) & (p_pres <= 1)) and np.all((p_back >= 0) & (p_back <= 1))  # analytic: probabilities
    assert p_pres.mean() > p_back.mean()  # common practice: presences score higher on average
    y = np.r_[np.ones(p_pres.size), np.zeros(p_back.size)]
    # reference: sklearn.metrics.roc_auc_score; common practice: AUC > 0.8 is a good model
    assert roc_auc_score(y, np.r_[p_pres, p_back]) > 0.8  # reference: sklearn roc_auc_score


def test_same_seed_same_predictions():
    presence, background = _invented_data(3)
    a = predict_suitability(fit_baseline(presence, background, seed=1), background)
    b = predict_suitability(fit_baseline(presence, background, seed=1), background)
    np.testing.assert_array_equal(a, b)  # contract: deterministic for a seed


def test_decision_function_only_estimator_gives_ranks():
    presence, background = _invented_data(1)
    X = np.vstack([presence, background])
    y = np.r_[np.ones(len(presence)), np.zeros(len(background))]
    svm = LinearSVC(random_state=0).fit(X, y)
    scores = predict_suitability(svm, X)
    np.testing.assert_allclose(scores, svm.decision_function(X))  # reference: sklearn decision_function
    assert roc_auc_score(y, scores) > 0.8  # reference: sklearn roc_auc_score


def test_bad_input():
    presence, background = _invented_data()
    with pytest.raises(InputError):
        fit_baseline(presence[:, :2], background)
    with pytest.raises(InputError):
        fit_baseline(np.full((3, 3), np.nan), background)
    with pytest.raises(InputError):
        predict_suitability(object(), background)
