"""Command line: thin shell over the Python API.

Exit codes: 0 ok, 1 a failed test or verdict asked for with --fail-on (or a failed
batch run), 2 bad input (one line on stderr naming the file, row or option and what
to do), 3 an unexpected error (a bug; SPLITTER_DEBUG=1 shows the traceback),
130 interrupted.
"""

from __future__ import annotations

import contextlib
import dataclasses
import functools
import os
import sys
from pathlib import Path
from typing import List, Optional

from typer._click import exceptions as _click_errors  # typer's own copy of click raises these
import typer

from splitter._version import __version__
from splitter.errors import InputError

# Start-up cost: `splitter --help` must stay near the cost of importing typer and rich.
# Only typer is imported here; rich, pandas and the API are imported inside the
# functions that use them.


def _no_type_word(ctx=None):
    return None


class _HelpPage:
    """Help pages without Python type names (``<path>``, ``<bool>``): each argument and option
    names its value with a word (its metavar), flags such as --help with none."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        for param in self.params:
            if param.param_type_name == "argument":  # the metavar already names it
                param.display_type_rich = _no_type_word

    def collect_usage_pieces(self, ctx):
        # "RECORDS" for a required argument, "[OUT_DIR]" for an optional one (braces would
        # read like the {fold} placeholder of --predictions).
        pieces = super().collect_usage_pieces(ctx)
        return [p[1:-1] if p.startswith("{") and p.endswith("}") else p for p in pieces]

    def get_help_option(self, ctx):
        option = super().get_help_option(ctx)
        if option is not None:
            option.metavar = ""
            # A flag whose value is a bool is taken as it is; without a default the parser
            # would load its type-checking machinery (pydantic) just to read "not given".
            option.default = False
        return option


    def parse_args(self, ctx, args):
        try:
            return super().parse_args(ctx, args)
        except _click_errors.UsageError as e:
            raise _one_line(e, ctx) from None


class _Group(_HelpPage, typer.core.TyperGroup):
    def invoke(self, ctx):
        # Unknown commands, unknown options and values that do not parse, in any
        # subcommand, all pass through here.
        try:
            return super().invoke(ctx)
        except _click_errors.UsageError as e:
            raise _one_line(e, ctx) from None


class _OneLineUsageError(_click_errors.UsageError):
    """A wrong option value or an unknown option: one line on stderr, exit 2."""

    def show(self, file=None):
        where = self.ctx.command_path if self.ctx is not None else "splitter"
        print(f"splitter: error: {self.format_message()} (see '{where} --help')", file=sys.stderr)


def _one_line(e, ctx):
    return e if isinstance(e, _OneLineUsageError) else _OneLineUsageError(e.format_message(), ctx=e.ctx or ctx)


class _Command(_HelpPage, typer.core.TyperCommand):
    pass


app = typer.Typer(
    help="Independent evaluation data for species distribution models: design folds, "
    "audit residual dependence, test each fold, write a methods appendix.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    cls=_Group,
)


@functools.lru_cache(maxsize=None)
def _consoles():
    from rich.console import Console

    out = Console(highlight=False)
    if not out.is_terminal:  # piped or captured: do not squeeze tables into 80 columns
        out.width = 140
    return out, Console(stderr=True, highlight=False)


def _out():
    """The console for results (stdout)."""
    return _consoles()[0]


def _err():
    """The console for progress and errors (stderr)."""
    return _consoles()[1]


def _table(title: str, **kwargs):
    from rich.table import Table

    return Table(title=title, title_justify="left", **kwargs)


# Defaults of every job option live in one place (splitter.workflow.job, which imports
# nothing heavy): the command line shows them.
from splitter.workflow.job import JobOptions as _JobOptions  # noqa: E402

_D = _JobOptions()

# Options every command that reads records shares.
X_OPTION = typer.Option(None, "--x", metavar="COLUMN", help="Longitude / easting column (detected from common spellings if omitted).")
Y_OPTION = typer.Option(None, "--y", metavar="COLUMN", help="Latitude / northing column.")
CRS_OPTION = typer.Option(None, "--crs", metavar="CRS", help="CRS of the coordinates (default EPSG:4326 for CSV); planar:km or planar:m for a local grid with no known projection.")
ID_OPTION = typer.Option(None, "--id-column", metavar="COLUMN", help="Record id column (default: record_id, else row number).")
KIND_OPTION = typer.Option(None, "--kind-column", metavar="COLUMN", help="presence/absence/background (or 1/0 with --zero-means) column (default: kind or occurrenceStatus; 'none': every row a presence).")
ZERO_OPTION = typer.Option(None, "--zero-means", metavar="KIND", help="What 0 (FALSE, no) means in a 0/1 kind column: 'absence' (a survey: surveyed, not found) or 'background'.")


def _fail(message: str, code: int = 2):
    _err().print(f"splitter: error: {message}", markup=False, soft_wrap=True)
    raise typer.Exit(code)


def guarded(fn):
    """Turn bad input into one line + exit 2, and Ctrl-C into a clean stop."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        import signal

        from splitter.io.journal import all_or_nothing
        from splitter.io.lock import output_lock
        from splitter.memory import keep_freed_memory

        keep_freed_memory()  # a fold's freed arrays serve the next fold (splitter.memory)
        # SIGTERM (e.g. a job scheduler stopping the run) cleans up like Ctrl-C:
        # the exception unwinds through every atomic writer, which removes its temp file.
        signal.signal(signal.SIGTERM, _interrupt)
        try:
            target = kwargs.get("out_dir") or kwargs.get("out_path")
            if target is None:
                return fn(*args, **kwargs)
            # A run that stops (bad input found late, Ctrl-C, a bug) leaves its output as it
            # was. A command's own typer.Exit is exit 1 of --fail-on: a verdict on complete
            # outputs, kept.
            with output_lock(target, folder="out_dir" in kwargs), all_or_nothing(keep_on=(typer.Exit,)):
                return fn(*args, **kwargs)
        except InputError as e:
            _fail(as_flags(str(e)))  # library errors name parameters; here, options
        except FileNotFoundError as e:
            _fail(f"{e.filename}: no such file; check the path.")
        except KeyboardInterrupt:
            from splitter.io.atomic import remove_unfinished

            remove_unfinished()  # a stop can land where no writer's cleanup covers it yet
            _err().print("splitter: interrupted; the output is as it was before this run.")
            raise typer.Exit(130)
        except (typer.Exit, typer.Abort):
            raise
        except Exception as e:  # a bug, not bad input: one line, the traceback on request
            if os.environ.get("SPLITTER_DEBUG") or _is_usage_error(e):
                raise
            _fail(f"unexpected error ({type(e).__name__}: {e}); this is a bug in splitter, please report it "
                  "with the command; set SPLITTER_DEBUG=1 to see the traceback.", code=3)

    return wrapper


def _interrupt(signum, frame):
    raise KeyboardInterrupt


def _is_usage_error(exc: Exception) -> bool:
    """Usage errors of the command-line parser (click's, or typer's copy of it) pass through."""
    return type(exc).__module__.split(".")[0] in ("click", "typer")


def command_line() -> str:
    """The command as typed, for the reproducibility record, with files named as
    the outputs name them (no absolute path of this machine)."""
    import shlex

    from splitter.io.paths import portable_text, shown

    return "splitter " + shlex.join(shown(a) if a.startswith("/") else portable_text(a) for a in sys.argv[1:])


def progress():
    """A spinner with elapsed time on stderr (silent when stderr is not a terminal)."""
    from rich.progress import Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

    err = _err()
    return Progress(SpinnerColumn(), TextColumn("{task.description}"), TimeElapsedColumn(),
                    console=err, transient=True, disable=not err.is_terminal)


def version_callback(value: bool):
    if value:
        _out().print(f"splitter {__version__}")
        raise typer.Exit()


@app.callback()
def main(version: bool = typer.Option(False, "--version", callback=version_callback, is_eager=True, metavar="",
                                      help="Print the version and exit.")):
    """splitter command line."""


def fold_summary_table(assignment, title: str):
    """Records per fold and kind, within 80 columns (one letter per kind, with a legend)."""
    import numpy as np

    counts = assignment.counts()
    kept = assignment.fold >= 0
    # A column per kind the records hold: absences are never shown as background.
    kinds = ["presence"] + [k for k in ("absence", "background") if np.any(kept & (assignment.kind == k))]
    letter = {"presence": "P", "absence": "A", "background": "B"}
    t = _table(title)
    t.add_column("fold", justify="right")
    for short in ("eval", "calib"):
        for k in kinds:
            t.add_column(f"{short} {letter[k]}", justify="right")
    t.add_column("buffer gap", justify="right")
    show = counts if len(counts) <= 25 else counts.head(25)
    for r in show.to_dict(orient="records"):
        t.add_row(str(r["fold"]), *[str(r[f"{role}_{k}"]) for role in ("evaluation", "calibration") for k in kinds],
                  str(r["gap"]))
    legend = {"presence": "P presences", "absence": "A absences", "background": "B background"}
    t.caption = (", ".join(legend[k] for k in kinds) + "; buffer gap: records left out of the fold's calibration set"
                 + (f"; {len(counts) - 25} more folds in the sidecar" if len(counts) > 25 else ""))
    return t


def imbalance_line(p) -> str | None:
    """Fold imbalance per kind the design holds (None when it was not measured)."""
    parts = [f"{word} {v:.3f}" for word, v in (("presences", p.presence_imbalance), ("absences", p.absence_imbalance),
                                               ("background", p.background_imbalance)) if v is not None]
    return "fold imbalance (max-min)/mean: " + ", ".join(parts) if p.presence_imbalance is not None else None


@guarded
def design(
    records: Path = typer.Argument(..., metavar="RECORDS", help="Occurrence records: CSV, GeoPackage or GeoParquet."),
    method: str = typer.Option(_D.method, "--method", metavar="METHOD", help="blocks, hexagons, checkerboard, clusters, groups, holdout-group, period, holdout-period, random or leave-one-out."),
    folds: int = typer.Option(_D.folds, "--folds", metavar="N", help="Number of folds k."),
    block_size: Optional[str] = typer.Option(_D.block_size, "--block-size", metavar="KM", help="Block/hexagon/checkerboard size in km, 'auto' (autocorrelation range of --env) or 'match'."),
    buffer: float = typer.Option(_D.buffer, "--buffer", metavar="KM", help="Buffer radius in km around each fold's evaluation records."),
    env: List[Path] = typer.Option(list(_D.env), "--env", metavar="PATH", help="Covariate GeoTIFF (repeatable)."),
    covariate_column: List[str] = typer.Option(list(_D.covariate_column), "--covariate-column", metavar="COLUMN", help="Covariate column of the records table (repeatable), for clusters."),
    group_column: Optional[str] = typer.Option(_D.group_column, "--group-column", metavar="COLUMN", help="Survey method / source column for groups and holdout-group."),
    calibrate_on: Optional[str] = typer.Option(_D.calibrate_on, "--calibrate-on", metavar="VALUES", help="holdout-group: group values to calibrate on (comma-separated)."),
    evaluate_on: Optional[str] = typer.Option(_D.evaluate_on, "--evaluate-on", metavar="VALUES", help="holdout-group: group values to evaluate on (comma-separated)."),
    time_column: Optional[str] = typer.Option(_D.time_column, "--time-column", metavar="COLUMN", help="Year or date column for period and holdout-period (default: year in any case, else eventDate or date)."),
    periods: Optional[int] = typer.Option(_D.periods, "--periods", metavar="N", help="period: number of contiguous time windows (default: --folds)."),
    calibrate_before: Optional[str] = typer.Option(_D.calibrate_before, "--calibrate-before", metavar="YEAR", help="holdout-period: calibrate before this year (or date), evaluate from it on; with another method, evaluate each fold on its later records only."),
    background: Optional[Path] = typer.Option(_D.background, "--background", metavar="PATH", help="A separate file of background points."),
    background_count: Optional[int] = typer.Option(_D.background_count, "--background-count", metavar="N", help="Sample N background points (seeded) over the --env rasters' valid cells or --region."),
    region: Optional[Path] = typer.Option(_D.region, "--region", metavar="PATH", help="Polygon file of the study region (for --background-count)."),
    generalise: Optional[float] = typer.Option(_D.generalise, "--generalise", metavar="KM", help="Write every coordinate of the fold table as the centre of its KM km cell (sensitive species); folds are made from the exact ones."),
    thin: Optional[str] = typer.Option(_D.thin, "--thin", metavar="cell|KM", help="Thin presences first: 'cell' keeps one per cell of the first --env raster, KM keeps no two closer than KM km (seeded); thinned rows stay, dropped as 'thinned'."),
    x: Optional[str] = X_OPTION,
    y: Optional[str] = Y_OPTION,
    crs: Optional[str] = CRS_OPTION,
    id_column: Optional[str] = ID_OPTION,
    kind_column: Optional[str] = KIND_OPTION,
    alpha: float = typer.Option(_D.alpha, "--alpha", metavar="ALPHA", help="Significance level the folds will be tested at (for the design checks)."),
    adjust: str = typer.Option(_D.adjust, "--adjust", metavar="METHOD", help="'holm' or 'none', as evaluate will use it (for the design checks)."),
    omission: float = typer.Option(_D.omission, "--omission", metavar="SHARE", help="Partial ROC omission tolerance E evaluate will use (for the design checks)."),
    zero_means: Optional[str] = ZERO_OPTION,
    seed: int = typer.Option(_D.seed, "--seed", min=0, metavar="N", help="Seed for every random step."),
    out_path: Path = typer.Option(..., "--out", metavar="PATH", help="Fold table to write: .csv, .gpkg or .parquet."),
):
    """Design calibration/evaluation folds before modelling, and say what each fold's tests can show."""
    from splitter.workflow.job import DESIGN, design_step

    options = _options(locals())
    with progress() as bar, flag_names():
        bar.add_task(f"reading records and making {method} folds", total=None)
        assignment, checks, paths = design_step(records, options, out_path,
                                                command=options.command(DESIGN, records, out_path))
    _print_design(assignment, paths, checks)  # the reader's warnings are among the design's notes
    if generalise is not None:
        _out().print(f"coordinates written generalised to {generalise:g} km cells (folds made from the exact ones)")


def _options(given: dict):
    """The job options a command was given (its other arguments are not options of a job)."""
    from splitter.workflow.job import JobOptions

    values = {}
    for name in JobOptions.names():
        if name not in given:
            continue
        v = given[name]
        if isinstance(v, list):
            v = tuple(str(p) for p in v)
        elif isinstance(v, Path):
            v = str(v)
        values[name] = v
    return JobOptions(**values)


def fold_checks_table(checks):
    """What each fold's tests can show, in 80 columns."""
    t = _table(f"what each fold can show (alpha {checks.alpha:g}"
               + (", Holm across folds" if checks.adjust == "holm" else "") + f", omission {checks.omission:g})")
    for c in ("fold", "eval presences", "binomial bound", "pROC may omit", "buffer removes"):
        t.add_column(c, justify="right")
    show = checks.folds[:25]
    for f in show:
        t.add_row(str(f.fold), str(f.evaluation_presences), f"{f.binomial_bound:.0%}", "yes" if f.can_omit else "no",
                  f"{f.buffer_record_share:.0%} / {f.buffer_presence_share:.0%}")
    t.caption = ("binomial bound: the largest share of the area a model may predict present and still be "
                 "significant if it hits every evaluation presence; buffer removes: share of the fold's calibration "
                 "records / presences")
    if len(checks.folds) > 25:
        t.caption += f"; {len(checks.folds) - 25} more folds in the sidecar"
    return t


# Python parameter -> command-line option, for the design settings (the one place they meet).
FLAGS = {
    # Every job option by its Python name (x, y and audit are words too common to rewrite) ...
    **{f.name: f.metadata["flag"] for f in dataclasses.fields(_JobOptions)
       if f.metadata["flag"] and f.name not in ("x", "y")},
    # ... and the library's own names for two of them.
    "covariates": "--covariate-column", "count": "--background-count",
}


def as_flags(message: str) -> str:
    """``block_size=-3: ...`` -> ``--block-size -3: ...``; `env` or group_column -> the option."""
    import re

    names = "|".join(sorted(FLAGS, key=len, reverse=True))

    def value(m):
        v = m.group(2)
        if len(v) >= 2 and v[0] == v[-1] and v[0] in "'\"":
            v = v[1:-1]
        elif v.startswith("[") and v.endswith("]"):
            v = ",".join(p.strip().strip("'\"") for p in v[1:-1].split(","))
        return f"{FLAGS[m.group(1)]} {v}"

    message = re.sub(rf"\b({names})=('[^']*'|\"[^\"]*\"|\[[^\]]*\]|[^\s:;,)]+)", value, message)
    message = re.sub(rf"`({names})`", lambda m: FLAGS[m.group(1)], message)
    multiword = "|".join(n for n in FLAGS if "_" in n)  # plain words (folds, env) stay words
    return re.sub(rf"(?<![\w-])({multiword})(?![\w=-])", lambda m: FLAGS[m.group(1)], message)


@contextlib.contextmanager
def flag_names():
    """Library errors name Python parameters; on the command line they name options."""
    try:
        yield
    except InputError as e:
        raise InputError(as_flags(str(e))) from None


def _print_warnings(recs):
    """Warnings the record reader raised (e.g. lon/lat-looking values given as a planar grid)."""
    for note in getattr(recs, "notes", ()):
        if note.startswith("warning:"):
            _out().print(note, markup=False, soft_wrap=True)


def _print_design(assignment, paths, checks):
    p = assignment.parameters  # a DesignParameters
    _out().print(fold_summary_table(assignment, f"{assignment.method}: {assignment.n_folds} folds"))
    _out().print(fold_checks_table(checks))
    for w in checks.warnings():
        _out().print(f"warning: {w}")
    if p.block_size_km:
        _out().print(f"block size: {p.block_size_km:.4g} km ({p.block_size_rule or 'given'})")
    if imbalance_line(p):
        _out().print(imbalance_line(p))
    if p.presence_before_thinning is not None:
        how = "one per raster cell" if p.thin == "cell" else f"none closer than {p.thin:g} km"
        _out().print(f"thinning ({how}): {p.presence_before_thinning} presences -> {p.presence_after_thinning} "
                     f"({p.presence_before_thinning - p.presence_after_thinning} thinned)")
    if p.fold_periods:
        _out().print("time windows: " + ", ".join(f"{f}: {v[0]:g}-{v[1]:g}" for f, v in p.fold_periods.items() if len(v) == 2))
    if p.calibrate_before is not None:
        _out().print(f"time: evaluation on records dated from {p.calibrate_before:g} on, calibration on earlier ones"
                  + ("" if assignment.method == "holdout-period" else " outside the fold (the rest counts as gap)"))
    if p.ladder:
        _out().print("block-size ladder (W1 = distance-distribution mismatch, km): " + ", ".join(
            f"{r['block_km']:.4g} km W1={r['wasserstein_km']:.3g}" for r in p.ladder["rungs"]))
    dropped = int((assignment.fold < 0).sum())
    if dropped:
        import pandas as pd

        reasons = pd.Series(assignment.dropped[assignment.fold < 0]).value_counts().sort_index()
        _out().print(f"dropped rows: {dropped} (" + ", ".join(f"{k}: {v}" for k, v in reasons.items()) + ")")
    for note in p.notes or ():
        _out().print(note if note.startswith("warning:") else f"note: {note}", markup=False, soft_wrap=True)
    for role, path in paths.items():
        _out().print(f"{role}: {path}")


def _fmt_p(p) -> str:
    from splitter.report.numbers import fmt_p

    return fmt_p(p) or "-"


def evaluation_table(result, title: str):
    from rich import box

    # Columns two apart, no outer edge: nine columns with "do not interpret" fit 80 characters.
    t = _table(title, box=box.SIMPLE_HEAD, padding=(0, 1), pad_edge=False, collapse_padding=True, show_edge=False)
    for c in ("fold", "verdict", "p adj.", "binom p", "pROC p", "ratio", "null", "AUC", "TSS"):
        t.add_column(c, justify="left" if c in ("fold", "verdict") else "right", no_wrap=True)
    rows = [f.row for f in result.folds] + [result.summary.to_row()]
    for r in rows:
        perf = bool(r["significant"])
        num = (lambda v: f"{v:.3f}") if perf else (lambda v: "-")
        null = f"{r['auc_ratio_null_median']:.3f}" if r["fold"] != "all" else ""
        t.add_row(str(r["fold"]), r["interpretation"], _fmt_p(r["p_adjusted"]), _fmt_p(r["binomial_p"]),
                  _fmt_p(r["partial_roc_p"]), f"{r['auc_ratio']:.3f}" if r["fold"] != "all" else num(r["auc_ratio"]),
                  null, num(r["auc"]), num(r["tss"]))
    summary = result.summary
    test = "jackknife test" if summary.combined_test == "jackknife" else "smallest Holm-adjusted p"
    t.caption = (f"ratio = observed AUC ratio, null = median for random presences; 'all': {test}, "
                 f"means over {summary.n_interpretable} interpretable fold(s)")
    return t


@guarded
def evaluate(
    folds_table: Path = typer.Argument(..., metavar="FOLDS", help="Fold table (ours, or your own with a fold column)."),
    predictions: Optional[str] = typer.Option(_D.predictions, "--predictions", metavar="PATTERN", help="Prediction raster pattern with {fold}, e.g. 'preds/fold_{fold}.tif'."),
    prediction_table: Optional[Path] = typer.Option(_D.prediction_table, "--prediction-table", metavar="PATH", help="CSV with record_id, fold, prediction."),
    model: Optional[str] = typer.Option(_D.model, "--model", metavar="NAME", help="'baseline': fit the built-in model per fold over --env rasters."),
    env: List[Path] = typer.Option(list(_D.env), "--env", metavar="PATH", help="Covariate GeoTIFF for --model (repeatable)."),
    covariate_column: List[str] = typer.Option(list(_D.covariate_column), "--covariate-column", metavar="COLUMN", help="Covariate column of the fold table for --model, instead of --env (repeatable or comma-separated)."),
    region: Optional[Path] = typer.Option(_D.region, "--region", metavar="PATH", help="Polygon file cutting the testing region."),
    fold_column: str = typer.Option(_D.fold_column, "--fold-column", metavar="COLUMN", help="Column holding the folds."),
    threshold: str = typer.Option(_D.threshold, "--threshold", metavar="RULE", help="lowest, quantile:Q, value:V or max-tss (from calibration presences)."),
    omission: float = typer.Option(_D.omission, "--omission", metavar="SHARE", help="Partial ROC omission tolerance E."),
    replicates: int = typer.Option(_D.replicates, "--replicates", metavar="N", help="Partial ROC replicates: bootstrap and null of random presences."),
    alpha: float = typer.Option(_D.alpha, "--alpha", metavar="ALPHA", help="Significance level."),
    adjust: str = typer.Option(_D.adjust, "--adjust", metavar="METHOD", help="'holm': adjust fold p-values across folds (Holm); 'none'."),
    x: Optional[str] = X_OPTION,
    y: Optional[str] = Y_OPTION,
    crs: Optional[str] = CRS_OPTION,
    id_column: Optional[str] = ID_OPTION,
    kind_column: Optional[str] = KIND_OPTION,
    zero_means: Optional[str] = ZERO_OPTION,
    seed: int = typer.Option(_D.seed, "--seed", min=0, metavar="N", help="Seed for the bootstrap and the null."),
    fail_on: Optional[str] = typer.Option(None, "--fail-on", metavar="CONDITION", help="'not-significant': exit 1 when any fold is not significant."),
    out_dir: Path = typer.Option(..., "--out", metavar="PATH", help="Output folder."),
):
    """Test each fold's predictions: significance first, then performance."""
    from splitter.workflow.job import EVALUATE, evaluate_step, read_step

    if fail_on not in (None, "not-significant"):
        raise InputError(f"--fail-on {fail_on}: the only choice is 'not-significant'.")
    options = _options(locals())
    recs, assignment, names = read_step(folds_table, options)
    _print_warnings(recs)
    with progress() as bar:
        steps = assignment.n_folds * (2 if model else 1)
        task = bar.add_task("evaluating folds", total=steps)
        result, paths = evaluate_step(assignment, names, options, out_dir,
                                      command=options.command(EVALUATE, folds_table, out_dir), fold_table=folds_table,
                                      progress=lambda: bar.advance(task))
    _out().print(evaluation_table(result, f"per-fold evaluation (alpha {alpha:g}; significance first)"))
    others = sorted({f.other_kind for f in result.folds if f.n_other})
    if others:
        words = {"absence": "absences (true specificity)", "background": "background (pseudo-specificity)"}
        _out().print("presences compared with evaluation " + " or ".join(words[o] for o in others)
                     + ("; folds with absences used them" if len(others) > 1 else ""))
    for w in result.warnings:
        _out().print(f"warning: {w}")
    for n in result.parameters.get("notes", []):
        _out().print(f"note: {n}")
    for role, p in paths.items():
        _out().print(f"{role}: {p}")
    if fail_on == "not-significant" and not all(f.row["significant"] for f in result.folds):
        raise typer.Exit(1)


@guarded
def range_command(
    records: Optional[Path] = typer.Argument(None, metavar="RECORDS", help="Records table whose own columns give the variograms (instead of --env rasters)."),
    env: List[Path] = typer.Option([], "--env", metavar="PATH", help="Covariate GeoTIFF (repeatable)."),
    covariate_column: List[str] = typer.Option([], "--covariate-column", metavar="COLUMN", help="Numeric covariate column of RECORDS (repeatable)."),
    response: bool = typer.Option(False, "--response", help="Also the indicator variogram of RECORDS' presence/absence (0/1) response."),
    region: Optional[Path] = typer.Option(None, "--region", metavar="PATH", help="Polygon file limiting the raster cell sample."),
    sample: int = typer.Option(2000, "--sample", metavar="N", help="Cells (or records) sampled for the variograms."),
    x: Optional[str] = X_OPTION,
    y: Optional[str] = Y_OPTION,
    crs: Optional[str] = CRS_OPTION,
    id_column: Optional[str] = ID_OPTION,
    kind_column: Optional[str] = KIND_OPTION,
    zero_means: Optional[str] = ZERO_OPTION,
    seed: int = typer.Option(0, "--seed", min=0, metavar="N", help="Seed for the cell or record sample."),
    out_dir: Path = typer.Option(..., "--out", metavar="PATH", help="Output folder."),
):
    """Estimate the autocorrelation range (from rasters or the records' own columns) and suggest a block size."""
    from splitter.workflow.range_estimate import estimate_range_from_rasters, estimate_range_from_records
    from splitter.report.outputs import write_range

    if records is None and (covariate_column or response):
        raise InputError("--covariate-column and --response read a records table: give RECORDS before the options.")
    if records is not None and env:
        raise InputError("give --env rasters or a RECORDS table with --covariate-column/--response, not both.")
    if records is None and not env:
        raise InputError("give --env RASTER (repeatable), or a RECORDS table with --covariate-column COL or --response.")
    if records is not None and not (covariate_column or response):
        raise InputError(f"{records}: name its covariates with --covariate-column COL (repeatable) or use --response.")
    if records is not None and not 50 <= sample <= 10_000:
        raise InputError(f"--sample {sample}: give a number of records between 50 and 10000.")
    if records is None and sample < 50:
        raise InputError(f"--sample {sample}: a variogram needs at least 50 cells (2000 is a good default).")
    with progress() as bar:
        if records is None:
            bar.add_task("sampling cells and fitting variograms", total=None)
            est = estimate_range_from_rasters(env, sample=sample, seed=seed, region=region)
            source = {"env": [str(p) for p in env]}
        else:
            from splitter.io.records import read_records

            bar.add_task("reading records and fitting variograms", total=None)
            recs = read_records(records, x=x, y=y, crs=crs, id_column=id_column, kind_column=kind_column, zero_means=zero_means)
            _print_warnings(recs)
            est = estimate_range_from_records(recs, covariates=covariate_column, response=response, sample=sample, seed=seed)
            source = {"records": str(records), "covariate_columns": list(covariate_column), "response": bool(response)}
        paths = write_range(est, out_dir, extra={"sample": sample, "seed": seed, **source, "command": command_line()})
    t = _table("autocorrelation range per covariate")
    for c in ("covariate", "model", "range km", "sill", "nugget", "r2", "chosen"):
        t.add_column(c, justify="left" if c in ("covariate", "model") else "right")
    for r in est.to_frame().itertuples():
        t.add_row(r.covariate, r.model, f"{r.range_km:.1f}", f"{r.sill:.3g}", f"{r.nugget:.3g}", f"{r.r2:.3f}", "yes" if r.chosen else "")
    _out().print(t)
    _out().print(f"suggested block size: {est.suggested_block_km:.1f} km ({est.summary_rule})")
    for n in est.notes:
        _out().print(f"note: {n}")
    for role, p in paths.items():
        _out().print(f"{role}: {p}")


def audit_table(result, what: str = "presences"):
    """Per-fold dependence within 80 columns; why a fold was flagged goes under the table."""
    from rich import box

    t = _table(f"residual dependence per fold, {what}: {result.verdict}", box=box.SIMPLE_HEAD, padding=(0, 1), pad_edge=False,
               caption_justify="left")
    for c in ("fold", "n", "NN km", "<range", "W1 km", "D", "out", "method", "verdict"):
        t.add_column(c, justify="left" if c in ("fold", "verdict") else "right", no_wrap=True)
    f = result.to_frame()
    num = lambda v, d=2: "-" if v is None or v != v else f"{v:.{d}f}"
    with_null = lambda v, share: num(v) if share != share else f"{num(v)} ({100 * share:.0f}%)"
    why = []
    for i, r in enumerate(f.itertuples()):
        reason = ", ".join(result.fired(i)) or (result.notes[i] if r.verdict == "insufficient" else "")
        if reason:
            why.append(f"fold {r.fold}: {reason}")
        t.add_row(str(r.fold), str(r.n_evaluation), num(r.nn_median_km, 1), num(r.share_within_range),
                  num(r.wasserstein_km, 1), with_null(r.schoener_d, r.schoener_d_null_share),
                  num(r.share_outside_envelope), with_null(r.shared_method_share, r.shared_method_null_share),
                  r.verdict)
    t.caption = ("NN km: median distance from an evaluation record to the nearest calibration record; <range: "
                 "share of them within the range; W1: distance-distribution mismatch; D: Schoener's D; out: share "
                 "outside the calibration envelope; method: shared survey methods; (x%): share of random "
                 "re-splits at least as dependent (better than random when at least the rule's threshold)"
                 + ("".join(f"\n{w}" for w in why)))
    return t


@guarded
def audit(
    table: Path = typer.Argument(..., metavar="TABLE", help="Fold table: ours, or your own with a fold or role column."),
    fold_column: str = typer.Option(_D.fold_column, "--fold-column", metavar="COLUMN", help="Column with fold numbers or names."),
    role_column: Optional[str] = typer.Option(_D.role_column, "--role-column", metavar="COLUMN", help="Column saying calibration/evaluation (instead of folds)."),
    env: List[Path] = typer.Option(list(_D.env), "--env", metavar="PATH", help="Covariate GeoTIFF (repeatable): environment diagnostics and prediction locations."),
    covariate_column: List[str] = typer.Option(list(_D.covariate_column), "--covariate-column", metavar="COLUMN", help="Covariate column measured at the sites (repeatable or comma-separated): environment diagnostics without rasters."),
    range_km: Optional[float] = typer.Option(_D.range_km, "--range-km", metavar="KM", help="Autocorrelation range in km."),
    range_from: Optional[Path] = typer.Option(_D.range_from, "--range-from", metavar="PATH", help="Folder written by 'splitter range'."),
    group_column: Optional[str] = typer.Option(_D.group_column, "--group-column", metavar="COLUMN", help="Survey method / source column."),
    time_column: Optional[str] = typer.Option(_D.time_column, "--time-column", metavar="COLUMN", help="Year or date column: the time gap between evaluation and calibration records (default: the design's, else year, eventDate or date)."),
    region: Optional[Path] = typer.Option(_D.region, "--region", metavar="PATH", help="Polygon of the prediction region."),
    x: Optional[str] = X_OPTION,
    y: Optional[str] = Y_OPTION,
    crs: Optional[str] = CRS_OPTION,
    id_column: Optional[str] = ID_OPTION,
    kind_column: Optional[str] = KIND_OPTION,
    zero_means: Optional[str] = ZERO_OPTION,
    seed: int = typer.Option(_D.seed, "--seed", min=0, metavar="N", help="Seed for the prediction-location sample and the random re-splits."),
    null_splits: int = typer.Option(_D.null_splits, "--null-splits", metavar="N", help="Random re-splits per fold that the environment and collection-method rules compare the split with (at least 19)."),
    fail_on: Optional[str] = typer.Option(None, "--fail-on", metavar="CONDITION", help="'dependent': exit 1 when any fold is flagged."),
    out_dir: Path = typer.Option(..., "--out", metavar="PATH", help="Output folder."),
):
    """Audit a split for residual dependence between calibration and evaluation data."""
    from splitter.workflow.job import AUDIT, audit_step, read_step

    if fail_on not in (None, "dependent"):
        raise InputError(f"--fail-on {fail_on}: the only choice is 'dependent'.")
    options = _options(locals())
    recs, assignment, names = read_step(table, options)
    _print_warnings(recs)
    with progress() as bar:
        bar.add_task("measuring distances and environmental overlap", total=None)
        result, context, paths = audit_step(assignment, names, options, out_dir,
                                            command=options.command(AUDIT, table, out_dir))
    _out().print(audit_table(result))
    if context.get("absences") is not None:
        _out().print(audit_table(context["absences"], "absences to absences"))
    _out().print("rules (a fold is dependent when any applicable rule fires):")
    for r in result.rules:
        _out().print(f"  {r['name']}: {r['rule']} (threshold {r['threshold']:g})")
    if context.get("time_gaps"):
        _out().print(f"time apart ({context['time_column']}; median years from an evaluation presence to the nearest "
                     "calibration presence, share dated after all calibration): " + ", ".join(
                         f"fold {g['fold']}: {g['median_years']:.1f} ({g['later_share']:.0%})" for g in context["time_gaps"]
                         if g["median_years"] == g["median_years"]))
    rk = context.get("range_km")
    _out().print(f"autocorrelation range: {'not given' if rk is None else f'{rk:.1f} km'} ({context.get('range_source') or 'no range: distance rule not applied'})")
    for n in context.get("notes", []):
        _out().print(f"note: {n}")
    for role, p in paths.items():
        _out().print(f"{role}: {p}")
    if fail_on == "dependent" and any(v == "dependent" for v in result.verdicts):
        raise typer.Exit(1)


@guarded
def appendix(
    run_dir: Path = typer.Argument(..., metavar="RUN_DIR", help="A run folder (a split with its audit/ and evaluation/), or a folder of several."),
    out_dir: Path = typer.Option(..., "--out", metavar="PATH", help="Output folder for the appendix."),
    generalise: Optional[float] = typer.Option(None, "--generalise", metavar="KM", help="Snap every coordinate in the appendix to a grid of KM km (sensitive species)."),
):
    """Write a methods appendix (Markdown, self-contained HTML, CSV tables, PNG/SVG figures)."""
    from splitter.report.appendix import build_appendix

    if not run_dir.is_dir():
        raise InputError(f"{run_dir}: not a folder; give the folder that holds the run's fold table, audit/ and evaluation/.")
    if generalise is not None and not generalise > 0:
        raise InputError(f"--generalise {generalise}: give a grid size in km greater than 0.")
    with progress() as bar:
        bar.add_task("writing the appendix", total=None)
        result = build_appendix(run_dir, out_dir, generalise_km=generalise)
    _out().print(f"appendix: {result.html}")
    _out().print(f"markdown: {result.markdown}")
    _out().print(f"tables: {len(result.tables)} CSV, figures: {len(result.figures)} files in {out_dir}")


@guarded
def demo(
    out_dir: Path = typer.Argument(Path("splitter-demo"), metavar="OUT_DIR", help="Where to write the demo run."),
    seed: int = typer.Option(1, "--seed", min=0, metavar="N", help="Seed for every random step."),
    replicates: int = typer.Option(1000, "--replicates", metavar="N", help="Partial ROC bootstrap replicates."),
    generalise: Optional[float] = typer.Option(None, "--generalise", metavar="KM", help="Write every coordinate (fold tables, appendix) as the centre of its KM km cell; the audit then measures between cell centres."),
):
    """Run the whole job on the bundled invented scenario: range, folds, audit, evaluation, appendix."""
    from splitter.demo import run_demo

    with progress() as bar, flag_names():
        task = bar.add_task("starting", total=None)
        run = run_demo(out_dir, seed=seed, replicates=replicates, step=lambda s: bar.update(task, description=s),
                       generalise_km=generalise)
    out = _out()
    out.print(demo_summary(run))
    out.print(f"autocorrelation range (blocks and buffer): {run.range_km:.1f} km")
    if run.optimism is not None:
        o = run.optimism
        out.print(f"one flexible model, both splits: AUC {o.means[o.reference]['auc']:.3f} ({o.reference}), "
                  f"{o.means[o.compared]['auc']:.3f} ({o.compared}); the {o.compared} split claims "
                  f"{o.differences['auc']:+.3f}")
    out.print(f"outputs: {run.out_dir}")
    out.print(f"appendix: {run.appendix.html}")
    for line in _demo_next_steps(run):
        out.print(line, markup=False, soft_wrap=True)


def demo_summary(run):
    from rich import box

    t = _table("demo: spatial blocks against a random split", box=box.SIMPLE_HEAD, padding=(0, 1))
    for c in ("split", "fold", "audit", "NN km", "verdict", "AUC ratio", "null"):
        t.add_column(c, justify="left" if c in ("split", "audit", "verdict") else "right", no_wrap=True)
    for n, split in run.splits.items():
        a, e = split["audit"], split["evaluation"]
        nn = a.to_frame()["nn_median_km"].to_numpy()
        for i, f in enumerate(e.folds):
            row = f.row
            t.add_row(n if i == 0 else "", row["fold"], a.verdicts[i], f"{nn[i]:.1f}", row["interpretation"],
                      f"{row['auc_ratio']:.3f}", f"{row['auc_ratio_null_median']:.3f}")
        t.add_section()
    t.caption = ("NN km: median distance from an evaluation presence to the nearest calibration presence; "
                 "null: median AUC ratio of as many presences placed at random")
    return t


def _demo_next_steps(run) -> list[str]:
    """The same job on one's own records, in three commands."""
    return [
        "the same job on your own records (add --env RASTER for covariates):",
        "  splitter design RECORDS.csv --block-size KM --buffer KM --out folds.csv",
        "  splitter audit folds.csv --out audit/",
        "  splitter evaluate folds.csv --prediction-table PREDS.csv --out evaluation/",
    ]


def batch_command(
    manifest: Path = typer.Argument(..., metavar="MANIFEST",
                                    help="Manifest CSV: one run per row; columns run, records and any "
                                         "design/audit/evaluate option (method, folds, block_size, buffer, "
                                         "env, seed, model, replicates, ...)."),
    out_dir: Path = typer.Option(..., "--out", metavar="PATH", help="Output folder: one folder per run, plus batch.csv."),
    workers: Optional[int] = typer.Option(None, "--workers", metavar="N",
                                          help="Worker processes of the local Dask cluster (default 2)."),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", metavar="ADDRESS",
                                            help="Address of a running Dask scheduler, e.g. tcp://127.0.0.1:8786, "
                                                 "instead of a local cluster."),
):
    """Run many designs, audits and evaluations (e.g. one per species) from a manifest, on Dask.

    Each run writes OUT/RUN/folds.csv, OUT/RUN/audit/ and OUT/RUN/evaluation/ as the
    single commands would; OUT/batch.csv has one row per run. A rerun skips runs
    whose options and input files are unchanged. Exit codes: 0 every run ok or
    skipped, 1 at least one run failed (the others are done), 2 bad manifest or options.
    """
    from splitter.batch import run_batch

    with progress() as bar:
        task = bar.add_task("checking the manifest", total=None)

        def step(done, total):
            bar.update(task, completed=done, total=total, description=f"runs done: {done} of {total}")

        result = run_batch(manifest, out_dir, workers=workers, scheduler=scheduler, progress=step)
    _out().print(batch_table(result))
    out = _out()
    out.print(f"runs ok: {result.n_ok}, skipped (unchanged): {result.n_skipped}, failed: {result.n_failed}")
    for run, why in result.failures.items():
        out.print(f"failed: {run}: {why}", markup=False, soft_wrap=True)
    out.print(f"summary: {result.table}")
    out.print(f"outputs: {result.out_dir}")
    if result.n_failed:
        raise typer.Exit(1)


def batch_table(result):
    """One line per run (only the failed ones when there are more than 40 runs)."""
    from rich import box

    # The light frame of the other per-fold tables, columns two apart, the fold count only
    # in "significant" (3/5) and batch.csv: the longest values fit 80 characters with run
    # names of up to 10; longer names squeeze the other columns, not themselves.
    t = _table(f"batch: {len(result.rows)} runs", box=box.SIMPLE_HEAD, padding=(0, 1), pad_edge=False,
               collapse_padding=True, show_edge=False)
    shown = result.rows if len(result.rows) <= 40 else [r for r in result.rows if r["status"] == "failed"]
    # Never cut: they say which run and how it went.
    keep = {c: max((len(r[c]) for r in shown), default=len(c)) for c in ("run", "status")}
    for c in ("run", "status", "method", "presences", "audit", "significant", "seconds"):
        t.add_column(c, justify="left" if c in ("run", "status", "method", "audit") else "right",
                     no_wrap=c in keep, min_width=keep.get(c))
    text = lambda v: "" if v is None else str(v)  # noqa: E731
    for r in shown:
        sig = "" if r["folds_evaluated"] is None else f"{r['folds_significant']}/{r['folds_evaluated']}"
        secs = "-" if r["status"] == "skipped" or r["seconds"] is None else f"{float(r['seconds']):.2f}"
        t.add_row(r["run"], r["status"], text(r["method"]), text(r["n_presence"]), text(r["audit_verdict"]), sig, secs)
    if len(shown) < len(result.rows):
        t.caption = f"failed runs only; every run is in {result.table}"
    return t


def _register(fn, name=None):
    """Add a command; its docstring's paragraphs are reflowed so the terminal wraps them."""
    import inspect

    paragraphs = inspect.cleandoc(fn.__doc__ or "").split("\n\n")
    text = "\n\n".join(" ".join(p.split()) for p in paragraphs)
    app.command(name, cls=_Command, help=text, short_help=text.split("\n\n")[0])(fn)


# Commands, in the order a newcomer meets them.
_register(demo)
_register(design)
_register(range_command, "range")
_register(audit)
_register(evaluate)
_register(appendix)
_register(guarded(batch_command), "batch")


def run():  # pragma: no cover - console entry for python -m
    app()


if __name__ == "__main__":  # pragma: no cover
    sys.exit(app())
