"""Records in a local planar grid (--crs planar:km / planar:m): no projection, a stated unit.

Surveys are invented here (seeded): sites on an 80 km x 60 km local grid.
"""

from __future__ import annotations

import json

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
from rasterio.transform import from_origin
from scipy.spatial.distance import cdist
from typer.testing import CliRunner

from splitter.cli import app
from splitter.geo import planar_crs
from splitter.io.rasters import write_geotiff

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _grid_survey(path, n=300, seed=1, scale=1.0):
    rng = np.random.default_rng(seed)
    x, y = rng.random(n) * 80, rng.random(n) * 60
    df = pd.DataFrame({"site": [f"q{i}" for i in range(n)], "easting": np.round(x * scale, 3),
                       "northing": np.round(y * scale, 3), "pa": (rng.random(n) < 0.3).astype(int),
                       "temp": np.round(5 + 0.2 * x + rng.normal(0, 1, n), 2)})
    df.to_csv(path, index=False)
    return df


def _design(src, out, crs="planar:km", *extra):
    return run("design", src, "--x", "easting", "--y", "northing", "--crs", crs, "--kind-column", "pa",
               "--zero-means", "absence", "--id-column", "site", "--block-size", 10, "--buffer", 3, "--folds", 4,
               "--seed", 1, *extra, "--out", out)


@pytest.fixture(scope="module")
def km_run(tmp_path_factory):
    d = tmp_path_factory.mktemp("planar")
    df = _grid_survey(d / "survey.csv")
    res = _design(d / "survey.csv", d / "folds.csv")
    assert res.exit_code == 0, res.output
    return d, df, res


def test_blocks_are_laid_in_the_plane_and_the_buffer_is_euclidean(km_run):
    d, df, _ = km_run
    side = json.loads((d / "folds.design.json").read_text())
    folds = pd.read_csv(d / "folds.csv", dtype={"fold": "Int64"})
    ox, oy = side["parameters"]["grid_offset_km"]
    # a plain reimplementation: 10 km cells from the stated origin, in the grid's own km
    cell = np.floor((df["easting"] - ox) / 10).astype(int) * 1000 + np.floor((df["northing"] - oy) / 10).astype(int)
    per_cell = pd.Series(folds["fold"].to_numpy()).groupby(cell.to_numpy()).nunique()
    assert (per_cell == 1).all() and side["parameters"]["occupied_cells"] == cell.nunique()
    # reference: scipy.spatial.distance.cdist (Euclidean) — the gaps are exactly the calibration
    # records within 3 km of a fold's evaluation records
    gaps = pd.read_csv(d / "folds.gaps.csv", dtype=str)
    xy = df[["easting", "northing"]].to_numpy()
    for f in range(1, 5):
        ev = np.flatnonzero(folds["fold"] == f)
        other = np.flatnonzero(folds["fold"] != f)
        near = other[cdist(xy[other], xy[ev]).min(axis=1) < 3]
        assert set(gaps.loc[gaps["fold"] == str(f), "record_id"]) == set(df["site"].to_numpy()[near])
    assert side["read_back"]["crs"] == "planar:km" and side["geometry_crs"] == "planar:km"


def test_metres_give_the_same_folds_as_kilometres(km_run, tmp_path):
    d, _, _ = km_run
    _grid_survey(tmp_path / "survey_m.csv", scale=1000.0)
    res = _design(tmp_path / "survey_m.csv", tmp_path / "folds.csv", "planar:m")
    assert res.exit_code == 0, res.output
    km = pd.read_csv(d / "folds.csv", dtype=str)
    m = pd.read_csv(tmp_path / "folds.csv", dtype=str)
    # analytic: the same places in another unit lie in the same cells and buffers
    assert (km["fold"] == m["fold"]).all()
    assert pd.read_csv(d / "folds.gaps.csv").equals(pd.read_csv(tmp_path / "folds.gaps.csv"))


@pytest.mark.parametrize("suffix", [".gpkg", ".parquet"])
def test_vector_outputs_carry_an_engineering_crs(km_run, tmp_path, suffix):
    d, _, _ = km_run
    res = _design(d / "survey.csv", tmp_path / f"folds{suffix}")
    assert res.exit_code == 0, res.output
    g = gpd.read_parquet(tmp_path / f"folds{suffix}") if suffix == ".parquet" else gpd.read_file(tmp_path / f"folds{suffix}")
    # reference: pyproj reads the file's WKT as an ISO 19111 engineering CRS in kilometres
    crs = pyproj.CRS.from_wkt(g.crs.to_wkt())
    assert crs.type_name == "Engineering CRS" and crs.to_wkt().startswith("ENGCRS")
    assert crs.axis_info[0].unit_conversion_factor == 1000.0
    again = _design(d / "survey.csv", tmp_path / f"again{suffix}")
    assert again.exit_code == 0
    assert (tmp_path / f"folds{suffix}").read_bytes() == (tmp_path / f"again{suffix}").read_bytes()


def test_a_raster_in_the_same_grid_is_sampled_and_a_geographic_one_refused(km_run, tmp_path):
    d, df, _ = km_run
    values = np.arange(60 * 80, dtype="float32").reshape(60, 80)  # 1 km cells, row 0 at northing 60
    write_geotiff(tmp_path / "grid.tif", values, from_origin(0, 60, 1, 1), planar_crs("km"))
    res = _design(d / "survey.csv", tmp_path / "folds.csv", "planar:km", "--env", tmp_path / "grid.tif",
                  "--method", "clusters")
    assert res.exit_code == 0, res.output
    write_geotiff(tmp_path / "lonlat.tif", values, from_origin(10, 50, 0.01, 0.01), "EPSG:4326")
    res = _design(d / "survey.csv", tmp_path / "bad.csv", "planar:km", "--env", tmp_path / "lonlat.tif",
                  "--method", "clusters")
    assert res.exit_code == 2 and len(res.stderr.strip().splitlines()) == 1
    assert "geographic" in res.stderr and "lonlat.tif" in res.stderr
    from splitter.geo import Points
    from splitter.io.rasters import sample_rasters

    got, _ = sample_rasters([tmp_path / "grid.tif"], Points(df["easting"], df["northing"], planar_crs("km")))
    # analytic: the cell holding each site (row from the top edge at 60 km)
    expected = values[(60 - df["northing"]).astype(int).clip(0, 59), df["easting"].astype(int).clip(0, 79)]
    assert np.array_equal(got[:, 0], expected)


def test_lonlat_looking_values_given_as_planar_get_a_warning(tmp_path):
    rng = np.random.default_rng(2)
    pd.DataFrame({"easting": np.round(10 + rng.random(60), 4), "northing": np.round(45 + rng.random(60), 4)}).to_csv(
        tmp_path / "r.csv", index=False)
    res = run("design", tmp_path / "r.csv", "--x", "easting", "--y", "northing", "--crs", "planar:km", "--method",
              "random", "--folds", 2, "--out", tmp_path / "f.csv")
    assert res.exit_code == 0, res.output
    assert "warning:" in res.stdout and "longitude/latitude" in res.stdout
    res = run("audit", tmp_path / "f.csv", "--range-km", 1, "--null-splits", 19, "--out", tmp_path / "a")
    assert res.exit_code == 0 and "longitude/latitude" in res.stdout  # read back as planar: warned again
    ok = _grid_survey(tmp_path / "s.csv")
    assert len(ok)
    res = _design(tmp_path / "s.csv", tmp_path / "g.csv")
    assert "warning:" not in res.stdout  # a real grid in km: no warning


def test_evaluate_with_prediction_rasters_in_the_grid(km_run, tmp_path):
    d, _, _ = km_run
    yy, xx = np.mgrid[0:60, 0:80] + 0.5
    suit = np.exp(-((5 + 0.2 * xx - 14) ** 2) / 8).astype("float32")
    for f in range(1, 5):
        write_geotiff(tmp_path / f"pred_{f}.tif", suit, from_origin(0, 60, 1, 1), planar_crs("km"))
        write_geotiff(tmp_path / f"ll_{f}.tif", suit, from_origin(10, 50, 0.01, 0.01), "EPSG:4326")
    res = run("evaluate", d / "folds.csv", "--predictions", str(tmp_path / "pred_{fold}.tif"), "--replicates", 99,
              "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv", dtype={"fold": str})
    for _, r in ev[ev["fold"] != "all"].iterrows():
        # analytic: equal 1 km² cells, so the area predicted present is the share of cells at or above the threshold
        assert r["area_predicted"] == pytest.approx(np.mean(suit >= r["threshold"]), abs=1e-9)
    bad = run("evaluate", d / "folds.csv", "--predictions", str(tmp_path / "ll_{fold}.tif"), "--replicates", 99,
              "--out", tmp_path / "ev2")
    assert bad.exit_code == 2 and "geographic" in bad.stderr and len(bad.stderr.strip().splitlines()) == 1
