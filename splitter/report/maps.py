"""Maps of records by fold over the block grid, and generalised coordinates.

Everything is drawn in one planar equal-area "map plane" in kilometres, so the
splits of a run can be compared side by side and a block of L km looks L km wide.
Grid cells are laid in the split's own geometry CRS with its block size and grid
offset (exactly as the design laid them) and carried into the map plane when the
two differ.

Generalisation (for sensitive species) snaps every coordinate to the centre of
the ``cell_km`` x ``cell_km`` cell of a lattice anchored at the map plane's
origin. One lattice serves the whole appendix: snapping the same record to two
different lattices would let a reader intersect the two cells and recover a
finer location.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pyproj
from matplotlib.collections import PolyCollection
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from splitter.errors import InputError
from splitter.geo import Points, equal_area_crs, is_planar, planar_km
from splitter.partition.grid import hexagon_cells, hexagon_corners, square_cell_corners, square_cells
from splitter.report.style import GREY, colour, new_figure, styled

SPATIAL_METHODS = ("blocks", "hexagons", "checkerboard")
#: Beyond this many lattice cells over the map extent only occupied cells are outlined.
MAX_GRID_CELLS = 6000
#: Folds named one by one in a map legend; beyond it one key says the colours repeat.
MAX_LEGEND_FOLDS = 12
#: Points added per cell edge when cells are carried into another plane.
_EDGE_STEPS = 8


def _km_factor(crs: pyproj.CRS) -> float:
    """Kilometres per unit of a projected CRS's first axis."""
    return float(crs.axis_info[0].unit_conversion_factor) / 1000.0 if crs.axis_info else 0.001


@dataclass(frozen=True)
class MapPlane:
    """A projected, equal-area CRS in which maps are drawn (coordinates in km).

    Examples
    --------
    >>> plane = MapPlane.for_points(Points.lonlat([10.0, 11.0], [45.0, 46.0]))
    >>> x, y = plane.from_lonlat([10.5], [45.5])
    >>> bool(abs(x[0]) < 1 and abs(y[0]) < 1)
    True
    """

    crs: pyproj.CRS

    @classmethod
    def for_points(cls, points: Points) -> "MapPlane":
        ok = np.isfinite(points.x) & np.isfinite(points.y)
        return cls(equal_area_crs(points.take(np.flatnonzero(ok))))

    def from_lonlat(self, lon, lat) -> tuple[np.ndarray, np.ndarray]:
        lon = np.asarray(lon, float)
        lat = np.asarray(lat, float)
        x = np.full(lon.shape, np.nan)
        y = np.full(lat.shape, np.nan)
        ok = np.isfinite(lon) & np.isfinite(lat)
        if is_planar(self.crs):  # a local grid: "lon/lat" are its own coordinates
            f = _km_factor(self.crs)
            return np.where(ok, lon * f, np.nan), np.where(ok, lat * f, np.nan)
        if ok.any():
            x[ok], y[ok] = planar_km(Points.lonlat(lon[ok], lat[ok]), self.crs)
        return x, y

    def to_lonlat(self, x_km, y_km) -> tuple[np.ndarray, np.ndarray]:
        x_km = np.asarray(x_km, float)
        y_km = np.asarray(y_km, float)
        lon = np.full(x_km.shape, np.nan)
        lat = np.full(y_km.shape, np.nan)
        ok = np.isfinite(x_km) & np.isfinite(y_km)
        if is_planar(self.crs):
            f = _km_factor(self.crs)
            return np.where(ok, x_km / f, np.nan), np.where(ok, y_km / f, np.nan)
        if ok.any():
            f = _km_factor(self.crs)
            p = Points(x_km[ok] / f, y_km[ok] / f, self.crs).to_lonlat()
            lon[ok], lat[ok] = p.x, p.y
        return lon, lat

    def describe(self) -> str:
        """A short plain description (projection and centre) for captions."""
        op = self.crs.coordinate_operation
        if op is not None and "lambert azimuthal equal area" in op.method_name.lower():
            par = {p.name.lower(): float(p.value) for p in op.params}
            lat0 = par.get("latitude of natural origin", 0.0)
            lon0 = par.get("longitude of natural origin", 0.0)
            return (f"Lambert azimuthal equal-area projection centred at "
                    f"{abs(lat0):.2f}° {'N' if lat0 >= 0 else 'S'}, {abs(lon0):.2f}° {'E' if lon0 >= 0 else 'W'}")
        epsg = self.crs.to_epsg()
        return f"{self.crs.name}" + (f" (EPSG:{epsg})" if epsg else "")


def generalise_coordinates(x_km, y_km, cell_km: float) -> tuple[np.ndarray, np.ndarray]:
    """Snap planar coordinates (km) to the centres of ``cell_km`` square cells.

    Cells are anchored at the plane's origin: cell ``(i, j)`` spans
    ``[i * cell_km, (i + 1) * cell_km)`` and its centre is ``(i + 0.5) * cell_km``.
    NaN stays NaN.

    Parameters
    ----------
    x_km, y_km : array_like
    cell_km : float
        Positive cell size in km.

    Returns
    -------
    x, y : ndarray

    Examples
    --------
    >>> generalise_coordinates([0.2, 12.9, -0.1], [5.0, 7.4, 0.0], 10.0)
    (array([ 5., 15., -5.]), array([5., 5., 5.]))
    """
    cell = float(cell_km)
    if not np.isfinite(cell) or cell <= 0:
        raise InputError(f"--generalise {cell_km}: give a cell size in km greater than 0.")
    x = np.asarray(x_km, float)
    y = np.asarray(y_km, float)
    return (np.floor(x / cell) + 0.5) * cell, (np.floor(y / cell) + 0.5) * cell


def _plane_to_plane(src: pyproj.CRS, dst: pyproj.CRS):
    """A function mapping km in ``src`` to km in ``dst`` (identity when equal)."""
    if src == dst:
        return lambda x, y: (np.asarray(x, float), np.asarray(y, float))
    tr = pyproj.Transformer.from_crs(src, dst, always_xy=True)
    fs, fd = _km_factor(src), _km_factor(dst)

    def go(x, y):
        a, b = tr.transform(np.asarray(x, float) / fs, np.asarray(y, float) / fs)
        return np.asarray(a, float) * fd, np.asarray(b, float) * fd

    return go


def _densify(corners: np.ndarray, steps: int) -> np.ndarray:
    """Add ``steps - 1`` points along each polygon edge (n, m, 2) -> (n, m*steps, 2).

    Straight edges in the geometry CRS are curves in another plane.
    """
    nxt = np.roll(corners, -1, axis=1)
    t = (np.arange(steps) / steps)[None, None, :, None]
    pts = corners[:, :, None, :] + t * (nxt - corners)[:, :, None, :]
    return pts.reshape(corners.shape[0], -1, 2)


@dataclass(frozen=True)
class CellGrid:
    """Cell outlines (in the map plane, km) and the fold of each occupied cell.

    ``cell_fold`` is 0 for empty cells, and is all zero when cells are not
    filled (generalised maps).
    """

    polygons: np.ndarray
    cell_fold: np.ndarray
    shape: str
    size_km: float
    occupied_only: bool


def cell_grid(method: str, size_km: float, offset_km, geometry_crs: pyproj.CRS, plane: MapPlane,
              gx_km, gy_km, fold, extent, fill: bool = True) -> CellGrid:
    """Lay the design's cells over the map extent.

    Parameters
    ----------
    method : {"blocks", "hexagons", "checkerboard"}
    size_km : float
        Block size (hexagons: the area-equivalent block size, as in the design).
    offset_km : (float, float)
        Grid offset in the geometry CRS.
    geometry_crs : pyproj.CRS
        The projected CRS the design laid its grid in.
    plane : MapPlane
    gx_km, gy_km : ndarray
        Record coordinates in the geometry CRS (km), exact; used only to colour
        occupied cells by fold when ``fill`` is true.
    fold : ndarray of int
    extent : (xmin, xmax, ymin, ymax)
        Map extent in the map plane (km).
    fill : bool
        Colour occupied cells by fold. Turned off for generalised maps, where
        cell membership from exact positions would reveal more than the
        generalised points do.
    """
    shape = "hexagon" if method == "hexagons" else "square"
    to_plane = _plane_to_plane(geometry_crs, plane.crs)
    from_plane = _plane_to_plane(plane.crs, geometry_crs)
    xmin, xmax, ymin, ymax = extent
    # The extent's corners (and edge midpoints) in the geometry CRS bound the cells to draw.
    ex = np.array([xmin, xmax, xmax, xmin, (xmin + xmax) / 2, (xmin + xmax) / 2, xmin, xmax])
    ey = np.array([ymin, ymin, ymax, ymax, ymin, ymax, (ymin + ymax) / 2, (ymin + ymax) / 2])
    bx, by = from_plane(ex, ey)
    off = (float(offset_km[0]), float(offset_km[1]))
    keep = np.isfinite(gx_km) & np.isfinite(gy_km) & (fold > 0)
    if shape == "square":
        i0, j0 = square_cells([bx.min()], [by.min()], size_km, off)
        i1, j1 = square_cells([bx.max()], [by.max()], size_km, off)
        ii, jj = np.meshgrid(np.arange(i0[0] - 1, i1[0] + 2), np.arange(j0[0] - 1, j1[0] + 2), indexing="ij")
        occ_i, occ_j = square_cells(gx_km[keep], gy_km[keep], size_km, off)
    else:
        qs, rs = hexagon_cells(np.r_[bx, bx.min(), bx.max()], np.r_[by, by.max(), by.min()], size_km, off)
        ii, jj = np.meshgrid(np.arange(qs.min() - 2, qs.max() + 3), np.arange(rs.min() - 2, rs.max() + 3), indexing="ij")
        occ_i, occ_j = hexagon_cells(gx_km[keep], gy_km[keep], size_km, off)
    ii, jj = ii.ravel(), jj.ravel()
    occupied_only = ii.size > MAX_GRID_CELLS
    if occupied_only and not fill:
        # Outlining only the occupied cells would show where records are at the cell size,
        # finer than a generalised map may: draw no cells at all then.
        return CellGrid(polygons=np.zeros((0, 4 if shape == "square" else 6, 2)), cell_fold=np.zeros(0, np.int64),
                        shape=shape, size_km=float(size_km), occupied_only=True)
    occ_key = occ_i.astype(np.int64) * 2**32 + occ_j.astype(np.int64)
    uk, first = np.unique(occ_key, return_index=True)
    if occupied_only:
        ii = occ_i[first]
        jj = occ_j[first]
    corners = square_cell_corners(ii, jj, size_km, off) if shape == "square" else hexagon_corners(ii, jj, size_km, off)
    if geometry_crs != plane.crs:
        corners = _densify(corners, _EDGE_STEPS)
        px, py = to_plane(corners[..., 0].ravel(), corners[..., 1].ravel())
        corners = np.stack([px, py], axis=-1).reshape(corners.shape)
    # Keep only cells that touch the extent (the index box is a little generous).
    cx0, cx1 = corners[..., 0].min(axis=1), corners[..., 0].max(axis=1)
    cy0, cy1 = corners[..., 1].min(axis=1), corners[..., 1].max(axis=1)
    touch = (cx1 >= xmin) & (cx0 <= xmax) & (cy1 >= ymin) & (cy0 <= ymax)
    cell_fold = np.zeros(ii.size, np.int64)
    if fill and uk.size:
        key = ii.astype(np.int64) * 2**32 + jj.astype(np.int64)
        pos = np.searchsorted(uk, key)
        pos = np.minimum(pos, uk.size - 1)
        hit = uk[pos] == key
        # Every record of a cell shares its fold in these designs; the first one names it.
        cell_fold[hit] = fold[keep][first[pos[hit]]]
    return CellGrid(polygons=corners[touch], cell_fold=cell_fold[touch], shape=shape,
                    size_km=float(size_km), occupied_only=occupied_only)


@dataclass(frozen=True)
class FoldMap:
    """A drawn map and the exact data it shows.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
    x_km, y_km : ndarray
        Map-plane coordinates of every record drawn (generalised if asked).
    fold : ndarray of int
    focus_fold : int
        The fold shown in the second panel.
    n_gap : int
        Records left out of ``focus_fold``'s calibration set by the buffer.
    grid : CellGrid or None
    """

    figure: object = field(repr=False)
    x_km: np.ndarray = field(repr=False)
    y_km: np.ndarray = field(repr=False)
    fold: np.ndarray = field(repr=False)
    focus_fold: int
    n_gap: int
    grid: CellGrid | None = field(default=None, repr=False)


def map_extent(x, y) -> tuple[float, float, float, float]:
    """(xmin, xmax, ymin, ymax) of the finite points, padded by 4 % of the larger side."""
    ok = np.isfinite(x) & np.isfinite(y)
    if not ok.any():
        raise InputError("no record has usable coordinates to map.")
    xmin, xmax, ymin, ymax = x[ok].min(), x[ok].max(), y[ok].min(), y[ok].max()
    pad = 0.04 * max(xmax - xmin, ymax - ymin, 1.0)
    return float(xmin - pad), float(xmax + pad), float(ymin - pad), float(ymax + pad)


@styled
def plot_fold_map(x_km, y_km, kind, fold, *, fold_names: dict, gap_rows=(), gap_folds=(),
                  buffer_km: float = 0.0, grid: CellGrid | None = None, title: str = "",
                  extent=None, focus_fold: int | None = None, generalised_km: float | None = None) -> FoldMap:
    """Two panels: records coloured by fold over the cells; one fold's buffer.

    Parameters
    ----------
    x_km, y_km : ndarray
        Map-plane coordinates (km) of every record (NaN = not drawn).
    kind : ndarray of str
        presence / absence / background.
    fold : ndarray of int
        1..k evaluation fold, 0 calibration only, -1 dropped (not drawn).
    fold_names : dict
        Fold number -> label.
    gap_rows, gap_folds : array_like of int
        Buffer gaps: row ``gap_rows[m]`` is left out of fold ``gap_folds[m]``'s calibration.
    buffer_km : float
    grid : CellGrid, optional
    title : str
    extent : (xmin, xmax, ymin, ymax), optional
    focus_fold : int, optional
        Fold shown in the second panel; default the fold with most buffer gaps
        (ties: the lowest number), or fold 1 without a buffer.
    generalised_km : float, optional
        Only for the caption inside the figure.

    Returns
    -------
    FoldMap
    """
    x = np.asarray(x_km, float)
    y = np.asarray(y_km, float)
    kind = np.asarray(kind).astype(str)
    fold = np.asarray(fold, np.int64)
    gap_rows = np.asarray(gap_rows, np.int64)
    gap_folds = np.asarray(gap_folds, np.int64)
    drawn = np.isfinite(x) & np.isfinite(y) & (fold >= 0)
    folds = sorted(int(f) for f in np.unique(fold[fold > 0]))
    if extent is None:
        extent = map_extent(x[drawn], y[drawn])
    if focus_fold is None:
        if gap_folds.size:
            counts = np.bincount(gap_folds, minlength=max(folds) + 1 if folds else 1)
            focus_fold = int(np.argmax(counts[1:]) + 1) if counts[1:].size else (folds[0] if folds else 1)
        else:
            focus_fold = folds[0] if folds else 1
    fig = new_figure(10.0, 5.0)
    ax_all, ax_one = fig.subplots(1, 2, sharex=True, sharey=True)
    pres = kind == "presence"
    absn = kind == "absence"
    back = ~(pres | absn)
    colour_of = {f: colour(f - 1) for f in folds}

    if grid is not None and len(grid.polygons):
        from matplotlib.colors import to_rgba

        for ax, filled in ((ax_all, True), (ax_one, False)):
            # Translucent faces, solid outlines: the fill must not fade the cell edges.
            faces = [to_rgba(colour_of[int(f)], 0.22) if (filled and int(f) in colour_of) else (0, 0, 0, 0)
                     for f in grid.cell_fold]
            ax.add_collection(PolyCollection(list(grid.polygons), facecolors=faces, edgecolors=GREY,
                                             linewidths=0.4 if filled else 0.3, zorder=1))

    # Panel 1: every record by fold; presences larger than background.
    for f in folds:
        sel = drawn & (fold == f)
        ax_all.scatter(x[sel & back], y[sel & back], s=2.5, marker="s", color=colour_of[f], alpha=0.55,
                       linewidths=0, zorder=2)
        ax_all.scatter(x[sel & absn], y[sel & absn], s=9, marker="^", color=colour_of[f], linewidths=0, zorder=3)
        ax_all.scatter(x[sel & pres], y[sel & pres], s=11, marker="o", color=colour_of[f],
                       edgecolors="white", linewidths=0.3, zorder=3)
    cal_only = drawn & (fold == 0)
    if cal_only.any():
        ax_all.scatter(x[cal_only], y[cal_only], s=6, marker="x", color="#000000", linewidths=0.6, zorder=3)

    # Panel 2: the focus fold's evaluation records, its calibration set and its buffer gap.
    in_gap = np.zeros(x.size, bool)
    gsel = gap_rows[gap_folds == focus_fold]
    in_gap[gsel[(gsel >= 0) & (gsel < x.size)]] = True
    ev = drawn & (fold == focus_fold)
    cal = drawn & (fold != focus_fold) & ~in_gap
    gap = drawn & in_gap
    ax_one.scatter(x[cal], y[cal], s=3, marker="s", color="#bdbdbd", linewidths=0, zorder=2)
    ax_one.scatter(x[gap], y[gap], s=9, marker="x", color=colour(5), linewidths=0.7, zorder=3)
    ax_one.scatter(x[ev & ~pres], y[ev & ~pres], s=3, marker="s", color=colour_of.get(focus_fold, colour(0)),
                   linewidths=0, zorder=3)
    ax_one.scatter(x[ev & pres], y[ev & pres], s=11, marker="o", color=colour_of.get(focus_fold, colour(0)),
                   edgecolors="white", linewidths=0.3, zorder=4)

    label = fold_names.get(focus_fold, str(focus_fold))
    for ax in (ax_all, ax_one):
        ax.set_xlim(extent[0], extent[1])
        ax.set_ylim(extent[2], extent[3])
        ax.set_aspect("equal", adjustable="box")
        ax.set_xlabel("east (km)")
        ax.tick_params(direction="out")
    ax_all.set_ylabel("north (km)")
    ax_all.set_title(f"{title}: records by evaluation fold" if title else "records by evaluation fold")
    ax_one.set_title(f"fold {label}: evaluation, calibration and buffer gap" if buffer_km > 0
                     else f"fold {label}: evaluation and calibration records")

    if len(folds) <= MAX_LEGEND_FOLDS:
        handles = [Patch(facecolor=colour_of[f], edgecolor="none", label=f"fold {fold_names.get(f, f)}")
                   for f in folds]
    else:  # leave-one-out and the like: colours repeat, one key says so
        handles = [Patch(facecolor=colour(0), edgecolor="none", label=f"{len(folds)} folds (colours repeat)")]
    handles += [Line2D([], [], ls="none", marker="o", color=GREY, ms=4, label="presence")]
    if back.any() or not absn.any():  # a survey without background: no key for it
        handles.append(Line2D([], [], ls="none", marker="s", color=GREY, ms=2, label="background"))
    if absn.any():
        handles.append(Line2D([], [], ls="none", marker="^", color=GREY, ms=4, label="absence"))
    if cal_only.any():
        handles.append(Line2D([], [], ls="none", marker="x", color="#000000", ms=4, label="calibration only"))
    if grid is not None and len(grid.polygons):
        what = (f"hexagons (area of a {grid.size_km:.1f} km block)" if grid.shape == "hexagon"
                else f"cells of {grid.size_km:.1f} km")
        handles.append(Patch(facecolor="none", edgecolor=GREY, label=what))
    ax_all.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=4, frameon=False)
    h2 = [Line2D([], [], ls="none", marker="o", color=colour_of.get(focus_fold, colour(0)), ms=4,
                 label=f"fold {label} evaluation"),
          Line2D([], [], ls="none", marker="s", color="#bdbdbd", ms=3, label=f"fold {label} calibration")]
    if buffer_km > 0:
        h2.append(Line2D([], [], ls="none", marker="x", color=colour(5), ms=4,
                         label=f"left out by the {buffer_km:.1f} km buffer ({int(gap.sum())})"))
    ax_one.legend(handles=h2, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=2, frameon=False)
    if generalised_km:
        fig.suptitle(f"positions generalised to {generalised_km:g} km cells", x=0.995, ha="right", fontsize=7,
                     color=GREY)
    return FoldMap(figure=fig, x_km=x, y_km=y, fold=fold, focus_fold=int(focus_fold), n_gap=int(gap.sum()),
                   grid=grid)
