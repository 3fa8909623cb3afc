"""Tests for splitter.report.maps and the --generalise option of the appendix."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import pytest
import shapely

from splitter.errors import InputError
from splitter.geo import Points
from splitter.report.appendix import build_appendix
from splitter.report.maps import MapPlane, cell_grid, generalise_coordinates, map_extent
from splitter.report.rundir import load_run


def test_generalise_coordinates_snaps_to_cell_centres():
    x = np.array([0.0, 9.999, 10.0, -0.001, -10.0, np.nan])
    y = np.array([4.9, 5.1, 25.0, -25.0, 0.0, 1.0])
    gx, gy = generalise_coordinates(x, y, 10.0)
    # reference: analytic, centre of [10 i, 10 (i + 1)) is 10 i + 5
    np.testing.assert_array_equal(gx[:5], [5.0, 5.0, 15.0, -5.0, -5.0])
    np.testing.assert_array_equal(gy[:5], [5.0, 5.0, 25.0, -25.0, 5.0])
    assert np.isnan(gx[5])
    with pytest.raises(InputError, match="--generalise"):
        generalise_coordinates(x, y, 0.0)


def test_map_plane_matches_pyproj():
    rng = np.random.default_rng(4)
    lon, lat = rng.uniform(5, 15, 50), rng.uniform(40, 48, 50)
    plane = MapPlane.for_points(Points.lonlat(lon, lat))
    x, y = plane.from_lonlat(lon, lat)
    tr = pyproj.Transformer.from_crs("EPSG:4326", plane.crs, always_xy=True)
    ex, ey = tr.transform(lon, lat)
    np.testing.assert_allclose(x, np.asarray(ex) / 1000, atol=1e-9)  # reference: pyproj.Transformer, metres -> km
    np.testing.assert_allclose(y, np.asarray(ey) / 1000, atol=1e-9)
    back_lon, back_lat = plane.to_lonlat(x, y)
    np.testing.assert_allclose(back_lon, lon, atol=1e-9)  # reference: pyproj inverse projection round trip
    np.testing.assert_allclose(back_lat, lat, atol=1e-9)
    # Lambert azimuthal equal-area: a 1 km x 1 km square has 1 km^2 on the ellipsoid.
    x0, y0 = float(np.mean(x)), float(np.mean(y))
    sq_lon, sq_lat = plane.to_lonlat([x0, x0 + 1, x0 + 1, x0], [y0, y0, y0 + 1, y0 + 1])
    area, _ = pyproj.Geod(ellps="WGS84").polygon_area_perimeter(sq_lon, sq_lat)
    assert abs(abs(area) / 1e6 - 1.0) < 1e-3  # reference: pyproj.Geod.polygon_area_perimeter


def test_block_cells_hold_one_fold_each(demo_run):
    """Cells drawn on the map sit where the design laid them: every record inside a drawn,
    coloured cell has that cell's fold (point-in-polygon by shapely)."""
    run = load_run(demo_run)
    split = next(s for s in run.splits if s.method == "blocks")
    plane = MapPlane(split.geometry_crs)
    r = split.records
    x, y = plane.from_lonlat(r.lon, r.lat)
    p = split.parameters
    grid = cell_grid("blocks", p["block_size_km"], p["grid_offset_km"], split.geometry_crs, plane, x, y, r.fold,
                     map_extent(x, y))
    polys = shapely.polygons(grid.polygons)
    inside = shapely.contains_xy(polys[:, None], x[None, :], y[None, :])  # reference: shapely point-in-polygon
    filled = grid.cell_fold > 0
    assert filled.sum() == p["occupied_cells"]  # reference: the design sidecar's occupied-cell count
    for c in np.flatnonzero(filled):
        assert set(r.fold[inside[c]]) == {grid.cell_fold[c]}
    # Every record lies in exactly one drawn cell, and empty cells hold none.
    assert (inside.sum(axis=0) == 1).all()
    assert not inside[~filled].any()


# --- --generalise across every appendix file ----------------------------------------------------

CELL_KM = 37.5


@pytest.fixture(scope="module")
def generalised(demo_run, tmp_path_factory):
    """An appendix of a copy of the demo run, generalised to CELL_KM (built once)."""
    import shutil

    base = tmp_path_factory.mktemp("generalised")
    run = base / "run"
    shutil.copytree(demo_run, run, ignore=shutil.ignore_patterns("appendix"))
    return run, build_appendix(run, base / "appendix", generalise_km=CELL_KM)


def _on_lattice(v_km: np.ndarray, cell: float, tol: float) -> bool:
    k = (np.asarray(v_km, float) - cell / 2) / cell
    return bool(np.all(np.abs(k - np.round(k)) * cell <= tol))


def test_generalise_leaves_no_finer_coordinate_in_tables(generalised):
    run, app = generalised
    plane = MapPlane(load_run(run).splits[0].geometry_crs)
    records_tables = [p for p in app.tables if p.name.endswith("_records.csv")]
    assert len(records_tables) == 2
    for path in records_tables:
        t = pd.read_csv(path)
        ok = t["x_km"].notna()
        # Plane coordinates are cell centres: (x - L/2) / L is a whole number (analytic).
        assert _on_lattice(t.loc[ok, "x_km"], CELL_KM, 1e-9) and _on_lattice(t.loc[ok, "y_km"], CELL_KM, 1e-9)
        # Longitude/latitude project (pyproj) onto the same centres, within 1 m (rounding to 1e-7 degree).
        tr = pyproj.Transformer.from_crs("EPSG:4326", plane.crs, always_xy=True)
        ex, ey = tr.transform(t.loc[ok, "longitude"].to_numpy(), t.loc[ok, "latitude"].to_numpy())
        assert _on_lattice(np.asarray(ex) / 1000, CELL_KM, 1e-3)  # reference: pyproj.Transformer
        assert _on_lattice(np.asarray(ey) / 1000, CELL_KM, 1e-3)
        # Far fewer distinct positions than records: locations are pooled per cell.
        assert t.loc[ok, ["x_km", "y_km"]].drop_duplicates().shape[0] < 0.9 * ok.sum()


def test_generalise_leaves_no_input_coordinate_in_any_text(generalised):
    """No longitude or latitude of the input (5 decimals in the fold table) appears in any table,
    in the Markdown or in the HTML text outside its embedded images."""
    run, app = generalised
    src = pd.read_csv(run / "blocks" / "folds.csv", dtype=str, keep_default_na=False)
    values = set(src["longitude"]) | set(src["latitude"])
    texts = [p.read_text(encoding="utf-8") for p in app.tables]
    texts.append(app.markdown.read_text(encoding="utf-8"))
    texts.append(re.sub(r"data:image/[a-z+]+;base64,[A-Za-z0-9+/=]+", "", app.html.read_text(encoding="utf-8")))
    numbers = set()
    for t in texts:
        numbers |= set(re.findall(r"-?\d+\.\d+", t))
    assert not (values & numbers)


def _marker_positions(svg: str) -> set:
    """(x, y) of every scatter point in a matplotlib SVG.

    Scatter plots are written as ``<g id="PathCollection_N">`` groups holding one ``<use>``
    element per point (tick marks and legend keys live in other groups).
    """
    out = set()
    groups = re.findall(r'<g id="PathCollection_\d+">(.*?)</g>', svg, flags=re.S)
    assert groups, "no scatter group found in the SVG"
    for tag in re.findall(r"<use [^>]*>", "".join(groups)):
        x = re.search(r'\bx="([-\d.e]+)"', tag)
        y = re.search(r'\by="([-\d.e]+)"', tag)
        if x and y:
            out.add((round(float(x.group(1)), 3), round(float(y.group(1)), 3)))
    return out


def test_generalised_maps_draw_only_cell_centres(generalised, demo_run):
    run, app = generalised
    for split in ("blocks", "random"):
        t = pd.read_csv(next(p for p in app.tables if p.name == f"{split}_records.csv"))
        cells = t.loc[t["fold"].notna(), ["x_km", "y_km"]].drop_duplicates().shape[0]
        svg = (app.markdown.parent / "figures" / f"map_{split}.svg").read_text(encoding="utf-8")
        generalised_positions = _marker_positions(svg)
        exact_positions = _marker_positions(
            (demo_run / "appendix" / "figures" / f"map_{split}.svg").read_text(encoding="utf-8"))
        # Each panel draws a record at its cell centre: at most one position per cell and panel.
        assert len(generalised_positions) <= 2 * cells
        # Control: the exact map draws far more distinct positions (one per record and panel).
        assert len(exact_positions) > 2 * len(generalised_positions)
        assert f"generalised to {CELL_KM:g} km" in svg


def test_generalise_is_documented_and_run_files_untouched(generalised, demo_run):
    run, app = generalised
    md = app.markdown.read_text(encoding="utf-8")
    assert f"{CELL_KM:g} km x {CELL_KM:g} km cell" in md
    assert f"`--generalise {CELL_KM:g}`" in md
    # The run keeps its exact positions (the copy's fold table equals the original's).
    assert (run / "blocks" / "folds.csv").read_bytes() == (Path(demo_run) / "blocks" / "folds.csv").read_bytes()
