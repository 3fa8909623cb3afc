"""Audit a split: residual dependence between calibration and evaluation presences."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from splitter.dependence.audit import AuditResult, audit_split
from splitter.dependence.resplit import NULL_SPLITS, check_null_splits
from splitter.columns import find_column, match_column
from splitter.errors import InputError
from splitter.partition.assignment import FoldAssignment


def audit(
    assignment: FoldAssignment,
    *,
    env=(),
    covariates=(),
    range_km: float | None = None,
    range_from=None,
    group_column: str | None = None,
    region=None,
    prediction_sample: int = 2000,
    seed: int = 0,
    fold_names: dict | None = None,
    min_evaluation: int = 5,
    null_splits: int = NULL_SPLITS,
    time_column: str | None = None,
) -> tuple[AuditResult, dict]:
    """Measure how independent each fold's evaluation presences are.

    Distances run from each evaluation presence to the nearest calibration
    presence of the same fold (buffer gaps respected). The autocorrelation
    range comes from ``range_km``, from ``range_from`` (a ``splitter range``
    output folder), or is estimated from the ``env`` rasters. Prediction
    locations, for the Wasserstein-1 comparison, are a seeded sample over the
    rasters' valid cells (or the ``region`` polygon). The environment and
    collection-method rules compare each fold with ``null_splits`` random
    re-splits of its presences (seeded with ``seed``).

    ``covariates`` names columns of the fold table measured at the sites (a
    survey's own covariates): the environmental overlap and envelope use them
    instead of rasters, standardised on background when there are at least 20
    background records, else on every kept record.

    ``time_column`` (default: the design's time column, else a ``year``, ``eventDate`` or ``date`` column)
    dates the records: each fold's time gap between evaluation and calibration
    presences is reported in the context (``time_gaps``) and in ``audit.csv``
    (:mod:`splitter.dependence.time_gap`); it is a description, not a rule.

    When the records hold absences, the same measures are taken a second time
    from evaluation absences to calibration absences (``context["absences"]``,
    an AuditResult), since absences are evaluation data too.

    Returns
    -------
    AuditResult, and a dict of context (range source, notes, range estimate or None)
    """
    null_splits = check_null_splits(null_splits)  # before any raster is read
    if assignment.records is None:
        raise InputError("the fold assignment carries no records; build it with splitter.design or splitter.read_fold_table.")
    recs = assignment.records
    env = [str(p) for p in (env or ())]
    notes: list[str] = []
    context: dict = {"range_source": None, "notes": notes, "range_estimate": None}
    if range_km is not None and range_from is not None:
        raise InputError("give --range-km or --range-from, not both.")
    if range_km is not None:
        if not range_km > 0:
            raise InputError(f"--range-km {range_km}: give a positive distance in km.")
        context["range_source"] = "given"
    elif range_from is not None:
        p = Path(range_from)
        p = p / "range.json" if p.is_dir() else p
        if not p.exists():
            raise InputError(f"--range-from {range_from}: no range.json there; run 'splitter range' first.")
        range_km = float(json.loads(p.read_text())["suggested_block_km"])
        context["range_source"] = f"{p}"
    elif env:
        from splitter.workflow.range_estimate import estimate_range_from_rasters

        est = estimate_range_from_rasters(env, seed=seed, region=region)
        range_km = float(est.suggested_block_km)
        context["range_source"] = "estimated from --env rasters"
        context["range_estimate"] = est
    context["range_km"] = range_km

    g = assignment.generalised_km
    if g:
        notes.append(f"the fold table's coordinates are generalised to {g:g} km cells: distances here are between "
                     f"cell centres (each off by up to {g * 0.5 ** 0.5:.3g} km); audit the exact fold table for exact ones")
    kind = assignment.kind
    pres = kind == "presence"
    # Presences only: the distances run from evaluation to calibration presences.
    cal = [rows[pres[rows]] for rows in map(assignment.calibration, assignment.folds)]
    ev = [rows[pres[rows]] for rows in map(assignment.evaluation, assignment.folds)]
    names = fold_names or {i: str(i) for i in assignment.folds}
    labels = [names.get(i, str(i)) for i in assignment.folds]

    env_matrix = env_reference = None
    env_names = None
    prediction_points = None
    covariates = [c.strip() for v in (covariates or ()) for c in str(v).split(",") if c.strip()]
    if covariates and env:
        raise InputError("give covariates as `env` rasters or as `covariates` columns, not both.")
    reg = None
    if region is not None:
        from splitter.io.rasters import read_region

        reg = read_region(region) if isinstance(region, (str, Path)) else region
        _check_region_holds_records(reg, recs, region)
    if env:
        from splitter.io.rasters import sample_rasters, sample_valid_locations

        env_matrix, n2 = sample_rasters(env, recs.points)
        notes.extend(n2)
        env_names = [Path(p).stem for p in env]
        bg = (assignment.fold >= 0) & (kind == "background")
        if bg.sum() >= 20:
            env_reference = env_matrix[bg]
        prediction_points = sample_valid_locations(env, prediction_sample, seed, region=reg)
        context["prediction_locations"] = f"{prediction_sample} locations sampled by area over the rasters' valid cells (seed {seed})"
    elif covariates:
        env_matrix = _covariate_columns(recs.table, covariates)
        env_names = list(covariates)
        kept = assignment.fold >= 0
        bg = kept & (kind == "background")
        ref = bg if bg.sum() >= 20 else kept
        env_reference = env_matrix[ref & np.isfinite(env_matrix).all(axis=1)]
        context["covariate_columns"] = list(covariates)
        context["standardised_on"] = "background" if bg.sum() >= 20 else "every kept record"
    if not env and reg is not None:
        from splitter.workflow.design import sample_in_polygon

        prediction_points = sample_in_polygon(region, prediction_sample, seed)
        context["prediction_locations"] = f"{prediction_sample} locations sampled by area inside the region (seed {seed})"
    groups = None
    if group_column:
        group_column = find_column(recs.table, group_column, "group_column")  # any case, as the design finds it
        groups = recs.table[group_column].astype(str).str.strip().to_numpy(object)
        context["group_column"] = group_column
    result = audit_split(
        recs.points, cal, ev, fold_labels=labels, env=env_matrix, env_names=env_names,
        env_reference=env_reference, groups=groups, range_km=range_km,
        prediction_points=prediction_points, min_evaluation=min_evaluation,
        null_splits=null_splits, seed=seed,
    )
    context["null_splits"] = int(null_splits)
    # Time apart: the column named, else the design's own time column, else a year or date column.
    params = assignment.parameters
    designed = (getattr(params, "time_column", None) if not isinstance(params, dict)
                else ((params.get("design") or {}).get("parameters") or {}).get("time_column"))
    from splitter.partition.periods import YEAR, decimal_years, time_column_of

    if time_column or designed:
        time_column = time_column_of(recs.table, time_column or designed)
    else:  # a year (or date) column when there is one; none is no error here
        try:
            time_column = time_column_of(recs.table, YEAR)
        except InputError:
            time_column = None
    if time_column is not None:
        from splitter.dependence.time_gap import time_gaps

        gaps = time_gaps(decimal_years(recs.table[time_column].to_numpy(object), f"time_column={time_column!r}"),
                         cal, ev)
        if gaps.n_dated.sum():
            context["time_column"] = time_column
            context["time_gaps"] = [
                {"fold": label, "median_years": m, "p10_years": p, "later_share": s, "n_dated": int(n)}
                for label, m, p, s, n in zip(labels, gaps.median_years, gaps.p10_years, gaps.later_share,
                                             gaps.n_dated)]
    absent = kind == "absence"
    if absent.any():
        cal_a = [rows[absent[rows]] for rows in map(assignment.calibration, assignment.folds)]
        ev_a = [rows[absent[rows]] for rows in map(assignment.evaluation, assignment.folds)]
        if all(c.size for c in cal_a):
            context["absences"] = audit_split(
                recs.points, cal_a, ev_a, fold_labels=labels, env=env_matrix, env_names=env_names,
                env_reference=env_reference, groups=groups, range_km=range_km,
                prediction_points=prediction_points, min_evaluation=min_evaluation,
                null_splits=null_splits, seed=seed,
            )
        else:
            notes.append("absences not audited: a fold has no calibration absences")
    return result, context


def _covariate_columns(table, covariates) -> np.ndarray:
    """Site covariates from the table's columns (decimal commas read as points; blanks as missing)."""
    from splitter.io.records import covariate_numbers

    cols = []
    for c in covariates:
        c = match_column(table.columns, c) or c  # any case, as every column option
        if c not in table.columns:
            raise InputError(f"covariates={c!r}: no such column; columns are: {', '.join(map(str, table.columns))}.")
        vals = covariate_numbers(table[c])
        if not np.isfinite(vals).any():
            raise InputError(f"covariates={c!r}: the column holds no numbers; name a numeric column.")
        cols.append(vals)
    return np.column_stack(cols)


def _check_region_holds_records(reg, recs, label):
    """A prediction region that misses every record is almost surely a CRS or file mix-up."""
    import shapely

    kept = recs.kept
    pts = recs.points.take(np.flatnonzero(kept)).to_crs(reg.crs)
    if not shapely.contains_xy(reg.geometry, pts.x, pts.y).any():
        raise InputError(f"{label}: the region polygon contains none of the records; check its extent and CRS.")
