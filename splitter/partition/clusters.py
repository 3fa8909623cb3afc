"""Environmental clusters: k-means in standardised covariate space."""

from __future__ import annotations

import numpy as np
from sklearn.cluster import KMeans

from splitter.errors import InputError


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
        raise InputError(f"--folds {k}: only {int(pres.sum())} presences with covariate values; use fewer folds.")
    km = KMeans(n_clusters=k, n_init=10, random_state=seed).fit(z[pres])
    label = km.predict(z)
    counts = np.bincount(label[pres], minlength=k)
    rank = np.empty(k, np.int64)
    rank[np.lexsort((np.arange(k), -counts))] = np.arange(k)
    return rank[label] + 1
