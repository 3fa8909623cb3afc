"""Per-fold evaluation of the user's predictions (or the baseline model's).

For each fold: a threshold from calibration presences, the cumulative binomial
test, the partial ROC with bootstrap, then the performance measures. A fold is
significant when both tests reject the null of no predictive ability at
``alpha``; a fold that is not is marked "do not interpret" before any measure.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from splitter.errors import InputError
from splitter.evaluate import (
    ThresholdRule,
    binomial_test,
    boyce_index,
    choose_threshold,
    combine_pvalues_fisher,
    confusion_measures,
    fit_baseline,
    partial_roc,
    predict_suitability,
)
from splitter.evaluate.surface import evaluate_surface
from splitter.partition.assignment import FoldAssignment

# Testing-extent check (Lobo, Jiménez-Valverde & Real, "AUC: a misleading measure of
# the performance of predictive distribution models", Global Ecology and
# Biogeography 2008): a testing region much larger than the area the records
# occupy makes AUC-type measures look better than they are. Our convention: warn
# when the region is more than EXTENT_RATIO times the records' convex hull
# buffered by EXTENT_BUFFER_KM.
EXTENT_BUFFER_KM = 50.0
EXTENT_RATIO = 2.0
MIN_PRESENCES = 5

COLUMNS = [
    "fold", "significant", "interpretation", "n_evaluation", "threshold_rule", "threshold",
    "area_predicted", "successes", "binomial_p", "auc", "auc_ratio", "auc_ratio_mean",
    "auc_ratio_low", "auc_ratio_high", "partial_roc_p", "omission", "replicates",
    "omission_rate", "sensitivity", "specificity", "commission_rate",
    "correct_classification_rate", "tss", "kappa", "boyce", "n_other", "other_kind",
    "area_source", "dropped_no_prediction", "warnings",
]


@dataclass(frozen=True)
class FoldEvaluation:
    """Everything measured on one fold (arrays kept for the figures)."""

    row: dict
    curve_x: np.ndarray = field(repr=False)
    curve_y: np.ndarray = field(repr=False)
    ratios: np.ndarray = field(repr=False)
    scores: pd.DataFrame | None = field(default=None, repr=False)


@dataclass(frozen=True)
class EvaluationResult:
    """Per-fold significance and performance, plus an ``all`` row.

    Attributes
    ----------
    folds : list of FoldEvaluation
    summary : dict
        The ``all`` row: means (and SDs) of the measures, Fisher-combined p-values.
    parameters : dict
    warnings : list of str
    """

    folds: list
    summary: dict
    parameters: dict
    warnings: list

    def to_frame(self) -> pd.DataFrame:
        rows = [f.row for f in self.folds] + [self.summary]
        df = pd.DataFrame(rows)
        cols = COLUMNS + [c for c in df.columns if c not in COLUMNS]
        return df.reindex(columns=cols)

    def to_dict(self) -> dict:
        from splitter.io.foldtable import to_json
        import json

        return json.loads(to_json({
            "parameters": self.parameters,
            "warnings": self.warnings,
            "folds": [f.row for f in self.folds],
            "all": self.summary,
            "curves": {str(f.row["fold"]): {"x": f.curve_x.tolist(), "y": f.curve_y.tolist()} for f in self.folds},
        }))


def _kind_rows(assignment, rows, kind):
    return rows[assignment.kind[rows] == kind]


def evaluate(
    assignment: FoldAssignment,
    *,
    predictions: str | None = None,
    prediction_table=None,
    model=None,
    env=(),
    region=None,
    threshold: str = "quantile:0.1",
    omission: float = 0.05,
    replicates: int = 1000,
    alpha: float = 0.05,
    seed: int = 0,
    prediction_dir=None,
    fold_names: dict | None = None,
    progress=None,
) -> EvaluationResult:
    """Test and measure each fold's predictions.

    Parameters
    ----------
    assignment : FoldAssignment
        From :func:`splitter.design` or :func:`splitter.read_fold_table`.
    predictions : str, optional
        Raster path pattern with ``{fold}``, e.g. ``"preds/fold_{fold}.tif"``;
        the testing region is its valid cells (cut to ``region``).
    prediction_table : DataFrame or path, optional
        Columns ``record_id, fold, prediction`` for evaluation presences and
        background/absences and calibration presences of each fold.
    model : "baseline" or scikit-learn estimator, optional
        Fitted per fold on that fold's calibration records over the ``env``
        rasters; writes ``prediction_dir/fold_{fold}.tif``.
    threshold : str
        ``lowest``, ``quantile:Q``, ``value:V`` or ``max-tss``; always from calibration data.
    omission, replicates, alpha, seed
        Partial ROC omission tolerance E, bootstrap replicates, significance level, seed.

    Returns
    -------
    EvaluationResult
    """
    rule = ThresholdRule.parse(threshold)
    if not 0 < alpha < 1:
        raise InputError(f"--alpha {alpha}: give a level between 0 and 1 (e.g. 0.05).")
    if predictions is None and prediction_table is None and model is None:
        raise InputError("give predictions: --predictions 'PATTERN_{fold}.tif', --prediction-table FILE or --model baseline --env RASTER.")
    if assignment.records is None:
        raise InputError("the fold assignment carries no records; build it with splitter.design or splitter.read_fold_table.")
    names = fold_names or {i: str(i) for i in assignment.folds}
    warnings: list[str] = []
    notes: list[str] = []
    region_geom = None
    if region is not None:
        from splitter.io.rasters import read_region

        region_geom = read_region(region) if not hasattr(region, "geometry") else region

    if model is not None:
        predictions = _fit_and_predict(assignment, model, env, prediction_dir, seed, names, notes, progress)
        model_label = "baseline" if isinstance(model, str) else type(model).__name__
    else:
        model_label = "user predictions"

    table = _read_prediction_table(prediction_table, assignment) if prediction_table is not None else None
    folds_out = []
    for i in assignment.folds:
        label = names.get(i, str(i))
        fe = _evaluate_fold(assignment, i, label, predictions, table, region_geom, rule, omission,
                            replicates, alpha, seed, warnings, notes)
        folds_out.append(fe)
        if progress is not None:
            progress()
    summary = _summarise(folds_out, alpha)
    if predictions is not None:
        _extent_check(assignment, predictions, names, region_geom, warnings)
    params = {
        "threshold_rule": str(rule), "omission": omission, "replicates": int(replicates),
        "alpha": alpha, "seed": int(seed), "model": model_label,
        "predictions": str(predictions) if predictions is not None else None,
        "prediction_table": str(prediction_table) if isinstance(prediction_table, (str, Path)) else None,
        "significance_rule": "binomial p < alpha and partial ROC p < alpha",
        "notes": notes,
        "extent_check": {"buffer_km": EXTENT_BUFFER_KM, "ratio": EXTENT_RATIO},
    }
    return EvaluationResult(folds_out, summary, params, warnings)


def _read_prediction_table(table, assignment) -> pd.DataFrame:
    if isinstance(table, (str, Path)):
        path = Path(table)
        if not path.exists():
            raise InputError(f"{path}: no such prediction table; check the path.")
        df = pd.read_csv(path, dtype={"record_id": str, "fold": str})
        src = str(path)
    else:
        df = pd.DataFrame(table).copy()
        src = "prediction table"
    missing = {"record_id", "fold", "prediction"} - set(df.columns)
    if missing:
        raise InputError(f"{src}: missing column(s) {', '.join(sorted(missing))}; it needs record_id, fold, prediction.")
    df["record_id"] = df["record_id"].astype(str).str.strip()
    df["fold"] = df["fold"].astype(str).str.strip()
    df["prediction"] = pd.to_numeric(df["prediction"], errors="coerce")
    return df


def _scores_from_table(table, label, rows, assignment) -> np.ndarray:
    sub = table[table["fold"] == str(label)]
    if sub.empty:
        raise InputError(f"the prediction table has no rows for fold {label}; add record_id,fold,prediction rows for it.")
    s = pd.Series(sub["prediction"].to_numpy(float), index=sub["record_id"].to_numpy(str))
    s = s[~s.index.duplicated(keep="first")]
    return s.reindex(assignment.record_id[rows].astype(str)).to_numpy(float)


def _fold_raster(pattern, label) -> Path:
    path = Path(str(pattern).replace("{fold}", str(label)))
    if not path.exists():
        raise InputError(f"{path}: prediction raster for fold {label} not found; check --predictions (it must contain {{fold}}).")
    return path


def _evaluate_fold(assignment, i, label, pattern, table, region, rule, omission, replicates,
                   alpha, seed, warnings, notes) -> FoldEvaluation:
    ev = assignment.evaluation(i)
    cal = assignment.calibration(i)
    ev_p = _kind_rows(assignment, ev, "presence")
    ev_a = _kind_rows(assignment, ev, "absence")
    ev_b = _kind_rows(assignment, ev, "background")
    other_kind = "absence" if ev_a.size else "background"
    ev_o = ev_a if ev_a.size else ev_b
    cal_p = _kind_rows(assignment, cal, "presence")
    cal_o = _kind_rows(assignment, cal, "absence")
    if not cal_o.size:
        cal_o = _kind_rows(assignment, cal, "background")
    fold_warn = []
    pts = assignment.records.points
    path = None
    if pattern is not None:
        from splitter.io.rasters import sample_rasters

        path = _fold_raster(pattern, label)
    if table is not None:
        s_ev_p = _scores_from_table(table, label, ev_p, assignment)
        s_ev_o = _scores_from_table(table, label, ev_o, assignment)
        s_cal_p = _scores_from_table(table, label, cal_p, assignment)
        s_cal_o = _scores_from_table(table, label, cal_o, assignment) if rule.kind == "max-tss" else np.zeros(0)
    else:
        need = np.concatenate([ev_p, ev_o, cal_p, cal_o])
        vals, sample_notes = sample_rasters([path], pts.take(need))
        for n in sample_notes:  # e.g. records reprojected to the raster's CRS
            if n.startswith("reprojected") and n not in notes:
                notes.append(n)
        v = vals[:, 0]
        a, b, c = ev_p.size, ev_p.size + ev_o.size, ev_p.size + ev_o.size + cal_p.size
        s_ev_p, s_ev_o, s_cal_p, s_cal_o = v[:a], v[a:b], v[b:c], v[c:]
    scores = _score_table(assignment, label, parts=((ev_p, s_ev_p, "evaluation"), (ev_o, s_ev_o, "evaluation"),
                                 (cal_p, s_cal_p, "calibration"), (cal_o, s_cal_o, "calibration")))
    no_pred = int((~np.isfinite(s_ev_p)).sum() + (~np.isfinite(s_ev_o)).sum())
    if no_pred:
        fold_warn.append(f"{no_pred} evaluation records have no prediction (nodata or missing) and were left out of fold {label}")
    s_ev_p = s_ev_p[np.isfinite(s_ev_p)]
    s_ev_o = s_ev_o[np.isfinite(s_ev_o)]
    s_cal_p = s_cal_p[np.isfinite(s_cal_p)]
    s_cal_o = s_cal_o[np.isfinite(s_cal_o)]
    if s_ev_p.size == 0:
        raise InputError(f"fold {label} has no evaluation presences with a prediction; check the fold table and the predictions.")
    if s_cal_p.size == 0:
        raise InputError(f"fold {label} has no calibration presences with a prediction; thresholds come from calibration presences only.")
    if s_ev_p.size < MIN_PRESENCES:
        fold_warn.append(f"fold {label} has only {s_ev_p.size} evaluation presences; the tests have little power")
    thr = choose_threshold(rule, s_cal_p, s_cal_o if s_cal_o.size else None)

    try:
        if path is not None:
            # The testing region is the raster's valid cells, read in windows: one
            # min/max pass and one summary pass, whatever the raster's size.
            from splitter.io.rasters import valid_cells

            surf = evaluate_surface(lambda: valid_cells(path, region), s_ev_p, [thr.value], omission=omission,
                                    replicates=replicates, seed=seed)
            area_share, proc = float(surf.area_shares[0]), surf.partial_roc
            boyce = surf.boyce.statistic if surf.boyce is not None else np.nan
            cell_lo, cell_hi = surf.surface.value_min, surf.surface.value_max
            area_source = "raster cells (area-weighted)"
        else:
            if s_ev_o.size == 0:
                raise InputError("no raster and no evaluation background/absences with predictions; the binomial test needs one of them.")
            area_share = float(np.mean(s_ev_o >= thr.value))
            proc = partial_roc(s_ev_o, s_ev_p, None, omission=omission, replicates=replicates, seed=seed)
            boyce = boyce_index(s_ev_p, s_ev_o).statistic
            cell_lo, cell_hi = np.inf, -np.inf
            area_source = f"evaluation {other_kind} records"
    except InputError as e:
        where = f"{path}: " if path is not None else "prediction table: "
        raise InputError(f"{where}fold {label}: {str(e)[0].lower()}{str(e)[1:]}") from None
    lo = min(s_ev_p.min(), s_cal_p.min(), cell_lo)
    hi = max(s_ev_p.max(), s_cal_p.max(), cell_hi)
    if lo < 0 or hi > 1:
        fold_warn.append(f"fold {label}: predictions run from {lo:.3g} to {hi:.3g}, outside [0, 1]; "
                         "only their order is used (ranks), which every test here allows")
    successes = int(np.sum(s_ev_p >= thr.value))
    binom = binomial_test(successes, s_ev_p.size, area_share)
    if s_ev_o.size:
        meas = confusion_measures(s_ev_p, s_ev_o, thr.value, other_kind=other_kind).to_dict()
    else:
        meas = {}
        fold_warn.append(f"fold {label} has no evaluation background or absences: confusion-matrix measures not computed")
    significant = bool(binom.pvalue < alpha and proc.pvalue < alpha)
    row = {
        "fold": str(label),
        "significant": significant,
        "interpretation": "interpret" if significant else "do not interpret",
        "n_evaluation": int(s_ev_p.size),
        "threshold_rule": str(rule),
        "threshold": thr.value,
        "area_predicted": area_share,
        "successes": successes,
        "binomial_p": binom.pvalue,
        "auc": proc.auc,
        "auc_ratio": proc.auc_ratio,
        "auc_ratio_mean": proc.statistic,
        "auc_ratio_low": proc.ratio_low,
        "auc_ratio_high": proc.ratio_high,
        "partial_roc_p": proc.pvalue,
        "omission": omission,
        "replicates": int(replicates),
        "omission_rate": meas.get("omission_rate", np.nan),
        "sensitivity": meas.get("sensitivity", np.nan),
        "specificity": meas.get("specificity", np.nan),
        "commission_rate": meas.get("commission_rate", np.nan),
        "correct_classification_rate": meas.get("correct_classification_rate", np.nan),
        "tss": meas.get("tss", np.nan),
        "kappa": meas.get("kappa", np.nan),
        "boyce": boyce,
        "n_other": int(s_ev_o.size),
        "other_kind": other_kind,
        "area_source": area_source,
        "dropped_no_prediction": no_pred,
        "warnings": "; ".join(fold_warn),
    }
    warnings.extend(fold_warn)
    used = np.isfinite(scores["prediction"].to_numpy(float))
    scores["predicted_present"] = np.where(used, (scores["prediction"].to_numpy(float) >= thr.value), None)
    return FoldEvaluation(row, proc.curve.x, proc.curve.y, proc.ratios, scores)


def _score_table(assignment, label, parts) -> pd.DataFrame:
    """Every record a fold's tests looked at, its prediction, and why it was left out if it was."""
    frames = []
    for rows, vals, role in parts:
        v = np.asarray(vals, float)
        if rows.size == 0 or v.size != rows.size:  # calibration background is only scored for max-tss
            continue
        frames.append(pd.DataFrame({
            "record_id": assignment.record_id[rows].astype(str),
            "fold": str(label),
            "role": role,
            "kind": assignment.kind[rows].astype(str),
            "prediction": v,
            "dropped": np.where(np.isfinite(v), "", "no-prediction"),
        }))
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(
        columns=["record_id", "fold", "role", "kind", "prediction", "dropped"])


MEASURES = ["area_predicted", "auc", "auc_ratio", "auc_ratio_mean", "omission_rate", "sensitivity",
            "specificity", "commission_rate", "correct_classification_rate", "tss", "kappa", "boyce"]


def _summarise(folds, alpha) -> dict:
    rows = [f.row for f in folds]
    out = {"fold": "all", "n_evaluation": int(sum(r["n_evaluation"] for r in rows)),
           "successes": int(sum(r["successes"] for r in rows))}
    for m in MEASURES:
        v = np.array([r[m] for r in rows], float)
        ok = np.isfinite(v)
        out[m] = float(v[ok].mean()) if ok.any() else np.nan
        out[f"{m}_sd"] = float(v[ok].std(ddof=1)) if ok.sum() > 1 else np.nan
    for p in ("binomial_p", "partial_roc_p"):
        # A bootstrap p of 0 means "below 1/B"; Fisher's method needs p > 0.
        vals = [max(r[p], 1.0 / (r["replicates"] + 1)) if p == "partial_roc_p" else r[p] for r in rows]
        out[p] = combine_pvalues_fisher(vals).pvalue
    out["significant"] = bool(out["binomial_p"] < alpha and out["partial_roc_p"] < alpha)
    out["interpretation"] = "interpret" if out["significant"] else "do not interpret"
    out["n_significant_folds"] = int(sum(r["significant"] for r in rows))
    out["threshold_rule"] = rows[0]["threshold_rule"] if rows else ""
    out["omission"] = rows[0]["omission"] if rows else np.nan
    out["replicates"] = rows[0]["replicates"] if rows else 0
    out["warnings"] = "p-values combined with Fisher's method; measures are fold means (SD in *_sd columns)"
    return out


def _extent_check(assignment, pattern, names, region, warnings):
    """Warn when the testing region dwarfs the area the records occupy."""
    import shapely

    from splitter.geo import equal_area_crs, planar_km
    from splitter.io.rasters import valid_cells

    first = names.get(assignment.folds[0], str(assignment.folds[0]))
    region_km2 = float(sum(b.areas.sum() for b in valid_cells(_fold_raster(pattern, first), region)))
    kept = (assignment.fold >= 0) & (assignment.kind == "presence")
    pts = assignment.records.points.take(np.flatnonzero(kept))
    crs = equal_area_crs(pts) if pts.geographic else pts.crs
    x, y = planar_km(pts, crs)
    hull = shapely.MultiPoint(np.column_stack([x, y])).convex_hull.buffer(EXTENT_BUFFER_KM)
    ratio = region_km2 / hull.area if hull.area > 0 else np.inf
    if ratio > EXTENT_RATIO:
        warnings.append(
            f"the testing region ({region_km2:,.0f} km²) is {ratio:.1f} times the presences' convex hull "
            f"buffered by {EXTENT_BUFFER_KM:g} km; a large background inflates AUC-type measures "
            "(Global Ecology and Biogeography 2008); consider cutting it with --region"
        )


def _predict_window(env, window, est) -> np.ndarray:
    """Model predictions for one window of the covariate stack (NaN where any covariate is missing)."""
    import rasterio

    layers = []
    for p in env:
        with rasterio.open(p) as src:
            layers.append(src.read(1, window=window, masked=True).astype("float64").filled(np.nan))
    stack = np.stack(layers, axis=-1)
    valid = np.isfinite(stack).all(axis=-1)
    out = np.full(valid.shape, np.nan)
    if valid.any():
        out[valid] = predict_suitability(est, stack[valid])
    return out


def _fit_and_predict(assignment, model, env, prediction_dir, seed, names, notes, progress) -> str:
    """Fit a model per fold on calibration records and write prediction rasters."""
    from sklearn.base import clone

    from splitter.io.rasters import raster_info, sample_rasters, sample_valid_locations, write_geotiff_by_rows

    env = [str(p) for p in (env or ())]
    if not env:
        raise InputError("--model needs covariate rasters: give --env RASTER (repeatable).")
    if prediction_dir is None:
        raise InputError("--model needs an output folder for the prediction rasters.")
    infos = [raster_info(p) for p in env]
    first = infos[0]
    for inf in infos[1:]:
        if (inf.width, inf.height) != (first.width, first.height) or inf.transform != first.transform or inf.crs != first.crs:
            raise InputError(f"{inf.path}: the model needs all --env rasters on one grid (same CRS, size and cells) as {first.path}; resample it first.")
    X_rec, _ = sample_rasters(env, assignment.records.points)
    kind = assignment.kind
    bg_extra = None
    if not np.any((assignment.fold >= 0) & (kind != "presence")):
        pts = sample_valid_locations(env, 10_000, seed)
        bg_extra, _ = sample_rasters(env, pts)
        notes.append("no background or absences in the fold table: 10,000 background points were sampled over the rasters for the model")
    out_dir = Path(prediction_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    for i in assignment.folds:
        cal = assignment.calibration(i)
        pres = cal[kind[cal] == "presence"]
        other = cal[kind[cal] != "presence"]
        Xp = X_rec[pres]
        Xp = Xp[np.isfinite(Xp).all(axis=1)]
        Xb = X_rec[other] if bg_extra is None else bg_extra
        Xb = Xb[np.isfinite(Xb).all(axis=1)]
        if isinstance(model, str):
            if model != "baseline":
                raise InputError(f"--model {model}: the built-in model is 'baseline'.")
            est = fit_baseline(Xp, Xb, seed=seed)
        else:
            est = clone(model)
            X = np.vstack([Xp, Xb])
            y = np.r_[np.ones(len(Xp)), np.zeros(len(Xb))]
            est.fit(X, y)
        label = names.get(i, str(i))
        # Predict window by window so covariate grids larger than memory work.
        write_geotiff_by_rows(out_dir / f"fold_{label}.tif", first.width, first.height, first.transform, first.crs,
                              lambda w, est=est: _predict_window(env, w, est))
        if progress is not None:
            progress()
    notes.append(f"model fitted per fold on that fold's calibration records; predictions in {out_dir}")
    return str(out_dir / "fold_{fold}.tif")
