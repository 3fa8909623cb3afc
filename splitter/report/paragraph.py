"""The methods paragraph, written from a run's recorded parameters and results.

Every number in the text comes from the run's files (design sidecar, and the
audit, evaluation and range results read back from their JSON) through the
formatters below, which the appendix tables use too, so text and tables always
agree and a reader (or a test) can parse the numbers back:

* counts: plain integers, no thousands separator (``2430``);
* distances: km with one decimal (``123.9 km``);
* shares, AUC, AUC ratios, E and alpha: three decimals or fewer, trailing
  zeros kept for shares and ratios (``0.050``), not for E/alpha (``0.05``);
* p-values: :func:`splitter.report.numbers.fmt_p`, three significant digits,
  ``< 0.001`` below 0.001 (the terminal tables use the same function).
"""

from __future__ import annotations

import math

import numpy as np

from splitter.report.numbers import fmt_p  # one p-value format for text, tables and terminal

METHOD_WORDS = {
    "blocks": "spatial blocks",
    "hexagons": "hexagonal blocks",
    "checkerboard": "a checkerboard",
    "clusters": "environmental clusters",
    "groups": "groups, leaving one group out",
    "holdout-group": "a one-way group holdout",
    "random": "random assignment",
    "leave-one-out": "leave-one-out",
    "period": "contiguous time windows",
    "holdout-period": "a one-way time holdout",
}


# --- number formats shared by text and tables -------------------------------------------------

def fmt_count(n) -> str:
    """An integer count: ``2430``."""
    return str(int(n))


def fmt_km(x) -> str:
    """A distance in km with one decimal, unit included: ``123.9 km``."""
    return f"{float(x):.1f} km"


def fmt_km_value(x) -> str:
    """A distance in km with one decimal, no unit (table cells)."""
    return "" if x is None or not math.isfinite(float(x)) else f"{float(x):.1f}"


def fmt_share(x) -> str:
    """A share, AUC or ratio with three decimals: ``0.824``."""
    return "" if x is None or not math.isfinite(float(x)) else f"{float(x):.3f}"


def fmt_level(x) -> str:
    """A chosen level (E, alpha, a quantile) as given: ``0.05``."""
    return f"{float(x):g}"


def fmt_list(items) -> str:
    """``a``, ``a and b``, ``a, b and c``.

    Examples
    --------
    >>> fmt_list([86, 86, 85])
    '86, 86 and 85'
    """
    items = [str(i) for i in items]
    if not items:
        return ""
    if len(items) == 1:
        return items[0]
    return ", ".join(items[:-1]) + " and " + items[-1]


#: Per-fold lists longer than this are summarised (range and total) instead of listed.
MAX_LISTED = 12


def fold_values(values, total: bool = True) -> str:
    """Per-fold counts as a list (``86, 86 and 85``), or a summary for many folds.

    Examples
    --------
    >>> fold_values([3, 4])
    '3 and 4'
    >>> fold_values([1] * 20)
    'from 1 to 1 (total 20 over 20 folds)'
    >>> fold_values([5, 6] * 10, total=False)
    'from 5 to 6 (over 20 folds)'
    """
    values = [int(v) for v in values]
    if len(values) <= MAX_LISTED:
        return fmt_list(fmt_count(v) for v in values)
    what = f"total {fmt_count(sum(values))} over" if total else "over"
    return f"from {fmt_count(min(values))} to {fmt_count(max(values))} ({what} {fmt_count(len(values))} folds)"


def _num(v):
    try:
        f = float(v)
    except (TypeError, ValueError):
        return float("nan")
    return f


def threshold_words(rule: str) -> str:
    """Plain words for a threshold rule's text form."""
    rule = str(rule)
    name, _, arg = rule.partition(":")
    if name == "lowest":
        return "the lowest prediction at a calibration presence"
    if name == "quantile":
        q = _num(arg)
        return (f"the {fmt_level(q)} quantile of predictions at calibration presences "
                f"(at most {fmt_level(q * 100)}% of calibration presences predicted absent)")
    if name == "value":
        return f"the fixed value {arg}"
    if name == "max-tss":
        return "the value maximising TSS on the calibration records"
    return f"the rule {rule}"


# --- sentences ------------------------------------------------------------------------------

def records_sentence(design: dict) -> str:
    rec = design.get("records", {}) or {}
    dropped = rec.get("dropped", {}) or {}
    n_dropped = int(sum(int(v) for v in dropped.values()))
    text = (f"The fold table holds {fmt_count(rec.get('rows', 0))} rows: {fmt_count(rec.get('presence', 0))} presence, "
            f"{fmt_count(rec.get('absence', 0))} absence and {fmt_count(rec.get('background', 0))} background records; "
            f"{fmt_count(n_dropped)} rows were dropped")
    if dropped:
        text += " (" + ", ".join(f"{k}: {fmt_count(v)}" for k, v in sorted(dropped.items())) + ")"
    if int(rec.get("calibration_only", 0) or 0):
        text += f", and {fmt_count(rec['calibration_only'])} records are used for calibration only"
    text += "."
    if design.get("generalised_km"):
        text += (f" Its coordinates were written generalised to the centres of {fmt_km(_num(design['generalised_km']))} "
                 f"cells; the folds were made from the exact coordinates.")
    p = design.get("parameters", {}) or {}
    if p.get("presence_before_thinning") is not None:
        how = ("one presence was kept per cell of the first covariate raster" if p.get("thin") == "cell" else
               f"presences were thinned so that no two lie closer than {fmt_km(_num(p.get('thin')))}")
        text += (f" Before folds were made, {how} (chosen at random, seed {design.get('seed', p.get('seed'))}): "
                 f"{fmt_count(p['presence_before_thinning'])} presences before thinning, "
                 f"{fmt_count(p['presence_after_thinning'])} after; the others are kept in the fold table, "
                 f"dropped as \"thinned\".")
    return text


def range_sentence(est) -> str:
    """The range estimate (a RangeEstimate) in one or two sentences."""
    covs = list(dict.fromkeys(f.covariate for f in est.fits))
    text = (f"The autocorrelation range was estimated from empirical semivariograms of {fmt_count(len(covs))} "
            f"covariates ({fmt_list(covs)}), each fitted with spherical and exponential models by weighted least squares; "
            f"the suggested block size is {fmt_km(est.suggested_block_km)}")
    if est.summary_rule:
        text += f" ({est.summary_rule})"
    text += "."
    parts = []
    for f in (f for f in est.fits if est.best[f.covariate] is f):
        if f.range_at_bound:
            parts.append(f"{f.covariate}: range not reached within the sampled distances")
        else:
            parts.append(f"{f.covariate}: {fmt_km(f.range_km)} ({f.model})")
    if parts:
        text += " Chosen effective ranges: " + "; ".join(parts) + "."
    return text


def _design_sentences(split, plane_words: str) -> list[str]:
    crs = split.geometry_crs
    if crs is not None and (crs.is_projected or crs.type_name == "Engineering CRS"):
        from splitter.report.maps import MapPlane

        plane_words = MapPlane(crs).describe()
    d = split.design
    p = split.parameters
    method = split.method
    k = int(d.get("n_folds", p.get("folds", 0)) or 0)
    rec = d.get("records", {}) or {}
    seed = d.get("seed", p.get("seed"))
    how = METHOD_WORDS.get(method, f"the given fold column ({method})")
    kept = fmt_count(rec.get("kept", rec.get("rows", 0)))
    out = []
    size = p.get("block_size_km", d.get("block_size_km"))
    if method in ("blocks", "hexagons", "checkerboard") and size is not None:
        shape = ("hexagons with the area of a square block of " if method == "hexagons"
                 else "square cells of ")
        s = (f"The {kept} kept records were assigned to {fmt_count(k)} folds by {how}: {shape}{fmt_km(size)} "
             f"laid in the {plane_words}")
        off = p.get("grid_offset_km")
        if off and len(off) == 2:
            s += f", with the grid origin shifted by {fmt_km(off[0])} east and {fmt_km(off[1])} north"
        s += f" (seed {seed})."
        out.append(s)
        rule = p.get("block_size_rule", "given")
        if rule == "auto":
            out.append("The block size equals the estimated autocorrelation range (block-size rule: auto).")
        elif rule == "match":
            out.append("The block size was chosen from a ladder of sizes as the one whose evaluation-to-calibration "
                       "distances best match the prediction-location-to-record distances (block-size rule: match).")
        else:
            out.append("The block size was set by the analyst (block-size rule: given).")
        if method == "checkerboard":
            out.append("Cells take folds in a fixed pattern so that neighbouring cells differ "
                       "(2 folds: rook neighbours; 4 folds: a 2 x 2 tile; 5 or more: fold = (i + 2j) mod k).")
        elif p.get("occupied_cells") is not None:
            imb = ", ".join(f"{k} {fmt_share(_num(p.get(f'{k}_imbalance')))}" for k in ("presence", "absence", "background")
                            if p.get(f"{k}_imbalance") is not None)
            out.append(f"The {fmt_count(p['occupied_cells'])} occupied cells were allotted to folds so that presence "
                       f"counts (then counts of the other records) per fold are as even as possible "
                       f"(imbalance reported by the design: {imb}).")
    elif method == "clusters":
        covs = p.get("covariates") or []
        out.append(f"The {kept} kept records were assigned to {fmt_count(k)} folds by {how}: k-means (seed {seed}) on "
                   f"the covariates {fmt_list(covs)}, standardised on {p.get('standardised_on', 'the records')}.")
    elif method == "groups":
        groups = p.get("fold_groups") or {}
        named = (" (" + "; ".join(f"fold {f}: {g}" for f, g in list(groups.items())[:MAX_LISTED])
                 + ("; ..." if len(groups) > MAX_LISTED else "") + ")") if groups else ""
        out.append(f"The {kept} kept records were assigned to {fmt_count(k)} folds by {how}: one fold per value of "
                   f"the column `{p.get('group_column', '?')}`{named}.")
    elif method == "holdout-group":
        out.append(f"The {kept} kept records were split by {how} on the column `{p.get('group_column', '?')}`: "
                   f"calibration on {fmt_list(p.get('calibrate_on') or ['the other groups'])}, evaluation on "
                   f"{fmt_list(p.get('evaluate_on') or ['the remaining groups'])}.")
    elif method == "random":
        out.append(f"The {kept} kept records were assigned to {fmt_count(k)} folds by {how}, without regard to "
                   f"location (seed {seed}).")
    elif method == "leave-one-out":
        out.append(f"The {kept} kept records were assigned to {fmt_count(k)} folds by {how}: each presence is "
                   f"evaluated once, in a fold of its own.")
    elif method == "period":
        spans = p.get("fold_periods") or {}
        named = "; ".join(f"fold {f}: {v[0]:g}-{v[1]:g}" for f, v in list(spans.items())[:MAX_LISTED] if len(v) == 2)
        out.append(f"The {kept} kept records were assigned to {fmt_count(k)} folds by {how} of the column "
                   f"`{p.get('time_column', '?')}`, cut so presence counts per window are as even as possible"
                   + (f" ({named})" if named else "") + f"; records without a time were dealt at random (seed {seed}).")
    elif method == "holdout-period":
        out.append(f"The {kept} kept records were split by {how} on the column `{p.get('time_column', '?')}`: "
                   f"calibration on records before {_num(p.get('calibrate_before')):g}, evaluation on the rest.")
    else:
        out.append(f"The {kept} kept records were in {fmt_count(k)} folds given by the analyst.")

    if method != "holdout-period" and p.get("calibrate_before") is not None:
        out.append(f"Each fold was evaluated on its records dated from {_num(p['calibrate_before']):g} on (column "
                   f"`{p.get('time_column', '?')}`) and calibrated on earlier records outside it; the fold's earlier "
                   "records and other folds' later records were left out of its calibration set (counted as gaps).")
    buffer = _num(d.get("buffer_km", p.get("buffer_km", 0)) or 0)
    folds = d.get("folds", []) or []
    if buffer > 0:
        gaps = fold_values(f.get("gap", 0) for f in folds)
        out.append(f"A buffer of {fmt_km(buffer)} was applied: calibration records closer than {fmt_km(buffer)} to a "
                   f"fold's evaluation records were left out of that fold's calibration set "
                   f"({gaps} records left out, fold by fold).")
    else:
        out.append("No buffer was applied.")
    if folds:
        ev = fold_values(f.get("evaluation_presence", 0) for f in folds)
        cal = fold_values((f.get("calibration_presence", 0) for f in folds), total=False)
        out.append(f"Evaluation presences per fold: {ev}; calibration presences per fold: {cal}.")
    return out


def _audit_sentences(split) -> list[str]:
    a = split.audit
    if a is None:
        return ["The split was not audited for residual dependence (no audit/audit.json in its folder)."]
    ctx = split.audit_context
    d = a.distance
    text = "Residual dependence was audited per fold"
    if d.range_km is not None:
        text += f" against an autocorrelation range of {fmt_km(d.range_km)}"
        if ctx.get("range_source"):
            src = str(ctx["range_source"]).split(" (")[0]
            text += f" ({src})"
    text += "."
    out = [text]
    med, within = d.nn_median_km, d.share_within_range
    if np.isfinite(med).any():
        s = (f"The median distance from an evaluation record to its nearest calibration record ran from "
             f"{fmt_km(np.nanmin(med))} to {fmt_km(np.nanmax(med))} across folds")
        if np.isfinite(within).any():
            s += (f", and the share of evaluation records within the range of a calibration record from "
                  f"{fmt_share(np.nanmin(within))} to {fmt_share(np.nanmax(within))}")
        out.append(s + ".")
    if a.rules:
        out.append("Rules applied (thresholds in the audit table): " +
                   "; ".join(f"{r['name']} (threshold {fmt_level(r['threshold'])})" for r in a.rules) + ".")
    v = a.verdicts
    out.append(f"{fmt_count(v.count('independent'))} of {fmt_count(len(v))} folds were judged independent, "
               f"{fmt_count(v.count('dependent'))} dependent and {fmt_count(v.count('insufficient'))} "
               f"insufficient; the split's audit verdict is {a.verdict}.")
    return out


def _model_words(params: dict) -> str:
    model = params.get("model")
    if model == "baseline":
        absent = any("presence-absence model" in str(n) for n in params.get("notes") or [])
        covs = params.get("covariates") or []
        return (f"the built-in baseline {'presence-absence' if absent else 'presence-background'} model"
                + (f" on the site covariates {fmt_list(covs)}" if covs else "")
                + ", calibrated on each fold's calibration set")
    if model and model != "user predictions":
        return f"the model `{model}`, calibrated on each fold's calibration set"
    if params.get("prediction_table"):
        return "the analyst's predictions (a prediction table)"
    return "the analyst's prediction rasters, one per fold"


def _evaluation_sentences(split) -> list[str]:
    e = split.evaluation
    if e is None:
        return ["The split was not evaluated (no evaluation/evaluation.json in its folder)."]
    par = e.parameters
    k = len(e.folds)
    n_sig = sum(f.significant for f in e.folds)
    out = [
        f"Predictions came from {_model_words(par)}. The threshold was chosen from calibration presences only: "
        f"`{par.get('threshold_rule')}`, {threshold_words(par.get('threshold_rule'))}.",
        f"Significance was tested first, per fold: a one-tailed cumulative binomial test of the evaluation presences "
        f"predicted present against the area predicted present, and a partial ROC test with omission tolerance "
        f"E = {fmt_level(par.get('omission'))}, in which the observed AUC ratio (all evaluation presences) was compared "
        f"with the ratios of {fmt_count(par.get('replicates', 0))} sets of as many presences placed at random in the "
        f"testing region (each place as likely as its area), p = (1 + number of random ratios at least as large) / "
        f"(1 + {fmt_count(par.get('replicates', 0))}), a Monte Carlo p-value that is never 0 and whose floor shows the "
        f"number of replicates (Davison & Hinkley, Bootstrap Methods and their Application, 1997). "
        f"A fold's p is the larger of the two, since both must reject"
        + (f"; it was adjusted across the {fmt_count(k)} folds with Holm's step-down procedure (\"A simple "
           f"sequentially rejective multiple test procedure\", Scandinavian Journal of Statistics 1979)"
           if par.get("adjust", "holm") == "holm" else "")
        + f", and a fold is significant when {'its adjusted' if par.get('adjust', 'holm') == 'holm' else 'its'} p is "
        f"below alpha = {fmt_level(par.get('alpha'))}. A bootstrap of 50% of the evaluation presences "
        f"({fmt_count(par.get('replicates', 0))} replicates, seed {par.get('seed')}) describes the ratio's 95% interval "
        f"only; the conventional bootstrap p (share of replicates with ratio <= 1) is reported beside it for comparison "
        f"with published studies but not used, as it calls models of no skill significant when presences are few.",
    ]
    summary = e.summary
    if summary.jackknife is not None:
        jack = summary.jackknife
        out.append(
            f"Every fold held a single evaluation presence, so the split was judged by the jackknife test "
            f"(\"Predicting species distributions from small numbers of occurrence records\", Journal of "
            f"Biogeography 2007): {fmt_count(jack.statistic)} of {fmt_count(jack.n)} held-out presences were "
            f"predicted present, p = {fmt_p(jack.pvalue)} (the exact upper tail of the sum of the folds' independent "
            f"chances, each its fold's share of area predicted present)."
        )
    elif summary.combined_test == "holm":
        out.append(f"The split as a whole was judged by its smallest Holm-adjusted p, {fmt_p(summary.pvalue)}.")
    out.append(_data_used_sentence(e.folds))
    s = f"{fmt_count(n_sig)} of {fmt_count(k)} folds were significant"
    good = [f for f in e.folds if f.significant]
    ratios = np.array([f.partial_roc.auc_ratio for f in good], float)
    aucs = np.array([f.partial_roc.auc for f in good], float)
    if good and np.isfinite(ratios).any():
        s += (f"; among them the observed partial AUC ratio ran from {fmt_share(np.nanmin(ratios))} to "
              f"{fmt_share(np.nanmax(ratios))} and the full AUC from {fmt_share(np.nanmin(aucs))} to "
              f"{fmt_share(np.nanmax(aucs))}")
    out.append(s + ".")
    bad = [f.fold for f in e.folds if not f.significant]
    if bad:
        out.append(f"Fold{'s' if len(bad) > 1 else ''} {fmt_list(bad)} {'were' if len(bad) > 1 else 'was'} not "
                   f"significant: marked \"do not interpret\", and {'their' if len(bad) > 1 else 'its'} performance "
                   f"figures are not findings.")
    return out


_OTHER_WORDS = {"absence": "evaluation absences (sites surveyed where the species was not found)",
                "background": "evaluation background points"}


def _data_used_sentence(folds) -> str:
    """Which kind of data each test set the evaluation presences against."""
    raster = any(f.area_source.startswith("raster") for f in folds)
    others = sorted({f.other_kind for f in folds if f.other_kind in _OTHER_WORDS and f.n_other > 0})
    other = " or ".join(_OTHER_WORDS[o] for o in others) if others else "no absences or background"
    again = " or ".join(_OTHER_WORDS[o].split(" (")[0] for o in others) if others else other
    if raster:
        tests = ("the binomial test's expected share and the partial ROC (and full AUC) used the prediction "
                 "raster's cells, weighted by area")
    else:
        tests = (f"with no prediction raster, the binomial test's expected share was the share of {other} predicted "
                 f"present, and the partial ROC (and full AUC) compared evaluation presences with {again}")
    meas = {"absence": "true specificity and commission rate (absences are surveyed)",
            "background": "pseudo-specificity and pseudo-commission rate (background is not known to be unoccupied)"}
    m = "; ".join(meas[o] for o in others) if others else "not computed"
    return (f"Data each test used: {tests}; the confusion-matrix measures compared evaluation presences with "
            f"{again if not raster else other}, giving {m}" + (" (a fold with absences used them, not background)" if len(others) > 1 else "")
            + ".")


def split_paragraph(split, plane_words: str, include_records: bool = False) -> str:
    """One paragraph describing how a split was made, audited and evaluated."""
    parts = [f"Split `{split.name}`."]
    if include_records:
        parts.append(records_sentence(split.design))
    parts += _design_sentences(split, plane_words)
    parts += _audit_sentences(split)
    parts += _evaluation_sentences(split)
    return " ".join(parts)


def comparison_paragraph(splits) -> str:
    """One sentence per split, side by side, when a run holds several."""
    bits = []
    for s in splits:
        b = f"`{s.name}` ({METHOD_WORDS.get(s.method, s.method)})"
        if s.audit is not None:
            v = s.audit.verdicts
            b += (f": audit verdict {s.audit.verdict} ({fmt_count(v.count('independent'))} of "
                  f"{fmt_count(len(v))} folds independent)")
        else:
            b += ": not audited"
        if s.evaluation is not None:
            folds = s.evaluation.folds
            b += f", {fmt_count(sum(f.significant for f in folds))} of {fmt_count(len(folds))} folds significant"
        else:
            b += ", not evaluated"
        bits.append(b)
    text = "Side by side: " + "; ".join(bits) + "."
    dep = [s.name for s in splits if s.audit is not None and s.audit.verdict == "dependent"]
    ind = [s.name for s in splits if s.audit is not None and s.audit.verdict == "independent"]
    if dep and ind:
        text += (f" Evaluation records of a split judged dependent ({fmt_list(f'`{n}`' for n in dep)}) sit close to "
                 f"calibration records, so its tests mostly measure interpolation between neighbours; the "
                 f"split judged independent ({fmt_list(f'`{n}`' for n in ind)}) is the one whose results speak to "
                 f"prediction away from the calibration data.")
    return text
