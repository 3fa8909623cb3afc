"""Environmental clusters: k-means in standardised covariate space.

``cluster_folds`` is the array function; ``EnvironmentClusters`` is the rule.
"""

from __future__ import annotations

import numpy as np

from splitter.errors import InputError
from splitter.partition.base import FoldRule, RuleFolds, RuleInput, check_fold_count


def cluster_folds(env: np.ndarray, is_presence: np.ndarray, k: int, seed: int = 0,
                  reference: np.ndarray | None = None) -> np.ndarray:
    """Fold per record from k-means clusters of standardised covariates.

    Covariates are standardised on ``reference`` (the region's background
    sample; default: all records), k-means (seeded, 10 starts) is fitted on
    the presences, and every record, background included, takes the fold of
    its nearest cluster centre. Folds are numbered by presence count, largest
    first. Evaluating a fold then tests transfer to environments the
    calibration set has not seen.
    """
    env = np.asarray(env, float)
    pres = np.asarray(is_presence, bool)
    ref = env if reference is None or len(reference) < 2 else np.asarray(reference, float)
    mu = ref.mean(axis=0)
    sd = ref.std(axis=0)
    sd[sd == 0] = 1.0
    z = (env - mu) / sd
    if pres.sum() < k:
        raise InputError(f"folds={k}: only {int(pres.sum())} presences with covariate values; use fewer folds.")
    from sklearn.cluster import KMeans  # here: scikit-learn takes about 0.5 s to import, and only this method needs it

    km = KMeans(n_clusters=k, n_init=10, random_state=seed).fit(z[pres])
    label = km.predict(z)
    counts = np.bincount(label[pres], minlength=k)
    rank = np.empty(k, np.int64)
    rank[np.lexsort((np.arange(k), -counts))] = np.arange(k)
    return rank[label] + 1


class EnvironmentClusters(FoldRule):
    """Folds from k-means clusters of the covariates (``env`` rasters sampled at
    the records and/or ``covariates`` columns), standardised on the background
    (see :func:`cluster_folds`): each fold tests transfer to environments the
    calibration set has not seen.

    Examples
    --------
    >>> import pandas as pd
    >>> from splitter import EnvironmentClusters  # the public class reads data frames
    >>> pts = pd.DataFrame({"x": range(8), "y": [0] * 8,
    ...                     "temp": [1, 2, 1, 2, 1, 20, 21, 20]})
    >>> rule = EnvironmentClusters(folds=2, covariates=["temp"])
    >>> rule
    EnvironmentClusters(folds=2, covariates=('temp',))
    >>> rule.assign(pts, crs="EPSG:3035").fold.tolist()
    [1, 1, 1, 1, 1, 2, 2, 2]
    """

    method = "clusters"

    def __init__(self, folds=5, buffer=0.0, seed=0, env=(), covariates=()):
        self.folds = check_fold_count(folds)
        self._common(buffer, seed, env, covariates)
        if not self.env and not self.covariates:
            raise InputError("clusters need covariates: give `env` (raster paths) or `covariates` (column names).")

    def _folds(self, data: RuleInput) -> RuleFolds:
        pres = data.is_presence
        ref = data.covariates[~pres] if (~pres).sum() >= 2 else None
        fold = cluster_folds(data.covariates, pres, self.folds, seed=self.seed, reference=ref)
        return RuleFolds(fold, self.folds, measured={
            "covariates": tuple(data.covariate_names),
            "standardised_on": "background" if ref is not None else "all records"})
