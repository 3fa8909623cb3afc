"""Autocorrelation range from covariate rasters or from the records' own columns."""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np

from splitter.dependence.variogram import MAX_POINTS, RangeEstimate, fit_ranges
from splitter.columns import match_column
from splitter.errors import InputError
from splitter.geo import equal_area_crs, planar_km

#: Name under which the 0/1 presence–absence response enters the range table.
RESPONSE_NAME = "presence"


def estimate_range(paths=(), *, records=None, covariates=(), response: bool = False, sample: int = 2000,
                   seed: int = 0, region=None, n_lags: int = 30, max_lag_km: float | None = None) -> RangeEstimate:
    """Estimate the autocorrelation range, from rasters or from a records table.

    With ``paths`` (covariate GeoTIFFs): a seeded sample of raster cells
    (:func:`estimate_range_from_rasters`). With ``records``: the records'
    own locations and their covariate columns and/or their 0/1 presence–absence
    response (:func:`estimate_range_from_records`). Give one or the other.

    Returns
    -------
    RangeEstimate
    """
    paths = [str(p) for p in (paths or ())]
    if paths and records is not None:
        raise InputError("give covariate rasters (paths) or a records table (records), not both.")
    if records is not None:
        return estimate_range_from_records(records, covariates=covariates, response=response, sample=sample,
                                           seed=seed, n_lags=n_lags, max_lag_km=max_lag_km)
    if covariates or response:
        raise InputError("covariates and response need a records table (records).")
    return estimate_range_from_rasters(paths, sample=sample, seed=seed, region=region, n_lags=n_lags,
                                       max_lag_km=max_lag_km)


def estimate_range_from_rasters(paths, *, sample: int = 2000, seed: int = 0, region=None,
                                n_lags: int = 30, max_lag_km: float | None = None) -> RangeEstimate:
    """Estimate each covariate's autocorrelation range from a seeded cell sample.

    Cells valid in every raster (inside ``region``) are drawn by area, placed in
    a Lambert azimuthal equal-area plane centred on the sample (so distances are
    true km), and an empirical semivariogram per covariate is fitted with the
    spherical and exponential models (see :mod:`splitter.dependence.variogram`).
    The suggested block size is the median of the covariates' best-fit
    effective ranges. Thirty distance classes up to half the largest sampled
    distance keep the first classes short enough to resolve ranges of a few
    tens of km over a region a thousand km wide (with 15 classes, a 40 km range
    on the demo landscape came out near 80 km; with 30, near 48 km).

    Examples
    --------
    >>> est = estimate_range_from_rasters(["demo_data/canopy.tif"], sample=1500, seed=0)
    >>> est.to_frame()[["covariate", "model", "chosen"]].values.tolist()
    [['canopy', 'spherical', False], ['canopy', 'exponential', True]]
    >>> round(est.suggested_block_km)
    70
    """
    paths = [str(p) for p in paths]
    if not paths:
        raise InputError("give at least one covariate raster (paths), or a records table with covariate columns.")
    if sample < 50:
        raise InputError(f"sample={sample}: a variogram needs at least 50 cells (2000 is a good default).")
    if region is None:
        # A job asked for the same estimate twice (the demo's range step, then its design's
        # block_size="auto") gets the first one back: a pure function of the files' bytes, so
        # the files are named by path, size and modification time.
        files = tuple((p, *_identity(p)) for p in paths)
        return _estimate_once(files, int(sample), seed, int(n_lags), max_lag_km)
    return _estimate(paths, sample, seed, region, n_lags, max_lag_km)


def _identity(path) -> tuple:
    try:
        st = Path(path).stat()
    except OSError:  # not a file: the reader says what is wrong with it
        return (None, -1, -1)
    return (str(Path(path).resolve()), st.st_size, st.st_mtime_ns)


@functools.lru_cache(maxsize=4)
def _estimate_once(files, sample, seed, n_lags, max_lag_km) -> RangeEstimate:
    return _estimate([f[0] for f in files], sample, seed, None, n_lags, max_lag_km)


def _estimate(paths, sample, seed, region, n_lags, max_lag_km) -> RangeEstimate:
    from splitter.io.rasters import read_region, sample_cells

    reg = read_region(region) if isinstance(region, (str, Path)) else region
    pts, values = sample_cells(paths, int(sample), seed, region=reg)
    if len(pts) < 50:
        raise InputError(f"only {len(pts)} valid cells to sample in {', '.join(paths)}; the rasters are too small or mostly nodata.")
    crs = equal_area_crs(pts) if pts.crs.is_geographic else pts.crs
    x, y = planar_km(pts, crs)
    names = [Path(p).stem for p in paths]
    return fit_ranges(x, y, {n: values[:, j] for j, n in enumerate(names)}, n_lags=n_lags, max_lag_km=max_lag_km)


def covariate_columns(records, names) -> tuple[dict, list[str]]:
    """Numeric covariates from columns of the records table, as the user named them.

    Values that are not numbers (empty cells, text) become NaN and are left out
    of that covariate's measures, with a note saying how many; a column with no
    number at all is an error. Rows the reader dropped are NaN too.

    Returns
    -------
    dict name -> float array (one value per row), and the notes.
    """
    import pandas as pd

    table = records.table
    values, notes = {}, []
    kept = records.kept
    for name in names:
        name = str(match_column(table.columns, str(name)) or name)  # any case, as every column option
        if name not in table.columns:
            raise InputError(f"covariate column {name!r}: no such column; columns are: {', '.join(map(str, table.columns))}.")
        v = pd.to_numeric(table[name], errors="coerce").to_numpy(float)
        v = np.where(kept & np.isfinite(v), v, np.nan)
        n_missing = int(np.sum(kept & ~np.isfinite(v)))
        if not np.isfinite(v).any():
            raise InputError(f"covariate column {name!r}: no kept row holds a number; name a numeric column.")
        if n_missing:
            notes.append(f"covariate column {name!r}: {n_missing} row(s) without a numeric value left out of its variogram")
        values[name] = v
    return values, notes


def estimate_range_from_records(records, *, covariates=(), response: bool = False, sample: int = 2000,
                                seed: int = 0, n_lags: int = 30, max_lag_km: float | None = None) -> RangeEstimate:
    """Autocorrelation range from the records' own locations, covariate columns and/or 0/1 response.

    The kept records (all kinds) are placed in a planar km system (a Lambert
    azimuthal equal-area plane centred on them for geographic coordinates, the
    records' own projected CRS otherwise). Each covariate column gives an
    empirical semivariogram over the records that hold a number in it; with
    ``response=True`` the presences (1) and absences (0) give an indicator
    semivariogram (background points are not observations of absence and are
    left out of it). Fitting and the suggested block size are as for rasters
    (:func:`splitter.dependence.variogram.fit_ranges`). More than ``sample``
    records are subsampled (seeded) so the pair count stays bounded.

    Parameters
    ----------
    records : splitter.Records
    covariates : list of str
        Numeric columns of ``records.table``.
    response : bool, default False
        Add the indicator semivariogram of the presence–absence response,
        named ``presence``.
    sample, seed, n_lags, max_lag_km
        As for :func:`estimate_range_from_rasters`.

    Returns
    -------
    RangeEstimate
        With the reader's ``notes`` (values left out, subsampling).
    """
    from dataclasses import replace

    covariates = [str(c) for c in (covariates or ())]
    if not covariates and not response:
        raise InputError("name at least one covariate column (covariates) or ask for the presence–absence response (response).")
    if isinstance(sample, bool) or not isinstance(sample, (int, np.integer)) or not 50 <= sample <= MAX_POINTS:
        raise InputError(f"sample={sample!r}: give a number of records between 50 and {MAX_POINTS}.")
    values, notes = covariate_columns(records, covariates)
    kept = records.kept
    if response:
        kind = records.kind
        pa = kept & np.isin(kind, ("presence", "absence"))
        n_abs = int(np.sum(pa & (kind == "absence")))
        n_pres = int(np.sum(pa & (kind == "presence")))
        if n_abs == 0 or n_pres == 0:
            raise InputError(
                f"the presence–absence response needs presences and absences, found {n_pres} and {n_abs}; "
                "background points are not absences."
            )
        if RESPONSE_NAME in values:
            raise InputError(f"a covariate column is named {RESPONSE_NAME!r}, the response's name; rename the column.")
        values[RESPONSE_NAME] = np.where(pa, (kind == "presence").astype(float), np.nan)
    use = kept & np.isfinite(records.points.x) & np.isfinite(records.points.y)
    use &= np.any([np.isfinite(v) for v in values.values()], axis=0)
    idx = np.flatnonzero(use)
    if idx.size < 50:
        raise InputError(f"only {idx.size} records with coordinates and a value to fit a variogram to; at least 50 are needed.")
    if idx.size > sample:
        idx = np.sort(np.random.default_rng(seed).choice(idx, int(sample), replace=False))
        notes.append(f"{int(use.sum())} records with a value; a seeded sample of {sample} used for the variograms")
    pts = records.points.take(idx)
    crs = equal_area_crs(pts) if pts.crs.is_geographic else pts.crs
    x, y = planar_km(pts, crs)
    est = fit_ranges(x, y, {n: v[idx] for n, v in values.items()}, n_lags=n_lags, max_lag_km=max_lag_km)
    where = (f"semivariograms over {idx.size} records' own locations"
             + (" (presence-absence response as an indicator)" if response else ""))
    return replace(est, notes=tuple(notes), summary_rule=f"{est.summary_rule}; {where}")
