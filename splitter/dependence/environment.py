"""Environmental overlap and extrapolation between calibration and evaluation records.

Two questions about the covariates at the records of a fold:

* **Overlap** — do calibration and evaluation records sample the same
  environments? Schoener's D (Schoener, "The Anolis lizards of Bimini: resource
  partitioning in a complex fauna", Ecology 1968) between the two records'
  densities in environmental space, as applied by Broennimann et al.
  ("Measuring ecological niche overlap from occurrence and spatial
  environmental data", Global Ecology and Biogeography 2012): covariates are
  standardised on a reference sample (the region/background, by default the
  two sets together), rotated to the reference's first two principal
  components, each set is smoothed by a Gaussian kernel density on a common
  grid, each density is normalised to sum 1 and
  ``D = 1 - 0.5 * sum |p - q|`` (1 = identical, 0 = disjoint).
* **Extrapolation** — must the model predict outside the environments it was
  calibrated on? The multivariate environmental similarity surface (MESS;
  Elith, Kearney & Phillips, "The art of modelling range-shifting species",
  Methods in Ecology and Evolution 2010) of each evaluation record against the
  calibration records; negative MESS = outside the calibration envelope.

Kernel bandwidth: Scott's rule, ``n ** (-1 / (d + 4))`` times the sample
covariance (``scipy.stats.gaussian_kde``'s default, with ``n`` the number of
records and ``d`` the number of components). For samples larger than
``_BIN_ABOVE`` records the points are first binned onto a grid twice as fine as
the evaluation grid and the counts used as kernel weights (same bandwidth,
computed from the true ``n``); the binning shift is at most a quarter grid
step, far below the kernel width, and keeps the cost bounded for large audits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.stats import gaussian_kde
from sklearn.decomposition import PCA

from splitter.errors import InputError

_BIN_ABOVE = 5000
_PAD_BANDWIDTHS = 3.0  # grid reaches 3 kernel standard deviations beyond the data


@dataclass(frozen=True)
class OverlapResult:
    """Schoener's D between two samples in environmental space.

    Attributes
    ----------
    statistic : float
        Schoener's D in [0, 1].
    n_components : int
        Principal components used (2, or 1 with one covariate).
    explained_variance : float
        Share of the reference's standardised variance in those components.
    n_a, n_b : int
        Records used from each sample (rows with a missing covariate are left out).
    """

    statistic: float
    n_components: int
    explained_variance: float
    n_a: int
    n_b: int

    def to_dict(self) -> dict:
        return {k: _num(getattr(self, k)) for k in self.__dataclass_fields__}


def _num(v):
    if isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_)):
        return int(v)
    v = float(v)
    return v if math.isfinite(v) else None


def _matrix(a, what: str) -> np.ndarray:
    """Records x covariates as floats, stored column by column.

    A few covariates and many records: numpy reduces a C-ordered (n, 2) array along its
    records 10-40x slower than the same array in Fortran order (one short inner loop per
    record), and the column-wise means, spreads and extents below are on that axis.
    """
    a = np.asarray(a, dtype=float)
    if a.ndim == 1:
        a = a[:, None]
    if a.ndim != 2:
        raise InputError(f"{what} must be a 2-D array of records x covariates.")
    return np.asfortranarray(a)


def _complete_rows(a: np.ndarray) -> np.ndarray:
    ok = np.isfinite(a).all(axis=1)
    return a if ok.all() else np.asfortranarray(a[ok])


def _density_on_grid(pc: np.ndarray, axes: list[np.ndarray], mesh: np.ndarray) -> np.ndarray:
    """Gaussian KDE (Scott's rule) of points ``pc`` (n, d) evaluated at ``mesh`` (d, m)."""
    n, d = pc.shape
    factor = n ** (-1.0 / (d + 4))  # Scott's rule with the true sample size
    if n > _BIN_ABOVE:
        # Bin onto a grid twice as fine as the evaluation grid; counts become weights.
        fine = []
        for ax in axes:
            step = (ax[1] - ax[0]) / 2.0
            edges = np.arange(ax[0] - step / 2, ax[-1] + step, step)
            fine.append(edges)
        counts, _ = np.histogramdd(pc, bins=fine)
        centres = [0.5 * (e[1:] + e[:-1]) for e in fine]
        grid_pts = np.stack([g.ravel() for g in np.meshgrid(*centres, indexing="ij")])
        w = counts.ravel()
        nz = w > 0
        # The weighted covariance of bin centres equals the points' covariance up to the
        # binning variance (step**2 / 12 per axis, negligible at this resolution).
        kde = gaussian_kde(grid_pts[:, nz], bw_method=factor, weights=w[nz])
    else:
        kde = gaussian_kde(pc.T, bw_method=factor)
    return kde(mesh)


def schoener_d(a, b, reference=None, grid: int = 100) -> OverlapResult:
    """Schoener's D between two sets of records in standardised PCA space.

    Parameters
    ----------
    a, b : array_like, shape (n, p)
        Covariates at calibration and evaluation records. Rows with a missing
        value are left out.
    reference : array_like, shape (m, p), optional
        Region/background sample that sets the standardisation and the
        principal axes; default ``a`` and ``b`` together.
    grid : int, default 100
        Grid points per principal axis.

    Returns
    -------
    OverlapResult
        ``statistic`` is D (1 identical, 0 disjoint).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> a = rng.normal(size=(500, 3))
    >>> schoener_d(a, a).statistic > 0.99
    True
    """
    a = _complete_rows(_matrix(a, "a"))
    b = _complete_rows(_matrix(b, "b"))
    if a.shape[1] != b.shape[1]:
        raise InputError(f"a has {a.shape[1]} covariates but b has {b.shape[1]}; give the same covariates.")
    p = a.shape[1]
    if reference is None:
        ref = np.vstack([a, b])
    else:
        ref = _complete_rows(_matrix(reference, "reference"))
        if ref.shape[1] != p:
            raise InputError(f"reference has {ref.shape[1]} covariates but the records have {p}.")
    if not isinstance(grid, (int, np.integer)) or grid < 10:
        raise InputError(f"grid must be an integer of at least 10, got {grid!r}.")
    ncomp = 1 if p == 1 else 2
    for name, s in (("a", a), ("b", b)):
        if s.shape[0] < ncomp + 2:
            raise InputError(
                f"Sample {name} has {s.shape[0]} complete records; a kernel density needs at least {ncomp + 2}."
            )
    space = ComponentSpace.fit(ref)
    pc_a, pc_b = space.transform(a), space.transform(b)

    # Grid over the reference's extent (extended to both samples), padded by three
    # kernel standard deviations so the tails fall on the grid.
    lo = np.minimum(space.lo, np.minimum(pc_a.min(axis=0), pc_b.min(axis=0)))
    hi = np.maximum(space.hi, np.maximum(pc_a.max(axis=0), pc_b.max(axis=0)))
    bw = np.zeros(ncomp)
    for s in (pc_a, pc_b):
        bw = np.maximum(bw, s.std(axis=0) * s.shape[0] ** (-1.0 / (ncomp + 4)))
    span = np.maximum(hi - lo, 1e-9)
    pad = np.maximum(_PAD_BANDWIDTHS * bw, 0.05 * span)
    axes = [np.linspace(lo[j] - pad[j], hi[j] + pad[j], int(grid)) for j in range(ncomp)]
    mesh = np.stack([g.ravel() for g in np.meshgrid(*axes, indexing="ij")])

    try:
        da = _density_on_grid(pc_a, axes, mesh)
        db = _density_on_grid(pc_b, axes, mesh)
    except np.linalg.LinAlgError as exc:
        raise InputError(
            "The covariates of one sample do not vary (all records share one environment); D is undefined."
        ) from exc
    sa, sb = da.sum(), db.sum()
    if not (sa > 0 and sb > 0):
        raise InputError("A kernel density vanished on the grid; check the covariates for extreme outliers.")
    d = 1.0 - 0.5 * float(np.abs(da / sa - db / sb).sum())
    return OverlapResult(
        statistic=min(max(d, 0.0), 1.0),
        n_components=ncomp,
        explained_variance=float(space.pca.explained_variance_ratio_.sum()),
        n_a=int(a.shape[0]),
        n_b=int(b.shape[0]),
    )


@dataclass(frozen=True, eq=False)
class ComponentSpace:
    """Covariates standardised on a reference sample and rotated to its first principal components.

    Fitted once per reference and reused for every fold that shares it (an audit's background
    sample): the standardisation, the rotation and the reference's extent do not change.

    Attributes
    ----------
    mean, scale : ndarray, shape (p,)
        The reference's mean and standard deviation per covariate (1 where it is constant).
    pca : sklearn.decomposition.PCA
        Fitted on the standardised reference; 2 components (1 with one covariate).
    lo, hi : ndarray, shape (n_components,)
        The reference's extent on each component.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> space = ComponentSpace.fit(rng.normal(size=(200, 3)))
    >>> space.transform(np.zeros((1, 3))).shape
    (1, 2)
    """

    mean: np.ndarray
    scale: np.ndarray
    pca: PCA
    lo: np.ndarray
    hi: np.ndarray

    @property
    def rotation(self) -> np.ndarray:
        """Loadings, shape (p, n_components)."""
        return self.pca.components_.T

    @classmethod
    def fit(cls, reference) -> "ComponentSpace":
        """Fit on the complete rows of ``reference`` (records x covariates)."""
        return cls._fit(reference)[0]

    @classmethod
    def _fit(cls, reference):
        ref = _complete_rows(_matrix(reference, "reference"))
        ncomp = 1 if ref.shape[1] == 1 else 2
        if ref.shape[0] < ncomp + 1:
            raise InputError("The reference sample has too few complete records to standardise on.")
        mu, sd = ref.mean(axis=0), ref.std(axis=0)
        if not (sd > 0).any():
            raise InputError("The covariates do not vary over the reference records; D is undefined.")
        sd = np.where(sd > 0, sd, 1.0)  # a constant covariate carries no information; avoid 0/0
        z = (ref - mu) / sd
        # The eigenvectors of the p x p covariance: the same axes as an SVD of the records,
        # without decomposing an n x p matrix (scikit-learn's solver for n much larger than p).
        pca = PCA(n_components=ncomp, svd_solver="covariance_eigh").fit(z)
        pc_ref = np.asfortranarray(pca.transform(z))
        return cls(mu, sd, pca, pc_ref.min(axis=0), pc_ref.max(axis=0)), pc_ref

    def transform(self, x) -> np.ndarray:
        """Component scores of records ``x`` (records x covariates)."""
        z = (np.asfortranarray(x, dtype=float) - self.mean) / self.scale
        return np.asfortranarray(self.pca.transform(z))


def _kernel_matrix(axis: np.ndarray, bandwidth: float) -> np.ndarray:
    """Gaussian weights between the nodes of one grid axis (rows: where the density is read)."""
    u = (axis[:, None] - axis[None, :]) / bandwidth
    return np.exp(-0.5 * u * u)


def _densities(counts: np.ndarray, kernels: list[np.ndarray]) -> np.ndarray:
    """Smooth binned counts ``(c, G[, G])`` with a separable kernel; each density sums to 1."""
    if len(kernels) == 1:
        dens = counts @ kernels[0].T
    else:
        dens = np.matmul(np.matmul(kernels[0][None], counts), kernels[1].T[None])
    total = dens.reshape(dens.shape[0], -1).sum(axis=1)
    return dens / total.reshape((-1,) + (1,) * (dens.ndim - 1))


def schoener_d_resplit(env, evaluation, reference=None, null_splits: int = 199, seed=0, grid: int = 64):
    """Schoener's D of one fold's calibration vs evaluation records, and of random re-splits.

    The fold's records are pooled; the designed split and ``null_splits``
    random re-splits of the pool into sets of the same two sizes are each
    measured with one estimator, so the designed value is compared with its
    null like with like (``splitter.dependence.resplit``).

    Estimator: covariates standardised on ``reference`` (default: the pooled
    records) and rotated to its first two principal components (as
    :func:`schoener_d`); records binned to the nearest node of a ``grid`` x
    ``grid`` lattice over the pooled and reference records, padded by three
    kernel widths; each set smoothed by a Gaussian product kernel whose width
    on component j is Scott's rule with the pooled spread,
    ``sd_j * n ** (-1 / (d + 4))`` with ``n`` the set's size (the sizes are the
    same in every re-split, so the kernels are too and each re-split's density
    is one separable smoothing of its bin counts); densities normalised to sum
    1 and ``D = 1 - 0.5 * sum |p - q|``. Binning moves a record by at most half
    a grid step, the same for designed and re-split sets.

    Parameters
    ----------
    env : array_like, shape (n, p)
        Covariates at the fold's records (rows with a missing value are left out).
    evaluation : array_like of bool, shape (n,)
        True for evaluation records, False for calibration records.
    reference : array_like, shape (m, p), or ComponentSpace, optional
        Sample that sets the standardisation and the principal axes (default:
        the pooled records); a fitted :class:`ComponentSpace` when several
        folds share one reference.
    null_splits : int, default 199
    seed : int or numpy.random.Generator
    grid : int, default 64
        Lattice nodes per principal component.

    Returns
    -------
    splitter.dependence.resplit.NullComparison
        ``statistic`` is the designed split's D; ``null`` the re-splits' D.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x = rng.normal(size=(400, 2))
    >>> warm = x[:, 0] > 0.8
    >>> res = schoener_d_resplit(x, warm, null_splits=19, seed=1)
    >>> bool(res.statistic < res.null.min()), res.share
    (True, 1.0)
    """
    from splitter.dependence.resplit import NullComparison, check_null_splits, resplit_counts

    x = _matrix(env, "env")
    ev = np.asarray(evaluation, dtype=bool)
    if ev.shape != (x.shape[0],):
        raise InputError(f"evaluation must have one value per record ({x.shape[0]}), got shape {ev.shape}.")
    null_splits = check_null_splits(null_splits)
    if not isinstance(grid, (int, np.integer)) or grid < 10:
        raise InputError(f"grid must be an integer of at least 10, got {grid!r}.")
    ok = np.isfinite(x).all(axis=1)
    if not ok.all():
        x, ev = np.asfortranarray(x[ok]), ev[ok]
    p = x.shape[1]
    ncomp = 1 if p == 1 else 2
    n_e = int(ev.sum())
    n_c = int(ev.size - n_e)
    if min(n_e, n_c) < ncomp + 2:
        raise InputError(
            f"{n_c} calibration and {n_e} evaluation records with every covariate; a kernel density needs at least {ncomp + 2} in each."
        )
    if isinstance(reference, ComponentSpace):
        space = reference
        if space.rotation.shape[0] != p:
            raise InputError(f"reference has {space.rotation.shape[0]} covariates but the records have {p}.")
        pc = space.transform(x)
    else:
        ref = x if reference is None else reference
        space, pc_ref = ComponentSpace._fit(ref)
        if space.rotation.shape[0] != p:
            raise InputError(f"reference has {space.rotation.shape[0]} covariates but the records have {p}.")
        pc = pc_ref if reference is None else space.transform(x)
    spread = pc.std(axis=0)
    if not (spread > 0).all():
        raise InputError("The covariates of the fold's records do not vary (all share one environment); D is undefined.")
    d = ncomp
    h_e = spread * n_e ** (-1.0 / (d + 4))
    h_c = spread * n_c ** (-1.0 / (d + 4))
    lo, hi = np.minimum(pc.min(axis=0), space.lo), np.maximum(pc.max(axis=0), space.hi)
    span = np.maximum(hi - lo, 1e-9)
    pad = np.maximum(_PAD_BANDWIDTHS * np.maximum(h_e, h_c), 0.05 * span)
    axes = [np.linspace(lo[j] - pad[j], hi[j] + pad[j], int(grid)) for j in range(d)]
    step = np.array([a[1] - a[0] for a in axes])
    node = np.clip(np.rint((pc - np.array([a[0] for a in axes])) / step), 0, grid - 1).astype(np.intp)
    cell = node[:, 0] if d == 1 else node[:, 0] * grid + node[:, 1]
    n_cells = grid**d
    shape = (grid,) * d
    k_e = [_kernel_matrix(axes[j], h_e[j]) for j in range(d)]
    k_c = [_kernel_matrix(axes[j], h_c[j]) for j in range(d)]
    # Only cells holding records (as np.unique(cell, return_inverse=True), by counting, not sorting).
    per_cell = np.bincount(cell, minlength=n_cells)
    occupied = np.flatnonzero(per_cell)
    code_of = np.zeros(n_cells, np.intp)
    code_of[occupied] = np.arange(occupied.size)
    cell_code = code_of[cell]
    pooled = per_cell[occupied]

    def d_of(ev_counts: np.ndarray) -> np.ndarray:
        c = ev_counts.shape[0]
        ce = np.zeros((c, n_cells))
        ce[:, occupied] = ev_counts
        cc = np.zeros((c, n_cells))
        cc[:, occupied] = pooled[None, :] - ev_counts
        pe = _densities(ce.reshape((c,) + shape), k_e)
        pcl = _densities(cc.reshape((c,) + shape), k_c)
        dist = np.abs(pe - pcl).reshape(c, -1).sum(axis=1)
        return np.clip(1.0 - 0.5 * dist, 0.0, 1.0)

    observed = float(d_of(np.bincount(cell_code[ev], minlength=occupied.size)[None, :])[0])
    draws = resplit_counts(np.random.default_rng(seed), pooled, n_e, null_splits)
    chunk = max(1, 2_000_000 // n_cells)  # bounds the (c, grid, grid) work arrays
    null = np.concatenate([d_of(draws[s:s + chunk]) for s in range(0, null_splits, chunk)])
    return NullComparison(observed, null)


def mess(reference, query) -> np.ndarray:
    """Multivariate environmental similarity of query records to a reference sample.

    Per covariate, with ``f`` the percentage of reference values below the
    query value ``v`` and ``min``/``max`` the reference extremes::

        f == 0        : 100 (v - min) / (max - min)     (<= 0: at or below the minimum)
        0 < f <= 50   : 2 f
        50 <= f < 100 : 2 (100 - f)
        f == 100      : 100 (max - v) / (max - min)     (< 0: above the maximum)

    MESS is the minimum over covariates; negative = outside the reference
    envelope. A covariate constant in the reference gives 0 where the query
    equals the constant and -100 elsewhere (a convention: any departure from a
    single observed value is treated as a full-range departure). Missing query
    values give NaN; missing reference values are ignored.

    Parameters
    ----------
    reference : array_like, shape (n, p)
        Covariates at calibration records.
    query : array_like, shape (m, p)
        Covariates at evaluation records (or prediction locations).

    Returns
    -------
    ndarray, shape (m,)

    Examples
    --------
    >>> mess([[0.0], [1.0], [2.0]], [[1.5], [3.0]]).round(1).tolist()
    [66.7, -50.0]
    """
    ref = _matrix(reference, "reference")
    q = _matrix(query, "query")
    if ref.shape[1] != q.shape[1]:
        raise InputError(f"reference has {ref.shape[1]} covariates but query has {q.shape[1]}.")
    sims = np.empty(q.shape, dtype=float)
    for j in range(q.shape[1]):  # loop over covariates (a few); records are vectorised
        col = np.sort(ref[:, j][np.isfinite(ref[:, j])])
        if col.size == 0:
            raise InputError(f"Covariate {j + 1} has no finite reference value.")
        v = q[:, j]
        f = 100.0 * np.searchsorted(col, v, side="left") / col.size
        lo, hi = col[0], col[-1]
        rng = hi - lo
        with np.errstate(invalid="ignore", divide="ignore"):
            if rng > 0:
                below = 100.0 * (v - lo) / rng
                above = 100.0 * (hi - v) / rng
            else:
                below = np.where(v == lo, 0.0, -100.0)
                above = np.full(v.shape, -100.0)
        s = np.where(f <= 50, 2 * f, 2 * (100 - f))
        s = np.where(f == 0, below, s)
        s = np.where(f == 100, above, s)
        sims[:, j] = np.where(np.isfinite(v), s, np.nan)
    return sims.min(axis=1)


@dataclass(frozen=True, eq=False)
class CovariateRanges:
    """Per-covariate extremes of the calibration and evaluation records.

    Attributes
    ----------
    names : tuple[str, ...]
    calibration_min, calibration_max, evaluation_min, evaluation_max : ndarray
    share_outside : ndarray
        Share of evaluation records (with a value) outside the calibration range.
    """

    names: tuple
    calibration_min: np.ndarray
    calibration_max: np.ndarray
    evaluation_min: np.ndarray
    evaluation_max: np.ndarray
    share_outside: np.ndarray

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame(
            {
                "covariate": list(self.names),
                "calibration_min": self.calibration_min,
                "calibration_max": self.calibration_max,
                "evaluation_min": self.evaluation_min,
                "evaluation_max": self.evaluation_max,
                "share_outside": self.share_outside,
            }
        )

    def to_dict(self) -> dict:
        return {"covariates": [{k: (v if isinstance(v, str) else _num(v)) for k, v in r.items()}
                               for r in self.to_frame().to_dict(orient="records")]}

    @classmethod
    def from_dict(cls, doc: dict) -> CovariateRanges:
        """Rebuild from :meth:`to_dict` (null read as NaN)."""
        rows = doc["covariates"]

        def column(key):
            return np.array([r[key] for r in rows], dtype=float)  # None -> NaN

        return cls(names=tuple(str(r["covariate"]) for r in rows), calibration_min=column("calibration_min"),
                   calibration_max=column("calibration_max"), evaluation_min=column("evaluation_min"),
                   evaluation_max=column("evaluation_max"), share_outside=column("share_outside"))


def covariate_ranges(cal, eval, names=None) -> CovariateRanges:
    """Range of each covariate in calibration and evaluation records.

    Parameters
    ----------
    cal, eval : array_like, shape (n, p) and (m, p)
    names : list of str, optional
        Default ``"covariate_1" ...``.

    Returns
    -------
    CovariateRanges

    Examples
    --------
    >>> r = covariate_ranges([[0.0], [1.0]], [[0.5], [2.0]], ["t"])
    >>> float(r.share_outside[0])
    0.5
    """
    c = _matrix(cal, "cal")
    e = _matrix(eval, "eval")
    if c.shape[1] != e.shape[1]:
        raise InputError(f"cal has {c.shape[1]} covariates but eval has {e.shape[1]}.")
    p = c.shape[1]
    names = [f"covariate_{j + 1}" for j in range(p)] if names is None else [str(n) for n in names]
    if len(names) != p:
        raise InputError(f"There are {len(names)} names for {p} covariates.")

    def ext(m, fn):
        out = np.full(p, np.nan)
        has = np.isfinite(m).any(axis=0)
        if has.any():
            out[has] = fn(m[:, has], axis=0)
        return out

    cmin, cmax = ext(c, np.nanmin), ext(c, np.nanmax)
    emin, emax = ext(e, np.nanmin), ext(e, np.nanmax)
    fin = np.isfinite(e)
    with np.errstate(invalid="ignore"):
        out = ((e < cmin) | (e > cmax)) & fin
        n_fin = fin.sum(axis=0)
        share = np.where((n_fin > 0) & np.isfinite(cmin), out.sum(axis=0) / np.maximum(n_fin, 1), np.nan)
    return CovariateRanges(tuple(names), cmin, cmax, emin, emax, share)
