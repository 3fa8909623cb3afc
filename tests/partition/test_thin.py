"""Thinning presences: one per raster cell, or none closer than a distance (invented records, seeded)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pyproj
import pytest
import rasterio
from rasterio.transform import from_origin
from scipy.spatial.distance import cdist
from typer.testing import CliRunner

from splitter.cli import app
from splitter.geo import Points
from splitter.io.rasters import write_geotiff
from splitter.partition.thin import thin_cells, thin_distance

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _greedy(xy, order, min_km):
    """A plain sequential implementation: visit in order, keep a point with no kept one closer than min_km."""
    kept = []
    for i in order:
        if all(np.hypot(*(xy[i] - xy[k])) >= min_km for k in kept):
            kept.append(i)
    return sorted(kept)


def test_distance_thinning_equals_the_sequential_greedy_in_the_same_order():
    rng = np.random.default_rng(4)
    xy = rng.random((400, 2)) * 30  # km
    pts = Points(xy[:, 0] * 1000, xy[:, 1] * 1000, pyproj.CRS.from_epsg(3035))
    t = thin_distance(pts, np.ones(400, bool), 2.0, seed=7)
    order = np.random.default_rng(7).permutation(400)  # the documented order: a seeded permutation
    assert np.flatnonzero(t.keep).tolist() == _greedy(xy, order, 2.0)
    kept = xy[t.keep]
    d = cdist(kept, kept) + np.eye(kept.shape[0]) * 1e9
    assert d.min() >= 2.0  # reference: scipy.spatial.distance.cdist — no two kept closer than 2 km
    assert cdist(xy[~t.keep], kept).min(axis=1).max() < 2.0  # every thinned one has a kept one close by


def test_distance_thinning_on_lonlat_is_geodesic():
    rng = np.random.default_rng(5)
    lon, lat = 10 + rng.random(300) * 0.5, 60 + rng.random(300) * 0.3
    t = thin_distance(Points.lonlat(lon, lat), np.ones(300, bool), 3.0, seed=1)
    k = np.flatnonzero(t.keep)
    geod = pyproj.Geod(ellps="WGS84")
    i, j = np.triu_indices(k.size, 1)
    # reference: pyproj.Geod, every pair of kept presences
    assert geod.inv(lon[k[i]], lat[k[i]], lon[k[j]], lat[k[j]])[2].min() / 1000 >= 3.0


def test_cell_thinning_keeps_one_presence_per_cell_and_leaves_other_kinds():
    rng = np.random.default_rng(2)
    cell = rng.integers(0, 30, 200)
    cand = rng.random(200) < 0.7
    t = thin_cells(cell, cand, seed=3)
    kept = pd.Series(cell[t.keep & cand])
    assert kept.is_unique and set(kept) == set(cell[cand])  # analytic: one per occupied cell
    assert t.keep[~cand].all() and t.after == len(set(cell[cand]))


@pytest.fixture()
def records(tmp_path):
    rng = np.random.default_rng(9)
    n = 300
    df = pd.DataFrame({"lon": np.round(10 + rng.random(n) * 2, 5), "lat": np.round(45 + rng.random(n) * 1.5, 5),
                       "kind": np.where(rng.random(n) < 0.6, "presence", "background")})
    df.to_csv(tmp_path / "r.csv", index=False)
    write_geotiff(tmp_path / "env.tif", rng.random((17, 20)).astype("float32"), from_origin(9.9, 46.6, 0.12, 0.1),
                  "EPSG:4326")
    return tmp_path, df


def test_design_thin_cell_marks_rows_thinned_and_counts_them(records):
    d, df = records
    res = run("design", d / "r.csv", "--method", "random", "--folds", 3, "--env", d / "env.tif", "--thin", "cell",
              "--seed", 2, "--out", d / "f.csv")
    assert res.exit_code == 0, res.output
    out = pd.read_csv(d / "f.csv", dtype=str, keep_default_na=False)
    assert len(out) == len(df)  # every row stays
    with rasterio.open(d / "env.tif") as src:
        rows, cols = rasterio.transform.rowcol(src.transform, df["lon"], df["lat"])  # reference: rasterio
    cell = np.asarray(rows) * 1000 + np.asarray(cols)
    pres = (df["kind"] == "presence").to_numpy()
    kept_pres = pres & (out["dropped"] == "").to_numpy()
    assert pd.Series(cell[kept_pres]).is_unique and set(cell[kept_pres]) == set(cell[pres])
    assert set(out.loc[~pres, "dropped"]) == {""} and (out.loc[pres & ~kept_pres, "dropped"] == "thinned").all()
    side = json.loads((d / "f.design.json").read_text())["parameters"]
    assert side["thin"] == "cell" and side["presence_before_thinning"] == int(pres.sum())
    assert side["presence_after_thinning"] == len(set(cell[pres]))
    assert f"{int(pres.sum())} presences -> {len(set(cell[pres]))}" in res.stdout


def test_design_thin_km_is_deterministic(records):
    d, _ = records
    args = ["design", d / "r.csv", "--method", "random", "--folds", 3, "--thin", "5", "--seed", 4]
    a = run(*args, "--out", d / "a.csv")
    b = run(*args, "--out", d / "b.csv")
    assert a.exit_code == 0 and b.exit_code == 0, a.output
    assert (d / "a.csv").read_bytes() == (d / "b.csv").read_bytes()
    assert (d / "a.design.json").read_text().replace("a.csv", "") == (d / "b.design.json").read_text().replace("b.csv", "")
    run(*args, "--out", d / "run" / "folds.csv")
    side = json.loads((d / "run" / "folds.design.json").read_text())["parameters"]
    assert run("appendix", d / "run", "--out", d / "app").exit_code == 0
    md = (d / "app" / "appendix.md").read_text()
    assert (f"{side['presence_before_thinning']} presences before thinning, {side['presence_after_thinning']} after"
            in md)
    out = pd.read_csv(d / "a.csv", dtype=str, keep_default_na=False)
    assert (out["dropped"] == "thinned").sum() == side["presence_before_thinning"] - side["presence_after_thinning"]


def test_thin_cell_without_rasters_is_one_line(records):
    d, _ = records
    res = run("design", d / "r.csv", "--method", "random", "--folds", 3, "--thin", "cell", "--out", d / "f.csv")
    assert res.exit_code == 2 and "--thin" in res.stderr and "--env" in res.stderr
    assert len(res.stderr.strip().splitlines()) == 1
