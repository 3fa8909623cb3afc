"""One job's options, with their defaults in one place, and the job itself.

A job reads records, designs folds, writes the fold table, reads it back (as a
user's next command would), audits it and evaluates predictions on it. The
command line, ``batch`` and the demo all build a :class:`JobOptions` and call
:func:`run_job` or one of its steps; the command recorded in each sidecar comes
from :meth:`JobOptions.command`, so the same options are recorded the same way
wherever the job ran.

This module imports nothing heavy at import time: the command line reads its
defaults from it before any command runs.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from pathlib import Path

from splitter.errors import InputError

__all__ = ["JobOptions", "JobResult", "run_job", "design_step", "audit_step", "evaluate_step", "parse_option"]

DESIGN, AUDIT, EVALUATE = "design", "audit", "evaluate"
READ = (DESIGN, AUDIT, EVALUATE)  # options that say how to read the records go with every step


def _opt(flag: str, kind: str, steps: tuple) -> dict:
    return {"flag": flag, "kind": kind, "steps": steps}


@dataclass(frozen=True)
class JobOptions:
    """Every option of a job, by the Python name the library uses, with its default.

    ``steps`` in each field's metadata say which commands take it, ``flag`` its
    command-line spelling and ``kind`` how a text cell (a batch manifest) is read.
    """

    # How to read the records.
    x: str | None = field(default=None, metadata=_opt("--x", "text", READ))
    y: str | None = field(default=None, metadata=_opt("--y", "text", READ))
    crs: str | None = field(default=None, metadata=_opt("--crs", "text", READ))
    id_column: str | None = field(default=None, metadata=_opt("--id-column", "text", READ))
    kind_column: str | None = field(default=None, metadata=_opt("--kind-column", "text", READ))
    zero_means: str | None = field(default=None, metadata=_opt("--zero-means", "zero_means", READ))
    background: str | None = field(default=None, metadata=_opt("--background", "path", (DESIGN,)))
    background_count: int | None = field(default=None, metadata=_opt("--background-count", "int", (DESIGN,)))
    region: str | None = field(default=None, metadata=_opt("--region", "path", READ))
    # Design.
    method: str = field(default="blocks", metadata=_opt("--method", "method", (DESIGN,)))
    folds: int = field(default=5, metadata=_opt("--folds", "int", (DESIGN,)))
    block_size: str | None = field(default=None, metadata=_opt("--block-size", "block_size", (DESIGN,)))
    buffer: float = field(default=0.0, metadata=_opt("--buffer", "float", (DESIGN,)))
    env: tuple = field(default=(), metadata=_opt("--env", "paths", READ))
    covariate_column: tuple = field(default=(), metadata=_opt("--covariate-column", "names", READ))
    group_column: str | None = field(default=None, metadata=_opt("--group-column", "text", (DESIGN, AUDIT)))
    calibrate_on: str | None = field(default=None, metadata=_opt("--calibrate-on", "text", (DESIGN,)))
    evaluate_on: str | None = field(default=None, metadata=_opt("--evaluate-on", "text", (DESIGN,)))
    time_column: str | None = field(default=None, metadata=_opt("--time-column", "text", (DESIGN, AUDIT)))
    periods: int | None = field(default=None, metadata=_opt("--periods", "int", (DESIGN,)))
    calibrate_before: str | None = field(default=None, metadata=_opt("--calibrate-before", "text", (DESIGN,)))
    thin: str | None = field(default=None, metadata=_opt("--thin", "text", (DESIGN,)))
    generalise: float | None = field(default=None, metadata=_opt("--generalise", "float", (DESIGN,)))
    seed: int = field(default=0, metadata=_opt("--seed", "int", READ))
    # Reading a fold table back (a user's own table names its fold or role column).
    fold_column: str = field(default="fold", metadata=_opt("--fold-column", "text", (AUDIT, EVALUATE)))
    role_column: str | None = field(default=None, metadata=_opt("--role-column", "text", (AUDIT,)))
    # Audit.
    audit: bool = field(default=True, metadata=_opt("", "yesno", ()))
    range_km: float | None = field(default=None, metadata=_opt("--range-km", "float", (AUDIT,)))
    range_from: str | None = field(default=None, metadata=_opt("--range-from", "path", (AUDIT,)))
    null_splits: int = field(default=199, metadata=_opt("--null-splits", "int", (AUDIT,)))
    # Evaluation.
    predictions: str | None = field(default=None, metadata=_opt("--predictions", "pattern", (EVALUATE,)))
    prediction_table: str | None = field(default=None, metadata=_opt("--prediction-table", "path", (EVALUATE,)))
    model: str | None = field(default=None, metadata=_opt("--model", "model", (EVALUATE,)))
    threshold: str = field(default="quantile:0.1", metadata=_opt("--threshold", "threshold", (EVALUATE,)))
    omission: float = field(default=0.05, metadata=_opt("--omission", "float", (DESIGN, EVALUATE)))
    replicates: int = field(default=1000, metadata=_opt("--replicates", "int", (EVALUATE,)))
    alpha: float = field(default=0.05, metadata=_opt("--alpha", "float", (DESIGN, EVALUATE)))
    adjust: str = field(default="holm", metadata=_opt("--adjust", "adjust", (DESIGN, EVALUATE)))

    @property
    def evaluates(self) -> bool:
        """Whether the job has predictions to evaluate (rasters, a table or the built-in model)."""
        return any(v is not None for v in (self.predictions, self.prediction_table, self.model))

    def replace(self, **changes) -> "JobOptions":
        return replace(self, **changes)

    @classmethod
    def names(cls) -> tuple:
        return tuple(f.name for f in fields(cls))

    def command(self, step: str, target, out, *, root=None) -> str:
        """The single command that does ``step`` with these options, as a sidecar records it.

        Options at their default are left out, except ``--seed``; files are named
        as outputs name them (:func:`splitter.io.paths.shown`, relative to ``root``).

        Examples
        --------
        >>> JobOptions(method="random", folds=4, seed=3).command("design", "records.csv", "run/folds.csv")
        'splitter design records.csv --method random --folds 4 --seed 3 --out run/folds.csv'
        """
        import shlex

        from splitter.io.paths import shown

        def text(v):
            return shown(v, root) if isinstance(v, Path) or (isinstance(v, str) and v.startswith("/")) else str(v)

        args = [step, text(target)]
        for f in fields(self):
            meta = f.metadata
            if step not in meta["steps"]:
                continue
            value = getattr(self, f.name)
            if value == f.default and f.name != "seed":
                continue
            if isinstance(value, tuple):
                args += [a for v in value for a in (meta["flag"], text(v))]
            elif isinstance(value, bool):
                args += [meta["flag"]] if value else []
            else:
                args += [meta["flag"], text(value if not isinstance(value, float) else f"{value:g}")]
        return "splitter " + shlex.join([*args, "--out", text(out)])


# --- reading options from text (a batch manifest's cells) --------------------

_YES = {"yes": True, "y": True, "true": True, "1": True, "no": False, "n": False, "false": False, "0": False}


def parse_option(name: str, value: str, base: Path):
    """One option from its text, checked; relative paths are taken from ``base``.

    Raises ``InputError`` with the reason only (the caller says where the text came from).

    >>> parse_option("folds", "4", Path("."))
    4
    >>> parse_option("block_size", "huge", Path("."))
    Traceback (most recent call last):
    ...
    splitter.errors.InputError: 'huge' is not a size; give a size in km, 'auto' or 'match'.
    """
    kind = _FIELDS[name].metadata["kind"]

    def bad(what):
        return InputError(f"'{value}' {what}")

    if kind == "int":
        try:
            f = float(value)
        except ValueError:
            raise bad("is not a number; give a whole number.") from None
        if not f.is_integer():
            raise bad("is not a whole number; give a whole number.")
        return int(f)
    if kind == "float":
        try:
            f = float(value)
        except ValueError:
            raise bad("is not a number; give a number (use '.' for decimals).") from None
        if f != f or f in (float("inf"), float("-inf")):
            raise bad("is not a finite number; give a number.")
        return f
    if kind == "block_size":
        if value.lower() in ("auto", "match"):
            return value.lower()
        try:
            f = float(value)
        except ValueError:
            raise bad("is not a size; give a size in km, 'auto' or 'match'.") from None
        if not f > 0:
            raise bad("is not a positive size; give a size in km, 'auto' or 'match'.")
        return value
    if kind == "method":
        from splitter.partition import METHODS

        if value not in METHODS:
            raise bad(f"is not a method; choose one of {', '.join(METHODS)}.")
        return value
    if kind == "model":
        if value != "baseline":
            raise bad("is not a model; the built-in model is 'baseline' (leave empty for none).")
        return value
    if kind == "threshold":
        from splitter.evaluate import ThresholdRule

        try:
            ThresholdRule.parse(value)
        except InputError as e:
            raise bad(f"is not a threshold rule ({e})") from None
        return value
    if kind == "zero_means":
        if value.lower() not in ("absence", "background"):
            raise bad("is not a reading of 0; give 'absence' (surveyed, not found) or 'background'.")
        return value.lower()
    if kind == "adjust":
        if value.lower() not in ("holm", "none"):
            raise bad("is not an adjustment; give 'holm' or 'none'.")
        return value.lower()
    if kind == "yesno":
        if value.lower() not in _YES:
            raise bad("is not yes or no.")
        return _YES[value.lower()]
    if kind == "path":
        return str((base / value).resolve())
    if kind == "paths":
        return tuple(str((base / p.strip()).resolve()) for p in value.split(";") if p.strip())
    if kind == "names":
        return tuple(p.strip() for p in value.split(";") if p.strip())
    if kind == "pattern":
        if "{fold}" not in value:
            raise bad("has no {fold}; give a raster pattern such as preds/fold_{fold}.tif.")
        return str((base / value).resolve())
    return value  # text


_FIELDS = {f.name: f for f in fields(JobOptions)}


# --- the job ----------------------------------------------------------------------

@dataclass(frozen=True)
class JobResult:
    """What a job made: the folds as written and read back, and what was measured on them.

    Attributes
    ----------
    assignment : FoldAssignment
        The fold table as the audit and evaluation read it back.
    fold_names : dict
    checks : FoldChecks
        What each fold's tests can show.
    audit, audit_context : AuditResult and its context, or None
    evaluation : EvaluationResult or None
    commands : dict
        Step -> the single command that writes the same outputs.
    """

    assignment: object
    fold_names: dict
    checks: object
    audit: object = None
    audit_context: dict | None = None
    evaluation: object = None
    commands: dict = field(default_factory=dict)


def design_step(records, options: JobOptions, out, *, command: str | None = None):
    """Read the records, design the folds and write the fold table, gaps and sidecar.

    Returns the assignment as designed, its checks and the paths written.
    """
    from splitter.io.foldtable import write_design
    from splitter.partition.testability import check_folds
    from splitter.workflow.design import rule_for
    from splitter.workflow.loading import load_records

    o = options
    rule = rule_for(o.method, folds=o.folds, block_size=o.block_size, buffer=o.buffer, env=list(o.env),
                    covariates=list(o.covariate_column), group_column=o.group_column, calibrate_on=o.calibrate_on,
                    evaluate_on=o.evaluate_on, time_column=o.time_column, periods=o.periods,
                    calibrate_before=o.calibrate_before, seed=o.seed)
    recs = load_records(records, x=o.x, y=o.y, crs=o.crs, id_column=o.id_column, kind_column=o.kind_column,
                        background=o.background, background_count=o.background_count, env=list(o.env),
                        region=o.region, seed=o.seed, zero_means=o.zero_means)
    assignment = rule.assign(recs, thin=o.thin)  # text or km: the rule checks it
    checks = check_folds(assignment, alpha=o.alpha, adjust=o.adjust, omission=o.omission)
    if o.generalise is not None and not o.generalise > 0:
        raise InputError(f"generalise={o.generalise:g}: give a grid size in km greater than 0.")
    paths = write_design(assignment, out, command=command or o.command(DESIGN, records, out), checks=checks,
                         generalise_km=o.generalise)
    return assignment, checks, paths


def read_step(table, options: JobOptions):
    """The fold table read back: records, assignment and fold names."""
    from splitter.io.foldtable import read_fold_table

    o = options
    return read_fold_table(table, fold_column=None if o.role_column else o.fold_column, role_column=o.role_column,
                           x=o.x, y=o.y, crs=o.crs, id_column=o.id_column, kind_column=o.kind_column,
                           zero_means=o.zero_means)


def audit_step(assignment, fold_names, options: JobOptions, out_dir, *, command: str):
    """Audit the folds and write the audit folder (tables, JSON, figure)."""
    from splitter.report.outputs import write_audit
    from splitter.workflow.audit import audit

    o = options
    result, context = audit(assignment, env=list(o.env), covariates=list(o.covariate_column), range_km=o.range_km,
                            range_from=o.range_from,
                            group_column=o.group_column, region=o.region, seed=o.seed, fold_names=fold_names,
                            null_splits=o.null_splits, time_column=o.time_column)
    context["command"] = command
    digest = fold_table_digest(assignment)
    if digest:
        context["fold_table_sha256"] = digest  # the appendix checks it against the fold table beside it
    paths = write_audit(result, context, out_dir)
    return result, context, paths


def evaluate_step(assignment, fold_names, options: JobOptions, out_dir, *, command: str, fold_table=None,
                  progress=None):
    """Evaluate predictions on the folds and write the evaluation folder."""
    from splitter.report.outputs import write_evaluation
    from splitter.workflow.evaluation import evaluate

    o = options
    out_dir = Path(out_dir)
    result = evaluate(assignment, predictions=o.predictions, prediction_table=o.prediction_table, model=o.model,
                      env=list(o.env), covariates=list(o.covariate_column), region=o.region, threshold=o.threshold, omission=o.omission,
                      replicates=o.replicates, alpha=o.alpha, adjust=o.adjust, seed=o.seed,
                      prediction_dir=out_dir / "predictions" if o.model else None, fold_names=fold_names,
                      progress=progress)
    extra = {"command": command}
    if fold_table is not None:
        extra["fold_table"] = str(fold_table)
    digest = fold_table_digest(assignment)
    if digest:
        extra["fold_table_sha256"] = digest  # the appendix checks it against the fold table beside it
    return result, write_evaluation(result, out_dir, extra=extra)


def fold_table_digest(assignment) -> str | None:
    """SHA-256 of the fold table file the folds were read from (taken when it was read),
    or None for folds that came from no file."""
    params = assignment.parameters if isinstance(assignment.parameters, dict) else {}
    source = params.get("source_table")
    recs = assignment.records
    return (recs.sources or {}).get(source) if recs is not None and source else None


def run_job(records, options: JobOptions, out_dir, *, final_dir=None, root=None, check=None) -> JobResult:
    """The whole job into ``out_dir``: ``folds.csv`` (+ gaps, sidecar), ``audit/`` (unless
    ``options.audit`` is false) and ``evaluation/`` (when the options name predictions).

    ``final_dir`` is where the folder will end up when ``out_dir`` is a temporary
    one (the recorded commands name it); ``root`` is the folder paths are named
    relative to; ``check`` is called between steps (a batch stops a withdrawn run there).
    """
    out_dir = Path(out_dir)
    final = Path(final_dir) if final_dir is not None else out_dir
    check = check or (lambda: None)
    o = options
    table = final / "folds.csv"
    commands = {DESIGN: o.command(DESIGN, records, table, root=root)}
    if o.audit:
        commands[AUDIT] = o.command(AUDIT, table, final / "audit", root=root)
    if o.evaluates:
        commands[EVALUATE] = o.command(EVALUATE, table, final / "evaluation", root=root)

    _, checks, _ = design_step(records, o, out_dir / "folds.csv", command=commands[DESIGN])
    check()
    # Audit and evaluation read the written fold table back, as the single commands do.
    _, assignment, names = read_step(out_dir / "folds.csv", o)
    result = JobResult(assignment=assignment, fold_names=names, checks=checks, commands=commands)
    if o.audit:
        audit_result, context, _ = audit_step(assignment, names, o, out_dir / "audit", command=commands[AUDIT])
        result = replace(result, audit=audit_result, audit_context=context)
        check()
    if o.evaluates:
        ev, _ = evaluate_step(assignment, names, o, out_dir / "evaluation", command=commands[EVALUATE],
                              fold_table=table)
        result = replace(result, evaluation=ev)
        check()
    return result
