"""Per-fold evaluation of the user's predictions (or the baseline model's).

For each fold: a threshold from calibration presences, the cumulative binomial
test, the partial ROC with bootstrap, then the performance measures. A fold is
significant when both tests reject the null of no predictive ability at
``alpha``; a fold that is not is marked "do not interpret" before any measure.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from splitter.columns import match_column
from splitter.errors import InputError
from splitter.io.journal import make_folder
from splitter.io.prediction_table import read_prediction_table
from splitter.evaluate import (
    ThresholdRule,
    binomial_test,
    boyce_index,
    choose_threshold,
    combine_pvalues_fisher,
    confusion_measures,
    fit_baseline,
    holm_adjust,
    jackknife_test,
    partial_roc,
    predict_suitability,
)
from splitter.evaluate.results import CANNOT_OMIT, MEASURES, EvaluationResult, FoldEvaluation, SplitSummary
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

ADJUSTMENTS = ("holm", "none")


def _kind_rows(assignment, rows, kind):
    return rows[assignment.kind[rows] == kind]


def evaluate(
    assignment: FoldAssignment,
    *,
    predictions: str | None = None,
    prediction_table=None,
    model=None,
    env=(),
    covariates=(),
    region=None,
    threshold: str = "quantile:0.1",
    omission: float = 0.05,
    replicates: int = 1000,
    alpha: float = 0.05,
    adjust: str = "holm",
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
        rasters (writes ``prediction_dir/fold_{fold}.tif``) or on the
        ``covariates`` columns of the fold table (writes
        ``prediction_dir/predictions.csv``, used as the prediction table). With
        calibration absences it is fitted as a presence-absence model.
    covariates : list of str
        Covariate columns of the fold table's records, for ``model`` without rasters.
    threshold : str
        ``lowest``, ``quantile:Q``, ``value:V`` or ``max-tss``; always from calibration data.
    omission, replicates, alpha, seed
        Partial ROC omission tolerance E, bootstrap and null replicates B,
        significance level, seed.
    adjust : {"holm", "none"}
        How a fold's p (the larger of its binomial and partial-ROC p) is adjusted
        for testing k folds: Holm's step-down adjustment (default), or none.

    Returns
    -------
    EvaluationResult
    """
    rule = ThresholdRule.parse(threshold)
    covariates = [c.strip() for v in (covariates or ()) for c in str(v).split(",") if c.strip()]
    if not 0 < alpha < 1:
        raise InputError(f"alpha={alpha}: give a level between 0 and 1 (e.g. 0.05).")
    if adjust not in ADJUSTMENTS:
        raise InputError(f"adjust={adjust!r}: use 'holm' (Holm's adjustment across folds) or 'none'.")
    if isinstance(model, str) and model != "baseline":
        raise InputError(f"model={model!r}: the built-in model is 'baseline' (pass other estimators from Python).")
    if covariates and model is None:
        raise InputError("`covariates` columns are for a model fitted here: give `model` (baseline) too.")
    if predictions is None and prediction_table is None and model is None:
        raise InputError("give predictions: --predictions 'PATTERN_{fold}.tif', --prediction-table FILE or --model "
                         "baseline with --env RASTER or --covariate-column COLUMN.")
    if assignment.records is None:
        raise InputError("the fold assignment carries no records; build it with splitter.design or splitter.read_fold_table.")
    names = fold_names or {i: str(i) for i in assignment.folds}
    warnings: list[str] = []
    notes: list[str] = []
    region_geom = None
    if region is not None:
        from splitter.io.rasters import read_region

        region_geom = read_region(region) if not hasattr(region, "geometry") else region

    if covariates and env:
        raise InputError("give the model's covariates as `env` rasters or as `covariates` columns, not both.")
    if model is not None and covariates:
        if predictions is not None or prediction_table is not None:
            raise InputError("give either a `model` to fit or predictions (`predictions`, `prediction_table`), not both.")
        prediction_table = _fit_and_predict_columns(assignment, model, covariates, prediction_dir, seed, names,
                                                    notes, progress)
        model_label = "baseline" if isinstance(model, str) else type(model).__name__
    elif model is not None:
        predictions = _fit_and_predict(assignment, model, env, prediction_dir, seed, names, notes, progress)
        model_label = "baseline" if isinstance(model, str) else type(model).__name__
    else:
        model_label = "user predictions"

    g = assignment.generalised_km
    if g and (predictions is not None or model is not None and not covariates):  # rasters read at the points
        notes.append(f"the fold table's coordinates are generalised to {g:g} km cells: the rasters were read at cell "
                     f"centres (each off by up to {g * 0.5 ** 0.5:.3g} km), not at the records' places; evaluate the "
                     "exact fold table for scores at the records themselves")
    if predictions is not None and "{fold}" not in str(predictions):
        raise InputError(f"predictions={str(predictions)!r}: give a pattern with {{fold}} in it (e.g. "
                         "'preds/fold_{fold}.tif'), so that each fold is tested on its own model's predictions.")
    table = read_prediction_table(prediction_table) if prediction_table is not None else None
    if table is not None:
        known = set(assignment.record_id.astype(str))
        ids = set(table["record_id"])
        matched = len(ids & known)
        if matched == 0:
            raise InputError(
                f"prediction_table: none of its {len(ids)} record ids matched the fold table's {len(known)} "
                f"(matched 0; e.g. {sorted(ids)[0]!r} against {sorted(known)[0]!r}); its record_id column must hold "
                "the fold table's record_id values.")
    folds_out = []
    for i in assignment.folds:
        label = names.get(i, str(i))
        fe = _evaluate_fold(assignment, i, label, predictions, table, region_geom, rule, omission,
                            replicates, seed, warnings, notes)
        folds_out.append(fe)
        if progress is not None:
            progress()
    folds_out = _decide(folds_out, alpha, adjust)
    k = len(folds_out) if adjust == "holm" else 1
    if k / (int(replicates) + 1) >= alpha:
        # The partial ROC's p is at least 1 / (B + 1); Holm multiplies the smallest by k.
        warnings.append(
            f"with {int(replicates)} replicates the partial ROC's p is at least 1/{int(replicates) + 1}"
            + (f", which Holm's adjustment over {k} folds raises to {k}/{int(replicates) + 1}" if k > 1 else "")
            + f"; no fold can reach alpha {alpha:g}: use at least {int(np.ceil(k / alpha))} replicates"
        )
    summary = _summarise(folds_out, alpha)
    if predictions is not None:
        _extent_check(assignment, folds_out[0].region_km2, warnings)
    params = {
        "threshold_rule": str(rule), "omission": omission, "replicates": int(replicates),
        "alpha": alpha, "seed": int(seed), "model": model_label, "covariates": covariates,
        "predictions": str(predictions) if predictions is not None else None,
        "prediction_table": str(prediction_table) if isinstance(prediction_table, (str, Path)) else None,
        "adjust": adjust,
        "significance_rule": (
            "p_fold = max(binomial p, partial ROC p); significant when "
            + ("Holm-adjusted p_fold < alpha" if adjust == "holm" else "p_fold < alpha")
        ),
        "combined_test": summary.combined_test,
        "notes": notes,
        "extent_check": {"buffer_km": EXTENT_BUFFER_KM, "ratio": EXTENT_RATIO},
    }
    return EvaluationResult(tuple(folds_out), summary, params, tuple(warnings))


def _scores_from_table(table, label, rows, assignment) -> np.ndarray:
    sub = table[table["fold"] == str(label)]
    if sub.empty:
        held = ", ".join(sorted(set(table["fold"]))[:6])
        raise InputError(f"the prediction table has no rows for fold {label} (its folds: {held}); add "
                         "record_id,fold,prediction rows for it, the fold named as in the fold table.")
    s = pd.Series(sub["prediction"].to_numpy(float), index=sub["record_id"].to_numpy(str))  # one per record (read_prediction_table)
    return s.reindex(assignment.record_id[rows].astype(str)).to_numpy(float)


def _fold_raster(pattern, label) -> Path:
    path = Path(str(pattern).replace("{fold}", str(label)))
    if not path.exists():
        raise InputError(f"{path}: prediction raster for fold {label} not found; check --predictions (it must contain {{fold}}).")
    return path


def _evaluate_fold(assignment, i, label, pattern, table, region, rule, omission, replicates,
                   seed, warnings, notes) -> FoldEvaluation:
    ev = assignment.evaluation(i)
    cal = assignment.calibration(i)
    ev_p = _kind_rows(assignment, ev, "presence")
    # With both in the table, a survey's absences are what presences are set against
    # (true specificity, ROC of presences vs absences); background only without them.
    ev_o, other_kind = _other_rows(assignment.kind, ev)
    cal_p = _kind_rows(assignment, cal, "presence")
    cal_o, _ = _other_rows(assignment.kind, cal)
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
            # The testing region is the raster's valid cells, read once in windows and
            # kept in memory when they fit (else read again for each later pass).
            from splitter.io.rasters import valid_cells

            surf = evaluate_surface(lambda: valid_cells(path, region), s_ev_p, [thr.value], omission=omission,
                                    replicates=replicates, seed=seed)
            area_share, proc = float(surf.area_shares[0]), surf.partial_roc
            boyce = surf.boyce.statistic if surf.boyce is not None else np.nan
            cell_lo, cell_hi = surf.surface.value_min, surf.surface.value_max
            area_source = "raster cells (area-weighted)"
            region_km2 = surf.surface.total_weight
        else:
            if s_ev_o.size == 0:
                raise InputError("no raster and no evaluation background/absences with predictions; the binomial test needs one of them.")
            area_share = float(np.mean(s_ev_o >= thr.value))
            proc = partial_roc(s_ev_o, s_ev_p, None, omission=omission, replicates=replicates, seed=seed)
            boyce = boyce_index(s_ev_p, s_ev_o).statistic
            cell_lo, cell_hi = np.inf, -np.inf
            region_km2 = float("nan")
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
        meas = confusion_measures(s_ev_p, s_ev_o, thr.value, other_kind=other_kind)
    else:
        meas = None
        fold_warn.append(f"fold {label} has no evaluation background or absences: confusion-matrix measures not computed")
    if not proc.can_omit:
        fold_warn.append(f"fold {label}: the partial ROC {CANNOT_OMIT}; its significance comes from the null of "
                         "presences placed at random, not from the bootstrap")
    warnings.extend(fold_warn)
    used = np.isfinite(scores["prediction"].to_numpy(float))
    scores["predicted_present"] = np.where(used, (scores["prediction"].to_numpy(float) >= thr.value), None)
    p_fold = max(binom.pvalue, proc.pvalue)
    return FoldEvaluation(
        fold=str(label), n_evaluation=int(s_ev_p.size), threshold=thr, area_predicted=area_share,
        binomial=binom, partial_roc=proc, p_fold=p_fold, p_adjusted=p_fold, significant=False,
        measures=meas, boyce=float(boyce), n_other=int(s_ev_o.size), other_kind=other_kind,
        area_source=area_source, dropped_no_prediction=no_pred, warnings=tuple(fold_warn), scores=scores,
        region_km2=region_km2,
    )


def _decide(folds, alpha, adjust) -> list:
    """Each fold's verdict: p_fold, adjusted across folds (Holm) unless asked not to."""
    p = np.array([f.p_fold for f in folds], float)
    adjusted = holm_adjust(p) if adjust == "holm" else p
    return [replace(f, p_adjusted=float(a), significant=bool(a < alpha)) for f, a in zip(folds, adjusted)]


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




def _summarise(folds, alpha) -> SplitSummary:
    """The ``all`` row: a stated combined test, means over interpretable folds only."""
    rows = [f.to_row() for f in folds]
    good = [r for r, f in zip(rows, folds) if f.significant]
    means, sds = {}, {}
    for m in MEASURES:
        v = np.array([r[m] for r in good], float)
        ok = np.isfinite(v)
        means[m] = float(v[ok].mean()) if ok.any() else np.nan
        sds[m] = float(v[ok].std(ddof=1)) if ok.sum() > 1 else np.nan
    jack = None
    if folds and all(f.n_evaluation == 1 for f in folds):
        # Every fold holds one evaluation presence (leave-one-out): the jackknife test
        # ("Predicting species distributions from small numbers of occurrence records",
        # Journal of Biogeography 2007) decides for the split.
        jack = jackknife_test([f.binomial.statistic == 1 for f in folds], [f.area_predicted for f in folds])
        combined, pvalue = "jackknife", jack.pvalue
    else:
        # Holm's adjusted p-values: the split has skill when any fold is significant
        # after adjustment, so its p is the smallest adjusted p (a Bonferroni test of
        # "no fold has skill", which holds its size).
        combined = "holm"
        pvalue = float(np.min(holm_adjust([f.p_fold for f in folds]))) if folds else np.nan
    return SplitSummary(
        combined_test=combined,
        pvalue=pvalue,
        significant=bool(pvalue < alpha),
        n_folds=len(folds),
        n_significant_folds=int(sum(f.significant for f in folds)),
        n_interpretable=len(good),
        n_evaluation=int(sum(f.n_evaluation for f in folds)),
        successes=int(sum(f.binomial.statistic for f in folds)),
        means=means,
        sds=sds,
        binomial_fisher_p=combine_pvalues_fisher([f.binomial.pvalue for f in folds]).pvalue,
        partial_roc_fisher_p=combine_pvalues_fisher([f.partial_roc.pvalue for f in folds]).pvalue,
        threshold_rule=folds[0].threshold.rule if folds else "",
        omission=folds[0].partial_roc.omission if folds else np.nan,
        replicates=folds[0].partial_roc.replicates if folds else 0,
        jackknife=jack,
    )


def _extent_check(assignment, region_km2, warnings):
    """Warn when the testing region (the first fold's valid raster cells) dwarfs the area
    the records occupy."""
    import shapely

    from splitter.geo import equal_area_crs, planar_km

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


def _other_rows(kind, rows):
    """The records a model or test sets against presences: a survey's absences when
    there are any (the stronger comparison), else background."""
    absent = rows[kind[rows] == "absence"]
    return (absent, "absence") if absent.size else (rows[kind[rows] == "background"], "background")


def _fit(model, Xp, Xo, other_kind, seed):
    from sklearn.base import clone

    if isinstance(model, str):
        if model != "baseline":
            raise InputError(f"--model {model}: the built-in model is 'baseline'.")
        return fit_baseline(Xp, Xo, seed=seed, other_kind=other_kind)
    est = clone(model)
    est.fit(np.vstack([Xp, Xo]), np.r_[np.ones(len(Xp)), np.zeros(len(Xo))])
    return est


def _model_data_note(kinds_used: set, notes: list):
    if "absence" in kinds_used:
        notes.append("the model was fitted as a presence-absence model: calibration presences against calibration "
                     "absences (surveyed, not found)" + (" (folds without calibration absences: against background)"
                                                         if "background" in kinds_used else ""))
    else:
        notes.append("the model was fitted as a presence-background model: calibration presences against background")


def _fit_and_predict_columns(assignment, model, covariates, prediction_dir, seed, names, notes, progress) -> pd.DataFrame:
    """Fit a model per fold on calibration records' covariate columns; predict every record of the fold."""
    from splitter.io.atomic import atomic_write
    from splitter.io.records import covariate_numbers

    table = assignment.records.table
    cols = []
    for c in covariates:
        c = match_column(table.columns, c) or c  # any case, as every column option
        if c not in table.columns:
            raise InputError(f"covariates={c!r}: no such column in the fold table; columns are: "
                             f"{', '.join(map(str, table.columns))}.")
        cols.append(covariate_numbers(table[c]))
    X = np.column_stack(cols)
    finite = np.isfinite(X).all(axis=1)
    kind = assignment.kind
    used, parts = set(), []
    for i in assignment.folds:
        cal = assignment.calibration(i)
        cal = cal[finite[cal]]
        pres = cal[kind[cal] == "presence"]
        other, other_kind = _other_rows(kind, cal)
        if pres.size == 0 or other.size == 0:
            raise InputError(f"fold {i}: the model needs calibration presences and absences or background with "
                             "values in every covariates column.")
        used.add(other_kind)
        est = _fit(model, X[pres], X[other], other_kind, seed)
        rows = np.union1d(assignment.evaluation(i), cal)
        rows = rows[finite[rows]]
        parts.append(pd.DataFrame({"record_id": assignment.record_id[rows].astype(str),
                                   "fold": names.get(i, str(i)), "prediction": predict_suitability(est, X[rows])}))
        if progress is not None:
            progress()
    _model_data_note(used, notes)
    preds = pd.concat(parts, ignore_index=True)
    if prediction_dir is not None:
        out = Path(prediction_dir)
        make_folder(out)
        with atomic_write(out / "predictions.csv", "w") as f:
            preds.to_csv(f, index=False, lineterminator="\n", float_format="%.10g")
        notes.append(f"model fitted per fold on the covariate columns {', '.join(covariates)}; "
                     f"predictions in {out / 'predictions.csv'}")
    return preds


def _fit_and_predict(assignment, model, env, prediction_dir, seed, names, notes, progress) -> str:
    """Fit a model per fold on calibration records and write prediction rasters."""
    from splitter.io.rasters import raster_info, sample_rasters, sample_valid_locations, write_geotiff_by_rows

    env = [str(p) for p in (env or ())]
    if not env:
        raise InputError("--model needs covariates: give --env RASTER (repeatable) or covariates (columns of the fold table).")
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
    make_folder(out_dir)
    used = set()
    for i in assignment.folds:
        cal = assignment.calibration(i)
        pres = cal[kind[cal] == "presence"]
        other, other_kind = _other_rows(kind, cal)
        Xp = X_rec[pres]
        Xp = Xp[np.isfinite(Xp).all(axis=1)]
        if bg_extra is not None:
            Xb, other_kind = bg_extra, "background"
        else:
            Xb = X_rec[other]
        Xb = Xb[np.isfinite(Xb).all(axis=1)]
        used.add(other_kind)
        est = _fit(model, Xp, Xb, other_kind, seed)
        label = names.get(i, str(i))
        # Predict window by window so covariate grids larger than memory work.
        write_geotiff_by_rows(out_dir / f"fold_{label}.tif", first.width, first.height, first.transform, first.crs,
                              lambda w, est=est: _predict_window(env, w, est))
        if progress is not None:
            progress()
    _model_data_note(used, notes)
    notes.append(f"model fitted per fold on that fold's calibration records; predictions in {out_dir}")
    return str(out_dir / "fold_{fold}.tif")
