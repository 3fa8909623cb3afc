"""The whole job on the bundled invented scenario, in one call.

range estimate -> spatial blocks (size = range, buffer = range) and a random
split for contrast -> audit of both -> baseline model per fold -> evaluation of
both -> one flexible model using covariates and coordinates under both splits
(what the random split claims: ``optimism.csv``) -> methods appendix.
"""

from __future__ import annotations

import shlex
from dataclasses import dataclass
from pathlib import Path

from splitter.errors import InputError

COVARIATES = ("temperature.tif", "moisture.tif", "canopy.tif")
RECORDS = "records_with_background.csv"


@dataclass(frozen=True)
class DemoRun:
    """Where the demo wrote its outputs, and its headline results."""

    out_dir: Path
    splits: dict          # split name -> {"dir", "audit", "evaluation"}
    range_km: float
    appendix: Path
    optimism: object = None   # OptimismResult: the same flexible model under both splits


def demo_data_dir(fallback: Path) -> Path:
    """The bundled demo data; regenerated (byte-identically) if this install lacks it."""
    bundled = Path(__file__).resolve().parent.parent / "demo_data"
    if all((bundled / f).exists() for f in (RECORDS, *COVARIATES)):
        return bundled
    from splitter.landscape import make_demo_data

    make_demo_data(fallback)
    return fallback


def _cmd(*parts, root=None) -> str:
    """A command line as the run records it: files relative to the demo folder (``root``)."""
    from splitter.io.paths import shown

    return "splitter " + shlex.join([shown(p, root) if isinstance(p, Path) else str(p) for p in parts])


def run_demo(out_dir="splitter-demo", *, seed: int = 1, replicates: int = 1000, folds: int = 5,
             step=None) -> DemoRun:
    """Run the demo and write everything under ``out_dir``.

    Parameters
    ----------
    out_dir : path
    seed : int
    replicates : int
        Partial ROC bootstrap replicates.
    folds : int
    step : callable(str), optional
        Called with a short description before each step (progress display).

    Returns
    -------
    DemoRun
    """
    from splitter.workflow.audit import audit
    from splitter.workflow.design import design
    from splitter.workflow.evaluation import evaluate
    from splitter.io.foldtable import read_fold_table, write_design
    from splitter.evaluate.optimism import split_optimism
    from splitter.io.rasters import sample_rasters
    from splitter.io.results import write_optimism
    from splitter.report.outputs import write_audit, write_evaluation, write_range
    from splitter.workflow.range_estimate import estimate_range_from_rasters
    from splitter.report.appendix import build_appendix

    from splitter.io.paths import shown

    say = step or (lambda s: None)
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder; give another OUT_DIR.")
    out.mkdir(parents=True, exist_ok=True)

    def cmd(*parts):
        return _cmd(*parts, root=out)

    data = demo_data_dir(out / "demo_data")
    env = [data / f for f in COVARIATES]
    records = data / RECORDS
    env_args = [a for p in env for a in ("--env", p)]

    say("estimating the covariates' autocorrelation range")
    est = estimate_range_from_rasters(env, seed=seed)
    range_km = float(est.suggested_block_km)
    write_range(est, out / "range", extra={"command": cmd("range", *env_args, "--seed", seed, "--out", out / "range"), "seed": seed})
    buffer_km = round(range_km, 1)

    plans = {
        "blocks": dict(method="blocks", folds=folds, block_size="auto", buffer=buffer_km),
        "random": dict(method="random", folds=folds),
    }
    splits = {}
    for name, kw in plans.items():
        split_dir = out / name
        say(f"designing {name} folds")
        assignment = design(records, env=env, seed=seed, **kw)
        args = ["design", records, "--method", kw["method"], "--folds", kw["folds"]]
        if "block_size" in kw:
            args += ["--block-size", kw["block_size"], "--buffer", kw["buffer"]]
        command = cmd(*args, *env_args, "--seed", seed, "--out", split_dir / "folds.csv")
        write_design(assignment, split_dir / "folds.csv", command=command)
        _, table_assignment, names = read_fold_table(split_dir / "folds.csv")

        say(f"auditing the {name} split")
        result, context = audit(table_assignment, env=env, range_km=range_km, seed=seed, fold_names=names)
        context["range_source"] = "estimated from the covariate rasters (range/range.json)"
        context["command"] = cmd("audit", split_dir / "folds.csv", *env_args, "--range-from", out / "range",
                                  "--seed", seed, "--out", split_dir / "audit")
        write_audit(result, context, split_dir / "audit")

        say(f"fitting the baseline model per fold and evaluating the {name} split")
        ev = evaluate(table_assignment, model="baseline", env=env, threshold="quantile:0.1", omission=0.05,
                      replicates=replicates, alpha=0.05, seed=seed, prediction_dir=split_dir / "evaluation" / "predictions",
                      fold_names=names)
        ev_cmd = cmd("evaluate", split_dir / "folds.csv", "--model", "baseline", *env_args, "--threshold", "quantile:0.1",
                      "--omission", 0.05, "--replicates", replicates, "--seed", seed, "--out", split_dir / "evaluation")
        write_evaluation(ev, split_dir / "evaluation", extra={"command": ev_cmd, "fold_table": shown(split_dir / "folds.csv", out)})
        splits[name] = {"dir": split_dir, "audit": result, "evaluation": ev, "assignment": table_assignment,
                        "fold_names": names}

    say("fitting one flexible model with coordinates under both splits")
    blocks, random = splits["blocks"], splits["random"]
    covariates, _ = sample_rasters(env, blocks["assignment"].records.points)
    optimism = split_optimism(blocks["assignment"], random["assignment"], covariates,
                              blocks["assignment"].records.points, covariate_names=[p.stem for p in env],
                              names=("blocks", "random"), fold_names=(blocks["fold_names"], random["fold_names"]),
                              threshold="quantile:0.1", omission=0.05, seed=seed)
    write_optimism(optimism, out, extra={"fold_tables": {n: shown(splits[n]["dir"] / "folds.csv", out) for n in splits}})

    say("writing the methods appendix")
    appendix = build_appendix(out, out / "appendix")
    return DemoRun(out, splits, range_km, appendix, optimism)
