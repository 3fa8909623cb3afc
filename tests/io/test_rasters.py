"""Raster reading and writing, checked against rasterio, pyproj, shapely and analytic results.

All rasters are invented here, seeded: a lon/lat raster over 0–30° E, 40–60° N with 0.5°
cells, and an EPSG:3035 (LAEA Europe) raster with 10 km cells over the same area.
"""

import numpy as np
import pyproj
import pytest
import rasterio
import rasterio.io
import shapely
from affine import Affine
from scipy import stats

from splitter.errors import InputError
from splitter.geo import Points
from splitter.io.rasters import (
    Region,
    cell_values_and_areas,
    raster_info,
    read_region,
    sample_cells,
    sample_rasters,
    sample_valid_locations,
    valid_cells,
    windows_of,
    write_geotiff,
)

NODATA = -9999.0
GEO_TRANSFORM = Affine(0.5, 0, 0.0, 0, -0.5, 60.0)  # 60 cols x 40 rows: lon 0–30, lat 40–60


def make_raster(path, array, transform, crs, nodata=NODATA, block=None):
    """Write a test raster with rasterio itself, independently of write_geotiff."""
    profile = dict(
        driver="GTiff", width=array.shape[1], height=array.shape[0], count=1,
        dtype="float32", crs=crs, transform=transform, nodata=nodata,
    )
    if block:
        profile.update(tiled=True, blockxsize=block, blockysize=block)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(array.astype("float32"), 1)
    return path


@pytest.fixture
def geo(tmp_path):
    rng = np.random.default_rng(1)
    arr = rng.normal(10, 3, size=(40, 60)).astype("float32")
    arr[rng.random(arr.shape) < 0.1] = NODATA
    return make_raster(tmp_path / "temp.tif", arr, GEO_TRANSFORM, "EPSG:4326"), arr


@pytest.fixture
def laea(tmp_path):
    # Extent of the lon/lat raster in EPSG:3035, padded, on a 10 km grid.
    tr = pyproj.Transformer.from_crs(4326, 3035, always_xy=True)
    lon, lat = np.meshgrid(np.linspace(0, 30, 61), np.linspace(40, 60, 41))
    x, y = tr.transform(lon.ravel(), lat.ravel())
    left, top = np.floor(x.min() / 1e4) * 1e4 - 2e4, np.ceil(y.max() / 1e4) * 1e4 + 2e4
    width, height = int((x.max() - left) // 1e4) + 3, int((top - y.min()) // 1e4) + 3
    rng = np.random.default_rng(2)
    arr = rng.uniform(0, 100, size=(height, width)).astype("float32")
    arr[rng.random(arr.shape) < 0.05] = NODATA
    transform = Affine(1e4, 0, left, 0, -1e4, top)
    return make_raster(tmp_path / "rain.tif", arr, transform, "EPSG:3035"), arr


def reference_sample(path, x, y):
    """rasterio's own sampler (dataset.sample), masked cells as NaN."""
    with rasterio.open(path) as src:
        out = [s[0] for s in src.sample(zip(x, y), masked=True)]
    return np.array([np.nan if np.ma.is_masked(v) else float(v) for v in out])


def random_lonlat(n, seed, pad=2.0):
    rng = np.random.default_rng(seed)
    return rng.uniform(0 - pad, 30 + pad, n), rng.uniform(40 - pad, 60 + pad, n)


def cell_centres(transform, rows, cols):
    return transform.c + transform.a * (cols + 0.5), transform.f + transform.e * (rows + 0.5)


# ------------------------------------------------------------------------ info


def test_raster_info_reads_header(geo):
    path, _ = geo
    info = raster_info(path)
    # reference: the values the raster was written with (analytic)
    assert (info.width, info.height, info.nodata, info.dtype, info.name) == (60, 40, NODATA, "float32", "temp")
    assert info.crs == pyproj.CRS.from_epsg(4326)
    assert info.transform == GEO_TRANSFORM
    assert info.bounds == (0.0, 40.0, 30.0, 60.0)


def test_raster_info_bad_files(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        raster_info(tmp_path / "missing.tif")
    text = tmp_path / "notes.tif"
    text.write_text("not a raster")
    with pytest.raises(InputError, match="notes.tif"):
        raster_info(text)
    no_crs = make_raster(tmp_path / "nocrs.tif", np.zeros((2, 2)), GEO_TRANSFORM, None)
    with pytest.raises(InputError, match="nocrs.tif.*no coordinate reference system"):
        raster_info(no_crs)


# -------------------------------------------------------------------- sampling


def test_sample_matches_rasterio_and_affine(geo):
    path, arr = geo
    lon, lat = random_lonlat(500, seed=3)
    values, notes = sample_rasters([path], Points.lonlat(lon, lat))
    # reference: rasterio.sample.sample_gen (dataset.sample) on the same points
    np.testing.assert_array_equal(values[:, 0], reference_sample(path, lon, lat))
    # reference: cell indices from the affine by hand (analytic): row = floor((60 − lat)/0.5)
    inside = (lon >= 0) & (lon < 30) & (lat > 40) & (lat <= 60)
    row = np.floor((60 - lat[inside]) / 0.5).astype(int)
    col = np.floor(lon[inside] / 0.5).astype(int)
    hand = arr[row, col].astype(float)
    hand[hand == NODATA] = np.nan
    np.testing.assert_array_equal(values[inside, 0], hand)
    assert np.isnan(values[~inside, 0]).all()
    assert not any("reprojected" in n for n in notes)


def test_sample_outside_nodata_and_nan_cells_give_nan(tmp_path):
    arr = np.array([[1.0, NODATA, np.nan], [4.0, 5.0, 6.0]])
    path = make_raster(tmp_path / "small.tif", arr, Affine(1, 0, 0, 0, -1, 2), "EPSG:4326")
    pts = Points.lonlat([0.5, 1.5, 2.5, 2.5, 5.0, -0.1], [1.5, 1.5, 1.5, 0.5, 1.0, 1.0])
    values, notes = sample_rasters([path], pts)
    # reference: the array written above, indexed by hand (analytic)
    np.testing.assert_array_equal(values[:, 0], [1.0, np.nan, np.nan, 6.0, np.nan, np.nan])
    assert any("4 of 6 records have no value in small.tif" in n for n in notes)


def test_sample_reprojects_to_each_raster(geo, laea):
    (gpath, _), (ppath, _) = geo, laea
    lon, lat = random_lonlat(400, seed=4, pad=0.0)
    values, notes = sample_rasters([gpath, ppath], Points.lonlat(lon, lat))
    x, y = pyproj.Transformer.from_crs(4326, 3035, always_xy=True).transform(lon, lat)
    # reference: pyproj.Transformer to EPSG:3035, then rasterio's dataset.sample there
    np.testing.assert_array_equal(values[:, 1], reference_sample(ppath, x, y))
    np.testing.assert_array_equal(values[:, 0], reference_sample(gpath, lon, lat))
    assert "reprojected records to EPSG:3035 for rain.tif" in notes
    assert not any("temp.tif" in n and "reprojected" in n for n in notes)


def test_sample_reads_only_tiles_with_points(tmp_path, monkeypatch):
    rng = np.random.default_rng(5)
    arr = rng.normal(size=(96, 128)).astype("float32")
    path = make_raster(tmp_path / "tiled.tif", arr, Affine(0.1, 0, 0, 0, -0.1, 9.6), "EPSG:4326", block=16)
    # Points confined to the upper-left 40 x 40 cells: blocks (0..2, 0..2) only.
    lon, lat = rng.uniform(0, 4.0, 300), rng.uniform(9.6 - 4.0, 9.6, 300)
    windows = []
    real_read = rasterio.io.DatasetReader.read

    def spy(self, *args, **kwargs):
        windows.append(kwargs.get("window"))
        return real_read(self, *args, **kwargs)

    monkeypatch.setattr(rasterio.io.DatasetReader, "read", spy)
    values, _ = sample_rasters([path], Points.lonlat(lon, lat), max_window_cells=256)
    monkeypatch.undo()
    # reference: the full in-memory array indexed from the affine (analytic)
    row, col = np.floor((9.6 - lat) / 0.1).astype(int), np.floor(lon / 0.1).astype(int)
    np.testing.assert_array_equal(values[:, 0], arr[row, col])
    # reference: the 16 x 16 blocks that hold points, counted by hand (analytic)
    blocks = {(r // 16, c // 16) for r, c in zip(row, col)}
    assert len(windows) == len(blocks)
    assert all(w is not None and w.width * w.height <= 256 for w in windows)
    # the same answer with the default (large) tiles
    np.testing.assert_array_equal(sample_rasters([path], Points.lonlat(lon, lat))[0], values)


def test_sample_all_outside_is_input_error(geo):
    path, _ = geo
    with pytest.raises(InputError, match="temp.tif"):
        sample_rasters([path], Points.lonlat([100.0, 101.0], [-10.0, -11.0]))


# ----------------------------------------------------------------- valid cells


def geod_row_areas_km2(transform, height, width):
    """Per-row cell areas from pyproj.Geod, edges densified so they follow the parallels."""
    geod = pyproj.Geod(ellps="WGS84")
    lon = np.linspace(transform.c, transform.c + transform.a * width, 2001)
    out = []
    for r in range(height):
        top, bottom = transform.f + transform.e * r, transform.f + transform.e * (r + 1)
        ring_lon = np.r_[lon, lon[::-1]]
        ring_lat = np.r_[np.full(lon.size, bottom), np.full(lon.size, top)]
        area, _ = geod.polygon_area_perimeter(ring_lon, ring_lat)
        out.append(abs(area) / 1e6 / width)
    return np.array(out)


def test_cell_values_and_areas_geographic(geo):
    path, arr = geo
    values, areas = cell_values_and_areas(path)
    valid = arr != NODATA
    # reference: the full array read in memory, valid cells in row-major order (analytic)
    np.testing.assert_array_equal(values, arr[valid].astype(float))
    # reference: pyproj.Geod.polygon_area_perimeter of each row's cells
    expected = np.broadcast_to(geod_row_areas_km2(GEO_TRANSFORM, 40, 60)[:, None], arr.shape)[valid]
    np.testing.assert_allclose(areas, expected, rtol=1e-6)


def test_cell_areas_projected(laea):
    path, arr = laea
    values, areas = cell_values_and_areas(path)
    assert values.size == int((arr != NODATA).sum())
    np.testing.assert_allclose(areas, 100.0)  # reference: 10 km x 10 km cell (analytic)


def test_valid_cells_windows_match_single_read(geo):
    path, _ = geo
    blocks = list(valid_cells(path, window_rows=3))
    assert all(b.rows.max() - b.rows.min() < 3 for b in blocks)
    whole = list(valid_cells(path, window_rows=1000))
    assert len(whole) == 1
    # reference: one read of the whole raster (the windowed path must agree exactly)
    for field in ("rows", "cols", "values", "areas"):
        np.testing.assert_array_equal(np.concatenate([getattr(b, field) for b in blocks]), getattr(whole[0], field))


def test_windows_of_cover_the_raster_once(geo):
    path, _ = geo
    windows = windows_of(path, max_cells=7 * 60)
    rows = np.concatenate([np.arange(w.row_off, w.row_off + w.height) for w in windows])
    # reference: every row 0..39 exactly once (analytic)
    np.testing.assert_array_equal(rows, np.arange(40))
    assert all(w.width * w.height <= 7 * 60 for w in windows)


def test_region_mask_same_crs(geo):
    path, arr = geo
    # No cell centre lies exactly on an edge: GDAL's rasteriser burns such boundary
    # centres on one side only, a convention the test should not depend on.
    triangle = shapely.Polygon([(2.1, 41.05), (27.9, 45.1), (10.05, 58.9)])
    values, _ = cell_values_and_areas(path, region=Region(triangle, pyproj.CRS.from_epsg(4326)))
    rows, cols = np.indices(arr.shape)
    cx, cy = cell_centres(GEO_TRANSFORM, rows, cols)
    assert shapely.distance(triangle.boundary, shapely.points(cx, cy)).min() > 1e-4
    # reference: shapely.contains_xy on the cell centres (cell-centre rule)
    inside = shapely.contains_xy(triangle, cx, cy) & (arr != NODATA)
    np.testing.assert_array_equal(values, arr[inside].astype(float))
    # a bare geometry is taken to be in the raster CRS already
    np.testing.assert_array_equal(cell_values_and_areas(path, region=triangle)[0], values)


def test_region_in_another_crs_is_reprojected(geo):
    path, arr = geo
    tr = pyproj.Transformer.from_crs(4326, 3035, always_xy=True)
    corners = np.array([(3, 42), (27, 44), (12, 58)], float)
    px, py = tr.transform(corners[:, 0], corners[:, 1])
    triangle_3035 = shapely.Polygon(np.column_stack([px, py]))
    blocks = list(valid_cells(path, region=Region(triangle_3035, pyproj.CRS.from_epsg(3035))))
    got = np.zeros(arr.shape, bool)
    for b in blocks:
        got[b.rows, b.cols] = True
    rows, cols = np.indices(arr.shape)
    cx, cy = tr.transform(*cell_centres(GEO_TRANSFORM, rows, cols))
    # reference: pyproj.Transformer of the centres + shapely.contains_xy in EPSG:3035;
    # centres within 2 km of the boundary are skipped (edge densification tolerance).
    inside = shapely.contains_xy(triangle_3035, cx, cy) & (arr != NODATA)
    clear = shapely.distance(triangle_3035.boundary, shapely.points(cx, cy)) > 2000
    np.testing.assert_array_equal(got[clear], inside[clear])
    assert clear.mean() > 0.95


# -------------------------------------------------------------- area sampling


def test_sample_valid_locations_only_valid_and_deterministic(tmp_path, geo):
    path, arr = geo
    rng = np.random.default_rng(6)
    other = arr.copy()
    other[rng.random(arr.shape) < 0.3] = NODATA
    path2 = make_raster(tmp_path / "other.tif", other, GEO_TRANSFORM, "EPSG:4326")
    pts = sample_valid_locations([path, path2], 3000, seed=7)
    assert len(pts) == 3000 and pts.crs == pyproj.CRS.from_epsg(4326)
    # reference: rasterio's dataset.sample finds a value in both rasters at every location
    assert np.isfinite(reference_sample(path, pts.x, pts.y)).all()
    assert np.isfinite(reference_sample(path2, pts.x, pts.y)).all()
    np.testing.assert_array_equal(pts.x, sample_valid_locations([path, path2], 3000, seed=7).x)
    np.testing.assert_array_equal(pts.y, sample_valid_locations([path, path2], 3000, seed=7).y)
    assert not np.array_equal(pts.x, sample_valid_locations([path, path2], 3000, seed=8).x)
    # streamed in small windows the sample is still of valid cells only
    small = sample_valid_locations([path, path2], 500, seed=7, window_rows=5)
    assert np.isfinite(reference_sample(path2, small.x, small.y)).all()


def _lonlat_raster(tmp_path, name, rows, cols, top=70.0, height_deg=70.0, width_deg=10.0):
    transform = Affine(width_deg / cols, 0, 0.0, 0, -height_deg / rows, top)
    return make_raster(tmp_path / name, np.ones((rows, cols)), transform, "EPSG:4326")


@pytest.mark.parametrize("rows", [70, 1])
def test_sample_valid_locations_is_uniform_by_area(tmp_path, rows):
    # 70 one-degree rows test the weighting of cells by area; a single 70-degree cell
    # tests the uniform-by-area position inside a cell.
    path = _lonlat_raster(tmp_path, "band.tif", rows, 1 if rows == 1 else 10)
    n = 20000
    pts = sample_valid_locations([path], n, seed=11)
    assert ((pts.y >= 0) & (pts.y <= 70) & (pts.x >= 0) & (pts.x <= 10)).all()
    north = int((pts.y >= 35).sum())
    # reference: spherical zone area ∝ sin φ2 − sin φ1 (analytic). On the WGS84
    # ellipsoid the share is 0.3911 instead of 0.3896, far inside the tolerance.
    p = (np.sin(np.radians(70)) - np.sin(np.radians(35))) / np.sin(np.radians(70))
    tolerance = 4 * np.sqrt(p * (1 - p) / n)  # reference: binomial standard deviation (analytic)
    assert abs(north / n - p) < tolerance
    # reference: scipy.stats.binomtest — uniform-by-cell-count (share 0.5) is rejected
    assert stats.binomtest(north, n, 0.5).pvalue < 1e-6


def test_sample_valid_locations_respects_region(geo):
    path, arr = geo
    square = shapely.box(5, 45, 15, 50)
    pts = sample_valid_locations([path], 2000, seed=3, region=square)
    row, col = np.floor((60 - pts.y) / 0.5), np.floor(pts.x / 0.5)
    cx, cy = cell_centres(GEO_TRANSFORM, row, col)
    # reference: shapely.contains_xy on the centre of the cell holding each location
    assert shapely.contains_xy(square, cx, cy).all()


def test_no_valid_cells_is_input_error(geo):
    path, _ = geo
    with pytest.raises(InputError, match="No cell is valid"):
        sample_valid_locations([path], 10, seed=1, region=shapely.box(100, 0, 101, 1))
    with pytest.raises(InputError, match="No cell is valid"):
        sample_cells([path], 10, seed=1, region=shapely.box(100, 0, 101, 1))


def test_sample_cells_values_and_centres(geo, laea):
    (gpath, _), (ppath, _) = geo, laea
    pts, values = sample_cells([gpath, ppath], 300, seed=2)
    assert values.shape == (300, 2) and np.isfinite(values).all()
    # centres of distinct cells of the first raster
    row, col = (60 - pts.y) / 0.5 - 0.5, pts.x / 0.5 - 0.5
    np.testing.assert_allclose(row, np.round(row), atol=1e-9)
    assert len(set(zip(np.round(row), np.round(col)))) == 300
    # reference: rasterio's dataset.sample; pyproj.Transformer for the EPSG:3035 raster
    np.testing.assert_array_equal(values[:, 0], reference_sample(gpath, pts.x, pts.y))
    x, y = pyproj.Transformer.from_crs(4326, 3035, always_xy=True).transform(pts.x, pts.y)
    np.testing.assert_array_equal(values[:, 1], reference_sample(ppath, x, y))
    again, _ = sample_cells([gpath, ppath], 300, seed=2, window_rows=4)
    np.testing.assert_array_equal(again.x, pts.x)  # same draw whatever the windows


def test_sample_cells_returns_all_when_asked_for_more(geo):
    path, arr = geo
    pts, values = sample_cells([path], 10**6, seed=1)
    # reference: number of non-nodata cells in the array written (analytic)
    assert len(pts) == int((arr != NODATA).sum())
    np.testing.assert_array_equal(np.sort(values[:, 0]), np.sort(arr[arr != NODATA].astype(float)))


def test_sample_cells_weights_by_area(tmp_path):
    # Two cells, 70–35° N and 35–0° N: the first cell drawn is the northern one with
    # probability equal to its area share (Efraimidis & Spirakis keys).
    path = _lonlat_raster(tmp_path, "two.tif", 2, 1)
    trials = 600
    north = sum(sample_cells([path], 1, seed=s)[0].y[0] > 35 for s in range(trials))
    # reference: spherical zone area share (analytic), scipy.stats.binomtest for the spread
    p = (np.sin(np.radians(70)) - np.sin(np.radians(35))) / np.sin(np.radians(70))
    assert stats.binomtest(int(north), trials, p).pvalue > 1e-3
    assert stats.binomtest(int(north), trials, 0.5).pvalue < 1e-3


# --------------------------------------------------------------------- regions


def test_read_region_unions_polygons(tmp_path):
    import geopandas as gpd

    path = tmp_path / "region.gpkg"
    geoms = [shapely.box(0, 0, 2, 1), shapely.box(1, 0, 3, 1), shapely.Point(5, 5)]
    gpd.GeoDataFrame(geometry=geoms, crs=3035).to_file(path)
    geometry, crs = read_region(path)
    assert geometry.area == 3.0  # reference: union of the two boxes is a 3 x 1 box (analytic)
    assert crs == pyproj.CRS.from_epsg(3035)


def test_read_region_errors(tmp_path):
    import geopandas as gpd

    with pytest.raises(InputError, match="does not exist"):
        read_region(tmp_path / "none.gpkg")
    points = tmp_path / "points.gpkg"
    gpd.GeoDataFrame(geometry=[shapely.Point(0, 0)], crs=4326).to_file(points)
    with pytest.raises(InputError, match="points.gpkg holds no polygon"):
        read_region(points)
    junk = tmp_path / "junk.gpkg"
    junk.write_text("junk")
    with pytest.raises(InputError, match="junk.gpkg"):
        read_region(junk)


# --------------------------------------------------------------------- writing


def test_write_geotiff_round_trip_and_byte_identical(tmp_path):
    rng = np.random.default_rng(9)
    arr = rng.random((300, 270))
    arr[5, 7] = np.nan
    transform = Affine(0.01, 0, 3.0, 0, -0.01, 50.0)
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    first, second = tmp_path / "a" / "pred.tif", tmp_path / "b" / "pred.tif"
    write_geotiff(first, arr, transform, pyproj.CRS.from_epsg(4326))
    write_geotiff(second, arr, transform, "EPSG:4326")
    assert first.read_bytes() == second.read_bytes()
    assert sorted(p.name for p in (tmp_path / "a").iterdir()) == ["pred.tif"]
    with rasterio.open(first) as src:
        # reference: rasterio's reading of the file (profile and masked values)
        assert src.profile["tiled"] and src.block_shapes[0] == (256, 256)
        assert src.profile["compress"] == "deflate" and src.dtypes[0] == "float32"
        assert src.nodata == -9999.0 and src.transform == transform
        back = src.read(1, masked=True)
    assert back.mask[5, 7] and back.mask.sum() == 1
    np.testing.assert_array_equal(back.filled(np.nan), arr.astype("float32"))


def test_write_geotiff_rejects_non_2d(tmp_path):
    with pytest.raises(InputError, match="2-D"):
        write_geotiff(tmp_path / "x.tif", np.zeros(3), GEO_TRANSFORM, "EPSG:4326")


def test_valid_cells_agree_with_rasterio_masks(tmp_path):
    """The fast read (nodata compared in the raster's own type) and GDAL's mask agree.

    Reference: rasterio's ``read(masked=True)`` of the whole band (GDAL's own validity),
    for a float32 raster with nodata and NaN, an integer raster with nodata, and a raster
    whose validity comes from an internal mask band rather than a nodata value.
    """
    rng = np.random.default_rng(5)
    arr = rng.normal(0, 1, (30, 20)).astype("float32")
    arr[rng.random(arr.shape) < 0.2] = NODATA
    arr[rng.random(arr.shape) < 0.05] = np.nan
    ints = rng.integers(0, 50, (30, 20)).astype("int16")
    ints[ints == 7] = -1
    paths = [make_raster(tmp_path / "f.tif", arr, GEO_TRANSFORM, "EPSG:4326")]
    profile = dict(driver="GTiff", width=20, height=30, count=1, dtype="int16", crs="EPSG:4326",
                   transform=GEO_TRANSFORM, nodata=-1)
    with rasterio.open(tmp_path / "i.tif", "w", **profile) as dst:
        dst.write(ints, 1)
    paths.append(tmp_path / "i.tif")
    masked_profile = dict(profile, dtype="float32", nodata=None)
    with rasterio.Env(GDAL_TIFF_INTERNAL_MASK=True):
        with rasterio.open(tmp_path / "m.tif", "w", **masked_profile) as dst:
            dst.write(np.abs(arr), 1)  # NODATA cells are ordinary values here: only the mask hides them
            dst.write_mask(np.where(rng.random(arr.shape) < 0.3, 0, 255).astype("uint8"))
    paths.append(tmp_path / "m.tif")
    for path in paths:
        with rasterio.open(path) as src:
            ref = src.read(1, masked=True)
        ok = ~np.ma.getmaskarray(ref) & np.isfinite(ref.data.astype(float))
        blocks = list(valid_cells(path, window_rows=7))
        np.testing.assert_array_equal(np.concatenate([b.values for b in blocks]), ref.data[ok].astype(float))
        rows, cols = np.nonzero(ok)
        np.testing.assert_array_equal(np.concatenate([b.rows for b in blocks]), rows)
        np.testing.assert_array_equal(np.concatenate([b.cols for b in blocks]), cols)
        # reference: pyproj.Geod.polygon_area_perimeter of each row's cells
        np.testing.assert_allclose(np.concatenate([b.areas for b in blocks]),
                                   geod_row_areas_km2(GEO_TRANSFORM, 30, 20)[rows], rtol=1e-6)
