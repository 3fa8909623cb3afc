"""Outside reference for raster cell areas: pyproj.Geod.polygon_area_perimeter.

Written for the tests only. A cell of a north-up longitude/latitude raster is the
region between two parallels and two meridians; its outline is given to
``pyproj.Geod(ellps="WGS84").polygon_area_perimeter`` with each parallel edge
densified (a geodesic between two points of one parallel bulges poleward; with 256
pieces per edge the bulge's area is below 1e-9 of the cell's).
"""

from __future__ import annotations

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")  # the ellipsoid of EPSG:4326


def geodesic_row_areas_km2(transform, height: int, pieces: int = 256) -> np.ndarray:
    """Area in km² of one cell of each row of a north-up lon/lat raster (pyproj.Geod)."""
    west, dx = transform.c, transform.a
    out = np.empty(int(height))
    lons = np.linspace(west, west + dx, pieces + 1)
    for r in range(int(height)):
        top = transform.f + r * transform.e
        bottom = top + transform.e
        lon = np.r_[lons, lons[::-1]]
        lat = np.r_[np.full(lons.size, top), np.full(lons.size, bottom)]
        area, _ = GEOD.polygon_area_perimeter(lon, lat)
        out[r] = abs(area) / 1e6
    return out
