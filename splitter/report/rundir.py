"""Read a run directory (design, audit, evaluation, range files) for the appendix.

A run directory is either one split folder (it holds a ``*.design.json`` sidecar
beside its fold table) or a folder holding several split folders one level down,
plus optionally ``range/range.json``. Every part other than the design is
optional: a split may not have been audited or evaluated yet.

The audit, evaluation and range come back as the objects the steps returned
(``AuditResult``, ``EvaluationResult``, ``RangeEstimate``, rebuilt by their
``from_dict``); what a step wrote beside its result (command line, sources,
notes) comes back as that step's context. A file that does not hold a whole
result is bad input, named with what to do.

This module is part of the report shell: it reads files and returns frozen
records; it never writes.
"""

from __future__ import annotations

import functools
import hashlib
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pyproj

from splitter.dependence.audit import AuditResult
from splitter.dependence.variogram import RangeEstimate
from splitter.errors import InputError
from splitter.evaluate.results import EvaluationResult

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

    ``audit``/``evaluation`` are None when that step was not run. The contexts
    hold what the step wrote beside its result: the audit's command line, range
    source, prediction locations, notes and time gaps; the evaluation's command
    line and fold table. ``audit_absences`` is the second audit, absences to
    absences, of a run with absences. ``range_summary`` is the range estimate the
    design stored for ``--block-size auto``.
    """

    name: str
    folder: Path
    table_path: Path
    design: dict
    records: SplitRecords = field(repr=False)
    audit: AuditResult | None = field(default=None, repr=False)
    audit_absences: AuditResult | None = field(default=None, repr=False)
    audit_context: dict = field(default_factory=dict, repr=False)
    distance_figure: Path | None = None
    roc_figure: Path | None = None   # evaluation/roc_curves (PNG + SVG), when the evaluation drew it
    evaluation: EvaluationResult | None = field(default=None, repr=False)
    evaluation_context: dict = field(default_factory=dict, repr=False)
    range_summary: RangeEstimate | None = field(default=None, repr=False)
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


@dataclass(frozen=True)
class Run:
    """A run directory: one or more splits, and the range estimate if any (``range_context``:
    what the range step wrote beside it, such as its seed and command line)."""

    folder: Path
    splits: tuple
    range: RangeEstimate | None = field(default=None, repr=False)
    range_context: dict = field(default_factory=dict, repr=False)
    range_path: Path | None = None


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


#: Step -> what its file holds, for the message when it does not.
_HOLDS = {"design": "design sidecar", "audit": "audit", "evaluate": "evaluation", "range": "range estimate"}


def _result(path: Path, step: str, read, doc):
    """``read(doc)``; a document that does not hold a whole result is bad input."""
    try:
        return read(doc)
    except (KeyError, IndexError, TypeError, ValueError, AttributeError) as e:
        what = f"no {e}" if isinstance(e, KeyError) else " ".join(str(e).split())
        raise InputError(f"{path}: not a complete {_HOLDS[step]} as splitter writes it ({what}); "
                         f"run 'splitter {step}' again to write it.") from None


def _check_made_from(path: Path, step: str, context: dict, table_path: Path, digest) -> None:
    """An audit or evaluation made from another fold table (the folds were designed again
    after it) must not be reported beside this one. Files written before the digest was
    recorded are not checked."""
    made_from = context.get("fold_table_sha256")
    if made_from and made_from != digest():
        raise InputError(f"{path}: made from another fold table than {table_path.name} (the folds were designed "
                         f"again since); run 'splitter {step}' on {table_path.name} again, or remove "
                         f"{path.parent.name}/.")


def _context(doc: dict, result) -> dict:
    """The keys a step wrote beside its result's own."""
    return {k: v for k, v in doc.items() if k not in result.to_dict()}


def _read_audit(doc: dict) -> tuple:
    absences = doc.get("absences")
    return (AuditResult.from_dict(doc), AuditResult.from_dict(absences) if absences is not None else None,
            dict(doc.get("context") or {}))


def _read_evaluation(doc: dict) -> tuple:
    result = EvaluationResult.from_dict(doc)
    return result, _context(doc, result)


def _read_range(doc: dict) -> tuple:
    result = RangeEstimate.from_dict(doc)
    return result, _context(doc, result)


def _range_summary(design: dict):
    rs = (design.get("parameters") or {}).get("range_summary")
    return RangeEstimate.from_dict(rs) if isinstance(rs, dict) and rs.get("semivariograms") else None


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


def load_split(sidecar: Path, name: str) -> SplitRun:
    """Read one split (design sidecar, fold table, audit/ and evaluation/ if present)."""
    design = _load_json(sidecar)
    range_summary = _result(sidecar, "design", _range_summary, design)
    table_path = _table_for(sidecar)
    folder = sidecar.parent
    files = [table_path, sidecar]
    gaps = table_path.with_name(table_path.stem + ".gaps.csv")
    if gaps.exists() and "gaps" in (design.get("outputs") or {"gaps": None}):  # as the fold-table reader decides
        files.append(gaps)
    records = _read_records(table_path, design)

    audit = audit_absences = distance_figure = None
    audit_context: dict = {}
    audit_json = folder / "audit" / "audit.json"
    digest = functools.cache(lambda: sha256_file(table_path))
    if audit_json.exists():
        audit, audit_absences, audit_context = _result(audit_json, "audit", _read_audit, _load_json(audit_json))
        _check_made_from(audit_json, "audit", audit_context, table_path, digest)
        # The tables are written from the same results: listed (with their digests), not read.
        files += [p for p in (audit_json, folder / "audit" / "audit.csv", folder / "audit" / "audit_absences.csv")
                  if p.exists()]
        stem = folder / "audit" / "distance_ecdf"
        if stem.with_suffix(".png").exists():
            distance_figure = stem

    evaluation = roc_figure = None
    evaluation_context: dict = {}
    ev_json = folder / "evaluation" / "evaluation.json"
    if ev_json.exists():
        evaluation, evaluation_context = _result(ev_json, "evaluate", _read_evaluation, _load_json(ev_json))
        _check_made_from(ev_json, "evaluate", evaluation_context, table_path, digest)
        files += [p for p in (ev_json, folder / "evaluation" / "evaluation.csv") if p.exists()]
        stem = folder / "evaluation" / "roc_curves"
        if stem.with_suffix(".png").exists():
            roc_figure = stem
    return SplitRun(
        name=name, folder=folder, table_path=table_path, design=design, records=records,
        audit=audit, audit_absences=audit_absences, audit_context=audit_context, distance_figure=distance_figure,
        roc_figure=roc_figure,
        evaluation=evaluation, evaluation_context=evaluation_context, range_summary=range_summary,
        files=tuple(files),
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
    candidate = run_dir / "range" / "range.json"
    if not candidate.exists():
        return Run(folder=run_dir, splits=splits)
    estimate, context = _result(candidate, "range", _read_range, _load_json(candidate))
    return Run(folder=run_dir, splits=splits, range=estimate, range_context=context, range_path=candidate)
