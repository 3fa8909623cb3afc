"""Design folds before modelling: records (+ rasters) in, a FoldAssignment out."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np

from splitter._version import __version__
from splitter.columns import match_column
from splitter.errors import InputError
from splitter.geo import Points, crs_text, equal_area_crs
from splitter.io.records import Records, as_records, kind_column_in
from splitter import partition as core
from splitter.geo import planar_km
from splitter.partition import FoldAssignment, FoldRule, buffer_gaps
from splitter.partition.base import RuleInput, imbalance
from splitter.partition.thin import check_thin


# --- the rules as users build them -------------------------------------------

class ReadsRecords:
    """What the shell adds to a core rule: records from a path or a data frame,
    ``assign`` and scikit-learn's splitter protocol. (The core rules in
    :mod:`splitter.partition` work on arrays and read nothing.)"""

    def assign(self, records, *, x=None, y=None, crs=None, id_column=None, kind_column=None, zero_means=None,
               thin=None) -> FoldAssignment:
        """Folds for ``records``: a path, a pandas DataFrame with coordinate
        columns (``crs`` names their CRS, default EPSG:4326), a GeoDataFrame or a
        :class:`splitter.Records`. ``zero_means`` says what 0 means in a 0/1 kind
        column ("absence" or "background"); ``thin`` ("cell" or a distance in km)
        thins presences first.

        Returns
        -------
        FoldAssignment
        """
        return assign_records(self, records, x=x, y=y, crs=crs, id_column=id_column, kind_column=kind_column,
                              zero_means=zero_means, thin=thin)

    def get_n_splits(self, X=None, y=None, groups=None) -> int:
        """Number of (calibration, evaluation) pairs ``split`` yields."""
        if getattr(self, "folds", None) is not None and not self.one_way:
            return int(self.folds)
        if self.one_way:
            return 1
        if X is None:
            raise ValueError(f"{type(self).__name__}: the number of folds depends on the data; pass X.")
        return self._assignment_for(X, y, groups).n_folds

    def split(self, X, y=None, groups=None):
        """scikit-learn splitter protocol: (calibration, evaluation) row positions per fold.

        ``X`` is a GeoDataFrame or a DataFrame with coordinate columns (detected
        as for CSV), one row per record. Kinds come from a ``kind`` column of
        ``X`` or else from ``y`` (1 = presence, 0 = background); ``groups``
        stands in for ``group_column``. Rows that cannot be used (no
        coordinates) appear in no set.
        """
        a = self._assignment_for(X, y, groups)
        for i in a.folds:
            yield a.calibration(i), a.evaluation(i)

    def _assignment_for(self, X, y, groups):
        if not (hasattr(X, "columns") or hasattr(X, "points")):
            raise InputError(f"X: got {type(X).__name__}; give a GeoDataFrame or a DataFrame with coordinate columns "
                             "(one row per record), so the rule can see where each record is.")
        # y gives the kinds when X has no kind column; a 0/1 column of X is then a covariate.
        no_kind = y is not None and hasattr(X, "columns") and kind_column_in(X.columns) is None
        return assign_records(self, X, labels=y, groups=groups, kind_column="none" if no_kind else None)


# The public classes: each core rule (same name, settings, docs and repr) that also reads records.

class SpatialBlocks(ReadsRecords, core.SpatialBlocks):
    __doc__ = core.SpatialBlocks.__doc__


class Hexagons(ReadsRecords, core.Hexagons):
    __doc__ = core.Hexagons.__doc__


class Checkerboard(ReadsRecords, core.Checkerboard):
    __doc__ = core.Checkerboard.__doc__


class EnvironmentClusters(ReadsRecords, core.EnvironmentClusters):
    __doc__ = core.EnvironmentClusters.__doc__


class Groups(ReadsRecords, core.Groups):
    __doc__ = core.Groups.__doc__


class HoldoutGroup(ReadsRecords, core.HoldoutGroup):
    __doc__ = core.HoldoutGroup.__doc__


class Periods(ReadsRecords, core.Periods):
    __doc__ = core.Periods.__doc__


class HoldoutPeriod(ReadsRecords, core.HoldoutPeriod):
    __doc__ = core.HoldoutPeriod.__doc__


class RandomFolds(ReadsRecords, core.RandomFolds):
    __doc__ = core.RandomFolds.__doc__


class LeaveOneOut(ReadsRecords, core.LeaveOneOut):
    __doc__ = core.LeaveOneOut.__doc__


class LaterPeriod(ReadsRecords, core.LaterPeriod):
    __doc__ = core.LaterPeriod.__doc__


#: ``design()`` method name -> public rule class (the same names as ``splitter.partition.RULES``).
_PUBLIC = {c.__name__: c for c in (SpatialBlocks, Hexagons, Checkerboard, EnvironmentClusters, Groups, HoldoutGroup,
                                   Periods, HoldoutPeriod, RandomFolds, LeaveOneOut)}
RULES = {method: _PUBLIC[c.__name__] for method, c in core.RULES.items()}
RULE_CLASSES = (*RULES.values(), LaterPeriod)


def choose_block_size(rule, data: RuleInput) -> RuleInput:
    """Resolve ``block_size='auto'`` (variogram range of the covariates) or
    ``'match'`` (the size whose evaluation distances match prediction distances)
    for the core rule; other rules and sizes pass through unchanged."""
    inner = getattr(rule, "rule", rule)  # a space-and-time design lays its inner rule's cells
    choice = getattr(inner, "block_size", None)
    if choice not in ("auto", "match"):
        return data
    if choice == "auto":
        from splitter.workflow.range_estimate import estimate_range_from_rasters, estimate_range_from_records  # reads the rasters

        if inner.env:
            est = estimate_range_from_rasters(list(inner.env), sample=inner.range_sample, seed=inner.seed)
        else:  # the records' own covariate columns
            est = estimate_range_from_records(data.records, covariates=list(inner.covariates),
                                              sample=inner.range_sample, seed=inner.seed)
        size = float(est.suggested_block_km)
        how = {"block_size_rule": "auto", "range_km": size, "range_summary": est.to_dict()}
    else:
        from splitter.workflow.block_matching import match_block_size

        pts = data.points
        x_km, y_km = planar_km(pts, pts.crs if not pts.geographic else equal_area_crs(pts))
        ladder = match_block_size(inner, pts, x_km, y_km, data.is_presence)
        size, how = ladder.chosen_km, {"block_size_rule": "match", "ladder": ladder.to_dict()}
    return replace(data, block_size_km=size, block_choice=how)


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
        c = match_column(records.table.columns, c) or c  # any case, as every column option
        if c not in records.table.columns:
            raise InputError(f"covariates={c!r}: no such column; columns are: {', '.join(map(str, records.table.columns))}.")
        import pandas as pd

        cols.append(pd.to_numeric(records.table[c], errors="coerce").to_numpy(float))
        names.append(c)
    matrix = np.column_stack(cols)
    missing = ~np.isfinite(matrix).all(axis=1)
    records = records.with_dropped(missing, "no-covariate-value")
    return records, matrix, names, list(notes)


def rule_for(method: str, **settings) -> FoldRule:
    """The rule object for a ``design()`` method name, built from the settings it takes.

    Settings a rule does not take are ignored (``block_size`` means nothing to
    ``random``), as ``design()`` always did. ``calibrate_before`` with a k-fold
    method makes a space-and-time design (:class:`LaterPeriod`).

    Examples
    --------
    >>> rule_for("blocks", folds=5, block_size=120, buffer=120, seed=1, group_column=None)
    SpatialBlocks(block_size=120.0, buffer=120.0, seed=1)
    """
    if method not in RULES:
        raise InputError(f"method={method!r}: unknown method; choose one of {', '.join(RULES)}.")
    cls = RULES[method]
    accepted = set(cls._parameter_names())
    if settings.get("time_column") is None:
        settings.pop("time_column", None)
    if method == "period" and settings.get("periods") is None:
        settings["periods"] = settings.get("folds")
    kw = {k: v for k, v in settings.items() if k in accepted}
    rule = cls(**kw)
    later = settings.get("calibrate_before")
    if later is not None and "calibrate_before" not in accepted:
        if cls.one_way or method in ("period", "leave-one-out"):
            raise InputError(f"calibrate_before={later!r}: {method} cannot take a time cut; combine it with blocks, "
                             "hexagons, checkerboard, clusters, groups or random, or use holdout-period.")
        rule = LaterPeriod(rule, time_column=settings.get("time_column", "year"), calibrate_before=later)
    return rule


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
    time_column: str | None = None,
    periods: int | None = None,
    calibrate_before=None,
    seed: int = 0,
    random_offset: bool = True,
    range_sample: int = 2000,
    crs=None,
    x: str | None = None,
    y: str | None = None,
    zero_means: str | None = None,
    thin=None,
) -> FoldAssignment:
    """Make calibration/evaluation folds for occurrence records.

    A small lookup: ``method`` names a rule class (``RULES``),
    which is built from the settings it takes and asked to ``assign`` the records.

    Parameters
    ----------
    records : path, DataFrame, GeoDataFrame or Records
        Occurrence records (and background, with a kind column or combined in).
        A DataFrame's coordinate columns are detected as for CSV (``crs`` gives
        their CRS, default EPSG:4326); a GeoDataFrame brings its own CRS.
    method : {"blocks", "hexagons", "checkerboard", "clusters", "groups",
              "holdout-group", "period", "holdout-period", "random", "leave-one-out"}
    folds : int
        Number of folds k (ignored by holdout-group, holdout-period and leave-one-out).
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
        Survey method / source / observer column for ``groups`` and
        ``holdout-group``.
    calibrate_on, evaluate_on : list of str
        Group values for ``holdout-group``.
    time_column : str
        Year or date column for ``period`` and ``holdout-period`` (default ``year``).
    periods : int
        Number of time windows for ``period`` (default: ``folds``).
    calibrate_before : year or date
        ``holdout-period``: calibrate on earlier records, evaluate on the rest.
        With a k-fold method, evaluate each fold on its records from this time
        on and calibrate on earlier records outside it (a space-and-time design).
    seed : int
    crs, x, y
        For a DataFrame (or CSV): the coordinates' CRS (default EPSG:4326) and
        their columns (detected from common spellings when omitted).
    zero_means : {"absence", "background"}
        What 0 means in a 0/1 kind column (required when there is one).
    thin : "cell" or float, optional
        Thin presences first: one per cell of the first ``env`` raster, or no two
        closer than this many km (seeded). Thinned rows stay, dropped as ``thinned``.

    Returns
    -------
    FoldAssignment

    Examples
    --------
    >>> a = design("demo_data/records_with_background.csv", method="blocks",
    ...            folds=5, block_size=120, buffer=120, seed=1)
    >>> a.parameters.block_size_km, a.n_folds, a.counts()["evaluation_presence"].tolist()
    (120.0, 5, [86, 86, 86, 86, 86])
    """
    rule = rule_for(method, folds=folds, block_size=block_size, buffer=buffer, env=env, covariates=covariates,
                    group_column=group_column, calibrate_on=calibrate_on, evaluate_on=evaluate_on,
                    time_column=time_column, periods=periods, calibrate_before=calibrate_before, seed=seed,
                    random_offset=random_offset, range_sample=range_sample)
    return rule.assign(records, crs=crs, x=x, y=y, zero_means=zero_means, thin=thin)


def assign_records(rule: FoldRule, records, *, x=None, y=None, crs=None, id_column=None, kind_column=None,
                   labels=None, groups=None, zero_means=None, thin=None) -> FoldAssignment:
    """The shell around a rule: read the records, sample covariates, ask the rule
    for folds, apply the buffer, and record how it was done.

    ``labels`` (scikit-learn's ``y``: 1 = presence, 0 = background) give the
    kinds when the records have no kind column; ``groups`` stand in for a
    group column.
    """
    recs = as_records(records, x=x, y=y, crs=crs, id_column=id_column, kind_column=kind_column, zero_means=zero_means)
    if labels is not None:
        recs = _kinds_from_labels(recs, labels, kind_column)
    if groups is not None and len(groups) != len(recs):
        raise InputError(f"groups has {len(groups)} values but the records have {len(recs)} rows.")
    thin = check_thin(thin)
    if thin == "cell" and not rule.env:
        raise InputError("thin='cell': one presence per cell needs `env` rasters (the first one's cells).")
    recs, env_matrix, env_names, notes = attach_covariates(recs, rule.env, rule.covariates)
    notes = list(recs.notes) + notes
    thinning = None
    if thin is not None:
        recs, thinning = thin_records(recs, thin, rule.env, rule.seed)

    kinds = recs.kind
    if not np.any(recs.kept & (kinds == "presence")):
        raise InputError("no usable presence records; check the kind column and the coordinates.")
    idx = np.flatnonzero(recs.kept)
    data = RuleInput(
        points=recs.points.take(idx), kind=kinds[idx], table=recs.table, rows=idx,
        covariates=None if env_matrix is None else env_matrix[idx], covariate_names=tuple(env_names),
        groups=None if groups is None else np.asarray(groups, object)[idx], records=recs,
    )
    made = rule._folds(choose_block_size(rule, data))
    fold = np.full(len(recs), -1, np.int64)
    fold[idx] = made.fold
    dropped = recs.dropped.copy()
    if made.reason is not None:
        sub = dropped[idx]
        why = np.asarray(made.reason, object)
        sub[why != ""] = why[why != ""]
        dropped[idx] = sub
    n_folds = int(made.n_folds)
    params = rule.design_parameters(n_folds).replace(**made.measured)

    kept_now = fold >= 0
    if n_folds >= 2:
        # Counted per kind on the final folds, for every rule (balancing rules deal
        # presences first and the other records second; absences and background are
        # reported apart so an absence imbalance is never shown as background).
        per_kind = {k: imbalance(np.bincount(fold[kept_now & (kinds == k)], minlength=n_folds + 1)[1:])
                    if np.any(kept_now & (kinds == k)) else None for k in ("presence", "absence", "background")}
        params = params.replace(presence_imbalance=per_kind["presence"], absence_imbalance=per_kind["absence"],
                                background_imbalance=per_kind["background"])
    if recs.zero_means is not None:
        params = params.replace(zero_means=recs.zero_means)
    if thinning is not None:
        params = params.replace(**thinning.to_dict())
    rows, gfolds = np.zeros(0, np.int64), np.zeros(0, np.int64)
    if rule.buffer > 0:
        rows, gfolds = buffer_gaps(recs.points, np.where(kept_now, fold, -1), rule.buffer)
    if made.gap_rows.size:
        pairs = np.unique(np.column_stack([np.r_[rows, idx[made.gap_rows]], np.r_[gfolds, made.gap_folds]]), axis=0)
        rows, gfolds = pairs[:, 0].astype(np.int64), pairs[:, 1].astype(np.int64)
    assignment = FoldAssignment(
        record_id=recs.record_id, kind=kinds, fold=fold, dropped=dropped, n_folds=n_folds,
        gap_rows=rows, gap_folds=gfolds, method=rule.method, parameters=params,
    )
    for i in assignment.folds:
        if not np.any(kinds[assignment.calibration(i)] == "presence"):
            if rule.buffer > 0:
                raise InputError(f"buffer={rule.buffer:g}: fold {i} has no calibration presences left; use a smaller buffer.")
            raise InputError(f"fold {i} has no calibration presences; use fewer folds or another design.")
    geometry_crs = made.geometry_crs if made.geometry_crs is not None else recs.points.crs
    params = params.replace(
        geometry_crs=crs_text(geometry_crs),
        software=f"splitter {__version__}", inputs=dict(recs.sources), notes=tuple(notes),
    )
    if rule.env:
        params = params.replace(env=tuple(rule.env), covariates=tuple(env_names))
    return replace(assignment, parameters=params, records=recs, covariates=env_matrix, covariate_names=tuple(env_names))


def thin_records(recs: Records, thin, env, seed: int):
    """Mark presences removed by thinning as dropped (``thinned``); return the records and the Thinning."""
    from splitter.partition.thin import thin_cells, thin_distance

    candidate = recs.kept & (recs.kind == "presence")
    if thin == "cell":
        from splitter.io.rasters import cell_of

        t = thin_cells(cell_of(env[0], recs.points), candidate, seed=seed)
    else:
        t = thin_distance(recs.points, candidate, float(thin), seed=seed)
    return recs.with_dropped(~t.keep, "thinned"), t


def _kinds_from_labels(recs: Records, labels, kind_column) -> Records:
    """Kinds from scikit-learn's ``y`` when the table has no kind column."""
    if kind_column not in (None, "none") or kind_column_in(recs.table.columns) is not None:
        return recs
    y = np.asarray(labels)
    if y.shape[0] != len(recs):
        raise InputError(f"y has {y.shape[0]} values but X has {len(recs)} rows.")
    try:
        values = set(np.unique(y).tolist())
    except TypeError:  # mixed types: not presence/background labels
        return recs
    if not values <= {0, 1, True, False}:
        return recs  # not presence/background labels: every row stays a presence
    kind = np.where(y.astype(bool), "presence", "background").astype(object)
    return replace(recs, kind=kind)


def add_background(records: Records, count: int, *, env=(), region=None, seed: int = 0) -> Records:
    """Append ``count`` background points sampled uniformly by area (seeded).

    Points fall on cells valid in every ``env`` raster (inside ``region`` when
    given), or, without rasters, anywhere inside the ``region`` polygon.
    """
    from splitter.io.records import append_points

    if count <= 0:
        raise InputError(f"count={count}: give a positive number of background points.")
    if env:
        from splitter.io.rasters import read_region, sample_valid_locations

        reg = read_region(region) if region else None
        pts = sample_valid_locations([str(p) for p in env], count, seed, region=reg)
    elif region:
        pts = sample_in_polygon(region, count, seed)
    else:
        raise InputError(f"count={count}: give `env` (rasters) or `region` (a polygon file) to say where background is sampled.")
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
