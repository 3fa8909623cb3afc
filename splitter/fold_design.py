"""Design folds before modelling: records (+ rasters) in, a FoldAssignment out."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np

from splitter._version import __version__
from splitter.errors import InputError
from splitter.geo import Points, equal_area_crs, planar_km
from splitter.io.records import Records, read_records
from splitter.partition import (
    METHODS,
    FoldAssignment,
    buffer_gaps,
    cell_folds,
    checkerboard_folds,
    cluster_folds,
    group_folds,
    holdout_folds,
    leave_one_out_folds,
    random_folds,
)

SPATIAL = {"blocks", "hexagons", "checkerboard"}


def _as_records(records) -> Records:
    if isinstance(records, Records):
        return records
    if isinstance(records, (str, Path)):
        return read_records(records)
    raise InputError("records must be a path or a splitter Records object (see splitter.read_records).")


def _parse_names(values) -> list[str]:
    if values is None:
        return []
    if isinstance(values, str):
        values = [values]
    out = []
    for v in values:
        out.extend(s.strip() for s in str(v).split(",") if s.strip())
    return out


def attach_covariates(records: Records, env=(), covariates=()) -> tuple[Records, np.ndarray | None, list[str], list[str]]:
    """Covariate matrix at the records from rasters and/or columns.

    Rows without a value for every covariate are dropped (``no-covariate-value``).
    A raster that covers no record is an error.

    Returns
    -------
    records, env_matrix (n, p) or None, names, notes
    """
    env = [str(p) for p in (env or ())]
    covariates = list(covariates or ())
    if not env and not covariates:
        return records, None, [], []
    cols, names, notes = [], [], []
    if env:
        from splitter.io.rasters import sample_rasters

        vals, notes = sample_rasters(env, records.points)
        for j, p in enumerate(env):
            if not np.isfinite(vals[records.kept, j]).any():
                raise InputError(f"{p}: the raster does not cover any record; check its extent and CRS.")
            cols.append(vals[:, j])
            names.append(Path(p).stem)
    for c in covariates:
        if c not in records.table.columns:
            raise InputError(f"--covariate-column {c}: no such column; columns are: {', '.join(map(str, records.table.columns))}.")
        import pandas as pd

        cols.append(pd.to_numeric(records.table[c], errors="coerce").to_numpy(float))
        names.append(c)
    matrix = np.column_stack(cols)
    missing = ~np.isfinite(matrix).all(axis=1)
    records = records.with_dropped(missing, "no-covariate-value")
    return records, matrix, names, list(notes)


def design(
    records,
    *,
    method: str = "blocks",
    folds: int = 5,
    block_size=None,
    buffer: float = 0.0,
    env=(),
    covariates=(),
    group_column: str | None = None,
    calibrate_on=(),
    evaluate_on=(),
    seed: int = 0,
    random_offset: bool = True,
    range_sample: int = 2000,
) -> FoldAssignment:
    """Make calibration/evaluation folds for occurrence records.

    Parameters
    ----------
    records : path or Records
        Occurrence records (and background, with a kind column or combined in).
    method : {"blocks", "hexagons", "checkerboard", "clusters", "groups",
              "holdout-group", "random", "leave-one-out"}
    folds : int
        Number of folds k (ignored by holdout-group and leave-one-out).
    block_size : float, "auto" or "match"
        Cell size in km for blocks, hexagons and checkerboard. "auto" uses the
        autocorrelation range estimated from the ``env`` rasters; "match" picks
        from a ladder of sizes the one whose evaluation-to-calibration distances
        best match prediction-to-record distances.
    buffer : float
        Buffer radius in km: calibration records closer than this to a fold's
        evaluation records are left out of that fold's calibration set.
    env : list of paths
        Covariate GeoTIFFs, sampled at the records.
    covariates : list of str
        Covariate columns of the records table (for ``clusters``).
    group_column : str
        Survey method / source / observer / period column for ``groups`` and
        ``holdout-group``.
    calibrate_on, evaluate_on : list of str
        Group values for ``holdout-group``.
    seed : int

    Returns
    -------
    FoldAssignment

    Examples
    --------
    >>> a = design("demo_data/records_with_background.csv", method="blocks",
    ...            folds=5, block_size=100, buffer=20, seed=1)  # doctest: +SKIP
    >>> a.counts()  # doctest: +SKIP
    """
    if method not in METHODS:
        raise InputError(f"--method {method}: unknown method; choose one of {', '.join(METHODS)}.")
    if method not in ("holdout-group", "leave-one-out") and (folds is None or int(folds) < 2):
        raise InputError(f"--folds {folds}: need at least 2 folds.")
    folds = int(folds) if folds is not None else 0
    buffer = float(buffer or 0.0)
    if buffer < 0:
        raise InputError(f"--buffer {buffer}: give a distance in km, 0 or more.")
    recs = _as_records(records)
    recs, env_matrix, env_names, notes = attach_covariates(recs, env, covariates)
    notes = list(recs.notes) + notes

    kept = recs.kept
    kinds = recs.kind
    if not np.any(kept & (kinds == "presence")):
        raise InputError("no usable presence records; check the kind column and the coordinates.")
    idx = np.flatnonzero(kept)
    pts = recs.points.take(idx)
    is_pres = kinds[idx] == "presence"
    fold = np.full(len(recs), -1, np.int64)
    dropped = recs.dropped.copy()
    params: dict = {"method": method, "folds": folds, "seed": int(seed), "buffer_km": buffer}
    geometry_crs = recs.points.crs

    if method in SPATIAL:
        geometry_crs = recs.points.crs if not recs.points.geographic else equal_area_crs(pts)
        x_km, y_km = planar_km(pts, geometry_crs)
        size, size_info = _block_size(block_size, recs, idx, x_km, y_km, is_pres, folds, seed,
                                      method, env, random_offset, range_sample, covariates=covariates)
        params.update(size_info)
        params["block_size_km"] = size
        if method == "checkerboard":
            from splitter.partition.grid import square_cells

            off = tuple(float(v) for v in np.random.default_rng(seed).uniform(0, size, 2)) if random_offset else (0.0, 0.0)
            i, j = square_cells(x_km, y_km, size, off)
            f = checkerboard_folds(i, j, folds)
            params["grid_offset_km"] = list(off)
            for q in range(1, folds + 1):
                if not np.any(is_pres & (f == q)):
                    raise InputError(
                        f"checkerboard fold {q} has no presence records at --block-size {size:g}; use a smaller block size or fewer folds."
                    )
        else:
            shape = "square" if method == "blocks" else "hexagon"
            cf = cell_folds(x_km, y_km, is_pres, folds, size, seed=seed, shape=shape, random_offset=random_offset)
            f = cf.fold
            params.update({"grid_offset_km": list(cf.offset), "occupied_cells": cf.n_cells,
                           "presence_imbalance": round(cf.imbalance, 4),
                           "background_imbalance": round(cf.background_imbalance, 4),
                           "cell_shape": shape})
        fold[idx] = f
    elif method == "clusters":
        if env_matrix is None:
            raise InputError("--method clusters needs covariates: give --env RASTER (repeatable) or --covariate-column COL.")
        idx = np.flatnonzero(recs.kept)  # rows without covariate values are dropped now
        is_pres = kinds[idx] == "presence"
        ref = env_matrix[idx][~is_pres] if (~is_pres).sum() >= 2 else None
        fold[idx] = cluster_folds(env_matrix[idx], is_pres, folds, seed=seed, reference=ref)
        params["covariates"] = env_names
        params["standardised_on"] = "background" if ref is not None else "all records"
    elif method in ("groups", "holdout-group"):
        if not group_column:
            raise InputError(f"--method {method} needs --group-column COLUMN (e.g. survey method or data source).")
        if group_column not in recs.table.columns:
            raise InputError(f"--group-column {group_column}: no such column; columns are: {', '.join(map(str, recs.table.columns))}.")
        groups = recs.table[group_column].astype(str).to_numpy(object)[idx]
        params["group_column"] = group_column
        if method == "groups":
            f, names = group_folds(groups, is_pres, seed=seed)
            fold[idx] = f
            folds = len(names)
            params["folds"] = folds
            params["fold_groups"] = {str(i + 1): n for i, n in enumerate(names)}
        else:
            cal, ev = _parse_names(calibrate_on), _parse_names(evaluate_on)
            f, why = holdout_folds(groups, cal, ev, seed=seed)
            fold[idx] = f
            sub = dropped[idx]
            sub[why != ""] = why[why != ""]
            dropped[idx] = sub
            folds = 1
            params.update({"folds": 1, "calibrate_on": cal, "evaluate_on": ev})
            if not np.any((f == 1) & is_pres):
                raise InputError("--evaluate-on: the evaluation groups hold no presence records.")
    elif method == "random":
        fold[idx] = random_folds(kinds[idx], folds, seed=seed)
    elif method == "leave-one-out":
        f = leave_one_out_folds(is_pres)
        fold[idx] = f
        folds = int(f.max())
        params["folds"] = folds

    kept_now = fold >= 0
    if "presence_imbalance" not in params and folds >= 2:
        # Methods that do not balance (checkerboard, clusters, groups...) still report it.
        counts = np.bincount(fold[kept_now & (kinds == "presence")], minlength=folds + 1)[1:]
        bcounts = np.bincount(fold[kept_now & (kinds == "background")], minlength=folds + 1)[1:]
        spread = lambda c: round(float((c.max() - c.min()) / c.mean()), 4) if c.mean() > 0 else 0.0
        params["presence_imbalance"] = spread(counts)
        params["background_imbalance"] = spread(bcounts)
    rows, gfolds = (np.zeros(0, np.int64), np.zeros(0, np.int64))
    if buffer > 0:
        work = np.where(kept_now, fold, -1)
        rows, gfolds = buffer_gaps(recs.points, work, buffer)
    assignment = FoldAssignment(
        record_id=recs.record_id, kind=kinds, fold=fold, dropped=dropped, n_folds=int(folds),
        gap_rows=rows, gap_folds=gfolds, method=method, parameters=params,
    )
    for i in assignment.folds:
        cal = assignment.calibration(i)
        if not np.any(kinds[cal] == "presence"):
            raise InputError(
                f"--buffer {buffer:g}: fold {i} has no calibration presences left; use a smaller buffer."
            )
    params["geometry_crs"] = geometry_crs.to_wkt() if not geometry_crs.to_epsg() else f"EPSG:{geometry_crs.to_epsg()}"
    params["software"] = f"splitter {__version__}"
    params["inputs"] = dict(recs.sources)
    if env:
        params["env"] = [str(p) for p in env]
        params["covariates"] = env_names
    params["notes"] = notes
    return replace(assignment, parameters=params, records=recs, covariates=env_matrix, covariate_names=tuple(env_names))


def _block_size(block_size, recs, idx, x_km, y_km, is_pres, folds, seed, method, env, random_offset, range_sample,
                covariates=()):
    """Resolve the cell size in km, and say how it was chosen."""
    if block_size is None:
        raise InputError(f"--method {method} needs --block-size KM (a number, 'auto' or 'match').")
    text = str(block_size).strip().lower()
    if text == "auto":
        if not env and not covariates:
            raise InputError("--block-size auto needs covariates: give --env RASTER or --covariate-column COL (repeatable).")
        from splitter.rangefinder import estimate_range_from_rasters, estimate_range_from_records

        if env:
            est = estimate_range_from_rasters(env, sample=range_sample, seed=seed)
        else:  # the records' own covariate columns
            est = estimate_range_from_records(recs, covariates=covariates, sample=range_sample, seed=seed)
        size = float(est.suggested_block_km)
        return size, {"block_size_rule": "auto", "range_km": size, "range_summary": est.to_dict()}
    if text == "match":
        from splitter.matching import match_block_size

        ladder = match_block_size(recs, idx, x_km, y_km, is_pres, folds, seed, method, env, random_offset)
        return ladder.chosen_km, {"block_size_rule": "match", "ladder": ladder.to_dict()}
    try:
        size = float(text)
    except ValueError:
        raise InputError(f"--block-size {block_size}: give a size in km, 'auto' or 'match'.") from None
    if not size > 0:
        raise InputError(f"--block-size {block_size}: give a positive size in km.")
    return size, {"block_size_rule": "given"}


def add_background(records: Records, count: int, *, env=(), region=None, seed: int = 0) -> Records:
    """Append ``count`` background points sampled uniformly by area (seeded).

    Points fall on cells valid in every ``env`` raster (inside ``region`` when
    given), or, without rasters, anywhere inside the ``region`` polygon.
    """
    from splitter.io.records import append_points

    if count <= 0:
        raise InputError(f"--background-count {count}: give a positive number.")
    if env:
        from splitter.io.rasters import read_region, sample_valid_locations

        reg = read_region(region) if region else None
        pts = sample_valid_locations([str(p) for p in env], count, seed, region=reg)
    elif region:
        pts = sample_in_polygon(region, count, seed)
    else:
        raise InputError("--background-count needs --env RASTER or --region POLYGON to know where to sample.")
    return append_points(records, pts, "background")


def sample_in_polygon(region, count: int, seed: int) -> Points:
    """Uniform-by-area points inside a polygon file (rejection in an equal-area CRS)."""
    import shapely

    from splitter.io.rasters import read_region

    geom, crs = read_region(region)
    rng = np.random.default_rng(seed)
    poly = Points(*np.asarray(shapely.get_coordinates(geom)).T, crs)
    ea = equal_area_crs(poly)
    import geopandas as gpd

    g_ea = gpd.GeoSeries([geom], crs=crs).to_crs(ea).iloc[0]
    minx, miny, maxx, maxy = g_ea.bounds
    share = max(g_ea.area / ((maxx - minx) * (maxy - miny)), 1e-3)
    xs, ys = np.zeros(0), np.zeros(0)
    while xs.size < count:
        m = int((count - xs.size) / share * 1.2) + 16
        cx = rng.uniform(minx, maxx, m)
        cy = rng.uniform(miny, maxy, m)
        inside = shapely.contains_xy(g_ea, cx, cy)
        xs, ys = np.r_[xs, cx[inside]], np.r_[ys, cy[inside]]
    return Points(xs[:count], ys[:count], ea).to_lonlat()
