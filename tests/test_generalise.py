"""design --generalise KM: every coordinate written is a cell centre; the folds come from the exact ones.

Records are invented here (seeded).
"""

from __future__ import annotations

import json

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
from typer.testing import CliRunner

from splitter.cli import app

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def _lonlat(path, n=250, seed=6):
    rng = np.random.default_rng(seed)
    df = pd.DataFrame({"record_id": [f"r{i}" for i in range(n)], "lon": np.round(20 + rng.random(n) * 3, 5),
                       "lat": np.round(50 + rng.random(n) * 2, 5),
                       "kind": np.where(rng.random(n) < 0.5, "presence", "background")})
    df.to_csv(path, index=False)
    return df


def test_lonlat_fold_table_is_generalised_in_the_design_plane_and_folds_are_unchanged(tmp_path):
    df = _lonlat(tmp_path / "r.csv")
    base = ["design", tmp_path / "r.csv", "--block-size", 40, "--buffer", 10, "--folds", 4, "--seed", 2]
    exact = run(*base, "--out", tmp_path / "exact.csv")
    gen = run(*base, "--generalise", 10, "--out", tmp_path / "gen.csv")
    assert exact.exit_code == 0 and gen.exit_code == 0, gen.output
    e = pd.read_csv(tmp_path / "exact.csv", dtype=str, keep_default_na=False)
    g = pd.read_csv(tmp_path / "gen.csv", dtype=str, keep_default_na=False)
    assert (e["fold"] == g["fold"]).all()  # folds from the exact coordinates
    assert (tmp_path / "exact.gaps.csv").read_text() == (tmp_path / "gen.gaps.csv").read_text()
    side = json.loads((tmp_path / "gen.design.json").read_text())
    assert side["generalised_km"] == 10.0 and (g["generalised_km"] == "10").all()
    # reference: pyproj — in the design's equal-area plane every written point is a 10 km cell centre ...
    plane = pyproj.CRS.from_user_input(side["geometry_crs"])
    tr = pyproj.Transformer.from_crs("EPSG:4326", plane, always_xy=True)
    x, y = tr.transform(g["lon"].astype(float).to_numpy(), g["lat"].astype(float).to_numpy())
    for v in (np.asarray(x) / 1000, np.asarray(y) / 1000):
        frac = v / 10 - 0.5
        assert np.allclose(frac, np.round(frac), atol=1e-6)
    # ... the centre of the cell holding the exact point, so within half a diagonal of it (pyproj.Geod)
    ex, ey = tr.transform(df["lon"].to_numpy(), df["lat"].to_numpy())
    assert np.array_equal(np.floor(np.asarray(ex) / 10_000), np.floor(np.asarray(x) / 10_000))
    d = pyproj.Geod(ellps="WGS84").inv(df["lon"], df["lat"], g["lon"].astype(float), g["lat"].astype(float))[2]
    assert np.max(d) / 1000 <= 10 * np.sqrt(2) / 2 * 1.01  # LAEA scale error well under 1 % here
    assert "generalised to 10 km" in gen.stdout


def test_planar_grid_and_geopackage_are_generalised(tmp_path):
    rng = np.random.default_rng(1)
    n = 200
    df = pd.DataFrame({"e": np.round(rng.random(n) * 50, 3), "n": np.round(rng.random(n) * 40, 3),
                       "pa": (rng.random(n) < 0.4).astype(int)})
    df.to_csv(tmp_path / "s.csv", index=False)
    res = run("design", tmp_path / "s.csv", "--x", "e", "--y", "n", "--crs", "planar:km", "--kind-column", "pa",
              "--zero-means", "absence", "--block-size", 10, "--folds", 3, "--generalise", 5, "--seed", 1,
              "--out", tmp_path / "f.gpkg")
    assert res.exit_code == 0, res.output
    g = gpd.read_file(tmp_path / "f.gpkg")
    # analytic: the centre of the 5 km cell of the grid's own origin
    centre = lambda v: np.floor(v / 5) * 5 + 2.5  # noqa: E731
    assert np.allclose(g.geometry.x, centre(df["e"])) and np.allclose(g.geometry.y, centre(df["n"]))
    assert np.allclose(g["e"].astype(float), centre(df["e"])) and np.allclose(g["n"].astype(float), centre(df["n"]))
    assert (g["generalised_km"].astype(str) == "5").all()


def test_audit_of_a_generalised_table_says_so(tmp_path):
    _lonlat(tmp_path / "r.csv")
    assert run("design", tmp_path / "r.csv", "--block-size", 40, "--folds", 4, "--generalise", 10,
               "--out", tmp_path / "g.csv").exit_code == 0
    res = run("audit", tmp_path / "g.csv", "--range-km", 20, "--null-splits", 19, "--out", tmp_path / "a")
    assert res.exit_code == 0, res.output
    assert "generalised to 10 km cells" in res.stdout


def test_an_evaluation_of_a_generalised_table_on_rasters_says_so(tmp_path):
    # Rasters are read at the written points: with a generalised table those are cell centres,
    # and the evaluation says so (a prediction table, matched by record_id, needs no such note).
    from rasterio.transform import from_origin

    from splitter.io.rasters import write_geotiff

    _lonlat(tmp_path / "r.csv")
    assert run("design", tmp_path / "r.csv", "--method", "random", "--folds", 3, "--generalise", 10,
               "--out", tmp_path / "g.csv").exit_code == 0
    rng = np.random.default_rng(2)
    for f in (1, 2, 3):
        write_geotiff(tmp_path / f"p_{f}.tif", rng.random((60, 80)).astype("float32"), from_origin(19.5, 52.5, 0.05, 0.05),
                      "EPSG:4326")
    res = run("evaluate", tmp_path / "g.csv", "--predictions", tmp_path / "p_{fold}.tif", "--replicates", 20,
              "--out", tmp_path / "e")
    assert res.exit_code == 0, res.output
    assert "generalised to 10 km cells: the rasters were read at cell centres" in res.stdout
    table = pd.read_csv(tmp_path / "g.csv", dtype=str, keep_default_na=False)
    pd.concat([pd.DataFrame({"record_id": table.record_id, "fold": f, "prediction": rng.random(len(table))})
               for f in ("1", "2", "3")]).to_csv(tmp_path / "preds.csv", index=False)
    res = run("evaluate", tmp_path / "g.csv", "--prediction-table", tmp_path / "preds.csv", "--replicates", 20,
              "--out", tmp_path / "e2")
    assert res.exit_code == 0 and "cell centres" not in res.stdout


def test_generalise_must_be_positive(tmp_path):
    _lonlat(tmp_path / "r.csv")
    res = run("design", tmp_path / "r.csv", "--block-size", 40, "--generalise", -2, "--out", tmp_path / "g.csv")
    assert res.exit_code == 2 and "--generalise" in res.stderr and len(res.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "g.csv").exists()


@pytest.mark.slow
def test_the_demo_generalises_every_coordinate_it_writes(tmp_path):
    # The demo writes fold tables and an appendix: with --generalise both carry cell centres.
    res = run("demo", tmp_path / "demo", "--generalise", 25, "--replicates", 20)
    assert res.exit_code == 0, res.output
    for split in ("blocks", "random"):
        side = json.loads((tmp_path / "demo" / split / "folds.design.json").read_text())
        table = pd.read_csv(tmp_path / "demo" / split / "folds.csv", dtype=str, keep_default_na=False)
        assert side["generalised_km"] == 25.0 and (table["generalised_km"] == "25").all()
        # reference: pyproj — every written point is a 25 km cell centre of the design's plane
        tr = pyproj.Transformer.from_crs("EPSG:4326", pyproj.CRS.from_user_input(side["geometry_crs"]), always_xy=True)
        if split == "blocks":
            x, y = tr.transform(table["longitude"].astype(float).to_numpy(), table["latitude"].astype(float).to_numpy())
            for v in (np.asarray(x) / 1000, np.asarray(y) / 1000):
                assert np.allclose(v / 25 - 0.5, np.round(v / 25 - 0.5), atol=1e-6)
    md = (tmp_path / "demo" / "appendix" / "appendix.md").read_text()
    assert "generalised" in md and "25" in md
