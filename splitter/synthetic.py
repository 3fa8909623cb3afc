"""Stationary Gaussian random fields with a known covariance, for invented test landscapes.

The fields are simulated exactly (not approximately) by circulant embedding of the
covariance matrix: the grid is embedded in a larger periodic grid, the covariance of the
periodic grid is diagonalised by the FFT, and a field with exactly the requested covariance
at every pair of grid nodes is one FFT of scaled white noise away. The method is described in
"Fast and exact simulation of stationary Gaussian processes through circulant embedding of
the covariance matrix" (SIAM Journal on Scientific Computing, 1997) and "Simulation of
stationary Gaussian processes in [0, 1]^d" (Journal of Computational and Graphical
Statistics, 1994).

Range convention
----------------
Throughout `splitter`, ``range_km`` is the **effective range**: the distance at which the
correlation has dropped to exactly 0.05. With ``a = range_km``:

* exponential model: ``C(h) = sd**2 * exp(-ln(20) * h / a)``
  (the usual "practical range = 3 x scale" convention gives correlation exp(-3) = 0.0498
  at the range; ours is ln(20) = 2.996 x scale, so the two agree to 0.2 %);
* gaussian model: ``C(h) = sd**2 * exp(-ln(20) * (h / a)**2)``.

So ``correlation(range_km, range_km, model) == 0.05`` for both models.
"""

from __future__ import annotations


import numpy as np
from scipy.fft import next_fast_len

from splitter.errors import InputError

__all__ = ["MODELS", "correlation", "covariance", "gaussian_field"]

#: Covariance models that :func:`gaussian_field` can simulate.
MODELS = ("exponential", "gaussian")

# ln(20): the factor that puts the correlation at exactly 0.05 at the effective range.
_LN20 = float(np.log(20.0))

# Eigenvalues of the embedded covariance that are negative but smaller than this share of
# the largest one are floating-point rounding, not a failure of the embedding; they are
# set to zero. Anything more negative means the periodic grid is too small and is enlarged.
_EIGEN_TOLERANCE = 1e-9

# Largest periodic grid (nodes) we are willing to build before giving up (~270 MB complex).
_MAX_EMBEDDING_NODES = 2**24


def _check_model(model: str) -> None:
    if model not in MODELS:
        raise InputError(
            f"Unknown covariance model {model!r}; use one of {', '.join(MODELS)}."
        )


def _check_range(range_km: float) -> float:
    try:
        value = float(range_km)
    except (TypeError, ValueError):
        raise InputError(f"range_km must be a number of kilometres, got {range_km!r}.") from None
    if not np.isfinite(value) or value <= 0:
        raise InputError(f"range_km must be a positive finite distance, got {range_km!r}.")
    return value


def correlation(distance_km, range_km: float, model: str = "exponential") -> np.ndarray:
    """Correlation of the field between two points ``distance_km`` apart.

    Parameters
    ----------
    distance_km : array_like
        Non-negative separation distances (km).
    range_km : float
        Effective range (km): the correlation is exactly 0.05 at this distance.
    model : {"exponential", "gaussian"}
        Covariance model (see the module docstring for the formulas).

    Returns
    -------
    ndarray
        Correlation in (0, 1], same shape as ``distance_km``.

    Examples
    --------
    >>> from splitter.synthetic import correlation
    >>> round(float(correlation(80.0, range_km=80.0)), 6)
    0.05
    """
    _check_model(model)
    a = _check_range(range_km)
    h = np.abs(np.asarray(distance_km, dtype=float)) / a
    if model == "exponential":
        return np.exp(-_LN20 * h)
    return np.exp(-_LN20 * h * h)


def covariance(distance_km, range_km: float, model: str = "exponential", sd: float = 1.0) -> np.ndarray:
    """Covariance ``sd**2 * correlation(distance_km, range_km, model)``.

    Examples
    --------
    >>> from splitter.synthetic import covariance
    >>> float(covariance(0.0, range_km=50.0, sd=2.0))
    4.0
    """
    return float(sd) ** 2 * correlation(distance_km, range_km, model)


def _normalise_cell_size(cell_size_km, ndim: int) -> tuple[float, ...]:
    if np.isscalar(cell_size_km):
        sizes = (cell_size_km,) * ndim
    else:
        sizes = tuple(cell_size_km)
        if len(sizes) != ndim:
            raise InputError(
                f"cell_size_km has {len(sizes)} entries but the grid has {ndim} axes; "
                "give one size for all axes or one per axis."
            )
    try:
        sizes = tuple(float(s) for s in sizes)
    except (TypeError, ValueError):
        raise InputError(f"cell_size_km must be numbers of kilometres, got {cell_size_km!r}.") from None
    if not all(np.isfinite(s) and s > 0 for s in sizes):
        raise InputError(f"cell_size_km must be positive finite distances, got {cell_size_km!r}.")
    return sizes


def _normalise_shape(shape) -> tuple[int, ...]:
    if np.isscalar(shape):
        shape = (shape,)
    try:
        dims = tuple(int(n) for n in shape)
    except (TypeError, ValueError):
        raise InputError(f"shape must be a tuple of positive integers, got {shape!r}.") from None
    if not 1 <= len(dims) <= 3 or any(n < 1 for n in dims) or any(
        int(n) != n for n in shape
    ):
        raise InputError(
            f"shape must be 1 to 3 positive integers (rows, columns, ...), got {shape!r}."
        )
    return dims


def _embedding_eigenvalues(
    embed: tuple[int, ...], cell: tuple[float, ...], range_km: float, model: str
) -> np.ndarray:
    """Eigenvalues of the block-circulant correlation matrix on the periodic grid ``embed``."""
    # Lag distance from node 0 on the torus: along each axis the shorter way round.
    squared = np.zeros(embed, dtype=float)
    for axis, (m, d) in enumerate(zip(embed, cell)):
        j = np.arange(m)
        lag = np.minimum(j, m - j) * d
        view = [1] * len(embed)
        view[axis] = m
        squared = squared + (lag * lag).reshape(view)
    base = correlation(np.sqrt(squared), range_km, model)
    # base is symmetric under j -> m - j on every axis, so its DFT is real.
    return np.fft.fftn(base).real


def _circulant_eigenvalues(
    dims: tuple[int, ...], cell: tuple[float, ...], range_km: float, model: str
) -> np.ndarray:
    """Non-negative eigenvalues of a periodic embedding of the grid ``dims``.

    The inverse FFT of the result is the covariance that the simulated field has; on lags
    inside the real grid it equals the model's correlation (up to rounding).
    """
    # Smallest periodic grid that holds every lag of the real grid once: 2(n - 1) per axis.
    embed = tuple(1 if n == 1 else next_fast_len(2 * (n - 1)) for n in dims)
    while True:
        eig = _embedding_eigenvalues(embed, cell, range_km, model)
        top = eig.max()
        if eig.min() >= -_EIGEN_TOLERANCE * top:
            break
        # Negative eigenvalues: correlation has not decayed enough across the torus.
        # Enlarge it (the exact covariance on the real grid is kept at any size).
        embed = tuple(1 if n == 1 else next_fast_len(int(m * 1.5) + 1) for n, m in zip(dims, embed))
        if int(np.prod(embed)) > _MAX_EMBEDDING_NODES:
            raise InputError(
                f"A range of {range_km:g} km is too large for a grid of shape {dims} with cells "
                f"of {cell} km to be simulated exactly; use a smaller range_km or a larger grid."
            )
    return np.clip(eig, 0.0, None)


def gaussian_field(
    shape,
    cell_size_km,
    range_km: float,
    seed,
    model: str = "exponential",
    mean: float = 0.0,
    sd: float = 1.0,
) -> np.ndarray:
    """Simulate a stationary, isotropic Gaussian random field on a regular grid.

    The covariance between any two grid nodes is exactly ``covariance(h, range_km, model,
    sd)`` with ``h`` their Euclidean distance in km (circulant embedding; see the module
    docstring).

    Parameters
    ----------
    shape : int or tuple of int
        Grid shape, e.g. ``(rows, columns)``; 1 to 3 axes.
    cell_size_km : float or sequence of float
        Node spacing in km, one value for all axes or one per axis (rows first).
    range_km : float
        Effective range in km: the correlation is exactly 0.05 at this distance.
    seed : int, numpy.random.SeedSequence or numpy.random.Generator
        Seed for ``numpy.random.default_rng``; the same seed gives the same field.
    model : {"exponential", "gaussian"}
        ``exponential`` gives rough surfaces, ``gaussian`` very smooth ones.
    mean, sd : float
        Mean and standard deviation of the field at every node.

    Returns
    -------
    ndarray of float64, shape ``shape``

    Raises
    ------
    InputError
        If an argument is out of range or the periodic grid needed for an exact
        simulation would be too large (range far larger than the grid).

    Examples
    --------
    >>> from splitter.synthetic import gaussian_field
    >>> z = gaussian_field((200, 240), cell_size_km=5.0, range_km=80.0, seed=1)
    >>> z.shape
    (200, 240)
    """
    _check_model(model)
    range_km = _check_range(range_km)
    dims = _normalise_shape(shape)
    cell = _normalise_cell_size(cell_size_km, len(dims))
    try:
        mean = float(mean)
        sd = float(sd)
    except (TypeError, ValueError):
        raise InputError(f"mean and sd must be numbers, got mean={mean!r}, sd={sd!r}.") from None
    if not (np.isfinite(mean) and np.isfinite(sd)) or sd < 0:
        raise InputError(f"mean must be finite and sd a non-negative number, got mean={mean}, sd={sd}.")

    eig = _circulant_eigenvalues(dims, cell, range_km, model)
    embed = eig.shape

    rng = np.random.default_rng(seed)
    noise = rng.standard_normal((2,) + embed)
    # With complex white noise e (E|e|^2 = 2) and L the eigenvalues, Re(FFT(sqrt(L / M) e))
    # has covariance exactly equal to the circulant matrix, whose top-left block is ours.
    scaled = np.sqrt(eig / eig.size) * (noise[0] + 1j * noise[1])
    field = np.fft.fftn(scaled).real
    window = tuple(slice(0, n) for n in dims)
    return mean + sd * field[window]
