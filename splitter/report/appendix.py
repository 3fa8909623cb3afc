"""The methods appendix: Markdown, a self-contained HTML page, CSV tables and figures.

Built from a run folder alone (design sidecars, fold tables, audit and
evaluation files, the range estimate): every number in it is read from those
files, nothing is typed in by hand. The run folder is only read; everything is
written under OUT_DIR, atomically, and the same run folder always gives the
same bytes.

``build_appendix(run_dir, out_dir)`` is the entry point; its docstring has a
worked example on the demo's run folder.
"""

from __future__ import annotations

import math
import platform
import re
import shlex
import shutil
from dataclasses import dataclass, field
from importlib import metadata
from pathlib import Path

import numpy as np
import pandas as pd

from splitter.errors import InputError
from splitter.io.atomic import atomic_path, atomic_write
from splitter.io.journal import make_folder, remove
from splitter.io.paths import portable_text
from splitter.io.results import audit_frame, write_csv
from splitter.report import paragraph as P
from splitter.report.document import Bullets, Code, Document, Figure, Heading, Table, Text, to_markdown
from splitter.report.html import to_html
from splitter.report.maps import SPATIAL_METHODS, MapPlane, cell_grid, generalise_coordinates, map_extent, plot_fold_map
from splitter.report.evaluation_figures import plot_roc_panels
from splitter.report.rundir import Run, SplitRun, load_run, sha256_file
from splitter.report.style import save

__all__ = ["Appendix", "build_appendix"]

TITLE = "Methods appendix: evaluation folds, dependence audit and per-fold tests"
#: Packages whose versions the reproducibility block lists (import name -> distribution name).
PACKAGES = (("splitter", "splitter"), ("numpy", "numpy"), ("scipy", "scipy"), ("pandas", "pandas"),
            ("scikit-learn", "scikit-learn"), ("geopandas", "geopandas"), ("shapely", "shapely"),
            ("pyproj", "pyproj"), ("rasterio", "rasterio"), ("matplotlib", "matplotlib"))
#: Decimal places kept for generalised longitude/latitude (1e-7 degree is about 1 cm).
LONLAT_DECIMALS = 7


@dataclass(frozen=True)
class Appendix:
    """Where the appendix was written.

    Attributes
    ----------
    markdown, html : Path
    tables : list of Path
        CSV tables under ``tables/``.
    figures : list of Path
        PNG and SVG files under ``figures/``.
    generalise_km : float or None
    """

    markdown: Path
    html: Path
    tables: list = field(default_factory=list)
    figures: list = field(default_factory=list)
    generalise_km: float | None = None


# --- helpers ---------------------------------------------------------------------------------

def _safe(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "-", name).strip("-") or "split"


def _num(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def _version(dist: str) -> str:
    if dist == "splitter":
        from splitter._version import __version__

        return __version__
    try:
        return metadata.version(dist)
    except metadata.PackageNotFoundError:
        return "not installed"


def _seed_from(command: str | None) -> str:
    if not command:
        return ""
    try:
        parts = shlex.split(command)
    except ValueError:
        return ""
    for a, b in zip(parts, parts[1:]):
        if a == "--seed":
            return b
    return ""


def _check_out_dir(run: Run, out_dir: Path) -> None:
    """OUT_DIR may sit inside RUN_DIR (the demo's does) but never where the run keeps files.

    Refused: RUN_DIR or a split folder itself, and anything inside a split's ``audit/`` or
    ``evaluation/`` folder or the run's ``range/`` folder (the appendix replaces its own old
    figures, which must never be the run's).
    """
    out = out_dir.resolve()
    exact = {run.folder.resolve(), *(s.folder.resolve() for s in run.splits)}
    if out in exact:
        raise InputError(f"--out {out_dir}: is a folder of the run itself; give a new folder "
                         f"(e.g. {run.folder / 'appendix'}).")
    subtrees = [s.folder.resolve() / part for s in run.splits for part in ("audit", "evaluation")]
    if run.range_path is not None:
        subtrees.append(run.range_path.parent.resolve())
    for g in subtrees:
        if out == g or g in out.parents:
            raise InputError(f"--out {out_dir}: lies inside {g}, which holds the run's files; give another folder.")


class _Writer:
    """Collects written files and keeps the figure/table names."""

    def __init__(self, out_dir: Path):
        self.out = out_dir
        self.tables: list[Path] = []
        self.figures: list[Path] = []

    def table(self, frame: pd.DataFrame, name: str) -> str:
        path = write_csv(frame, self.out / "tables" / f"{name}.csv")
        self.tables.append(path)
        return f"tables/{name}.csv"

    def figure(self, fig, name: str) -> str:
        self.figures += save(fig, self.out / "figures" / name)
        return f"figures/{name}"

    def copy_figure(self, stem: Path, name: str) -> str | None:
        """Reuse a figure the run already drew (PNG and SVG)."""
        if not all(stem.with_suffix(s).exists() for s in (".png", ".svg")):
            return None
        for s in (".png", ".svg"):
            dst = self.out / "figures" / f"{name}{s}"
            make_folder(dst.parent)
            with atomic_path(dst) as tmp:
                shutil.copyfile(stem.with_suffix(s), tmp)
            self.figures.append(dst)
        return f"figures/{name}"


# --- the map plane and coordinates -----------------------------------------------------------

def _map_plane(run: Run) -> MapPlane:
    """One equal-area plane for every map: the first spatial split's geometry CRS, else one
    centred on the records."""
    if run.splits[0].records.crs is not None:  # a local planar grid: maps are drawn in it
        return MapPlane(run.splits[0].records.crs)
    ordered = sorted(run.splits, key=lambda s: (s.method not in SPATIAL_METHODS, s.name))
    for s in ordered:
        crs = s.geometry_crs
        if crs is not None and crs.is_projected:
            return MapPlane(crs)
    from splitter.geo import Points

    r = run.splits[0].records
    return MapPlane.for_points(Points.lonlat(r.lon, r.lat))


@dataclass(frozen=True)
class _Coords:
    x_km: np.ndarray
    y_km: np.ndarray
    lon: np.ndarray
    lat: np.ndarray


def _coords(split: SplitRun, plane: MapPlane, generalise_km: float | None) -> _Coords:
    r = split.records
    x, y = plane.from_lonlat(r.lon, r.lat)
    if generalise_km is None:
        return _Coords(x, y, r.lon, r.lat)
    gx, gy = generalise_coordinates(x, y, generalise_km)
    lon, lat = plane.to_lonlat(gx, gy)
    return _Coords(gx, gy, np.round(lon, LONLAT_DECIMALS), np.round(lat, LONLAT_DECIMALS))


# --- tables ----------------------------------------------------------------------------------

def _records_frame(split: SplitRun, c: _Coords) -> pd.DataFrame:
    r = split.records
    n = r.record_id.size
    # "1;3": the folds whose calibration set leaves this record out (buffer gaps).
    order = np.lexsort((r.gap_folds, r.gap_rows))
    rows, folds = r.gap_rows[order], r.gap_folds[order]
    gaps = np.full(n, "", dtype=object)
    if rows.size:
        starts = np.r_[0, np.flatnonzero(np.diff(rows)) + 1]
        groups = np.split(folds.astype(str), starts[1:])
        gaps[rows[starts]] = [";".join(g) for g in groups]
    fold = pd.array(np.where(r.fold < 0, 0, r.fold), dtype="Int64")
    fold[r.fold < 0] = pd.NA
    return pd.DataFrame({
        "record_id": r.record_id, "kind": r.kind, "fold": fold, "dropped": r.dropped,
        "left_out_of_calibration_in_folds": gaps,
        **({"x": c.lon, "y": c.lat} if r.crs is not None else {"longitude": c.lon, "latitude": c.lat}),
        "x_km": c.x_km, "y_km": c.y_km,
    })


def _fold_counts_frame(split: SplitRun) -> pd.DataFrame:
    rows = split.design.get("folds", []) or []
    names = split.records.fold_names
    cols = ["fold", "evaluation_presence", "evaluation_absence", "evaluation_background",
            "calibration_presence", "calibration_absence", "calibration_background", "gap"]
    df = pd.DataFrame(rows).reindex(columns=cols)
    if len(df):
        df["fold"] = [names.get(int(f), str(f)) if pd.notna(f) else "" for f in df["fold"]]
    return df


AUDIT_FIRST = ["fold", "verdict", "reasons"]
EVAL_FIRST = ["fold", "significant", "interpretation", "p_adjusted", "binomial_p", "partial_roc_p", "n_evaluation", "successes",
              "area_predicted", "threshold_rule", "threshold"]


def _reorder(df: pd.DataFrame, first: list) -> pd.DataFrame:
    lead = [c for c in first if c in df.columns]
    return df[lead + [c for c in df.columns if c not in lead]]


def _display_fold_counts(split: SplitRun, frame: pd.DataFrame, source: str) -> Table:
    has_abs = bool(frame[["evaluation_absence", "calibration_absence"]].fillna(0).astype(float).to_numpy().sum())
    cols = ["fold", "evaluation presences", "evaluation background"]
    keys = ["fold", "evaluation_presence", "evaluation_background"]
    if has_abs:
        cols.insert(2, "evaluation absences")
        keys.insert(2, "evaluation_absence")
    cols += ["calibration presences", "calibration background"]
    keys += ["calibration_presence", "calibration_background"]
    if has_abs:
        cols.insert(-1, "calibration absences")
        keys.insert(-1, "calibration_absence")
    buffer = _num(split.design.get("buffer_km", 0) or 0)
    if buffer > 0:
        cols.append("left out by the buffer")
        keys.append("gap")
    rows = [[str(r["fold"])] + [P.fmt_count(_num(r[k]) if math.isfinite(_num(r[k])) else 0) for k in keys[1:]]
            for _, r in frame.iterrows()]
    notes = ["Evaluation counts are the records whose fold is that fold; calibration counts are the other kept "
             "records" + (", less those the buffer leaves out." if buffer > 0 else ".")]
    return Table(caption=f"Records per fold, split `{split.name}`.", columns=tuple(cols),
                 rows=tuple(tuple(r) for r in rows), css_class="fold-counts", element_id=f"fold-counts-{_safe(split.name)}",
                 notes=tuple(notes), source=source)


def _display_fold_checks(split: SplitRun, checks: dict, source: str) -> list:
    """What each fold's tests could show, measured when the folds were designed."""
    names = split.records.fold_names
    holm = checks.get("adjust") == "holm"
    rows = tuple(
        (names.get(int(f["fold"]), str(f["fold"])), P.fmt_count(f["evaluation_presences"]),
         f"{100 * f['binomial_bound']:.0f} %", "yes" if f["can_omit"] else "no",
         f"{100 * f['buffer_record_share']:.0f} %", f"{100 * f['buffer_presence_share']:.0f} %")
        for f in checks.get("folds", []))
    level = f"alpha = {checks['alpha']:g}" + (" adjusted by Holm's method across folds" if holm else "")
    notes = (
        f"Binomial bound: the largest share of the testing region a model may predict present and still have the "
        f"binomial test reject at {level} when it predicts every evaluation presence present "
        + ("((alpha/k)^(1/n) for the first Holm step, n evaluation presences, k folds)." if holm else "(alpha^(1/n), n evaluation presences)."),
        f"Partial ROC may omit: whether a bootstrap sample of half the presences may leave one out at the omission "
        f"tolerance E = {checks['omission']:g}; when it may not, the partial area starts at the lowest presence.",
        "Buffer removes: the share of the fold's calibration records, and of its calibration presences, that the "
        "buffer leaves out: what independence costs the model in calibration data.",
    )
    out = [Table(caption=f"What each fold's tests can show, split `{split.name}` (known before any model is fitted).",
                 columns=("fold", "evaluation presences", "binomial bound", "partial ROC may omit",
                          "buffer removes (records)", "buffer removes (presences)"),
                 rows=rows, css_class="fold-checks", element_id=f"fold-checks-{_safe(split.name)}", notes=notes,
                 source=source)]
    for warning in checks.get("warnings", []):
        out.append(Text(f"Caution: {warning}."))
    return out


def _display_rules(rules: list, names: list) -> Table:
    rows = tuple((str(r["name"]), str(r["rule"]), P.fmt_level(r["threshold"])) for r in rules)
    which = "all splits" if len(names) != 1 else f"split `{names[0]}`"
    return Table(caption=f"Audit rules and their thresholds ({which}). A fold is dependent when any rule fires, "
                         "independent when every rule that could be applied stays quiet, and insufficient otherwise.",
                 columns=("rule", "fires when", "threshold"), rows=rows, css_class="audit-rules")


def _display_audit(split: SplitRun, source: str, absences: bool = False) -> Table:
    a = split.audit_absences if absences else split.audit
    d = a.distance
    spec = [("fold", a.fold_labels, str), ("verdict", a.verdicts, str),
            ("evaluation records", d.n_evaluation, P.fmt_count), ("calibration records", d.n_calibration, P.fmt_count),
            ("NN median (km)", d.nn_median_km, P.fmt_km_value),
            ("NN 10th percentile (km)", d.nn_p10_km, P.fmt_km_value),
            ("share within range", d.share_within_range, P.fmt_share),
            ("W1 vs prediction locations (km)", d.wasserstein_km, P.fmt_km_value),
            ("Schoener's D", a.schoener_d, P.fmt_share),
            ("share outside envelope", a.share_outside_envelope, P.fmt_share),
            ("share with shared method", a.shared_method_share, P.fmt_share)]
    cells = [[fn(values[i]) for _, values, fn in spec] for i in range(len(a.fold_labels))]
    # Columns no fold could fill (no covariates or groups given) are left out of the page, not the CSV.
    keep = [j for j in range(len(spec)) if j < 2 or any(row[j] for row in cells)]
    rows = tuple(tuple(row[j] for j in keep) for row in cells)
    dropped = [spec[j][0] for j in range(len(spec)) if j not in keep]
    notes = ["NN: distance (geodesic for longitude/latitude, straight-line in a projected or local grid) from an "
             "evaluation record to its nearest calibration record" + (" of the same kind" if absences else "") + ". W1: "
             "Wasserstein-1 distance between those distances and the prediction-location-to-record distances. "
             "Envelope: the calibration records' covariate ranges (MESS < 0 outside)."]
    if dropped:
        notes.append("Not computed for any fold (no input for it): " + ", ".join(dropped) + ".")
    notes += [f"Fold {f}: {why}." for f, verdict, why in zip(a.fold_labels, a.verdicts, a.reasons)
              if verdict != "independent" and why.strip()]
    what = ": evaluation absences to calibration absences" if absences else ""
    return Table(caption=f"Residual dependence audit, split `{split.name}`{what} (verdict: {a.verdict}).",
                 columns=tuple(spec[j][0] for j in keep), rows=rows, css_class="audit",
                 element_id=f"audit-{_safe(split.name)}" + ("-absences" if absences else ""), notes=tuple(notes),
                 source=source)


def _share(value):
    return lambda f: P.fmt_share(value(f))


def _measure(name):
    return _share(lambda f: getattr(f.measures, name) if f.measures is not None else math.nan)


def _interval(f) -> str:
    lo, hi = f.partial_roc.ratio_low, f.partial_roc.ratio_high
    return f"{P.fmt_share(lo)} – {P.fmt_share(hi)}" if math.isfinite(lo) and math.isfinite(hi) else ""


#: The performance table's columns: label, a fold's cell, and the key of the ``all`` row's mean (None: no mean).
PERFORMANCE = (
    ("partial AUC ratio (observed)", _share(lambda f: f.partial_roc.auc_ratio), "auc_ratio"),
    ("ratio of random presences (median)", _share(lambda f: f.partial_roc.null_median), None),
    ("bootstrap 95% interval", _interval, None),
    ("full AUC", _share(lambda f: f.partial_roc.auc), "auc"),
    ("omission rate", _measure("omission_rate"), "omission_rate"),
    ("sensitivity", _measure("sensitivity"), "sensitivity"),
    ("specificity", _measure("specificity"), "specificity"),
    ("TSS", _measure("tss"), "tss"),
    ("kappa", _measure("kappa"), "kappa"),
    ("Boyce index", _share(lambda f: f.boyce), "boyce"),
)


def _display_evaluation(split: SplitRun, source: str) -> tuple[Table, Table]:
    """Two tables: significance (first, always shown) and performance (significant folds only)."""
    ev = split.evaluation
    summary = ev.summary
    other = "background" if {f.other_kind for f in ev.folds} - {""} == {"background"} else ""
    perf = [("pseudo-specificity" if (label == "specificity" and other == "background") else label, cell, mean)
            for label, cell, mean in PERFORMANCE]
    sig_rows, perf_rows, classes = [], [], []
    for f in ev.folds:
        sig_rows.append((f.fold, "yes" if f.significant else "no", f.interpretation, P.fmt_p(f.p_adjusted),
                         P.fmt_p(f.binomial.pvalue), P.fmt_p(f.partial_roc.pvalue), P.fmt_count(f.n_evaluation),
                         P.fmt_count(f.binomial.statistic), P.fmt_share(f.area_predicted)))
        perf_rows.append(tuple([f.fold, f.interpretation] + [cell(f) if f.significant else "—" for _, cell, _ in perf]))
        classes.append("" if f.significant else "not-significant")
    sig_rows.append(("all folds", "yes" if summary.significant else "no", summary.interpretation,
                     P.fmt_p(summary.pvalue), P.fmt_p(summary.binomial_fisher_p), P.fmt_p(summary.partial_roc_fisher_p),
                     P.fmt_count(summary.n_evaluation), P.fmt_count(summary.successes),
                     P.fmt_share(summary.means["area_predicted"])))
    show = summary.significant and summary.n_interpretable > 0
    perf_rows.append(tuple(["all folds", summary.interpretation] +
                           [("" if mean is None else P.fmt_share(summary.means[mean])) if show else "—"
                            for _, _, mean in perf]))
    classes.append("summary")
    par = ev.parameters
    tag = _safe(split.name)
    sig_table = Table(
        caption=f"Per-fold significance, split `{split.name}` (threshold `{par.get('threshold_rule')}`, chosen from "
                f"calibration presences).",
        columns=("fold", "significant", "interpretation", "adjusted p", "binomial p", "partial ROC p", "evaluation presences",
                 "predicted present", "area predicted present"),
        rows=tuple(sig_rows), css_class="evaluation significance", element_id=f"significance-{tag}",
        row_classes=tuple(classes),
        notes=(f"Binomial test: evaluation presences predicted present against the share of area predicted present. "
               f"Partial ROC: omission tolerance E = {P.fmt_level(par.get('omission'))}, the observed AUC ratio against "
               f"{P.fmt_count(par.get('replicates', 0))} sets of as many presences placed at random in the testing region; "
               f"p = (1 + random ratios at least as large) / (1 + {P.fmt_count(par.get('replicates', 0))}), never 0. "
               f"Adjusted p: {par.get('significance_rule', 'both tests reject the null')}, alpha = "
               f"{P.fmt_level(par.get('alpha'))}.",
               "\"all folds\": " + ("the jackknife test over the one-presence folds (its p in the adjusted column)."
                                     if par.get("combined_test") == "jackknife" else
                                     "the smallest Holm-adjusted p decides; binomial and partial ROC p here are "
                                     "Fisher-combined, a description only.")),
        source=source)
    notes = ["A fold that is not significant is marked \"do not interpret\": its performance figures are withheld "
             "here (they stay in the CSV, flagged).",
             "\"all folds\": means over the interpretable (significant) folds only.",
             "Partial AUC ratio (observed): on all evaluation presences. Ratio of random presences: the median "
             "ratio of as many presences placed at random, what a model of no skill scores here (above 1 when "
             "presences are few). Bootstrap interval: 50% of the presences resampled, a description only."]
    if other == "background":
        notes.append("Specificity is computed against background points, not true absences (pseudo-specificity).")
    perf_table = Table(
        caption=f"Per-fold performance at the threshold, split `{split.name}`.",
        columns=tuple(["fold", "interpretation"] + [label for label, _, _ in perf]), rows=tuple(perf_rows),
        css_class="evaluation performance", element_id=f"performance-{tag}", row_classes=tuple(classes),
        notes=tuple(notes), source=source)
    return sig_table, perf_table


def _comparison_frame(splits) -> pd.DataFrame:
    rows = []
    for s in splits:
        d = s.design
        row = {"split": s.name, "method": s.method, "folds": d.get("n_folds"),
               "block_size_km": s.parameters.get("block_size_km", d.get("block_size_km")),
               "block_size_rule": s.parameters.get("block_size_rule", ""), "buffer_km": d.get("buffer_km"),
               "audit_verdict": "", "independent_folds": np.nan, "significant_folds": np.nan,
               "nn_median_km_min": np.nan, "nn_median_km_max": np.nan,
               "auc_ratio_mean_significant": np.nan}
        if s.audit is not None:
            row["audit_verdict"] = s.audit.verdict
            row["independent_folds"] = s.audit.verdicts.count("independent")
            med = s.audit.distance.nn_median_km
            if np.isfinite(med).any():
                row["nn_median_km_min"], row["nn_median_km_max"] = np.nanmin(med), np.nanmax(med)
        if s.evaluation is not None:
            good = [f for f in s.evaluation.folds if f.significant]
            row["significant_folds"] = len(good)
            v = np.array([f.partial_roc.auc_ratio for f in good], float)
            if np.isfinite(v).any():
                row["auc_ratio_mean_significant"] = float(np.nanmean(v))
        rows.append(row)
    df = pd.DataFrame(rows)
    for c in ("independent_folds", "significant_folds"):
        df[c] = pd.array([None if not math.isfinite(_num(v)) else int(v) for v in df[c]], dtype="Int64")
    return df


def _display_comparison(df: pd.DataFrame, source: str) -> Table:
    def km(v):
        return P.fmt_km_value(_num(v)) if math.isfinite(_num(v)) else "—"

    def cnt(v):
        return "" if pd.isna(v) else P.fmt_count(v)

    rows = []
    for _, r in df.iterrows():
        rows.append((f"`{r['split']}`", str(r["method"]), cnt(r["folds"]), km(r["block_size_km"]),
                     km(r["buffer_km"]) if _num(r["buffer_km"]) > 0 else "—", str(r["audit_verdict"]) or "not audited",
                     cnt(r["independent_folds"]), cnt(r["significant_folds"]),
                     f"{P.fmt_km_value(r['nn_median_km_min'])} – {P.fmt_km_value(r['nn_median_km_max'])}"
                     if math.isfinite(_num(r["nn_median_km_min"])) else ""))
    return Table(caption="The splits side by side.",
                 columns=("split", "method", "folds", "block size (km)", "buffer (km)", "audit verdict",
                          "independent folds", "significant folds", "median nearest calibration distance (km)"),
                 rows=tuple(rows), css_class="comparison", element_id="comparison", source=source)


def _fits_frame(est) -> pd.DataFrame:
    """The range_fits table: every fit as range.json lists it (keys sorted, as the JSON writes them)."""
    return pd.DataFrame([dict(sorted(f.items())) for f in est.to_dict()["fits"]])


def _display_range(est, source: str) -> Table:
    rows = []
    for f in est.fits:
        rows.append((f.covariate, f.model, "not reached" if f.range_at_bound else P.fmt_km_value(f.range_km),
                     P.fmt_share(f.r2), "yes" if est.best[f.covariate] is f else ""))
    return Table(caption=f"Variogram fits per covariate; suggested block size "
                         f"{P.fmt_km(est.suggested_block_km)}.",
                 columns=("covariate", "model", "effective range (km)", "R²", "chosen"), rows=tuple(rows),
                 css_class="range", element_id="range-fits", source=source)


# --- the appendix ----------------------------------------------------------------------------

def _map_figure(w: _Writer, s: SplitRun, c: _Coords, plane: MapPlane, plane_words: str, extent,
                generalise_km: float | None) -> Figure:
    """Draw and save one split's map; return its figure block."""
    r = s.records
    grid = None
    size = s.parameters.get("block_size_km", s.design.get("block_size_km"))
    gcrs = s.geometry_crs
    if s.method in SPATIAL_METHODS and size and gcrs is not None and (gcrs.is_projected or r.crs is not None):
        from splitter.geo import Points, planar_km

        ok = np.isfinite(r.lon) & np.isfinite(r.lat)
        gx = np.full(r.lon.shape, np.nan)
        gy = np.full(r.lat.shape, np.nan)
        if r.crs is not None:  # a local planar grid: the records' own coordinates, in km
            gcrs = plane.crs
            gx, gy = plane.from_lonlat(r.lon, r.lat)
        elif ok.any():
            gx[ok], gy[ok] = planar_km(Points.lonlat(r.lon[ok], r.lat[ok]), gcrs)
        grid = cell_grid(s.method, float(size), s.parameters.get("grid_offset_km") or (0.0, 0.0), gcrs, plane,
                         gx, gy, r.fold, extent, fill=generalise_km is None)
    buffer = _num(s.design.get("buffer_km", 0) or 0)
    fm = plot_fold_map(c.x_km, c.y_km, r.kind, r.fold, fold_names=r.fold_names, gap_rows=r.gap_rows,
                       gap_folds=r.gap_folds, buffer_km=buffer if buffer > 0 else 0.0, grid=grid, title=s.name,
                       extent=extent, generalised_km=generalise_km)
    stem = w.figure(fm.figure, f"map_{_safe(s.name)}")
    label = r.fold_names.get(fm.focus_fold, str(fm.focus_fold))
    shown = ["presences as dots"] + (["absences as triangles"] if np.any(r.kind == "absence") else []) + \
        (["background as small squares"] if np.any(r.kind == "background") else [])
    cap = f"Split `{s.name}`. Left: records coloured by evaluation fold ({', '.join(shown)})"
    if grid is not None:
        what = "hexagons" if grid.shape == "hexagon" else "square cells"
        cap += (f" over the design's {what} of {P.fmt_km(grid.size_km)}"
                + (" (cells coloured by the fold of the records they hold)" if generalise_km is None else
                   " (cells left uncoloured: with generalised positions the fold of each cell is not shown)"))
        if grid.occupied_only and len(grid.polygons):
            cap += "; only occupied cells are outlined"
        elif grid.occupied_only:
            cap += "; too many cells to outline at this scale without showing where records are"
    cap += f". Right: fold {label}'s evaluation records and its calibration records"
    if buffer > 0:
        cap += (f", with the {P.fmt_count(fm.n_gap)} records left out of its calibration set by the "
                f"{P.fmt_km(buffer)} buffer (crosses; the fold with the most records left out)")
    cap += f". Axes in km on the {plane_words}"
    cap += f"; positions generalised to {generalise_km:g} km cells." if generalise_km else "."
    return Figure(stem, cap, alt=f"map of records by fold, split {s.name}")


def _block_size_for_variogram(splits) -> tuple[float | None, str]:
    for s in splits:
        if s.method in SPATIAL_METHODS and s.parameters.get("block_size_km") is not None:
            return float(s.parameters["block_size_km"]), s.name
    return None, ""


def _build(run: Run, out: Path, generalise_km: float | None) -> tuple[Document, _Writer]:
    w = _Writer(out)
    plane = _map_plane(run)
    plane_words = plane.describe()
    splits = run.splits
    names = [s.name for s in splits]
    blocks: list = []

    same_records = len({(P.records_sentence(s.design), tuple(sorted((s.design.get("inputs_sha256") or {}).values())))
                        for s in splits}) == 1

    # 1. Methods paragraph(s)
    blocks.append(Heading(1, "Methods", "methods"))
    intro = [f"This appendix describes {P.fmt_count(len(splits))} "
             f"split{'s' if len(splits) != 1 else ''} of the same occurrence records" if same_records and len(splits) > 1
             else f"This appendix describes {P.fmt_count(len(splits))} split{'s' if len(splits) != 1 else ''}"]
    intro[0] += f" ({P.fmt_list(f'`{n}`' for n in names)})."
    if same_records:
        intro.append(P.records_sentence(splits[0].design))
    range_est = run.range
    range_source = "range/range.json" if run.range is not None else ""
    if range_est is None:
        for s in splits:
            if s.range_summary is not None:
                range_est, range_source = s.range_summary, f"{s.name}: design sidecar (block size auto)"
                break
    if range_est is not None:
        intro.append(P.range_sentence(range_est))
    blocks.append(Text(" ".join(intro), "methods"))
    for s in splits:
        blocks.append(Text(P.split_paragraph(s, plane_words, include_records=not same_records), "methods"))
    if len(splits) > 1:
        blocks.append(Text(P.comparison_paragraph(splits), "methods"))
    if generalise_km is not None:
        blocks.append(Text(
            f"Locations are generalised in this appendix: every coordinate in its tables and maps is the centre of the "
            f"{generalise_km:g} km x {generalise_km:g} km cell (of a grid anchored at the origin of the {plane_words}) "
            f"that holds the record, written back as longitude/latitude and as plane kilometres. Fold tables, "
            f"audits and evaluations were computed on the exact positions, which stay in the run folder only.",
            "warning"))

    # 2. Records and folds, each split with its map; maps share one extent so they compare at a glance
    blocks.append(Heading(1, "Records and folds", "folds"))
    coords = {s.name: _coords(s, plane, generalise_km) for s in splits}
    allx = np.concatenate([coords[s.name].x_km[s.records.fold >= 0] for s in splits])
    ally = np.concatenate([coords[s.name].y_km[s.records.fold >= 0] for s in splits])
    ok = np.isfinite(allx) & np.isfinite(ally)
    extent = map_extent(allx[ok], ally[ok]) if ok.any() else None
    for s in splits:
        c = coords[s.name]
        tag = _safe(s.name)
        rec_src = w.table(_records_frame(s, c), f"{tag}_records")
        counts = _fold_counts_frame(s)
        src = w.table(counts, f"{tag}_fold_counts")
        blocks.append(Heading(2, f"Split `{s.name}`", f"folds-{tag}"))
        said = [n[len("warning:"):].strip() for n in s.design.get("notes") or [] if str(n).startswith("warning:")]
        if said:  # what the reader warned of when the records were read (several species, a suspect grid)
            blocks.append(Bullets(tuple(f"Warning when the records were read: {n}" for n in said)))
        blocks.append(_display_fold_counts(s, counts, src))
        checks = s.design.get("checks")
        if checks:
            blocks.extend(_display_fold_checks(s, checks, w.table(pd.DataFrame(checks["folds"]), f"{tag}_fold_checks")))
        blocks.append(Text(f"Every record with its fold, kind and coordinates"
                           f"{' (generalised)' if generalise_km else ''}: `{rec_src}`."))
        if extent is not None:
            blocks.append(_map_figure(w, s, c, plane, plane_words, extent, generalise_km))

    # 3. Autocorrelation range
    blocks.append(Heading(1, "Autocorrelation range", "range"))
    if range_est is not None:
        from splitter.report.dependence_figures import plot_variogram

        block_km, block_split = _block_size_for_variogram(splits)
        # The range step drew this figure with the suggested block size marked: copied when
        # that is the size marked here too.
        drawn = run.range_path.with_name("variogram") if range_est is run.range else None
        same = drawn is not None and block_km in (None, range_est.suggested_block_km)
        stem = (same and w.copy_figure(drawn, "variogram")) or \
            w.figure(plot_variogram(range_est, chosen_block_km=block_km), "variogram")
        blocks.append(_display_range(range_est, w.table(_fits_frame(range_est), "range_fits")))
        which = (f"the block size of split `{block_split}` ({P.fmt_km(block_km)})" if block_km is not None
                 else f"the suggested block size ({P.fmt_km(range_est.suggested_block_km)})")
        blocks.append(Figure(stem, f"Empirical semivariograms (dots) with the fitted spherical and exponential "
                                   f"models, one panel per covariate; dotted vertical line: {which}. "
                                   f"Source: {range_source}.", alt="semivariograms"))
    else:
        blocks.append(Text("No autocorrelation range was estimated in this run (no range/range.json and no "
                           "block size chosen with 'auto')."))

    # 4. Residual dependence
    blocks.append(Heading(1, "Residual dependence audit", "audit"))
    audited = [s for s in splits if s.audit is not None]
    rule_sets: set = set()
    if audited:
        rule_sets = {tuple((r["name"], r["rule"], r["threshold"]) for r in s.audit.rules) for s in audited}
        if len(rule_sets) == 1:
            blocks.append(_display_rules(audited[0].audit.rules, [s.name for s in audited]))
            w.table(pd.DataFrame(audited[0].audit.rules), "audit_rules")
    for s in splits:
        tag = _safe(s.name)
        blocks.append(Heading(2, f"Split `{s.name}`", f"audit-{tag}"))
        if s.audit is None:
            blocks.append(Text(f"Split `{s.name}` was not audited: no `audit/audit.json` in its folder."))
            continue
        if len(rule_sets) != 1:
            blocks.append(_display_rules(s.audit.rules, [s.name]))
            w.table(pd.DataFrame(s.audit.rules), f"{tag}_audit_rules")
        # The run's audit.csv rows, written again from the audit read back (the same bytes, reordered).
        src = w.table(_reorder(audit_frame(s.audit, s.audit_context), AUDIT_FIRST), f"{tag}_audit")
        blocks.append(_display_audit(s, src))
        if s.audit_absences is not None:  # a survey's absences, audited on their own
            src = w.table(_reorder(s.audit_absences.to_frame(), AUDIT_FIRST), f"{tag}_audit_absences")
            blocks.append(_display_audit(s, src, absences=True))
        if s.audit_context.get("prediction_locations"):
            blocks.append(Text(f"Prediction locations for the distance comparison: "
                               f"{s.audit_context['prediction_locations']}."))
        if s.distance_figure is not None:
            stem = w.copy_figure(s.distance_figure, f"distance_ecdf_{tag}")
            if stem:
                blocks.append(Figure(stem, f"Split `{s.name}`: cumulative distributions of nearest-neighbour distances "
                                           f"(evaluation record to nearest calibration record, per fold; prediction "
                                           f"location to nearest record; record to nearest other record), with the "
                                           f"autocorrelation range. Drawn by the audit.", alt="distance ECDFs",
                                     width_pct=62))

    # 5. Significance and performance
    blocks.append(Heading(1, "Significance and performance", "evaluation"))
    for s in splits:
        tag = _safe(s.name)
        blocks.append(Heading(2, f"Split `{s.name}`", f"evaluation-{tag}"))
        if s.evaluation is None:
            blocks.append(Text(f"Split `{s.name}` was not evaluated: no `evaluation/evaluation.json` in its folder."))
            continue
        ev = s.evaluation
        src = w.table(_reorder(ev.to_frame(), EVAL_FIRST), f"{tag}_evaluation")
        blocks += list(_display_evaluation(s, src))
        for msg in ev.warnings:
            blocks.append(Text(f"Warning recorded by the evaluation: {msg}", "warning"))
        omission = ev.summary.omission
        # The evaluation step drew these curves from the same results: copied, not drawn again.
        stem = (s.roc_figure and w.copy_figure(s.roc_figure, f"roc_{tag}")) or \
            w.figure(plot_roc_panels(ev.folds, omission), f"roc_{tag}")
        blocks.append(Figure(stem, f"Split `{s.name}`: exact area-based ROC curve of each fold (every prediction "
                                   f"value is a threshold), with the null line (dashed) and the cut-off "
                                   f"1 - E = {1.0 - omission:g} (dotted); the shaded part above it is the partial area "
                                   f"tested. Grey curves: not significant, do not interpret.",
                             alt=f"ROC curves, split {s.name}"))
    evaluated = {s.name: s.evaluation for s in splits if s.evaluation is not None}
    if evaluated:
        from splitter.report.evaluation_figures import plot_ratio_intervals

        alpha = float(next(iter(evaluated.values())).parameters.get("alpha", 0.05))
        stem = w.figure(plot_ratio_intervals(evaluated, alpha), "auc_ratio_intervals")
        blocks.append(Figure(stem, "Partial AUC ratio per fold: bootstrap mean and 95% interval against the null "
                                   "ratio of 1; filled markers: significant folds, open markers: not significant "
                                   "(do not interpret).", alt="AUC ratio intervals", width_pct=72))

    # 6. Side by side
    if len(splits) > 1:
        blocks.append(Heading(1, "The splits side by side", "comparison"))
        df = _comparison_frame(splits)
        src = w.table(df, "comparison")
        blocks.append(_display_comparison(df, src))

    # 6b. The same flexible model under both splits: what the less separated split claims
    if len(splits) > 1 and same_records:
        from splitter.report.optimism import load_optimism, optimism_section

        blocks += optimism_section(load_optimism(run.folder), w.table)

    # 7. Reproducibility
    blocks += _reproducibility(run, splits)

    # 8. Cautions
    blocks += _cautions(generalise_km)
    return Document(TITLE, tuple(blocks)), w


def _reproducibility(run: Run, splits) -> list:
    out = [Heading(1, "Reproducibility", "reproducibility")]
    versions = [(name, _version(dist)) for name, dist in PACKAGES]
    versions.insert(1, ("python", platform.python_version()))
    recorded = sorted({str(s.design.get("software")) for s in splits if s.design.get("software")})
    out.append(Table(caption="Software that built this appendix" +
                             (f" (the folds were written by {P.fmt_list(recorded)})." if recorded else "."),
                     columns=("package", "version"), rows=tuple(versions), css_class="software"))
    seeds = []
    if run.range_context.get("seed") is not None:
        seeds.append(("range", "range estimate", str(run.range_context["seed"])))
    for s in splits:
        seeds.append((s.name, "design", str(s.design.get("seed", ""))))
        if s.audit is not None:
            seeds.append((s.name, "audit", _seed_from(s.audit_context.get("command")) or "not recorded"))
        if s.evaluation is not None:
            seeds.append((s.name, "evaluation", str(s.evaluation.parameters.get("seed", ""))))
    out.append(Table(caption="Seeds of every random step.", columns=("split", "step", "seed"), rows=tuple(seeds),
                     css_class="seeds"))
    cmds = []
    if run.range_context.get("command"):
        cmds += ["# range estimate", run.range_context["command"]]
    for s in splits:
        for label, cmd in (("design", s.design.get("command")), ("audit", s.audit_context.get("command")),
                           ("evaluation", s.evaluation_context.get("command"))):
            if cmd:
                cmds += [f"# {s.name}: {label}", str(cmd)]
    out.append(Text("Command lines recorded in the run's files:"))
    out.append(Code("\n".join(cmds) if cmds else "(no command lines were recorded)"))
    inputs = {}
    for s in splits:
        for path, digest in sorted((s.design.get("inputs_sha256") or {}).items()):
            inputs.setdefault((path, digest), []).append(s.name)
    rows = tuple((f"`{p}`", d, ", ".join(n)) for (p, d), n in sorted(inputs.items()))
    out.append(Table(caption="SHA-256 of the input files, as recorded by the design.",
                     columns=("input", "SHA-256", "splits"), rows=rows, css_class="inputs"))
    files = []
    base = run.folder
    if run.range_path is not None:
        files.append(run.range_path)
    for s in splits:
        files += list(s.files)
    files += [p for p in (base / "optimism.csv", base / "optimism.json") if p.exists()]
    rows = tuple((f"`{p.relative_to(base).as_posix()}`", sha256_file(p)) for p in files)
    out.append(Table(caption="SHA-256 of the run's files this appendix was built from.",
                     columns=("file", "SHA-256"), rows=rows, css_class="run-files"))
    return out


def _cautions(generalise_km) -> list:
    items = [
        "Evaluation describes the records used: these folds, these presences, this region and its survey effort. "
        "It says nothing about places, periods or species the records do not cover.",
        "A significant, well-performing fold does not make a model fit for a decision such as choosing a "
        "reintroduction site or drawing a protected area; such uses need their own evidence, field checks and "
        "expert review.",
        "Follow the local rules for wildlife data (data-sharing agreements, sensitive-species policies, permits) and "
        "licensed professional practice; where they ask for more than this appendix gives, they take precedence.",
    ]
    if generalise_km is None:
        items.append("Locations of sensitive species should not be published exactly: rebuild this appendix with "
                     "`--generalise KM` to snap every coordinate in its tables and maps to the centre of a KM grid "
                     "cell.")
    else:
        items.append(f"Locations here are generalised to {generalise_km:g} km cells (`--generalise {generalise_km:g}`); "
                     f"the run folder still holds the exact positions: do not share it where the generalised "
                     f"appendix was required.")
    items.append("Performance figures are withheld for folds that are not significant; a fold marked "
                 "\"do not interpret\" carries no evidence about predictive ability, good or bad.")
    return [Heading(1, "Cautions", "cautions"), Bullets(tuple(items))]


def _clean_stale(out: Path, keep: set) -> None:
    """Remove tables/figures an earlier build of this appendix left that this build did not write."""
    md = out / "appendix.md"
    if not md.exists() or not md.read_text(encoding="utf-8", errors="replace").startswith(f"# {TITLE}"):
        return
    for sub, patterns in (("tables", ("*.csv",)), ("figures", ("*.png", "*.svg"))):
        for pat in patterns:
            for p in (out / sub).glob(pat):
                if p.resolve() not in keep and not p.name.startswith("."):  # hidden: a write in progress
                    remove(p)


def build_appendix(run_dir, out_dir, *, generalise_km: float | None = None) -> Appendix:
    """Write the methods appendix of a run.

    Parameters
    ----------
    run_dir : path
        One split folder (holding a ``*.design.json`` beside its fold table,
        optionally ``audit/`` and ``evaluation/``), or a folder of such split
        folders (one level down) plus optionally ``range/range.json``; with
        several splits they are compared side by side.
    out_dir : path
        Where to write ``appendix.md``, ``appendix.html``, ``tables/*.csv`` and
        ``figures/*.png|svg``. May lie inside ``run_dir`` (not inside a split
        folder); the run's own files are only read.
    generalise_km : float, optional
        Snap every coordinate in the appendix's tables and maps to the centre
        of a ``generalise_km`` square cell of the map plane (an equal-area CRS).

    Returns
    -------
    Appendix

    Raises
    ------
    InputError
        No design sidecar in ``run_dir``, a bad ``generalise_km``, or an
        ``out_dir`` on top of the run's files.

    Examples
    --------
    A run folder that holds only a fold table and its design sidecar already
    gives an appendix (the design section and its map); ``splitter demo``
    writes a full one, with audit and evaluation.

    >>> import tempfile
    >>> from pathlib import Path
    >>> from splitter.workflow.design import design
    >>> from splitter.io.foldtable import write_design
    >>> tmp = tempfile.TemporaryDirectory()
    >>> folds = design("demo_data/records_with_background.csv", method="blocks", folds=5, block_size=120, seed=1)
    >>> _ = write_design(folds, Path(tmp.name) / "run" / "folds.csv")
    >>> app = build_appendix(Path(tmp.name) / "run", Path(tmp.name) / "appendix-10km", generalise_km=10)
    >>> app.html.name, sorted(p.name for p in app.figures)
    ('appendix.html', ['map_run.png', 'map_run.svg'])
    >>> tmp.cleanup()
    """
    if generalise_km is not None:
        g = _num(generalise_km)
        if not math.isfinite(g) or g <= 0:
            raise InputError(f"--generalise {generalise_km}: give a cell size in km greater than 0.")
        generalise_km = g
    out = Path(out_dir)
    run = load_run(run_dir)
    _check_out_dir(run, out)
    make_folder(out)
    doc, w = _build(run, out, generalise_km)
    md = out / "appendix.md"
    html_path = out / "appendix.html"
    _clean_stale(out, {p.resolve() for p in w.tables + w.figures})
    # Commands and inputs recorded by older runs may name absolute paths: never in the appendix.
    with atomic_write(md, "w") as f:
        f.write(portable_text(to_markdown(doc), run.folder))
    page = portable_text(to_html(doc, out), run.folder)
    with atomic_write(html_path, "w") as f:
        f.write(page)
    return Appendix(markdown=md, html=html_path, tables=list(w.tables), figures=list(w.figures),
                    generalise_km=generalise_km)
