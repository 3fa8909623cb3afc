"""Distances, nearest neighbours and equal-area projections.

Distances are geodesic on the WGS84 ellipsoid (``pyproj.Geod``) for geographic
coordinates and Euclidean for a projected CRS, always returned in kilometres.

Nearest-neighbour search for geographic points uses a KD-tree on unit-sphere
Cartesian coordinates (chord distance is monotone in great-circle distance), then
measures the candidates on the ellipsoid. Because the sphere and the ellipsoid
disagree by well under 1 %, a second, bounded query over every candidate within
1 % of the first answer makes the result the exact geodesic nearest neighbour.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyproj
import pyproj.exceptions
from scipy.spatial import cKDTree

from splitter.errors import InputError
from splitter.threads import side_by_side, threads

WGS84 = pyproj.CRS.from_epsg(4326)
GEOD = pyproj.Geod(ellps="WGS84")
# Sphere-vs-ellipsoid distance disagreement is < 0.5 %; 1 % leaves margin.
_SPHERE_SLACK = 1.01
_EARTH_RADIUS_KM = 6371.0088


@dataclass(frozen=True)
class Points:
    """Point coordinates with their CRS.

    Parameters
    ----------
    x, y : ndarray
        Longitude/latitude (degrees) for a geographic CRS, easting/northing otherwise.
    crs : pyproj.CRS

    Examples
    --------
    >>> p = Points.lonlat([10.0, 11.0], [45.0, 45.0])
    >>> distance_km(p, Points.lonlat([10.0, 11.0], [46.0, 45.0])).round(1).tolist()
    [111.1, 0.0]
    """

    x: np.ndarray
    y: np.ndarray
    crs: pyproj.CRS

    def __post_init__(self):
        x = np.asarray(self.x, dtype=float)
        y = np.asarray(self.y, dtype=float)
        if x.shape != y.shape or x.ndim != 1:
            raise InputError("x and y must be 1-D arrays of the same length.")
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "y", y)
        object.__setattr__(self, "crs", pyproj.CRS.from_user_input(self.crs))

    @classmethod
    def lonlat(cls, lon, lat) -> "Points":
        return cls(np.asarray(lon, float), np.asarray(lat, float), WGS84)

    def __len__(self) -> int:
        return self.x.shape[0]

    @property
    def geographic(self) -> bool:
        return bool(self.crs.is_geographic)

    def take(self, index) -> "Points":
        return Points(self.x[index], self.y[index], self.crs)

    def to_crs(self, crs) -> "Points":
        crs = pyproj.CRS.from_user_input(crs)
        if crs == self.crs:
            return self
        if is_planar(self.crs) or is_planar(crs):
            # A local grid has no known relation to the Earth: only its own unit can change.
            if not (is_planar(self.crs) and is_planar(crs)):
                raise InputError(f"crs={crs_text(self.crs)}: a planar grid with no known projection cannot be "
                                 f"converted to {crs_text(crs)[:60]}; give every input in the same grid.")
            f = _axis_factor(self.crs) / _axis_factor(crs)
            return Points(self.x * f, self.y * f, crs)
        tr = pyproj.Transformer.from_crs(self.crs, crs, always_xy=True)
        x, y = tr.transform(self.x, self.y)
        return Points(np.asarray(x, float), np.asarray(y, float), crs)

    def to_lonlat(self) -> "Points":
        return self.to_crs(WGS84)


# Planar coordinates with a stated unit and no known projection (a survey's local
# grid): an ISO 19111 engineering CRS, so files that carry a CRS can say so.
PLANAR_UNITS = {"km": ("kilometre", 1000.0), "m": ("metre", 1.0)}


def planar_crs(unit: str) -> pyproj.CRS:
    """The engineering CRS (WKT ``ENGCRS``) of a local planar grid in ``unit`` ("km" or "m").

    Examples
    --------
    >>> c = planar_crs("km")
    >>> c.type_name, c.axis_info[0].unit_conversion_factor, crs_text(c)
    ('Engineering CRS', 1000.0, 'planar:km')
    """
    if unit not in PLANAR_UNITS:
        raise InputError(f"crs='planar:{unit}': a planar grid's unit is km or m (planar:km, planar:m); "
                         "rescale other units first (e.g. 100 m grid units: multiply by 0.1 for km).")
    name, factor = PLANAR_UNITS[unit]
    axis = lambda label, direction, order: (  # noqa: E731
        f'AXIS["{label}",{direction},ORDER[{order}],LENGTHUNIT["{name}",{factor:g}]]')
    return pyproj.CRS.from_wkt(
        f'ENGCRS["planar grid in {name}s, projection unknown",EDATUM["local survey grid"],'
        f'CS[Cartesian,2],{axis("easting (x)", "east", 1)},{axis("northing (y)", "north", 2)}]')


def is_planar(crs) -> bool:
    """True for an engineering (local planar) CRS."""
    return crs is not None and pyproj.CRS.from_user_input(crs).type_name == "Engineering CRS"


def parse_crs(crs) -> pyproj.CRS:
    """A CRS from user input: ``planar:km`` / ``planar:m``, or anything pyproj reads."""
    if isinstance(crs, str) and crs.strip().lower().startswith("planar"):
        unit = crs.strip().lower().partition(":")[2].strip()
        return planar_crs(unit)
    try:
        return pyproj.CRS.from_user_input(crs)
    except pyproj.exceptions.CRSError:
        raise InputError(f"crs={crs!r}: not a CRS pyproj knows; give e.g. EPSG:4326, EPSG:3035, "
                         "or planar:km / planar:m for a local grid.") from None


def crs_text(crs) -> str:
    """A CRS as text that :func:`parse_crs` reads back: planar:UNIT, EPSG:N or WKT."""
    crs = pyproj.CRS.from_user_input(crs)
    if is_planar(crs):
        factor = _axis_factor(crs)
        return "planar:km" if factor == 1000.0 else "planar:m" if factor == 1.0 else crs.to_wkt()
    epsg = crs.to_epsg()
    return f"EPSG:{epsg}" if epsg else crs.to_wkt()


def _axis_factor(crs: pyproj.CRS) -> float:
    return float(crs.axis_info[0].unit_conversion_factor) if crs.axis_info else 1.0


def _unit_factor_km(crs: pyproj.CRS) -> float:
    """Kilometres per unit of a projected CRS's first axis."""
    factor = crs.axis_info[0].unit_conversion_factor if crs.axis_info else 1.0
    return float(factor) / 1000.0


def equal_area_crs(points: Points) -> pyproj.CRS:
    """Lambert azimuthal equal-area CRS centred on the points (metres).

    The centre is the midpoint of the points' latitude range and the circular
    mean of their longitudes, so a block of L km has area L² wherever it lies.
    """
    ll = points.to_lonlat()
    ok = np.isfinite(ll.x) & np.isfinite(ll.y)
    if not ok.any():
        raise InputError("No record has usable coordinates.")
    lon = np.deg2rad(ll.x[ok])
    lon0 = float(np.rad2deg(np.arctan2(np.sin(lon).mean(), np.cos(lon).mean())))
    lat0 = float((ll.y[ok].min() + ll.y[ok].max()) / 2)
    return pyproj.CRS.from_proj4(
        f"+proj=laea +lat_0={lat0:.6f} +lon_0={lon0:.6f} +x_0=0 +y_0=0 "
        "+datum=WGS84 +units=m +no_defs"
    )


def planar_km(points: Points, crs: pyproj.CRS) -> tuple[np.ndarray, np.ndarray]:
    """Coordinates of ``points`` in a projected ``crs``, in kilometres."""
    p = points.to_crs(crs)
    f = _unit_factor_km(p.crs)
    return p.x * f, p.y * f


def generalise_points(points: Points, cell_km: float, plane: pyproj.CRS | None = None) -> Points:
    """Points moved to the centres of ``cell_km`` square cells of a planar grid (same CRS back).

    The grid lies in ``plane`` (a projected CRS; default: the points' own CRS when
    projected or a local planar grid, else the equal-area CRS centred on them),
    anchored at its origin: cell ``(i, j)`` spans ``[i L, (i + 1) L)`` km and its centre
    is ``(i + 0.5) L``. Missing coordinates stay missing. For sharing locations of
    sensitive species; computations use the exact points.

    Examples
    --------
    >>> p = generalise_points(Points([0.2e3, 12.9e3], [5.0e3, 7.4e3], "EPSG:3035"), 10.0)
    >>> p.x.tolist(), p.y.tolist()
    ([5000.0, 15000.0], [5000.0, 5000.0])
    """
    cell = float(cell_km) if isinstance(cell_km, (int, float, np.number)) and not isinstance(cell_km, bool) else np.nan
    if not np.isfinite(cell) or cell <= 0:
        raise InputError(f"generalise_km={cell_km!r}: give a cell size in km greater than 0.")
    if plane is None:
        plane = points.crs if not points.geographic else equal_area_crs(points)
    ok = np.isfinite(points.x) & np.isfinite(points.y)
    x, y = np.full(len(points), np.nan), np.full(len(points), np.nan)
    if ok.any():
        f = _unit_factor_km(plane)
        px, py = planar_km(points.take(np.flatnonzero(ok)), plane)
        snapped = Points((np.floor(px / cell) + 0.5) * cell / f, (np.floor(py / cell) + 0.5) * cell / f, plane)
        back = snapped.to_crs(points.crs)
        x[ok], y[ok] = back.x, back.y
    return Points(x, y, points.crs)


def distance_km(a: Points, b: Points) -> np.ndarray:
    """Element-wise distance between two equally long point sets (km).

    Geodesic on WGS84 when the CRS is geographic, Euclidean otherwise; ``b`` is
    first converted to ``a``'s CRS.

    Parameters
    ----------
    a, b : Points
        The same number of points; the i-th distance is from ``a``'s i-th point
        to ``b``'s i-th point. Coordinates must be finite, and latitudes within
        [-90, 90] and longitudes within [-360, 360] for a geographic CRS.

    Raises
    ------
    splitter.errors.InputError
        When the lengths differ, a coordinate is missing or out of range, or
        ``b``'s CRS cannot be converted to ``a``'s.

    Examples
    --------
    >>> a = Points.lonlat([10.0, 0.0], [45.0, 0.0])
    >>> b = Points.lonlat([10.0, 1.0], [46.0, 0.0])
    >>> distance_km(a, b).round(1).tolist()  # 1 degree of latitude, 1 degree of longitude at the equator
    [111.1, 111.3]
    >>> distance_km(a, Points.lonlat([10.0], [46.0]))
    Traceback (most recent call last):
    ...
    splitter.errors.InputError: distance_km pairs the i-th point of a with the i-th point of b, but a has 2 points and b has 1; give both the same number of points.
    """
    for name, p in (("a", a), ("b", b)):
        if not isinstance(p, Points):
            raise InputError(f"distance_km: {name} must be a splitter Points object, not {type(p).__name__}.")
    if len(a) != len(b):
        raise InputError(f"distance_km pairs the i-th point of a with the i-th point of b, but a has {len(a)} "
                         f"points and b has {len(b)}; give both the same number of points.")
    if a.crs != b.crs:
        try:
            b = b.to_crs(a.crs)
        except pyproj.exceptions.ProjError as e:
            raise InputError(f"distance_km: b's CRS ({b.crs.name}) cannot be converted to a's CRS ({a.crs.name}); "
                             "give both point sets in one CRS.") from e
    for name, p in (("a", a), ("b", b)):
        _check_coordinates(name, p)
    return _distance_km(a, b)


def _check_coordinates(name: str, p: Points) -> None:
    bad = ~(np.isfinite(p.x) & np.isfinite(p.y))
    what = "has a missing or infinite coordinate"
    if p.geographic and not bad.any():
        bad = (np.abs(p.y) > 90) | (np.abs(p.x) > 360)
        what = "has a latitude outside [-90, 90] or a longitude outside [-360, 360]"
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"distance_km: point {i} of {name} ({p.x[i]:g}, {p.y[i]:g}) {what}; "
                         f"{int(bad.sum())} such point(s) in all.")


def _distance_km(a: Points, b: Points, workers: int | None = None) -> np.ndarray:
    """distance_km without the checks, for points this module has already checked or made."""
    if a.crs != b.crs:
        b = b.to_crs(a.crs)
    if a.geographic:
        ll_a, ll_b = a.to_lonlat(), b.to_lonlat()
        return _geodesic_km(ll_a.x, ll_a.y, ll_b.x, ll_b.y, workers)
    f = _unit_factor_km(a.crs)
    return np.hypot(a.x - b.x, a.y - b.y) * f


_GEODESIC_PART = 10_000  # pairs per thread below which a second thread saves too little (~7 ms)


def _geodesic_km(lon1, lat1, lon2, lat2, workers: int | None = None) -> np.ndarray:
    """Geodesic distance (km) on WGS84 between paired points, in parts over ``workers`` threads
    (default :func:`splitter.threads.threads`).

    pyproj's ``Geod.inv`` releases the GIL (geographiclib's solver reads the ellipsoid and
    writes nothing shared), so parts of a long array run on separate cores; each pair's
    distance is the same as from one call.
    """
    n = np.size(lon1)
    parts = max(1, min(threads() if workers is None else workers, n // _GEODESIC_PART))
    if parts < 2:
        return np.asarray(GEOD.inv(lon1, lat1, lon2, lat2)[2], float) / 1000.0
    cuts = np.linspace(0, n, parts + 1).astype(np.int64)

    def part(s):
        return np.asarray(GEOD.inv(lon1[s], lat1[s], lon2[s], lat2[s])[2], float)

    pieces = side_by_side([lambda s=slice(a, b): part(s) for a, b in zip(cuts[:-1], cuts[1:])], parts)
    return np.concatenate(pieces) / 1000.0


def _unit_xyz(points: Points) -> np.ndarray:
    ll = points.to_lonlat()
    lon, lat = np.deg2rad(ll.x), np.deg2rad(ll.y)
    c = np.cos(lat)
    return np.column_stack([c * np.cos(lon), c * np.sin(lon), np.sin(lat)])


def _chord(km):
    return 2.0 * np.sin(np.minimum(np.asarray(km, float) / (2 * _EARTH_RADIUS_KM), np.pi / 2))


class NeighbourIndex:
    """Nearest-neighbour index over reference points; answers in kilometres.

    Examples
    --------
    >>> ref = Points.lonlat([0.0, 1.0], [0.0, 0.0])
    >>> d, i = NeighbourIndex(ref).nearest(Points.lonlat([0.9], [0.0]))
    >>> int(i[0])
    1
    """

    def __init__(self, reference: Points, workers: int | None = None):
        if len(reference) == 0:
            raise InputError("The reference point set is empty.")
        self.reference = reference
        # Threads for the queries and geodesics (default: threads()); 1 when the caller
        # already runs several indexes side by side.
        self.workers = threads() if workers is None else int(workers)
        # Midpoint splits (balanced_tree=False) build in two thirds of the time of median
        # splits (which scipy's cKDTree documents as more compact, slower to build); on
        # clustered records the queries measured as fast. Leaves of 32 points instead of 16:
        # the 3-nearest queries measured 6-13 % faster (2e5 records, tests/benchmarks).
        # Neither changes an answer: ties are settled by index, not by the tree's layout.
        if reference.geographic:
            self._tree = cKDTree(_unit_xyz(reference), leafsize=32, balanced_tree=False)
        else:
            self._tree = cKDTree(np.column_stack([reference.x, reference.y]), leafsize=32, balanced_tree=False)
            self._factor = _unit_factor_km(reference.crs)

    def nearest(self, query: Points) -> tuple[np.ndarray, np.ndarray]:
        """Distance (km) and index of the nearest reference point for each query point."""
        if query.crs != self.reference.crs:
            query = query.to_crs(self.reference.crs)
        n = len(query)
        if n == 0:
            return np.zeros(0), np.zeros(0, dtype=np.int64)
        if not self.reference.geographic:
            d, i = self._tree.query(np.column_stack([query.x, query.y]), k=1, workers=self.workers)
            return d * self._factor, i.astype(np.int64)

        xyz = _unit_xyz(query)
        nref = len(self.reference)
        # Three candidates: most rows whose second is within the slack have no third there,
        # so the second is measured from this query and only the rest search again.
        k = min(3, nref)
        dd, ii = self._tree.query(xyz, k=k, workers=self.workers)
        dd, ii = dd.reshape(n, k), ii.reshape(n, k)
        idx = ii[:, 0].astype(np.int64)
        best = _distance_km(query, self.reference.take(idx), self.workers)
        # Any point nearer on the ellipsoid is within the slack on the sphere.
        bound = _chord(best * _SPHERE_SLACK) * 1.000001 + 1e-12
        todo = np.flatnonzero(dd[:, 1] <= bound) if k > 1 else np.zeros(0, np.int64)
        best, idx = self._refine(query, xyz, todo, best, idx, bound, 8, first=(dd[todo], ii[todo]))
        return best, idx

    def nearest_other(self) -> tuple[np.ndarray, np.ndarray]:
        """Leave-self-out: distance (km) and index of each reference point's nearest *other* point.

        A point sharing its location with another gets 0; a lone point gets NaN and index -1.

        Examples
        --------
        >>> d, i = NeighbourIndex(Points.lonlat([0.0, 0.0, 1.0], [0.0, 0.0, 0.0])).nearest_other()
        >>> d.round(1).tolist(), i.tolist()
        ([0.0, 0.0, 111.3], [1, 0, 0])
        """
        ref = self.reference
        n = len(ref)
        if n < 2:
            return np.full(n, np.nan), np.full(n, -1, np.int64)
        self_idx = np.arange(n)
        coords = _unit_xyz(ref) if ref.geographic else np.column_stack([ref.x, ref.y])
        # Geographic: one candidate more than the point and its nearest, so that only the
        # rows whose next candidate is still within the slack need the wider search (a
        # fourth candidate, as in nearest(), measured slower here).
        k = 2 if not ref.geographic else min(3, n)
        dd, ii = self._tree.query(coords, k=k, workers=self.workers)
        # With duplicates the first neighbour may be another point at distance 0.
        col = np.where(ii[:, 0] == self_idx, 1, 0)
        idx = ii[self_idx, col].astype(np.int64)
        if not ref.geographic:
            return dd[self_idx, col] * self._factor, idx
        best = _distance_km(ref, ref.take(idx), self.workers)
        bound = _chord(best * _SPHERE_SLACK) * 1.000001 + 1e-12
        # Any point nearer on the ellipsoid is within the slack on the sphere: a row whose
        # last candidate lies beyond it has seen every such point (itself and its nearest).
        todo = np.flatnonzero(dd[:, -1] <= bound) if k > 2 else self_idx
        return self._refine(ref, coords, todo, best, idx, bound, 8, exclude=self_idx)

    def _refine(self, query, xyz, todo, best, idx, bound, k, exclude=None, first=None):
        """Check every candidate within ``bound`` (chord) for the rows in ``todo``.

        ``exclude[row]`` names a reference index that row must not take (itself). The row's
        current ``idx`` is not measured again: its distance is ``best`` already. ``first``,
        the (distances, indices) of a query already made for the rows in ``todo``, is their
        first round; later rounds ask the tree for ``k``, then 4k, ... candidates.
        """
        nref = len(self.reference)
        pending = first
        while todo.size:
            if pending is not None:
                (dd, ii), pending = pending, None
                kk = dd.shape[1]
            else:
                kk = min(k, nref)
                dd, ii = self._tree.query(xyz[todo], k=kk, workers=self.workers)
                dd = dd.reshape(len(todo), kk)
                ii = ii.reshape(len(todo), kk)
                k *= 4
            inside = dd <= bound[todo, None]
            found = inside & (ii != idx[todo, None])
            if exclude is not None:
                found &= ii != exclude[todo, None]
            rows, cols = np.nonzero(found)
            if rows.size:
                qsel = todo[rows]
                cand = ii[rows, cols].astype(np.int64)
                dist = _distance_km(query.take(qsel), self.reference.take(cand), self.workers)
                order = np.lexsort((cand, dist, qsel))
                qsel, cand, dist = qsel[order], cand[order], dist[order]
                first = np.r_[True, qsel[1:] != qsel[:-1]]
                q1, c1, d1 = qsel[first], cand[first], dist[first]
                better = (d1 < best[q1]) | ((d1 == best[q1]) & (c1 < idx[q1]))
                best[q1[better]] = d1[better]
                idx[q1[better]] = c1[better]
            # Rows whose k-th candidate was still inside the bound may hide more.
            todo = todo[inside[:, -1]]
            if kk >= nref:
                break
        return best, idx

    def within(self, query: Points, radius_km: float) -> np.ndarray:
        """Boolean mask: query points with a reference point closer than ``radius_km``.

        Faster than :meth:`nearest` for a small radius: the tree search stops at
        the radius, so far-away points cost almost nothing.
        """
        if query.crs != self.reference.crs:
            query = query.to_crs(self.reference.crs)
        n = len(query)
        if n == 0 or radius_km <= 0:
            return np.zeros(n, bool)
        if not self.reference.geographic:
            d, _ = self._tree.query(np.column_stack([query.x, query.y]), k=1,
                                    distance_upper_bound=radius_km / self._factor, workers=self.workers)
            return d * self._factor < radius_km
        xyz = _unit_xyz(query)
        bound = float(_chord(radius_km * _SPHERE_SLACK)) * 1.000001 + 1e-12
        d, i = self._tree.query(xyz, k=1, distance_upper_bound=bound, workers=self.workers)
        hit = np.zeros(n, bool)
        # A sphere distance under radius / slack is under the radius on the ellipsoid too
        # (their ratio stays within 1 %): those need no geodesic.
        sure = d <= float(_chord(radius_km / _SPHERE_SLACK))
        hit[sure] = True
        cand = np.flatnonzero(np.isfinite(d) & ~sure)
        if not cand.size:
            return hit
        dist = _distance_km(query.take(cand), self.reference.take(i[cand].astype(np.int64)), self.workers)
        hit[cand[dist < radius_km]] = True
        # A first candidate beyond the radius may hide a nearer one on the ellipsoid.
        unsure = cand[dist >= radius_km]
        if unsure.size:
            best = np.full(n, np.inf)
            idx = np.full(n, -1, np.int64)
            best[unsure] = dist[dist >= radius_km]
            idx[unsure] = i[unsure]
            bounds = np.full(n, bound)
            best, _ = self._refine(query, xyz, unsure, best, idx, bounds, 8)
            hit[unsure[best[unsure] < radius_km]] = True
        return hit

def proximity_cells(points: Points, radius_km: float) -> np.ndarray:
    """An integer cell per point such that two points closer than ``radius_km`` lie in the
    same or adjacent cells (3 x 3 in a plane, 3 x 3 x 3 on the unit sphere).

    A cheap prefilter: :func:`adjacent_cells` widens a set of cells by one, and only the
    points in the widened set can be near the points of the set.

    Examples
    --------
    >>> p = Points.lonlat([0.0, 0.05, 3.0], [0.0, 0.0, 0.0])
    >>> c = proximity_cells(p, 10.0)
    >>> bool(np.isin(c[1], adjacent_cells(c[:1], p, 10.0))), bool(np.isin(c[2], adjacent_cells(c[:1], p, 10.0)))
    (True, False)
    """
    if points.geographic:
        size = float(_chord(radius_km * _SPHERE_SLACK)) * 1.000001 + 1e-12  # chord length, unit sphere
        ijk = np.floor(_unit_xyz(points) / size).astype(np.int64)
    else:
        size = radius_km / _unit_factor_km(points.crs)
        ijk = np.floor(np.column_stack([points.x, points.y, np.zeros(len(points))]) / size).astype(np.int64)
    return _cell_key(ijk)


_KEY_SPAN = 1 << 20  # cell indices fit in 21 bits each: unit-sphere cells of >= 10 m, planar grids up to 10^6 cells wide


def _cell_key(ijk: np.ndarray) -> np.ndarray:
    shifted = ijk + _KEY_SPAN
    return (shifted[:, 0] << 42) | (shifted[:, 1] << 21) | shifted[:, 2]


def adjacent_cells(cells: np.ndarray, points: Points, radius_km: float) -> np.ndarray:
    """The distinct cells of :func:`proximity_cells` given, and every cell next to them."""
    u = np.unique(cells)
    ijk = np.column_stack([(u >> 42) - _KEY_SPAN, ((u >> 21) & (2 * _KEY_SPAN - 1)) - _KEY_SPAN,
                           (u & (2 * _KEY_SPAN - 1)) - _KEY_SPAN])
    dz = (-1, 0, 1) if points.geographic else (0,)
    offsets = np.array([(a, b, c) for a in (-1, 0, 1) for b in (-1, 0, 1) for c in dz], dtype=np.int64)
    return np.unique(_cell_key((ijk[:, None, :] + offsets[None, :, :]).reshape(-1, 3)))


def nearest_km(query: Points, reference: Points) -> np.ndarray:
    """Distance (km) from each query point to its nearest reference point."""
    return NeighbourIndex(reference).nearest(query)[0]
