"""Raster input and output: sampling, valid cells with their areas, area-uniform samples.

Rasters may be larger than memory, so nothing here reads a whole band at once:

* point sampling groups the points by raster tile (whole GDAL blocks where possible)
  and reads each tile that holds points exactly once;
* valid cells are streamed in row windows of whole blocks of about 10^6 cells, so
  one window's working set (values, masks, indices) stays under about 64 MB;
* area-uniform sampling makes two passes over those windows (total valid area per
  window, then the cells drawn in each window), so its memory is one window plus the
  sample.

Cell areas (km²) come from :func:`splitter.evaluate.area.cell_areas`: for a
geographic CRS the ellipsoidal area between two parallels and two meridians; for a
projected CRS the cell's planar area.
Only band 1 of each raster is used.

Examples
--------
>>> import numpy as np, rasterio, tempfile, pathlib
>>> from rasterio.transform import from_origin
>>> from splitter.geo import Points
>>> path = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
>>> write_geotiff(path, np.arange(6.0).reshape(2, 3), from_origin(0, 2, 1, 1), "EPSG:4326")
>>> values, notes = sample_rasters([path], Points.lonlat([0.5, 2.5, 9.0], [1.5, 0.5, 0.0]))
>>> values[:, 0]
array([ 0.,  5., nan])
"""

from __future__ import annotations

import contextlib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, NamedTuple

import numpy as np
import pyproj
import rasterio
import rasterio.crs
import rasterio.errors
import rasterio.features
import shapely
from affine import Affine
from rasterio.windows import Window
from shapely.geometry.base import BaseGeometry

from splitter.errors import InputError
from splitter.evaluate.area import cell_areas
from splitter.geo import Points
from splitter.io.atomic import atomic_path

__all__ = [
    "RasterInfo",
    "Region",
    "CellBlock",
    "raster_info",
    "read_region",
    "sample_rasters",
    "valid_cells",
    "cell_values_and_areas",
    "sample_valid_locations",
    "sample_cells",
    "windows_of",
    "write_geotiff",
]

# Cells per streamed window. At ~50 bytes of working arrays per cell (float64 values,
# masks, int64 indices) this keeps a window under ~64 MB; it is also faster than
# bigger windows, which fall out of the CPU caches (tests/benchmarks/bench_rasters.py).
WINDOW_CELLS = 1024 * 1024
# Point-sampling tiles stay small: with sparse points most of a big tile is wasted.
TILE_CELLS = 512 * 512
_POLYGONAL = ("Polygon", "MultiPolygon")


# ----------------------------------------------------------------------------- info


@dataclass(frozen=True)
class RasterInfo:
    """What ``splitter`` needs to know about a raster file (band 1).

    Attributes
    ----------
    path : Path
    crs : pyproj.CRS
    transform : affine.Affine
        Pixel (col, row) → CRS (x, y) of the cell's upper-left corner.
    width, height : int
        Columns and rows.
    nodata : float or None
    dtype : str
    bounds : tuple
        (left, bottom, right, top) in the raster CRS.
    name : str
        File stem, used as the covariate name.
    block_shape : tuple
        (rows, cols) of one GDAL block of band 1.
    count : int
        Number of bands.
    """

    path: Path
    crs: pyproj.CRS
    transform: Affine
    width: int
    height: int
    nodata: float | None
    dtype: str
    bounds: tuple
    name: str
    block_shape: tuple = (1, 1)
    count: int = 1

    def to_dict(self) -> dict:
        return {
            "path": str(self.path),
            "crs": _crs_label(self.crs),
            "transform": tuple(self.transform)[:6],
            "width": self.width,
            "height": self.height,
            "nodata": self.nodata,
            "dtype": self.dtype,
            "bounds": tuple(self.bounds),
            "name": self.name,
            "block_shape": tuple(self.block_shape),
            "count": self.count,
        }


def raster_info(path) -> RasterInfo:
    """Read a raster's header and check it can be used.

    Raises
    ------
    InputError
        The file is missing, is not a raster GDAL can read, or has no CRS.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "bio1.tif"
    >>> write_geotiff(p, np.zeros((2, 3)), from_origin(0, 2, 1, 1), "EPSG:4326")
    >>> info = raster_info(p)
    >>> info.name, info.width, info.height, info.crs.to_string()
    ('bio1', 3, 2, 'EPSG:4326')
    """
    path = Path(path)
    if not path.exists():
        raise InputError(f"Raster file {path} does not exist; check the path or file pattern.")
    try:
        with rasterio.open(path) as src:
            crs = src.crs
            info = dict(
                transform=src.transform,
                width=src.width,
                height=src.height,
                nodata=src.nodata,
                dtype=src.dtypes[0],
                bounds=tuple(src.bounds),
                block_shape=tuple(src.block_shapes[0]),
                count=src.count,
            )
    except rasterio.errors.RasterioError as exc:
        raise InputError(
            f"Cannot read {path} as a raster ({exc}); give a GeoTIFF or another raster format GDAL reads."
        ) from None
    if crs is None:
        raise InputError(
            f"Raster {path} has no coordinate reference system; assign one "
            f"(e.g. `gdal_edit.py -a_srs EPSG:4326 {path}`) and run again."
        )
    return RasterInfo(path=path, crs=pyproj.CRS.from_user_input(crs), name=path.stem, **info)


def _crs_label(crs: pyproj.CRS) -> str:
    auth = crs.to_authority()
    return f"{auth[0]}:{auth[1]}" if auth else crs.name


def _same_crs(a: pyproj.CRS, b: pyproj.CRS) -> bool:
    # Equal CRSs may come with different WKT (axis order, names); compare what matters.
    return a == b or a.equals(b, ignore_axis_order=True)


def check_planar_grid(records_crs: pyproj.CRS, raster_crs: pyproj.CRS, path) -> bool:
    """True when records in a local planar grid meet a raster in the same grid and unit.

    A raster with records in a planar grid (planar:km / planar:m) must be in that grid: its
    CRS an engineering CRS in the same unit. Anything else is refused, since nothing
    relates a local grid to the Earth.
    """
    from splitter.geo import _axis_factor, crs_text, is_planar

    if not is_planar(records_crs):
        if is_planar(raster_crs):
            raise InputError(f"{path}: the raster is in a local planar grid but the records are in "
                             f"{crs_text(records_crs)[:40]}; give the records with --crs planar:km or planar:m.")
        return False
    unit = crs_text(records_crs)
    if raster_crs.is_geographic:
        raise InputError(f"{path}: the raster has a geographic CRS (longitude/latitude) but the records are a "
                         f"local planar grid ({unit}); give a raster laid in the records' grid.")
    if not is_planar(raster_crs):
        raise InputError(f"{path}: the raster's CRS is {_crs_label(raster_crs)} but the records are a local planar "
                         f"grid ({unit}) with no known projection; give a raster laid in the records' grid.")
    if _axis_factor(raster_crs) != _axis_factor(records_crs):
        raise InputError(f"{path}: the raster's grid unit is {_axis_factor(raster_crs):g} m but the records' is "
                         f"{unit}; give both in the same unit.")
    return True


def cell_of(path, points: Points) -> np.ndarray:
    """Index (row * width + column) of the raster cell holding each point; -1 outside or missing.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "c.tif"
    >>> write_geotiff(p, np.zeros((2, 3)), from_origin(0, 2, 1, 1), "EPSG:4326")
    >>> cell_of(p, Points.lonlat([0.5, 2.5, 9.0], [1.5, 0.5, 0.5])).tolist()
    [0, 5, -1]
    """
    info = raster_info(path)
    if check_planar_grid(points.crs, info.crs, path):
        pts = Points(points.x, points.y, info.crs)
    else:
        pts = points.to_crs(info.crs)
    col, row = _apply(~info.transform, pts.x, pts.y)
    ok = np.isfinite(col) & np.isfinite(row)
    c = np.floor(np.where(ok, col, -1)).astype(np.int64)
    r = np.floor(np.where(ok, row, -1)).astype(np.int64)
    inside = ok & (c >= 0) & (c < info.width) & (r >= 0) & (r < info.height)
    return np.where(inside, r * info.width + c, -1)


def _same_grid(a: RasterInfo, b: RasterInfo) -> bool:
    return (
        _same_crs(a.crs, b.crs)
        and a.width == b.width
        and a.height == b.height
        and a.transform.almost_equals(b.transform)
    )


# -------------------------------------------------------------------------- region


class Region(NamedTuple):
    """A study-region polygon and its CRS (``geometry, crs = read_region(path)``)."""

    geometry: BaseGeometry
    crs: pyproj.CRS

    def to_crs(self, crs) -> "Region":
        """The region in another CRS; long edges are densified first so they bend as they should."""
        crs = pyproj.CRS.from_user_input(crs)
        if _same_crs(self.crs, crs):
            return Region(self.geometry, crs)
        x0, y0, x1, y1 = self.geometry.bounds
        geom = shapely.segmentize(self.geometry, max(x1 - x0, y1 - y0) / 256 or 1.0)
        tr = pyproj.Transformer.from_crs(self.crs, crs, always_xy=True)

        def move(xy):
            x, y = tr.transform(xy[:, 0], xy[:, 1])
            return np.column_stack([x, y])

        return Region(shapely.transform(geom, move), crs)


def read_region(path) -> Region:
    """Read a polygon vector file as one region (the union of all polygon features).

    Parameters
    ----------
    path : str or Path
        GeoPackage, Shapefile, GeoJSON, GeoParquet or any vector file geopandas reads.

    Returns
    -------
    Region
        ``(geometry, crs)``.

    Raises
    ------
    InputError
        Missing or unreadable file, no CRS, or no polygon in it.

    Examples
    --------
    >>> import geopandas as gpd, shapely, tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "region.gpkg"
    >>> gpd.GeoDataFrame(geometry=[shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1)], crs=4326).to_file(p)
    >>> geometry, crs = read_region(p)
    >>> geometry.area, crs.to_string()
    (2.0, 'EPSG:4326')
    """
    import geopandas as gpd

    path = Path(path)
    if not path.exists():
        raise InputError(f"Region file {path} does not exist; check the path.")
    try:
        if path.suffix.lower() in (".parquet", ".geoparquet"):
            frame = gpd.read_parquet(path)
        else:
            frame = gpd.read_file(path)
    except Exception as exc:  # drivers raise many kinds of errors; all mean "unreadable"
        raise InputError(
            f"Cannot read region file {path} ({exc}); give a GeoPackage, Shapefile or GeoJSON of polygons."
        ) from None
    if frame.crs is None:
        raise InputError(f"Region file {path} has no CRS; assign one (e.g. in QGIS) and run again.")
    geoms = frame.geometry.values
    geoms = geoms[~shapely.is_missing(geoms) & np.isin(shapely.get_type_id(geoms), [3, 6])]
    if len(geoms) == 0:
        raise InputError(f"Region file {path} holds no polygon; give a file of polygons outlining the region.")
    geom = shapely.union_all(shapely.make_valid(np.asarray(geoms)))
    if geom.geom_type not in _POLYGONAL:
        # make_valid can leave slivers as lines; keep only the area.
        parts = shapely.get_parts(geom)
        geom = shapely.union_all(parts[np.isin(shapely.get_type_id(parts), [3, 6])])
    if geom.is_empty:
        raise InputError(f"Region file {path} holds only empty polygons; give a file of polygons outlining the region.")
    return Region(geom, pyproj.CRS.from_user_input(frame.crs))


def _region_in(region, crs: pyproj.CRS) -> BaseGeometry | None:
    """Region geometry in ``crs``. A bare geometry is taken to be in ``crs`` already."""
    if region is None:
        return None
    if isinstance(region, Region):
        return region.to_crs(crs).geometry
    if isinstance(region, BaseGeometry):
        return region
    raise InputError("region must be a Region (from read_region) or a shapely polygon in the raster CRS.")


# ------------------------------------------------------------------------ reading


def _as_paths(paths) -> list[Path]:
    if isinstance(paths, (str, Path)):
        paths = [paths]
    paths = [Path(p) for p in paths]
    if not paths:
        raise InputError("No raster was given; name at least one raster file.")
    return paths


def _read_float(src, window: Window) -> np.ndarray:
    """Band 1 in ``window`` as float64 with NaN for nodata, masked and non-finite cells."""
    data = src.read(1, window=window, masked=True)
    out = np.asarray(data.data, dtype=np.float64)
    out[np.ma.getmaskarray(data)] = np.nan
    out[~np.isfinite(out)] = np.nan
    return out


def _apply(t: Affine, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Affine transform of coordinate arrays (vectorised)."""
    return t.a * x + t.b * y + t.c, t.d * x + t.e * y + t.f


def _tile_shape(info: RasterInfo, max_cells: int) -> tuple[int, int]:
    """Rows and columns of a point-sampling tile: whole blocks, at most ``max_cells``."""
    bh, bw = info.block_shape
    target = max(1, min(max_cells, TILE_CELLS))
    tw = min(info.width, bw, target)  # narrower than a block only for very wide strips
    rows_fit = max(1, target // tw)
    th = (rows_fit // bh) * bh if rows_fit >= bh else rows_fit
    th = min(info.height, th)
    if tw == bw:  # small blocks: take several side by side
        tw = min(info.width, bw * max(1, target // (th * bw)))
    return th, tw


def _sample_open(src, info: RasterInfo, x: np.ndarray, y: np.ndarray, max_cells: int) -> np.ndarray:
    """Values at points already in the raster CRS, reading only tiles that hold points."""
    out = np.full(x.shape, np.nan)
    with np.errstate(invalid="ignore"):
        colf, rowf = _apply(~info.transform, x, y)
    # NaN/inf coordinates (failed reprojection) compare False, so they count as outside.
    with np.errstate(invalid="ignore"):
        inside = (colf >= 0) & (colf < info.width) & (rowf >= 0) & (rowf < info.height)
    idx = np.flatnonzero(inside)
    if idx.size == 0:
        return out
    col = np.floor(colf[idx]).astype(np.int64)
    row = np.floor(rowf[idx]).astype(np.int64)
    th, tw = _tile_shape(info, max_cells)
    tiles_across = -(-info.width // tw)
    tile = (row // th) * tiles_across + (col // tw)
    order = np.argsort(tile, kind="stable")
    tile, idx, row, col = tile[order], idx[order], row[order], col[order]
    starts = np.flatnonzero(np.r_[True, tile[1:] != tile[:-1]])
    ends = np.r_[starts[1:], tile.size]
    for s, e in zip(starts, ends):  # one read per tile that holds points
        tr, tc = divmod(int(tile[s]), tiles_across)
        r0, c0 = tr * th, tc * tw
        window = Window(c0, r0, min(tw, info.width - c0), min(th, info.height - r0))
        block = _read_float(src, window)
        out[idx[s:e]] = block[row[s:e] - r0, col[s:e] - c0]
    return out


def sample_rasters(paths, points: Points, *, max_window_cells: int = WINDOW_CELLS) -> tuple[np.ndarray, list[str]]:
    """Raster values at points.

    Parameters
    ----------
    paths : sequence of str or Path
        Raster files; column j of the result is ``paths[j]`` (band 1).
    points : Points
        Locations in any CRS; they are reprojected to each raster's own CRS.
    max_window_cells : int
        Largest number of cells read at once (tiles are whole GDAL blocks when they fit).

    Returns
    -------
    values : ndarray, shape (n, len(paths)), float64
        NaN where a point is outside the raster, on a nodata/masked cell or on NaN.
    notes : list of str
        Reprojections made and how many points had no value, one line each.

    Raises
    ------
    InputError
        A raster cannot be read, or no point falls on a valid cell of some raster.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
    >>> write_geotiff(p, np.array([[1.0, 2.0]]), from_origin(0, 1, 1, 1), "EPSG:4326")
    >>> sample_rasters([p], Points.lonlat([1.5], [0.5]))[0]
    array([[2.]])
    """
    paths = _as_paths(paths)
    n = len(points)
    values = np.full((n, len(paths)), np.nan)
    notes: list[str] = []
    for j, path in enumerate(paths):
        info = raster_info(path)
        if info.count > 1:
            notes.append(f"used band 1 of {info.count} in {path.name}")
        if check_planar_grid(points.crs, info.crs, path):
            pts = Points(points.x, points.y, info.crs)  # the same local grid and unit
        else:
            if not _same_crs(points.crs, info.crs):
                notes.append(f"reprojected records to {_crs_label(info.crs)} for {path.name}")
            pts = points.to_crs(info.crs)
        with rasterio.open(path) as src:
            values[:, j] = _sample_open(src, info, pts.x, pts.y, max_window_cells)
        missing = int(np.isnan(values[:, j]).sum())
        if n and missing == n:
            raise InputError(
                f"None of the {n} records falls on a valid cell of {path}; check that the records "
                f"and the raster cover the same area and that their CRSs are right."
            )
        if missing:
            notes.append(f"{missing} of {n} records have no value in {path.name} (outside it or on nodata)")
    return values, notes


# ---------------------------------------------------------------------- valid cells


@dataclass(frozen=True, eq=False)
class CellBlock:
    """Valid cells of one row window.

    Attributes
    ----------
    rows, cols : ndarray of int64
        Cell indices in the (first) raster's grid (worked out from the window's
        valid-cell mask when first asked for: the evaluation kernels never need them).
    values : ndarray
        Shape (m,) from :func:`valid_cells`, in the raster's own float type (float32
        values stay float32: every kernel compares them exactly as float64); (m, k)
        float64 for k rasters internally.
    areas : ndarray of float64
        Cell areas in km² (expanded from ``area_runs`` when first asked for).
    area_runs : (ndarray, ndarray) or None
        The areas as runs: the area of each row holding valid cells and how many it
        holds (cells of a row share its area). Kernels that pass over the cells
        more than once keep these instead of one area per cell.
    """

    values: np.ndarray
    _areas: np.ndarray | None = field(default=None, repr=False)
    _rows: np.ndarray | None = field(default=None, repr=False)
    _cols: np.ndarray | None = field(default=None, repr=False)
    # (mask, row_off, col_off): where the valid cells lie in the window, row-major.
    _where: tuple | None = field(default=None, repr=False)
    area_runs: tuple | None = field(default=None, repr=False)

    @classmethod
    def at(cls, rows, cols, values, areas) -> "CellBlock":
        return cls(values, np.asarray(areas, dtype=np.float64), np.asarray(rows), np.asarray(cols))

    @property
    def areas(self) -> np.ndarray:
        if self._areas is None:
            object.__setattr__(self, "_areas", np.repeat(*self.area_runs))
        return self._areas

    def _indices(self):
        if self._rows is None:
            mask, r0, c0 = self._where
            r, c = np.nonzero(mask)
            object.__setattr__(self, "_rows", r + r0)
            object.__setattr__(self, "_cols", c + c0)
        return self._rows, self._cols

    @property
    def rows(self) -> np.ndarray:
        return self._indices()[0]

    @property
    def cols(self) -> np.ndarray:
        return self._indices()[1]

    def __len__(self) -> int:
        return self.values.shape[0]


def _row_windows(info: RasterInfo, geom: BaseGeometry | None, window_rows: int | None) -> list[Window]:
    """Full-width row windows (whole blocks tall) over the rows the region touches."""
    row0, row1, col0, col1 = 0, info.height, 0, info.width
    if geom is not None:
        if geom.is_empty:
            return []
        x0, y0, x1, y1 = geom.bounds
        inv = ~info.transform
        cs, rs = _apply(inv, np.array([x0, x0, x1, x1]), np.array([y0, y1, y0, y1]))
        col0, col1 = max(0, int(np.floor(cs.min()))), min(info.width, int(np.ceil(cs.max())))
        row0, row1 = max(0, int(np.floor(rs.min()))), min(info.height, int(np.ceil(rs.max())))
        if col0 >= col1 or row0 >= row1:
            return []
    if window_rows is None:
        bh = info.block_shape[0]
        window_rows = max(bh, (WINDOW_CELLS // max(1, col1 - col0)) // bh * bh)
    window_rows = max(1, int(window_rows))
    return [Window(col0, r, col1 - col0, min(window_rows, row1 - r)) for r in range(row0, row1, window_rows)]


def windows_of(path, max_cells: int = WINDOW_CELLS) -> list[Window]:
    """Row windows covering a raster, each at most ``max_cells`` cells (at least one row).

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
    >>> write_geotiff(p, np.zeros((10, 4)), from_origin(0, 10, 1, 1), "EPSG:4326")
    >>> [w.height for w in windows_of(p, max_cells=12)]
    [3, 3, 3, 1]
    """
    info = raster_info(path)
    return _row_windows(info, None, max(1, max_cells // info.width))


class _CellReader:
    """Valid-in-all-rasters cells of the first raster's grid, one row window at a time.

    Other rasters on the same grid are read window by window; rasters on another grid
    (or CRS) are sampled at the first raster's cell centres.
    """

    def __init__(self, paths, region, window_rows):
        self.paths = _as_paths(paths)
        self.infos = [raster_info(p) for p in self.paths]
        self.first = self.infos[0]
        self.geom = _region_in(region, self.first.crs)
        f = self.first
        self.row_areas = cell_areas(f.transform, f.height, f.width, f.crs)
        self.windows = _row_windows(self.first, self.geom, window_rows)
        self._stack = contextlib.ExitStack()

    def __enter__(self):
        # Each window is read once, so GDAL's block cache (5 % of RAM by default)
        # only holds memory; a small cache keeps large rasters lean.
        # GDAL decodes the tiles of a window on several cores (a full-width window spans
        # many tiles) unless the user set GDAL_NUM_THREADS.
        from splitter.threads import threads

        decoders = os.environ.get("GDAL_NUM_THREADS", str(threads()))
        self._stack.enter_context(rasterio.Env(GDAL_CACHEMAX=64, GDAL_NUM_THREADS=decoders))
        self.srcs = [self._stack.enter_context(rasterio.open(p)) for p in self.paths]
        from rasterio.enums import MaskFlags

        # Validity from nodata (or none at all) can be tested on the values themselves.
        flags = set(self.srcs[0].mask_flag_enums[0])
        self.fast_mask = flags <= {MaskFlags.nodata, MaskFlags.all_valid}
        return self

    def __exit__(self, *exc):
        self._stack.close()

    def centres(self, rows, cols) -> Points:
        x, y = _apply(self.first.transform, cols + 0.5, rows + 0.5)
        return Points(x, y, self.first.crs)

    def single(self, window: Window) -> CellBlock:
        """Valid cells of the first raster alone, values in its own float type.

        One read, one mask and one boolean selection per window: the evaluation
        kernels stream every cell of a prediction raster through here, so no
        float64 copy of the window and no cell indices are made.
        """
        src = self.srcs[0]
        if self.fast_mask:
            data = src.read(1, window=window)
            if data.dtype.kind != "f":
                data = data.astype(np.float64)
            ok = np.isfinite(data)
            if src.nodata is not None and not np.isnan(src.nodata):
                ok &= data != data.dtype.type(src.nodata)
        else:
            # A mask band or alpha channel: GDAL's own mask says which cells are valid.
            masked = src.read(1, window=window, masked=True)
            data = np.asarray(masked.data)
            if data.dtype.kind != "f":
                data = data.astype(np.float64)
            ok = ~np.ma.getmaskarray(masked) & np.isfinite(data)
        if self.geom is not None:
            ok &= rasterio.features.geometry_mask(
                [self.geom], out_shape=ok.shape, transform=src.window_transform(window), invert=True
            )
        r0, c0 = int(window.row_off), int(window.col_off)
        per_row = np.count_nonzero(ok, axis=1)
        filled = per_row > 0
        runs = (self.row_areas[r0 : r0 + ok.shape[0]][filled], per_row[filled])
        return CellBlock(data[ok], _where=(ok, r0, c0), area_runs=runs)

    def block(self, window: Window) -> CellBlock:
        first_values = _read_float(self.srcs[0], window)
        ok = ~np.isnan(first_values)
        if self.geom is not None:
            ok &= rasterio.features.geometry_mask(
                [self.geom], out_shape=ok.shape, transform=self.srcs[0].window_transform(window), invert=True
            )
        r, c = np.nonzero(ok)
        rows, cols = r + int(window.row_off), c + int(window.col_off)
        columns = [first_values[r, c]]
        for src, info in zip(self.srcs[1:], self.infos[1:]):
            if _same_grid(info, self.first):
                columns.append(_read_float(src, window)[r, c])
            else:
                pts = self.centres(rows, cols).to_crs(info.crs)
                columns.append(_sample_open(src, info, pts.x, pts.y, WINDOW_CELLS))
        values = np.column_stack(columns)
        keep = ~np.isnan(values).any(axis=1)
        rows, cols = rows[keep], cols[keep]
        return CellBlock.at(rows, cols, values[keep], self.row_areas[rows])


def valid_cells(path, region=None, window_rows: int | None = None) -> Iterator[CellBlock]:
    """Stream the valid cells of a raster, one row window at a time.

    A cell is valid when it is not nodata/masked, is finite and (if ``region`` is
    given) its centre lies inside the region.

    Parameters
    ----------
    path : str or Path
    region : Region or shapely geometry, optional
        A :class:`Region` is reprojected to the raster CRS; a bare geometry must
        already be in the raster CRS.
    window_rows : int, optional
        Rows per window. Default: whole blocks, about 10^6 cells per window.

    Yields
    ------
    CellBlock
        ``rows``, ``cols``, ``values`` (m,) and ``areas`` (km²) of the window's valid cells.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
    >>> write_geotiff(p, np.array([[1.0, np.nan], [3.0, 4.0]]), from_origin(0, 2000, 1000, 1000), "EPSG:3035")
    >>> [(b.values.tolist(), b.areas.tolist()) for b in valid_cells(p, window_rows=1)]
    [([1.0], [1.0]), ([3.0, 4.0], [1.0, 1.0])]
    """
    with _CellReader([path], region, window_rows) as reader:
        for window in reader.windows:
            block = reader.single(window)
            if len(block):
                yield block


def cell_values_and_areas(path, region=None, window_rows: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Values and areas (km²) of all valid cells, as two 1-D float64 arrays.

    Holds 16 bytes per valid cell (160 MB for 10^7 cells); use :func:`valid_cells`
    to stream rasters too large for that.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
    >>> write_geotiff(p, np.array([[0.5, np.nan]]), from_origin(0, 1, 1, 1), "EPSG:4326")
    >>> v, a = cell_values_and_areas(p)
    >>> v.tolist(), round(float(a[0]))
    ([0.5], 12308)
    """
    values, areas = [np.zeros(0)], [np.zeros(0)]
    for block in valid_cells(path, region, window_rows):
        values.append(block.values)  # keep only what is returned, not the cell indices
        areas.append(block.areas)
    return np.concatenate(values), np.concatenate(areas)


# ------------------------------------------------------------------------ sampling


def _no_valid_cells(paths) -> InputError:
    names = ", ".join(str(p) for p in paths)
    return InputError(
        f"No cell is valid in all of {names} (inside the region, if one was given); "
        "check the nodata values, the rasters' overlap and the region."
    )


def sample_valid_locations(paths, n: int, seed, region=None, *, window_rows: int | None = None) -> Points:
    """A seeded sample of locations, uniform by area over cells valid in all rasters.

    Cells are drawn with replacement with probability proportional to their area,
    then a location is drawn uniformly (by area) inside the chosen cell. Used for
    background points, prediction locations and variogram samples.

    Parameters
    ----------
    paths : sequence of str or Path
        The first raster sets the grid and the CRS of the result; a cell counts as
        valid when every raster has a value at it (other grids are checked at the
        first raster's cell centres).
    n : int
        Number of locations.
    seed : int or None
        Seed of ``numpy.random.default_rng``.
    region : Region or shapely geometry, optional
        Only cells whose centre lies inside it.
    window_rows : int, optional
        Rows per streamed window (default: whole blocks, about 10^6 cells).

    Returns
    -------
    Points
        In the first raster's CRS, in random order.

    Notes
    -----
    Two passes over the windows: the first sums the valid area of each window, then
    the n draws are split among windows by a multinomial draw, and the second pass
    draws cells inside each window that received draws. This is the same
    distribution as one weighted draw over all cells, with memory for one window.
    In a geographic CRS the latitude inside a cell is drawn so that sin(latitude) is
    uniform, which is uniform by area on the sphere.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
    >>> write_geotiff(p, np.array([[1.0, np.nan]]), from_origin(0, 1, 1, 1), "EPSG:4326")
    >>> pts = sample_valid_locations([p], 5, seed=1)
    >>> bool(((pts.x >= 0) & (pts.x < 1)).all())
    True
    """
    n = int(n)
    if n < 0:
        raise InputError(f"The number of locations to sample must be 0 or more, not {n}.")
    rng = np.random.default_rng(seed)
    with _CellReader(paths, region, window_rows) as reader:
        totals = np.array([reader.block(w).areas.sum() for w in reader.windows])
        if totals.size == 0 or totals.sum() <= 0:
            raise _no_valid_cells(reader.paths)
        counts = rng.multinomial(n, totals / totals.sum())
        rows, cols = [], []
        for window, count in zip(reader.windows, counts):
            if count == 0:
                continue
            block = reader.block(window)
            pick = rng.choice(len(block), size=count, p=block.areas / block.areas.sum())
            rows.append(block.rows[pick])
            cols.append(block.cols[pick])
        info = reader.first
    rows = np.concatenate(rows) if rows else np.zeros(0, np.int64)
    cols = np.concatenate(cols) if cols else np.zeros(0, np.int64)
    order = rng.permutation(rows.size)  # windows come in raster order; mix them
    rows, cols = rows[order], cols[order]
    u, v = rng.random(rows.size), rng.random(rows.size)
    t = info.transform
    if info.crs.is_geographic:
        # cell_areas has checked the grid is north-up. Uniform by area inside the
        # cell: sin(lat) uniform between the cell's edges, not lat itself.
        x = t.a * (cols + u) + t.c
        top = np.deg2rad(np.clip(t.f + t.e * rows, -90, 90))
        bottom = np.deg2rad(np.clip(t.f + t.e * (rows + 1), -90, 90))
        s = np.sin(top) + v * (np.sin(bottom) - np.sin(top))
        y = np.rad2deg(np.arcsin(np.clip(s, -1.0, 1.0)))
    else:
        x, y = _apply(t, cols + u, rows + v)
    return Points(x, y, info.crs)


def sample_cells(paths, n: int, seed, region=None, *, window_rows: int | None = None) -> tuple[Points, np.ndarray]:
    """A seeded sample of distinct cells, weighted by area, with all rasters' values.

    For variograms: cells valid in all rasters (and inside ``region``) are drawn
    without replacement with weights proportional to cell area, in one pass, using the
    keys of "Weighted random sampling with a reservoir" (Information Processing
    Letters, 2006): each cell gets key log(U)/area and the n largest keys win.

    Parameters
    ----------
    paths, seed, region, window_rows
        As for :func:`sample_valid_locations`.
    n : int
        Number of cells; fewer are returned when fewer cells are valid.

    Returns
    -------
    points : Points
        Cell centres in the first raster's CRS, in random order.
    values : ndarray, shape (len(points), len(paths))
        Each raster's value at those cells.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.tif"
    >>> write_geotiff(p, np.array([[1.0, np.nan, 3.0]]), from_origin(0, 1, 1, 1), "EPSG:4326")
    >>> pts, vals = sample_cells([p], 5, seed=1)
    >>> sorted(vals[:, 0].tolist()), sorted(pts.x.tolist())
    ([1.0, 3.0], [0.5, 2.5])
    """
    n = int(n)
    if n < 0:
        raise InputError(f"The number of cells to sample must be 0 or more, not {n}.")
    rng = np.random.default_rng(seed)
    keys = np.zeros(0)
    rows = cols = np.zeros(0, np.int64)
    values = None
    with _CellReader(paths, region, window_rows) as reader:
        for window in reader.windows:
            block = reader.block(window)
            if not len(block):
                continue
            # 1 - U lies in (0, 1], so the log is finite.
            block_keys = np.log1p(-rng.random(len(block))) / block.areas
            keys = np.concatenate([keys, block_keys])
            rows = np.concatenate([rows, block.rows])
            cols = np.concatenate([cols, block.cols])
            values = block.values if values is None else np.concatenate([values, block.values])
            if keys.size > n:  # keep only the n best so memory stays bounded
                best = np.argpartition(-keys, n)[:n]
                keys, rows, cols, values = keys[best], rows[best], cols[best], values[best]
        if values is None:
            raise _no_valid_cells(reader.paths)
        order = np.argsort(-keys, kind="stable")
        points = reader.centres(rows[order], cols[order])
    return points, values[order]


# ------------------------------------------------------------------------ writing


def write_geotiff(path, array, transform, crs, nodata: float = -9999.0) -> None:
    """Write a single-band float32 GeoTIFF atomically and reproducibly.

    Deflate-compressed with the floating-point predictor, tiled 256 × 256. NaN cells
    are written as ``nodata``. The same inputs give the same bytes (GDAL writes no
    timestamp unless asked to).

    Parameters
    ----------
    path : str or Path
    array : array_like, shape (rows, cols)
    transform : affine.Affine
    crs : pyproj.CRS, rasterio CRS or anything they accept (e.g. "EPSG:4326")
    nodata : float

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from rasterio.transform import from_origin
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "pred.tif"
    >>> write_geotiff(p, np.array([[0.1, np.nan]]), from_origin(0, 1, 1, 1), "EPSG:4326")
    >>> raster_info(p).nodata
    -9999.0
    """
    data = np.asarray(array, dtype=np.float32)
    if data.ndim != 2 or data.size == 0:
        raise InputError(f"A GeoTIFF needs a non-empty 2-D array, not one of shape {data.shape} (for {path}).")
    data = np.where(np.isnan(data), np.float32(nodata), data)
    with atomic_path(path) as tmp:
        with rasterio.open(tmp, "w", **_geotiff_profile(data.shape[1], data.shape[0], transform, crs, nodata)) as dst:
            dst.write(data, 1)


def _geotiff_profile(width, height, transform, crs, nodata) -> dict:
    if isinstance(crs, pyproj.CRS):
        crs = crs.to_wkt()
    return dict(
        driver="GTiff", width=width, height=height, count=1, dtype="float32",
        crs=rasterio.crs.CRS.from_user_input(crs), transform=transform, nodata=nodata,
        compress="deflate", predictor=3, tiled=True, blockxsize=256, blockysize=256,
    )


def write_geotiff_by_rows(path, width: int, height: int, transform, crs, compute, *,
                          nodata: float = -9999.0, rows_per_window: int = 1024) -> None:
    """Write a GeoTIFF window by window: ``compute(window)`` returns that window's values.

    For outputs larger than memory (e.g. a model's predictions over a 10^8-cell
    grid). Windows are whole tile rows (multiples of 256 rows), so every tile is
    written once; NaN becomes ``nodata``; the file appears atomically.
    """
    step = max(256, (rows_per_window // 256) * 256)
    with atomic_path(path) as tmp:
        with rasterio.open(tmp, "w", **_geotiff_profile(width, height, transform, crs, nodata)) as dst:
            for row in range(0, height, step):
                w = Window(0, row, width, min(step, height - row))
                data = np.asarray(compute(w), dtype=np.float32)
                dst.write(np.where(np.isnan(data), np.float32(nodata), data), 1, window=w)
