"""A plain, independent partial ROC: one polyline per sample, trapezoids, no shortcuts.

Written for the tests only (it is slow: every sample passes over all cells). It
follows the definition in "Rethinking receiver operating characteristic analysis
applications in ecological niche modeling", Ecological Modelling 213 (2008): the
curve through (area predicted present, share of presences predicted present) at
every distinct value, and the area from x0 (where the curve first reaches 1 - E)
to 1 over the null line's area on the same range.
"""

import numpy as np


def partial_roc_reference(cell_values, presence_scores, indices, cell_weights=None, omission=0.05) -> np.ndarray:
    """Plain per-replicate partial ROC ratios (slow; a check on :func:`partial_roc`).

    For every row of ``indices`` it builds the full polyline over all cells and the
    sampled presences (every distinct value a vertex) and integrates y dx from x0 to
    1 by trapezoids. It passes over all cells once per replicate.

    Parameters
    ----------
    cell_values, presence_scores, cell_weights
        As in :func:`partial_roc`.
    indices : array_like of int, shape (B, m)
        Presence indices of each replicate (use ``np.arange(n)[None, :]`` for the
        observed ratio on all presences).
    omission : float
        Omission tolerance E.

    Returns
    -------
    numpy.ndarray, shape (B,)
        AUC ratio per replicate.
    """
    v = np.asarray(cell_values, dtype=np.float64).ravel()
    s = np.asarray(presence_scores, dtype=np.float64).ravel()
    w = None if cell_weights is None else np.asarray(cell_weights, dtype=np.float64).ravel()
    if w is None:
        w = np.ones_like(v)
    keep = w > 0
    v, w = v[keep], w[keep] / w[keep].sum()
    indices = np.atleast_2d(np.asarray(indices))
    out = np.empty(indices.shape[0])
    for b, row in enumerate(indices):
        sample = s[row]
        m = sample.size
        required = round((1.0 - omission) * m, 9)  # (1 - E) m, as the library rounds it
        values, inv = np.unique(np.concatenate([v, sample]), return_inverse=True)
        inv = inv.ravel()
        k = values.size
        width = np.bincount(inv[: v.size], weights=w, minlength=k)[::-1]  # descending values
        rise = np.bincount(inv[v.size :], minlength=k)[::-1].astype(float)
        # Vertices P_0 = (0, 0), P_j after threshold value j (descending). Keep 1 - x
        # (area strictly below the threshold) to avoid cancellation near x = 1.
        rest = np.concatenate([np.cumsum(width[::-1])[::-1][1:], [0.0]])  # 1 - x at P_j, j >= 1
        rest = np.concatenate([[1.0], rest])
        height = np.concatenate([[0.0], np.cumsum(rise)])  # presence counts at P_j
        widths = np.concatenate([[0.0], width])
        if required <= 0.0:
            j = 0
            one_minus_x0 = 1.0
            area = 0.0
        else:
            j = int(np.argmax(height >= required))  # first vertex at or above the level
            frac = (required - height[j - 1]) / (height[j] - height[j - 1])
            one_minus_x0 = rest[j - 1] - frac * widths[j]
            # Trapezoid from x0 to P_j: width (1 - x0) - (1 - x_j), heights required and height[j].
            area = (one_minus_x0 - rest[j]) * (required + height[j]) / 2.0
        area += np.sum(widths[j + 1 :] * (height[j:-1] + height[j + 1 :]) / 2.0)
        area /= m
        if one_minus_x0 <= 0.0:
            # Limit for x0 -> 1 (see partial_roc): height just left of x = 1.
            lowest = np.flatnonzero(width > 0)[-1]  # the lowest cell value, descending index
            out[b] = height[lowest + 1] / m
        else:
            out[b] = area / (one_minus_x0 * (2.0 - one_minus_x0) / 2.0)
    return out
