"""Write a design (fold table, gaps, sidecar) and read fold tables back."""

from __future__ import annotations

import json
from contextlib import ExitStack
from pathlib import Path

import numpy as np
import pandas as pd

from splitter.columns import match_column
from splitter.errors import InputError
from splitter.io.atomic import atomic_path, atomic_write
from splitter.io.journal import make_folder, remove
from splitter.io.paths import portable
from splitter.io.records import Records, read_records
from splitter.partition.assignment import FoldAssignment
from splitter.partition.testability import check_folds

TABLE_SUFFIXES = (".csv", ".gpkg", ".parquet")
ROLE_VALUES = {
    "calibration": 0, "calibrate": 0, "train": 0, "training": 0, "fit": 0,
    "evaluation": 1, "evaluate": 1, "test": 1, "testing": 1, "validation": 1,
}


def companion(path, suffix: str) -> Path:
    """``folds.csv`` -> ``folds.gaps.csv`` / ``folds.design.json``."""
    path = Path(path)
    return path.with_name(path.stem + suffix)


def to_json(obj, root=None) -> str:
    """Stable JSON text: sorted keys, NaN as null, numpy scalars as Python, and no
    absolute path of this machine (files named as :func:`splitter.io.paths.shown`
    names them, relative to ``root`` when inside it)."""

    def clean(o):
        if isinstance(o, dict):
            return {str(k): clean(v) for k, v in o.items()}
        if isinstance(o, (list, tuple)):
            return [clean(v) for v in o]
        if isinstance(o, np.ndarray):
            return [clean(v) for v in o.tolist()]
        if isinstance(o, (np.integer,)):
            return int(o)
        if isinstance(o, (np.floating, float)):
            f = float(o)
            return None if not np.isfinite(f) else f
        if isinstance(o, np.bool_):
            return bool(o)
        return o

    return json.dumps(portable(clean(obj), root), indent=2, sort_keys=True, allow_nan=False) + "\n"


def _table_suffix(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix not in TABLE_SUFFIXES:
        raise InputError(f"--out {path}: use a .csv, .gpkg or .parquet file name.")
    return suffix


def write_table(frame: pd.DataFrame, path, points=None) -> Path:
    """Write a table by extension (.csv, .gpkg, .parquet), atomically."""
    path = Path(path)
    suffix = _table_suffix(path)
    make_folder(path.parent)
    if suffix == ".csv":
        with atomic_write(path, "w") as f:
            frame.to_csv(f, index=False, lineterminator="\n")
        return path
    import geopandas as gpd

    if points is None:
        raise InputError(f"--out {path}: a {suffix} output needs coordinates.")
    gdf = gpd.GeoDataFrame(frame.copy(), geometry=gpd.points_from_xy(points.x, points.y), crs=points.crs)
    # Nullable integers are not understood by every driver: write plain int with -1 dropped? Keep nulls.
    with atomic_path(path) as tmp:
        if suffix == ".parquet":
            gdf.to_parquet(tmp, index=False)
        else:
            import pyogrio

            # A fixed timestamp keeps GeoPackages byte-identical between runs.
            pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": "2000-01-01T00:00:00.000Z"})
            gdf.to_file(tmp, driver="GPKG", layer="folds", engine="pyogrio")
    return path


def design_summary(assignment: FoldAssignment) -> dict:
    """The sidecar's content: how the folds were made and what they hold."""
    counts = assignment.counts()
    kinds = assignment.kind
    kept = assignment.fold >= 0
    return {
        "method": assignment.method,
        "parameters": {k: v for k, v in assignment.parameters.items() if k not in ("inputs", "software", "notes", "geometry_crs")},
        "seed": assignment.parameters.get("seed"),
        "geometry_crs": assignment.parameters.get("geometry_crs"),
        "block_size_km": assignment.parameters.get("block_size_km"),
        "buffer_km": assignment.parameters.get("buffer_km"),
        "software": assignment.parameters.get("software"),
        "inputs_sha256": assignment.parameters.get("inputs", {}),
        "notes": assignment.parameters.get("notes", []),
        "n_folds": assignment.n_folds,
        "records": {
            "rows": int(len(assignment)),
            "kept": int(kept.sum()),
            "presence": int(np.sum(kept & (kinds == "presence"))),
            "absence": int(np.sum(kept & (kinds == "absence"))),
            "background": int(np.sum(kept & (kinds == "background"))),
            "calibration_only": int(np.sum(assignment.fold == 0)),
            "dropped": {str(k): int(v) for k, v in pd.Series(assignment.dropped[~kept]).value_counts().sort_index().items()},
        },
        "folds": counts.to_dict(orient="records"),
        "read_back": read_back(assignment),
    }


def read_back(assignment: FoldAssignment) -> dict:
    """How later commands read the fold table without asking for record options again."""
    recs = assignment.records
    out = {"id_column": "record_id", "kind_column": "kind", "fold_column": "fold"}
    zero = assignment.parameters.get("zero_means") if hasattr(assignment.parameters, "get") else None
    if zero:
        out["zero_means"] = zero  # what 0 meant in the input's own kind column
    if recs is not None:
        from splitter.geo import crs_text

        out["crs"] = crs_text(recs.points.crs)
        if recs.x_column:
            out["x"], out["y"] = recs.x_column, recs.y_column
    return out


def write_design(assignment: FoldAssignment, out, command: str | None = None, checks=None,
                 generalise_km: float | None = None) -> dict:
    """Write the fold table, its gaps file (with a buffer) and the design sidecar.

    ``checks`` (a :class:`splitter.partition.testability.FoldChecks`) is what each
    fold's tests can show; by default it is measured at alpha 0.05 with Holm's
    adjustment and omission 0.05 (``evaluate``'s defaults). A fold with no
    evaluation presence is an error.

    With ``generalise_km`` every coordinate written (coordinate columns, geometry) is
    the centre of its ``generalise_km`` cell in the design's planar grid (the
    equal-area or planar system), a ``generalised_km`` column says so on every row,
    and the sidecar records it; the folds were made from the exact coordinates.

    Returns the paths written, by role.
    """
    if checks is None:
        checks = check_folds(assignment)
    out = Path(out)
    frame = assignment.to_frame(text=True)
    pts = assignment.records.points if assignment.records is not None else None
    if generalise_km is not None and pts is not None:
        pts = _generalised(assignment, pts, generalise_km)
        recs = assignment.records
        if recs.x_column is not None:
            for col, vals in ((recs.x_column, pts.x), (recs.y_column, pts.y)):
                text = frame[col].astype(str).to_numpy(object)
                frame[col] = np.where(np.isfinite(vals), [f"{v:.10g}" for v in vals], text)
        frame["generalised_km"] = f"{float(generalise_km):g}"
    if out.suffix.lower() == ".csv" and pts is not None and assignment.records.x_column is None:
        # Vector input written as CSV: carry the coordinates as plain columns.
        names = ("longitude", "latitude") if pts.geographic else ("x", "y")
        pos = list(frame.columns).index("record_id") if "record_id" in frame.columns else len(frame.columns)
        for off, (name, vals) in enumerate(zip(names, (pts.x, pts.y))):
            if name not in frame.columns:
                frame.insert(pos + off, name, [f"{v:.10g}" if np.isfinite(v) else "" for v in vals])
        # Read back from these columns (the sidecar's read_back says so).
        summary_xy = names
    gaps_path = companion(out, ".gaps.csv")
    with_gaps = (assignment.parameters.get("buffer_km", 0) or 0) > 0 or assignment.gap_rows.size  # buffer or space-and-time gaps
    paths = {"folds": out, **({"gaps": gaps_path} if with_gaps else {})}
    side = companion(out, ".design.json")
    summary = design_summary(assignment)
    if out.suffix.lower() == ".csv" and assignment.records is not None and assignment.records.x_column is None and pts is not None:
        summary["read_back"]["x"], summary["read_back"]["y"] = summary_xy
    summary["checks"] = checks.to_dict()
    if generalise_km is not None:
        summary["generalised_km"] = float(generalise_km)
        summary["notes"] = list(summary.get("notes") or []) + [
            f"coordinates in the fold table are generalised to the centres of {float(generalise_km):g} km cells of "
            f"the design's planar grid ({assignment.parameters.get('geometry_crs', '')[:60]}); folds were made from "
            "the exact coordinates"]
    summary["outputs"] = {k: Path(v).name for k, v in paths.items()}
    if command:
        summary["command"] = command
    _table_suffix(out)
    make_folder(out.parent)
    # All files are written before any takes its name (the stack renames the gaps file and
    # the sidecar after the table): a stop mid-write leaves the whole set or none of it,
    # never a new table beside an old sidecar.
    with ExitStack() as stack:
        if with_gaps:
            f = stack.enter_context(atomic_write(gaps_path, "w"))
            assignment.gaps_frame().to_csv(f, index=False, lineterminator="\n")
        f = stack.enter_context(atomic_write(side, "w"))
        f.write(to_json(summary, root=out.parent))
        write_table(frame, out, pts)
    if not with_gaps:
        remove(gaps_path)  # an earlier design's gaps would be read back as this one's
    paths["design"] = side
    return paths


def _generalised(assignment: FoldAssignment, pts, cell_km):
    """Generalised points in the design's own planar grid (its geometry CRS when projected or planar)."""
    from splitter.geo import generalise_points, is_planar, parse_crs

    plane = None
    text = assignment.parameters.get("geometry_crs") if hasattr(assignment.parameters, "get") else None
    if text:
        crs = parse_crs(text)
        plane = crs if (crs.is_projected or is_planar(crs)) else None
    if plane is not None and is_planar(plane) != is_planar(pts.crs):
        plane = None
    return generalise_points(pts, cell_km, plane)


def read_fold_table(path, *, fold_column: str | None = "fold", role_column: str | None = None,
                    x=None, y=None, crs=None, id_column=None, kind_column=None,
                    zero_means=None) -> tuple[Records, FoldAssignment, dict]:
    """Read a fold table (ours or a user's) as records plus a FoldAssignment.

    The fold column may hold numbers (1..k evaluation folds, 0 calibration
    only, empty = not used) or names (each distinct name becomes a fold,
    numbered in sorted order). A role column holding calibration/evaluation
    (or train/test) makes a single fold. Gaps are read from ``<stem>.gaps.csv``
    when it exists beside the table. Our own tables are read back the way the
    design sidecar says (coordinate columns, CRS), unless told otherwise.

    Returns
    -------
    records, assignment, fold_names (fold number -> original label)
    """
    path = Path(path)
    side = companion(path, ".design.json")
    sidecar = None
    if side.exists():
        try:
            sidecar = json.loads(side.read_text())
        except json.JSONDecodeError:
            sidecar = None
    back = (sidecar or {}).get("read_back") or {}
    if path.suffix.lower() == ".csv" and back:
        # Options not given are read as the design wrote the table.
        x = x if x is not None else back.get("x")
        y = y if y is not None else back.get("y")
        crs = crs if crs is not None else back.get("crs")
    recs = read_records(path, x=x, y=y, crs=crs, id_column=id_column, kind_column=kind_column, zero_means=zero_means)
    table = recs.table
    n = len(table)
    fold = np.full(n, -1, np.int64)
    names: dict = {}
    role_column = role_column and (match_column(table.columns, role_column) or role_column)
    fold_column = fold_column and (match_column(table.columns, fold_column) or fold_column)
    if role_column:
        if role_column not in table.columns:
            raise InputError(f"{path}: no role column '{role_column}'; columns are: {', '.join(map(str, table.columns))}.")
        roles = table[role_column].astype(str).str.strip().str.lower()
        mapped = roles.map(ROLE_VALUES)
        unknown = mapped.isna() & (roles != "")
        if unknown.any():
            bad = sorted(set(roles[unknown]))[:4]
            row = int(np.flatnonzero(unknown.to_numpy())[0]) + 2
            raise InputError(
                f"{path}: row {row}: role '{bad[0]}' in column '{role_column}' is not known; "
                "use calibration/evaluation (or train/test)."
            )
        fold = np.where(mapped.isna(), -1, mapped.fillna(-1)).astype(np.int64)
        names = {1: "evaluation"}
        method = "given (role column)"
    else:
        if fold_column not in table.columns:
            raise InputError(f"{path}: no fold column '{fold_column}'; name it with --fold-column (columns: {', '.join(map(str, table.columns))}).")
        raw = table[fold_column].astype(str).str.strip()
        blank = raw.isin(["", "nan", "NA", "<NA>", "None"])
        num = pd.to_numeric(raw.where(~blank), errors="coerce")
        if num[~blank].notna().all() and (num[~blank] % 1 == 0).all():
            fold = np.where(blank, -1, num.fillna(-1)).astype(np.int64)
            if (fold < -1).any():
                raise InputError(f"{path}: column '{fold_column}' has negative fold numbers; use 1..k (0 = calibration only).")
            names = {int(v): str(int(v)) for v in np.unique(fold[fold >= 1])}
            # Renumber sparse fold numbers (e.g. 2, 5, 9) to 1..k, keeping the labels.
            uniq = np.unique(fold[fold >= 1])
            remap = {int(v): i + 1 for i, v in enumerate(uniq)}
            if any(k != v for k, v in remap.items()):
                f2 = fold.copy()
                for old, new in remap.items():
                    f2[fold == old] = new
                fold = f2
                names = {remap[k]: v for k, v in names.items()}
        else:
            labels = np.unique(raw[~blank].to_numpy(str))
            fold = np.full(n, -1, np.int64)
            pos = np.searchsorted(labels, raw.to_numpy(str))
            fold[~blank.to_numpy()] = pos[~blank.to_numpy()] + 1
            names = {i + 1: str(v) for i, v in enumerate(labels)}
        method = "given (fold column)"
    k = int(fold.max()) if (fold >= 1).any() else 0
    if k < 1:
        col = role_column or fold_column
        raise InputError(f"{path}: column '{col}' names no evaluation fold; it needs at least one fold (or 'evaluation' rows).")
    if k == 1 and not role_column and not (fold == 0).any():
        raise InputError(f"{path}: column '{fold_column}' has one value only; a split needs at least two folds (or 0 = calibration-only rows).")
    dropped = recs.dropped.copy()
    if "dropped" in table.columns:  # our own fold table: keep its reasons
        given = table["dropped"].astype(str).str.strip().to_numpy(object)
        dropped = np.where((dropped == "") & (given != ""), given, dropped).astype(object)
    dropped[(fold < 0) & (dropped == "")] = "no-fold"
    fold[dropped != ""] = -1
    gap_rows = np.zeros(0, np.int64)
    gap_folds = np.zeros(0, np.int64)
    gpath = companion(path, ".gaps.csv")
    listed = (sidecar or {}).get("outputs")
    # Our sidecar lists the gaps file it wrote; one it does not list is an earlier design's.
    if gpath.exists() and (listed is None or "gaps" in listed):
        g = pd.read_csv(gpath, dtype=str, keep_default_na=False)
        pos = pd.Series(np.arange(n), index=recs.record_id.astype(str))
        ok = g["record_id"].isin(pos.index)
        gap_rows = pos.loc[g.loc[ok, "record_id"]].to_numpy(np.int64)
        gap_folds = g.loc[ok, "fold"].astype(int).to_numpy(np.int64)
    params = {"source_table": str(path)}
    if sidecar is not None:
        params["design"] = sidecar
    assignment = FoldAssignment(
        record_id=recs.record_id, kind=recs.kind, fold=fold, dropped=dropped, n_folds=k,
        gap_rows=gap_rows, gap_folds=gap_folds, method=method, parameters=params, records=recs,
    )
    return recs, assignment, names
