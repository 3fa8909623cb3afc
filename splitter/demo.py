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
from splitter.io.journal import make_folder

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
             step=None, generalise_km: float | None = None) -> DemoRun:
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
    generalise_km : float, optional
        Write every coordinate (fold tables, appendix) as the centre of its cell of
        this size; the audit then measures between cell centres (it says so).

    Returns
    -------
    DemoRun
    """
    from splitter.evaluate.optimism import split_optimism
    from splitter.io.paths import shown
    from splitter.io.rasters import sample_rasters
    from splitter.io.results import write_optimism
    from splitter.report.appendix import build_appendix
    from splitter.report.outputs import write_range
    from splitter.workflow.job import JobOptions, run_job
    from splitter.workflow.range_estimate import estimate_range_from_rasters

    say = step or (lambda s: None)
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder; give another OUT_DIR.")
    make_folder(out)

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

    # Both splits: the same records, covariates, baseline model and tests; only the folds differ.
    common = JobOptions(folds=folds, env=tuple(str(p) for p in env), seed=seed, range_from=str(out / "range"),
                        model="baseline", replicates=replicates, generalise=generalise_km)
    plans = {
        "blocks": common.replace(method="blocks", block_size="auto", buffer=buffer_km),
        "random": common.replace(method="random"),
    }
    splits = {}
    for name, options in plans.items():
        say(f"designing, auditing and evaluating the {name} split (the baseline model is fitted per fold)")
        job = run_job(records, options, out / name, root=out)
        splits[name] = {"dir": out / name, "audit": job.audit, "evaluation": job.evaluation,
                        "assignment": job.assignment, "fold_names": job.fold_names}

    say("fitting one flexible model with coordinates under both splits")
    blocks, random = splits["blocks"], splits["random"]
    covariates, _ = sample_rasters(env, blocks["assignment"].records.points)
    optimism = split_optimism(blocks["assignment"], random["assignment"], covariates,
                              blocks["assignment"].records.points, covariate_names=[p.stem for p in env],
                              names=("blocks", "random"), fold_names=(blocks["fold_names"], random["fold_names"]),
                              threshold="quantile:0.1", omission=0.05, seed=seed)
    write_optimism(optimism, out, extra={"fold_tables": {n: shown(splits[n]["dir"] / "folds.csv", out) for n in splits}})

    say("writing the methods appendix")
    appendix = build_appendix(out, out / "appendix", generalise_km=generalise_km)
    return DemoRun(out, splits, range_km, appendix, optimism)
