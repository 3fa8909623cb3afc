"""The built-in baseline model: a quadratic logistic presence-background model.

When a user has no predictions of their own, splitter fits a simple, documented
model so that the folds can still be evaluated: a generalised linear model of the
kind common in the trade. Covariates are standardised, expanded to all linear,
squared and pairwise-product terms (degree 2, so a species can peak at intermediate
values), and a logistic regression separates presences (1) from background (0)
with an L2 penalty (C = 1) and balanced class weights (so the usually far more
numerous background points do not swamp the presences).

Its output is a relative suitability score in [0, 1]; with background rather than
true absences it is not a probability of presence. Given a survey's absences
(``other_kind="absence"``) the same terms are fitted as a presence-absence model:
presences (1) against the surveyed absences (0), without class weights, since
absences are real data whose share carries the survey's prevalence.
"""

from __future__ import annotations

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler

from splitter.errors import InputError

__all__ = ["fit_baseline", "predict_suitability"]

_MAX_ITER = 2000


def _matrix(X, name: str) -> np.ndarray:
    arr = np.asarray(X, dtype=float)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2 or arr.shape[0] == 0 or arr.shape[1] == 0:
        raise InputError(f"{name} must be a non-empty table of covariates (rows = records, columns = covariates).")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} has missing covariate values; drop those records first.")
    return arr


def fit_baseline(X_presence, X_background, seed=0, other_kind: str = "background") -> Pipeline:
    """Fit the baseline quadratic logistic presence-background (or presence-absence) model.

    Parameters
    ----------
    X_presence : array_like, shape (n_presences, n_covariates)
        Covariates at calibration presences.
    X_background : array_like, shape (n_background, n_covariates)
        Covariates at calibration background points.
    other_kind : {"background", "absence"}
        What ``X_background`` holds: background points (balanced class weights)
        or a survey's absences (a presence-absence model, no class weights).
    seed : int, default 0
        Passed to the logistic regression as ``random_state`` (the lbfgs solver is
        deterministic, so this only matters if the solver is changed).

    Returns
    -------
    sklearn.pipeline.Pipeline
        ``StandardScaler -> PolynomialFeatures(degree=2, include_bias=False) ->
        LogisticRegression(class_weight="balanced", C=1.0)``, fitted.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> model = fit_baseline(rng.normal(1, 0.5, (50, 2)), rng.normal(0, 1, (500, 2)), seed=0)
    >>> predict_suitability(model, [[1.0, 1.0]]).shape
    (1,)
    """
    if other_kind not in ("background", "absence"):
        raise InputError(f"other_kind={other_kind!r}: use 'background' or 'absence'.")
    pres = _matrix(X_presence, "Presence covariates")
    back = _matrix(X_background, "Background covariates")
    if pres.shape[1] != back.shape[1]:
        raise InputError(
            f"Presences have {pres.shape[1]} covariates but background has {back.shape[1]}; use the same columns."
        )
    X = np.vstack([pres, back])
    y = np.concatenate([np.ones(pres.shape[0], dtype=int), np.zeros(back.shape[0], dtype=int)])
    model = Pipeline(
        [
            ("scale", StandardScaler()),
            ("terms", PolynomialFeatures(degree=2, include_bias=False)),
            (
                "logistic",
                LogisticRegression(class_weight="balanced" if other_kind == "background" else None, C=1.0, max_iter=_MAX_ITER, random_state=seed),
            ),
        ]
    )
    model.fit(X, y)
    return model


def predict_suitability(estimator, X) -> np.ndarray:
    """Suitability scores from a fitted scikit-learn estimator.

    Parameters
    ----------
    estimator : fitted scikit-learn estimator
        The baseline pipeline or any classifier trained with presence = 1 (or True).
    X : array_like, shape (n_records, n_covariates)
        Covariates where predictions are wanted.

    Returns
    -------
    numpy.ndarray, shape (n_records,)
        ``predict_proba`` of the presence class, in [0, 1]; for an estimator with
        only ``decision_function`` its raw scores, which are not in [0, 1] but carry
        the ranks, and the evaluation methods use ranks only.
    """
    Xa = _matrix(X, "Prediction covariates")
    if hasattr(estimator, "predict_proba"):
        proba = np.asarray(estimator.predict_proba(Xa))
        classes = list(getattr(estimator, "classes_", [0, 1]))
        column = classes.index(1) if 1 in classes else proba.shape[1] - 1
        return proba[:, column].astype(float)
    if hasattr(estimator, "decision_function"):
        return np.asarray(estimator.decision_function(Xa), dtype=float).ravel()
    raise InputError(
        f"{type(estimator).__name__} has neither predict_proba nor decision_function; "
        "give a classifier that scores presence."
    )
