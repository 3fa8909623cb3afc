"""Tests for splitter.landscape: the invented demo scenario."""

import hashlib
import json
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import pytest
import rasterio
from scipy import stats

from splitter.errors import InputError
from splitter.landscape import DEFAULT_SEED, build_landscape, main, make_demo_data

BUNDLED = Path(__file__).resolve().parents[1] / "demo_data"
RASTERS = ["temperature", "moisture", "canopy"]
EXPECTED_FILES = {
    "README.md", "truth.json", "records.csv", "background.csv", "records_with_background.csv",
    "temperature.tif", "moisture.tif", "canopy.tif",
}


def _digests(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """The landscape at DEFAULT_SEED, built once for the module: (folder, make_demo_data's result)."""
    out = tmp_path_factory.mktemp("demo_one")
    return out, make_demo_data(out)


@pytest.fixture(scope="module")
def demo(made) -> Path:
    return made[0]


@pytest.fixture(scope="module")
def tables(demo):
    records = pd.read_csv(demo / "records.csv")
    background = pd.read_csv(demo / "background.csv")
    return records, background


def _sample(path: Path, frame: pd.DataFrame) -> np.ndarray:
    with rasterio.open(path) as src:
        return np.array([v[0] for v in src.sample(zip(frame["longitude"], frame["latitude"]))])


def test_regeneration_is_byte_identical(made, demo, tmp_path, capsys):
    # The second build goes through the command-line entry point (`python -m splitter.landscape OUT`).
    assert main([str(tmp_path / "again")]) == 0
    assert "records.csv" in capsys.readouterr().out
    first = _digests(demo)
    assert set(first) == EXPECTED_FILES
    # reference: hashlib.sha256 of every file of two independent runs
    assert _digests(tmp_path / "again") == first
    # the digests make_demo_data reports are those of the files it wrote
    assert made[1].sha256 == first


def test_different_seed_gives_different_data(demo, tmp_path):
    make_demo_data(tmp_path, seed=DEFAULT_SEED + 1)
    assert _digests(tmp_path)["records.csv"] != _digests(demo)["records.csv"]


def test_bundled_demo_data_is_up_to_date(demo):
    # demo_data/ is committed; a tree without it is broken, not a reason to skip
    assert (BUNDLED / "truth.json").is_file(), "demo_data/ is missing; run `python -m splitter.landscape demo_data`"
    # Text files must match byte for byte; rasters by value (GDAL versions may differ in bytes).
    for name in ["README.md", "truth.json", "records.csv", "background.csv", "records_with_background.csv"]:
        assert (BUNDLED / name).read_bytes() == (demo / name).read_bytes(), (
            f"demo_data/{name} is stale; run `python -m splitter.landscape demo_data`"
        )
    for name in RASTERS:
        with rasterio.open(BUNDLED / f"{name}.tif") as a, rasterio.open(demo / f"{name}.tif") as b:
            # consistency: the bundled files equal the generator's output at DEFAULT_SEED (read by rasterio)
            np.testing.assert_array_equal(a.read(1), b.read(1))


def test_files_are_small(demo):
    total = sum(p.stat().st_size for p in demo.iterdir())
    # common practice: bundled demo data under the 5 MB budget set for the package
    assert total < 5 * 1024 * 1024


def test_raster_profile(demo):
    for name in RASTERS:
        with rasterio.open(demo / f"{name}.tif") as src:
            assert src.crs.to_epsg() == 4326
            assert (src.width, src.height) == (240, 200)
            # reference: analytic result, 12 x 10 degrees in 0.05 degree cells
            assert src.res == pytest.approx((0.05, 0.05))
            assert (src.bounds.left, src.bounds.bottom, src.bounds.right, src.bounds.top) == pytest.approx(
                (-44.0, 40.0, -32.0, 50.0))
            assert src.dtypes[0] == "float32"
            assert src.nodata == -9999.0
            assert src.compression.value.lower() == "deflate"
            data = src.read(1)
        sea = data == -9999.0
        assert 0 < sea.sum() < 0.2 * sea.size
        # The sea lies along the eastern edge: in every row the nodata cells are one run
        # that ends at the last column.
        first_sea = np.where(sea.any(axis=1), sea.argmax(axis=1), sea.shape[1])
        assert sea[:, -1].all()
        assert all(sea[r, first_sea[r]:].all() for r in range(sea.shape[0]))
        assert np.all(np.isfinite(data))


def test_rasters_share_one_nodata_mask(demo):
    masks = []
    for name in RASTERS:
        with rasterio.open(demo / f"{name}.tif") as src:
            masks.append(src.read_masks(1) == 0)
    assert all(np.array_equal(masks[0], m) for m in masks[1:])


def test_table_schema(demo, tables):
    records, background = tables
    columns = ["record_id", "longitude", "latitude", "kind", "method", "year"]
    assert list(records.columns) == columns and list(background.columns) == columns
    assert 300 <= len(records) <= 500
    assert len(background) == 2000
    assert set(records["kind"]) == {"presence"} and set(background["kind"]) == {"background"}
    assert set(records["method"]) == {"transect", "light-trap"}
    assert background["method"].isna().all() and background["year"].isna().all()
    assert records["year"].between(2011, 2024).all()
    stacked = pd.read_csv(demo / "records_with_background.csv")
    # Background columns that are all empty read back with another dtype; compare values.
    pd.testing.assert_frame_equal(stacked, pd.concat([records, background], ignore_index=True), check_dtype=False)
    assert stacked["record_id"].is_unique
    # Coordinates are written with at most 5 decimals.
    for line in (demo / "records_with_background.csv").read_text().splitlines()[1:4]:
        lon, lat = line.split(",")[1:3]
        assert len(lon.split(".")[1]) <= 5 and len(lat.split(".")[1]) <= 5


def test_every_point_lies_on_a_valid_cell(demo, tables):
    records, background = tables
    for name in RASTERS:
        # reference: rasterio DatasetReader.sample at each point
        assert (_sample(demo / f"{name}.tif", records) != -9999.0).all(), name
        assert (_sample(demo / f"{name}.tif", background) != -9999.0).all(), name


def test_records_follow_the_niche(demo, tables):
    records, background = tables
    truth = json.loads((demo / "truth.json").read_text())
    assert truth["niche"]["temperature_optimum"] > np.median(_sample(demo / "temperature.tif", background))
    assert truth["niche"]["moisture_optimum"] > np.median(_sample(demo / "moisture.tif", background))
    # The optima lie above the background's typical values, so records are warmer and wetter.
    for name in ["temperature", "moisture"]:
        presence = _sample(demo / f"{name}.tif", records)
        reference = _sample(demo / f"{name}.tif", background)
        # reference: scipy.stats.mannwhitneyu, one-sided
        assert stats.mannwhitneyu(presence, reference, alternative="greater").pvalue < 0.01, name


def test_survey_methods_have_different_footprints(demo, tables):
    records, _ = tables
    truth = json.loads((demo / "truth.json").read_text())
    stations = np.array(list(truth["sampling"]["stations"].values()))  # [lon, lat] per field station
    assert stations.shape == (5, 2)
    # Degree distance is enough to rank closeness within one region.
    d = np.hypot(records["longitude"].to_numpy()[:, None] - stations[:, 0],
                 records["latitude"].to_numpy()[:, None] - stations[:, 1]).min(axis=1)
    trap = records["method"].eq("light-trap").to_numpy()
    # reference: scipy.stats.mannwhitneyu, light-trap records lie nearer the field stations
    assert stats.mannwhitneyu(d[trap], d[~trap], alternative="less").pvalue < 0.01


def test_background_is_uniform_by_area(demo, tables):
    _, background = tables
    with rasterio.open(demo / "canopy.tif") as src:  # land cells: the rasters' shared valid mask
        valid = src.read_masks(1) > 0
    lat_c = 50.0 - (np.arange(200) + 0.5) * 0.05
    # reference: analytic result, spherical zone area is proportional to the band of sin(latitude)
    band = np.sin(np.radians(lat_c + 0.025)) - np.sin(np.radians(lat_c - 0.025))
    area = valid * band[:, None]
    north_share = area[:100].sum() / area.sum()
    north_points = int((background["latitude"] > 45.0).sum())
    # reference: scipy.stats.binomtest against the area share of the northern half
    assert stats.binomtest(north_points, len(background), north_share).pvalue > 0.001


def test_truth_records_the_ranges(demo):
    truth = json.loads((demo / "truth.json").read_text())
    ranges = {k: v["effective_range_km"] for k, v in truth["covariates"].items()}
    assert ranges == {"temperature": 80.0, "moisture": 150.0, "canopy": 40.0}
    assert truth["seed"] == DEFAULT_SEED
    readme = (demo / "README.md").read_text()
    assert "synthetic" in readme.lower() and "invented" in readme.lower()


@pytest.mark.parametrize("name, true_range_km", [("canopy", 40.0), ("moisture", 150.0)])
def test_covariate_range_can_be_recovered(demo, name, true_range_km):
    import skgstat as skg  # here, not at collection: it loads numba (0.5 s) on every worker

    with rasterio.open(demo / f"{name}.tif") as src:
        z = src.read(1)
        t = src.transform
        b = src.bounds
    rows, cols = np.nonzero(z != -9999.0)
    pick = np.random.default_rng(5).choice(rows.size, 2000, replace=False)
    # Equal-area km from pyproj: Lambert azimuthal equal-area centred on the raster.
    laea = pyproj.Transformer.from_crs(
        "EPSG:4326", f"+proj=laea +lat_0={(b.bottom + b.top) / 2} +lon_0={(b.left + b.right) / 2} +ellps=WGS84",
        always_xy=True)
    x, y = laea.transform(t.c + (cols[pick] + 0.5) * t.a, t.f + (rows[pick] + 0.5) * t.e)
    x, y = np.asarray(x) / 1000.0, np.asarray(y) / 1000.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        vario = skg.Variogram(np.column_stack([x, y]), z[rows[pick], cols[pick]].astype(float),
                              model="exponential", n_lags=80, maxlag=400.0)
    # skgstat's exponential r has correlation exp(-3) at r, 0.2 % from our 0.05 convention.
    # reference: skgstat.Variogram fit on one realisation; a factor-1.5 band. Measured over 8 cell
    # samples (seeds 0..7) of this one realisation: canopy 45-56 km (1.12-1.39 x 40 km), moisture
    # 154-178 km (1.03-1.18 x 150 km); the realisation itself is the larger error (one field over a
    # region only ~7 moisture ranges wide), so 1.5 leaves canopy's worst sample ~1.3 sd of room.
    assert true_range_km / 1.5 < vario.parameters[0] < true_range_km * 1.5


def test_command_line_entry_point_refuses_a_file_as_folder(tmp_path):
    # (the entry point's successful build is test_regeneration_is_byte_identical's second run)
    blocker = tmp_path / "a_file"
    blocker.write_text("x")
    with pytest.raises(SystemExit) as exit_info:
        main([str(blocker)])
    assert exit_info.value.code == 2


def test_bad_seed_raises_input_error():
    with pytest.raises(InputError):
        build_landscape(-1)
    with pytest.raises(InputError):
        build_landscape("not a seed")
