"""Read a run directory (design, audit, evaluation, range files) for the appendix.

A run directory is either one split folder (it holds a ``*.design.json`` sidecar
beside its fold table) or a folder holding several split folders one level down,
plus optionally ``range/range.json``. Every part other than the design is
optional: a split may not have been audited or evaluated yet.

This module is part of the report shell: it reads files and returns plain
frozen records; it never writes.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj

from splitter.errors import InputError

SIDECAR = ".design.json"
TABLE_SUFFIXES = (".csv", ".gpkg", ".parquet")


@dataclass(frozen=True)
class SplitRecords:
    """The records of one fold table, as the appendix needs them.

    Attributes
    ----------
    record_id, kind : ndarray of str
    fold : ndarray of int
        1..k evaluation fold, 0 calibration only, -1 dropped.
    lon, lat : ndarray of float
        WGS84 longitude/latitude (NaN where the row has no coordinates); for
        records in a local planar grid, their own x/y in the grid's unit.
    gap_rows, gap_folds : ndarray of int
        Row ``gap_rows[m]`` is left out of fold ``gap_folds[m]``'s calibration set.
    fold_names : dict
        Fold number -> label as written in the fold table.
    crs : pyproj.CRS or None
        The local planar grid (planar:km / planar:m) of ``lon``/``lat``; None for longitude/latitude.
    """

    record_id: np.ndarray
    kind: np.ndarray
    fold: np.ndarray
    dropped: np.ndarray
    lon: np.ndarray
    lat: np.ndarray
    gap_rows: np.ndarray
    gap_folds: np.ndarray
    fold_names: dict
    crs: object = None


@dataclass(frozen=True)
class SplitRun:
    """Everything one split folder holds.

    ``audit``/``evaluation`` are None when that step was not run.
    """

    name: str
    folder: Path
    table_path: Path
    design: dict
    records: SplitRecords = field(repr=False)
    audit: dict | None = field(default=None, repr=False)
    audit_table: pd.DataFrame | None = field(default=None, repr=False)
    audit_absences_table: pd.DataFrame | None = field(default=None, repr=False)
    distance_figure: Path | None = None
    evaluation: dict | None = field(default=None, repr=False)
    evaluation_table: pd.DataFrame | None = field(default=None, repr=False)
    files: tuple = ()

    @property
    def method(self) -> str:
        return str(self.design.get("method", "given"))

    @property
    def parameters(self):
        """The sidecar's design parameters (a DesignParameters, read like a dict)."""
        from splitter.partition.base import DesignParameters

        d = self.design
        return DesignParameters.from_dict(d.get("parameters", {}) or {}, geometry_crs=d.get("geometry_crs"),
                                          software=d.get("software"))

    @property
    def geometry_crs(self) -> pyproj.CRS | None:
        text = self.design.get("geometry_crs")
        if not text:
            return None
        from splitter.geo import parse_crs

        try:
            return parse_crs(text)  # EPSG:N, WKT or planar:km / planar:m
        except InputError:
            return None

    @property
    def range_summary(self) -> dict | None:
        """The range estimate stored in the sidecar (``--block-size auto``)."""
        rs = self.parameters.get("range_summary")
        return rs if isinstance(rs, dict) and rs.get("semivariograms") else None


@dataclass(frozen=True)
class Run:
    """A run directory: one or more splits, and the range estimate if any."""

    folder: Path
    splits: tuple
    range: dict | None = field(default=None, repr=False)
    range_path: Path | None = None
    range_figure: Path | None = None


def sha256_file(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _load_json(path: Path) -> dict:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as e:
        raise InputError(f"{path}: cannot be read as JSON ({e.__class__.__name__}); re-run the step that wrote it.") from None


def _sidecars(folder: Path) -> list[Path]:
    return sorted(p for p in folder.glob(f"*{SIDECAR}") if p.is_file())


def _table_for(sidecar: Path) -> Path:
    stem = sidecar.name[: -len(SIDECAR)]
    for suffix in TABLE_SUFFIXES:
        candidate = sidecar.with_name(stem + suffix)
        if candidate.exists():
            return candidate
    raise InputError(f"{sidecar}: no fold table {stem}.csv/.gpkg/.parquet beside it; keep the sidecar with its table.")


def _read_records(table_path: Path, design: dict) -> SplitRecords:
    """Read the fold table with the package's own reader, coordinates as lon/lat."""
    from splitter.io.foldtable import read_fold_table

    try:
        recs, assignment, names = read_fold_table(table_path)
    except InputError:
        # A projected CSV carries no CRS: the sidecar's geometry CRS is the input CRS then.
        crs = design.get("geometry_crs")
        if not crs:
            raise
        recs, assignment, names = read_fold_table(table_path, crs=crs)
    from splitter.geo import is_planar

    planar = is_planar(recs.points.crs)
    # A local grid has no longitude/latitude: its own coordinates are carried instead.
    ll = recs.points if planar else recs.points.to_lonlat()
    return SplitRecords(
        record_id=np.asarray(assignment.record_id).astype(str),
        kind=np.asarray(assignment.kind).astype(str),
        fold=np.asarray(assignment.fold, np.int64),
        dropped=np.asarray(assignment.dropped).astype(str),
        lon=np.asarray(ll.x, float),
        lat=np.asarray(ll.y, float),
        gap_rows=np.asarray(assignment.gap_rows, np.int64),
        gap_folds=np.asarray(assignment.gap_folds, np.int64),
        fold_names={int(k): str(v) for k, v in names.items()},
        crs=recs.points.crs if planar else None,
    )


def _read_table(path: Path) -> pd.DataFrame:
    # Text first: the appendix prints the run's values, it does not re-type them.
    return pd.read_csv(path, dtype=str, keep_default_na=False)


def load_split(sidecar: Path, name: str) -> SplitRun:
    """Read one split (design sidecar, fold table, audit/ and evaluation/ if present)."""
    design = _load_json(sidecar)
    table_path = _table_for(sidecar)
    folder = sidecar.parent
    files = [table_path, sidecar]
    gaps = table_path.with_name(table_path.stem + ".gaps.csv")
    if gaps.exists():
        files.append(gaps)
    records = _read_records(table_path, design)

    audit = audit_table = audit_absences_table = distance_figure = None
    audit_json = folder / "audit" / "audit.json"
    if audit_json.exists():
        audit = _load_json(audit_json)
        files.append(audit_json)
        if (folder / "audit" / "audit.csv").exists():
            audit_table = _read_table(folder / "audit" / "audit.csv")
            files.append(folder / "audit" / "audit.csv")
        if (folder / "audit" / "audit_absences.csv").exists():
            audit_absences_table = _read_table(folder / "audit" / "audit_absences.csv")
            files.append(folder / "audit" / "audit_absences.csv")
        stem = folder / "audit" / "distance_ecdf"
        if stem.with_suffix(".png").exists():
            distance_figure = stem

    evaluation = evaluation_table = None
    ev_json = folder / "evaluation" / "evaluation.json"
    if ev_json.exists():
        evaluation = _load_json(ev_json)
        files.append(ev_json)
        if (folder / "evaluation" / "evaluation.csv").exists():
            evaluation_table = _read_table(folder / "evaluation" / "evaluation.csv")
            files.append(folder / "evaluation" / "evaluation.csv")
    return SplitRun(
        name=name, folder=folder, table_path=table_path, design=design, records=records,
        audit=audit, audit_table=audit_table, audit_absences_table=audit_absences_table,
        distance_figure=distance_figure,
        evaluation=evaluation, evaluation_table=evaluation_table, files=tuple(files),
    )


def load_run(run_dir) -> Run:
    """Find and read every split of RUN_DIR.

    Parameters
    ----------
    run_dir : path
        One split folder, or a folder of split folders (one level down).

    Raises
    ------
    InputError
        When RUN_DIR is not a folder or holds no design sidecar.
    """
    run_dir = Path(run_dir)
    if not run_dir.is_dir():
        raise InputError(f"{run_dir}: not a folder; give the run folder (the one holding folds.design.json, or folders of them).")
    found = [(p, run_dir.name if len(_sidecars(run_dir)) == 1 else f"{run_dir.name}-{p.name[: -len(SIDECAR)]}")
             for p in _sidecars(run_dir)]
    if not found:
        for sub in sorted(p for p in run_dir.iterdir() if p.is_dir()):
            cars = _sidecars(sub)
            for p in cars:
                found.append((p, sub.name if len(cars) == 1 else f"{sub.name}-{p.name[: -len(SIDECAR)]}"))
    if not found:
        raise InputError(
            f"{run_dir}: no design sidecar (*{SIDECAR}) here or one folder down; "
            "give a folder written by 'splitter design' (or the demo)."
        )
    splits = tuple(load_split(p, name) for p, name in found)
    rng = rng_path = rng_fig = None
    candidate = run_dir / "range" / "range.json"
    if candidate.exists():
        rng, rng_path = _load_json(candidate), candidate
        if (run_dir / "range" / "variogram.png").exists():
            rng_fig = run_dir / "range" / "variogram"
    return Run(folder=run_dir, splits=splits, range=rng, range_path=rng_path, range_figure=rng_fig)
