"""True area of raster cells, so that area shares are shares of land, not of cells.

In a longitude/latitude raster a cell near the pole covers far less ground than a
cell at the equator; counting cells would overweight high latitudes in the binomial
test and the partial ROC. :func:`cell_areas` gives the area of the cells of each
row (all cells of a row share it).
"""

from __future__ import annotations

import numpy as np
from pyproj import CRS

from splitter.errors import InputError

__all__ = ["cell_areas"]


def _authalic_q(phi: np.ndarray, e: float) -> np.ndarray:
    """Snyder's q(phi): the ellipsoidal zone area from the equator to latitude phi,
    per radian of longitude, is a**2 * q / 2 ("Map Projections: A Working Manual",
    U.S. Geological Survey Professional Paper 1395, 1987)."""
    s = np.sin(phi)
    if e == 0.0:
        # Sphere: the zone area per radian is a**2 * sin(phi), i.e. q = 2 sin(phi).
        return 2.0 * s
    es = e * e
    return (1.0 - es) * (s / (1.0 - es * s * s) - np.log((1.0 - e * s) / (1.0 + e * s)) / (2.0 * e))


def _as_crs(crs) -> CRS:
    if crs is None:
        raise InputError("The raster has no CRS; set one (e.g. EPSG:4326) so cell areas can be computed.")
    try:
        return CRS.from_user_input(crs)
    except Exception as exc:  # pyproj raises its own CRSError for unreadable input
        raise InputError(f"Cannot read the raster CRS {crs!r} ({exc}); give an EPSG code or WKT.") from None


def cell_areas(transform, height: int, width: int, crs) -> np.ndarray:
    """Area of the cells of each raster row, in km².

    Parameters
    ----------
    transform : affine.Affine
        The raster's affine transform (rasterio's ``dataset.transform``).
    height, width : int
        Raster shape in rows and columns.
    crs : pyproj.CRS, rasterio CRS, EPSG code or WKT
        The raster's coordinate reference system.

    Returns
    -------
    numpy.ndarray, shape (height,)
        Area in km² of one cell of each row.

    Raises
    ------
    InputError
        Without a CRS, for an empty raster, or for a rotated geographic raster.

    Notes
    -----
    Geographic CRS: the exact area of the ellipsoidal zone between the row's upper
    and lower latitudes over the cell's longitude width,
    ``a² · Δλ · |q(φ₂) − q(φ₁)| / 2`` with Snyder's authalic ``q`` on the CRS's
    ellipsoid. Latitudes beyond ±90° are clipped to the pole.
    Projected CRS: ``|a·e − b·d|`` (the cell's parallelogram area) in the CRS's
    linear unit, converted to km². Equal-area projections give true areas; other
    projections give map areas, which is why geographic rasters are handled exactly.

    Examples
    --------
    >>> from affine import Affine
    >>> a = cell_areas(Affine(1.0, 0, 0, 0, -1.0, 1.0), 1, 1, "EPSG:4326")
    >>> round(float(a[0]), 1)  # 1 degree square at the equator
    12308.5
    """
    height = int(height)
    width = int(width)
    if height < 1 or width < 1:
        raise InputError(f"Raster shape {height} x {width} is empty; cell areas need at least one cell.")
    crs = _as_crs(crs)
    if crs.is_compound:
        # A compound CRS (horizontal + vertical): only the horizontal part matters.
        crs = crs.sub_crs_list[0]
    a, b, c, d, e, f = (float(v) for v in tuple(transform)[:6])
    if crs.is_geographic:
        if b != 0.0 or d != 0.0:
            raise InputError(
                "The geographic raster is rotated; warp it to a north-up grid before computing cell areas."
            )
        # Angular unit to radians (degrees for nearly every geographic CRS).
        to_rad = float(crs.axis_info[0].unit_conversion_factor) if crs.axis_info else np.pi / 180.0
        geod = crs.get_geod()
        semi_major = float(geod.a)
        ecc = float(np.sqrt(geod.es))
        edges = f + e * np.arange(height + 1, dtype=float)
        phi = np.clip(edges * to_rad, -np.pi / 2.0, np.pi / 2.0)
        q = _authalic_q(phi, ecc)
        zone = semi_major**2 * np.abs(np.diff(q)) / 2.0  # m² per radian of longitude
        dlon = abs(a) * to_rad
        return zone * dlon / 1.0e6
    if crs.is_projected or crs.type_name == "Engineering CRS":
        # (A local planar grid, planar:km / planar:m, has a stated length unit too.)
        # Linear unit to metres (1 for metre CRSs, 1200/3937 for US survey feet).
        unit = float(crs.axis_info[0].unit_conversion_factor)
        area_m2 = abs(a * e - b * d) * unit * unit
        return np.full(height, area_m2 / 1.0e6)
    raise InputError(f"The CRS {crs.name!r} is neither geographic nor projected; reproject the raster.")
