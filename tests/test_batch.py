"""batch: many runs from one manifest on Dask, equal to the single commands, resumable.

One local cluster (2 worker processes) serves the module; the default path (a
cluster started by run_batch) and a scheduler + worker started as separate
processes on loopback are tested once each. Records are invented here, seeded.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import shutil
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import typer
from typer.testing import CliRunner

from splitter.batch import BATCH_COLUMNS, read_manifest, run_batch
from splitter.cli import app as cli_app
from splitter.cli import batch_command, guarded
from splitter.errors import InputError
from tests.conftest import write_records_csv

pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parent.parent / "demo_data"
ENV = [DEMO / "temperature.tif", DEMO / "moisture.tif", DEMO / "canopy.tif"]
ENV_CELL = ";".join(str(p) for p in ENV)
COLUMNS = ["run", "records", "method", "folds", "block_size", "buffer", "env", "seed", "group_column", "background",
           "prediction_table", "model", "threshold", "replicates", "range_km", "audit"]
runner = CliRunner()


def _presence_only(path, background_path, seed):
    """Presences without a kind column, and background points in a file of their own."""
    rng = np.random.default_rng(seed)
    lon, lat = rng.normal(5.0, 0.8, 70), rng.normal(50.0, 0.6, 70)
    path.write_text("record_id,lon,lat\n" + "".join(f"p{i},{x:.5f},{y:.5f}\n" for i, (x, y) in enumerate(zip(lon, lat))))
    blon, blat = rng.uniform(2, 8, 60), rng.uniform(48, 52, 60)
    background_path.write_text("record_id,lon,lat\n" + "".join(f"b{i},{x:.5f},{y:.5f}\n" for i, (x, y) in enumerate(zip(blon, blat))))


def _prediction_table(records_csv, path, folds, seed):
    """record_id, fold, prediction for every record and fold: higher near the presences' centre."""
    recs = pd.read_csv(records_csv, dtype={"record_id": str})
    rng = np.random.default_rng(seed)
    d2 = (recs.longitude - recs.longitude[recs.kind == "presence"].mean()) ** 2 + \
         (recs.latitude - recs.latitude[recs.kind == "presence"].mean()) ** 2
    rows = [pd.DataFrame({"record_id": recs.record_id, "fold": f,
                          "prediction": np.exp(-d2 / 4) + rng.normal(0, 0.02, len(recs))}) for f in range(1, folds + 1)]
    pd.concat(rows).to_csv(path, index=False)


def make_inputs(folder: Path) -> dict:
    """9 runs (8 good, one with a missing records file) and their manifest.

    One row per branch of a run: blocks with a buffer (gaps file) and a range, random without
    covariates, survey-method groups, background in a file of its own, the user's prediction
    table under each threshold rule, the baseline model over rasters under blocks (audit off)
    and under random folds, and a missing records file.
    """
    folder.mkdir(parents=True, exist_ok=True)
    rows = []

    def add(run, records, **kw):
        rows.append({"run": run, "records": records, **{k: str(v) for k, v in kw.items()}})

    for i in (1, 2):  # spatial blocks (with a buffer) and a random split, no covariates
        write_records_csv(folder / f"sp{i:02d}.csv", n_presence=70, n_background=50, seed=i)
    add("sp01", "sp01.csv", method="blocks", folds=4, block_size=60, buffer=10, seed=1, range_km=40)
    add("sp02", "sp02.csv", method="random", folds=5, seed=2)
    # survey-method groups, audited for shared methods
    write_records_csv(folder / "sp09.csv", n_presence=70, n_background=50, seed=9)
    add("sp09", "sp09.csv", method="groups", group_column="method", seed=9, range_km=40)
    # presences and background in separate files
    _presence_only(folder / "sp11.csv", folder / "bg11.csv", seed=11)
    add("sp11", "sp11.csv", method="random", folds=4, background="bg11.csv", seed=11)
    for i in (13, 14):  # the user's own predictions as a table, one per threshold rule
        write_records_csv(folder / f"sp{i}.csv", n_presence=80, n_background=60, seed=i)
        _prediction_table(folder / f"sp{i}.csv", folder / f"pred{i}.csv", 4, seed=i)
        add(f"sp{i}", f"sp{i}.csv", method="random", folds=4, seed=i, prediction_table=f"pred{i}.csv",
            threshold="lowest" if i == 13 else "quantile:0.1", replicates=50)
    for i in (16, 17):  # baseline model over the demo rasters, records inside the demo region
        write_records_csv(folder / f"sp{i}.csv", n_presence=70, n_background=60, seed=i, lon0=-38.0, lat0=45.0)
        add(f"sp{i}", f"sp{i}.csv", method="random" if i % 2 else "blocks", folds=4, seed=i,
            block_size="" if i % 2 else 150, env=ENV_CELL, model="baseline", replicates=50, range_km=100,
            audit="no" if i == 16 else "")
    add("broken", "no_such_records.csv", method="random", folds=4)
    manifest = folder / "manifest.csv"
    pd.DataFrame(rows, columns=COLUMNS).fillna("").to_csv(manifest, index=False)
    return {"manifest": manifest, "rows": {r["run"]: r for r in rows}}


def file_times(folder: Path) -> dict:
    return {p: p.stat().st_mtime_ns for p in folder.rglob("*") if p.is_file()}


def partial_folders(folder: Path) -> list:
    return [p.name for p in folder.iterdir() if p.name.startswith(".")]


@pytest.fixture(scope="module")
def cluster():
    """A running cluster for --scheduler: the one run_batch would start itself (2 workers)."""
    import distributed

    from splitter.batch import _quiet_cluster

    c = _quiet_cluster(distributed, 2)
    yield c.scheduler_address
    c.close()


def _worker_settings():
    import dask

    from splitter.batch import _RARE_CHECKS

    return {"profile": dask.config.get("distributed.worker.profile.enabled"),
            "checks": {k: dask.config.get(k) for k in _RARE_CHECKS},
            "trim": os.environ.get("MALLOC_TRIM_THRESHOLD_"), "mmap": os.environ.get("MALLOC_MMAP_THRESHOLD_"),
            "threads": os.environ.get("SPLITTER_THREADS")}


def test_the_local_cluster_workers_run_single_threaded_without_the_profiler(cluster):
    """What a batch's own cluster sets in its workers (splitter.batch._quiet_cluster): one
    thread in the kernels, Dask's statistical profiler off, its housekeeping checks once a
    second or less (20 ms and 100 ms by default) and freed memory kept for the next run, as
    a splitter command keeps it (splitter.memory; Dask's default trims at 64 KB). The
    parent's config is untouched."""
    import dask
    import distributed

    from splitter.memory import ENVIRON

    with distributed.Client(cluster, set_as_default=False) as c:
        settings = list(c.run(_worker_settings).values())
    keep = {"trim": ENVIRON["MALLOC_TRIM_THRESHOLD_"], "mmap": ENVIRON["MALLOC_MMAP_THRESHOLD_"]}
    checks = {"distributed.admin.tick.interval": "1s", "distributed.worker.memory.monitor-interval": "1s",
              "distributed.admin.system-monitor.interval": "5s", "distributed.deploy.cluster-repr-interval": "10s"}
    assert settings == [{"profile": False, "checks": checks, **keep, "threads": "1"}] * 2
    # reference: Dask's defaults (distributed.yaml), left as they were in this process
    assert dask.config.get("distributed.worker.profile.enabled") is True
    assert dask.config.get("distributed.admin.tick.interval") == "20ms"
    assert dask.config.get("distributed.worker.memory.monitor-interval") == "100ms"


@pytest.fixture(scope="module")
def first(tmp_path_factory, cluster):
    """The manifest run once; later tests read, rerun or copy its outputs."""
    base = tmp_path_factory.mktemp("batch")
    inputs = make_inputs(base / "inputs")
    calls = []
    res = run_batch(inputs["manifest"], base / "out", scheduler=cluster, progress=lambda d, t: calls.append((d, t)))
    return {**inputs, "base": base, "out": base / "out", "result": res, "calls": calls}


def test_every_run_done_and_the_broken_one_reported(first):
    res, out = first["result"], first["out"]
    table = pd.read_csv(out / "batch.csv", dtype=str, keep_default_na=False)
    # reference for the row checks below: the batch contract (DESIGN §6; one row per run, sorted by run id)
    assert list(table.columns) == list(BATCH_COLUMNS)
    assert table.run.tolist() == sorted(first["rows"])
    assert (table.status == "ok").sum() == 8 and res.n_ok == 8  # 8 good runs written above, one broken
    broken = table[table.run == "broken"].iloc[0]
    assert broken.status == "failed" and res.failures == {"broken": broken.error}
    assert "no_such_records.csv" in broken.error and "no such file" in broken.error and "\n" not in broken.error
    assert first["calls"] == [(i, 9) for i in range(1, 10)]  # reference: 9 manifest rows, one call per run
    assert partial_folders(out) == []  # nothing hidden left behind
    assert not (out / "broken").exists()
    for run, spec in first["rows"].items():
        if run == "broken":
            continue
        d = out / run
        assert (d / "folds.csv").is_file() and (d / "folds.design.json").is_file() and (d / "run.json").is_file()
        assert (d / "audit" / "audit.csv").is_file() == (spec.get("audit") != "no")
        evaluates = bool(spec.get("model") or spec.get("prediction_table"))
        assert (d / "evaluation" / "evaluation.csv").is_file() == evaluates
        assert (d / "folds.gaps.csv").is_file() == bool(spec.get("buffer"))
        row = table[table.run == run].iloc[0]
        folds = pd.read_csv(d / "folds.csv", dtype=str, keep_default_na=False)
        # consistency: the method batch.csv names is the one the manifest asked for and the run's
        # design sidecar records (the fold table read back for the audit names none of its own)
        assert row.method == spec["method"] == json.loads((d / "folds.design.json").read_text())["method"]
        # consistency: batch.csv against the run's own fold table (DESIGN §3.2: kept rows have a fold)
        assert int(row.n_presence) == int(((folds.fold != "") & (folds.kind == "presence")).sum())
        src = pd.read_csv(first["base"] / "inputs" / spec["records"], dtype=str)
        # reference: every input row is carried to the fold table (DESIGN §3.2), background file rows appended
        extra = len(pd.read_csv(first["base"] / "inputs" / spec["background"])) if spec.get("background") else 0
        assert len(folds) == len(src) + extra
        if evaluates:
            ev = pd.read_csv(d / "evaluation" / "evaluation.csv", dtype=str)
            ev = ev[ev.fold != "all"]
            # consistency: batch.csv against the run's own evaluation.csv
            assert int(row.folds_significant) == (ev.significant == "True").sum()
            assert int(row.folds_evaluated) == len(ev)
        if spec.get("audit") != "no":
            # consistency: batch.csv against the run's own audit.json
            assert row.audit_verdict == json.loads((d / "audit" / "audit.json").read_text())["verdict"]
        # paths written inside the outputs name the final folder, never the temporary one
        for js in d.rglob("*.json"):
            assert ".partial-" not in js.read_text()
    doc = json.loads((out / "sp17" / "run.json").read_text())
    assert doc["options"]["model"] == "baseline" and doc["options"]["replicates"] == 50  # reference: manifest row sp17
    assert set(doc["inputs"]) == {"records", "env[0]", "env[1]", "env[2]"}
    # reference: hashlib.sha256 over the input file's bytes; a SHA-256 hex digest has 64 characters
    assert doc["inputs"]["records"]["sha256"] == hashlib.sha256((first["base"] / "inputs" / "sp17.csv").read_bytes()).hexdigest()
    assert doc["inputs"]["env[0]"]["sha256"] == hashlib.sha256(ENV[0].read_bytes()).hexdigest()
    assert len(doc["fingerprint"]) == 64
    # reference: the invented records hold two survey methods (transect, trap): 'groups' makes one fold each
    assert table[table.run == "sp09"].iloc[0].folds == "2"


def _cli(*args):
    res = runner.invoke(cli_app, [str(a) for a in args])
    assert res.exit_code == 0, res.output
    return res


def test_outputs_equal_the_single_commands(first, tmp_path):
    """Byte-equal to 'splitter design/audit/evaluate' with the same options, and to direct API calls."""
    ins, out = first["base"] / "inputs", first["out"]
    env_args = [a for p in ENV for a in ("--env", p)]
    # sp17: random folds + baseline model over the demo rasters, through the commands.
    d = tmp_path / "sp17"
    _cli("design", ins / "sp17.csv", "--method", "random", "--folds", 4, *env_args, "--seed", 17, "--out", d / "folds.csv")
    _cli("audit", d / "folds.csv", *env_args, "--range-km", 100, "--seed", 17, "--out", d / "audit")
    _cli("evaluate", d / "folds.csv", "--model", "baseline", *env_args, "--replicates", 50, "--seed", 17, "--out", d / "evaluation")
    for rel in ("folds.csv", "audit/audit.csv", "evaluation/evaluation.csv", "evaluation/predictions/fold_1.tif"):
        # consistency: byte-equal to the single commands' output files
        assert (out / "sp17" / rel).read_bytes() == (d / rel).read_bytes(), rel
    # sp01: blocks with a buffer (gaps file), through the commands.
    d = tmp_path / "sp01"
    _cli("design", ins / "sp01.csv", "--method", "blocks", "--folds", 4, "--block-size", 60, "--buffer", 10,
         "--seed", 1, "--out", d / "folds.csv")
    for rel in ("folds.csv", "folds.gaps.csv"):
        assert (out / "sp01" / rel).read_bytes() == (d / rel).read_bytes(), rel  # reference: splitter design

    # sp14: the user's prediction table, through the Python API.
    from splitter.workflow.audit import audit
    from splitter.workflow.design import design
    from splitter.workflow.evaluation import evaluate
    from splitter.io.foldtable import read_fold_table, write_design
    from splitter.report.outputs import write_audit, write_evaluation

    d = tmp_path / "sp14"
    write_design(design(ins / "sp14.csv", method="random", folds=4, seed=14), d / "folds.csv")
    _, a, names = read_fold_table(d / "folds.csv")
    result, context = audit(a, seed=14, fold_names=names)
    write_audit(result, context, d / "audit")
    ev = evaluate(a, prediction_table=ins / "pred14.csv", replicates=50, seed=14, fold_names=names)
    write_evaluation(ev, d / "evaluation")
    for rel in ("folds.csv", "audit/audit.csv", "evaluation/evaluation.csv"):
        assert (out / "sp14" / rel).read_bytes() == (d / rel).read_bytes(), rel  # consistency: the API calls


def test_a_rerun_does_no_work(first, cluster):
    out = first["out"]
    before = {p: t for p, t in file_times(out).items() if p.name != "batch.csv"}
    res = run_batch(first["manifest"], out, scheduler=cluster)
    # reference: 8 runs done by the first call; the broken one (no run.json) is tried again
    assert res.n_skipped == 8 and res.n_ok == 0 and res.n_failed == 1
    assert {p: t for p, t in file_times(out).items() if p.name != "batch.csv"} == before
    rows = {r["run"]: r for r in res.rows}
    first_rows = {r["run"]: r for r in first["result"].rows}
    for run in rows:
        if run != "broken":
            # a skipped run repeats its results from run.json
            assert {k: rows[run][k] for k in ("n_presence", "audit_verdict", "folds_significant")} == \
                   {k: first_rows[run][k] for k in ("n_presence", "audit_verdict", "folds_significant")}
            assert rows[run]["status"] == "skipped" and rows[run]["seconds"] == 0.0


def test_a_changed_input_or_option_redoes_only_that_run(first, cluster, tmp_path):
    # A copy of the whole project (inputs + outputs, times kept): fingerprints hold the
    # manifest's relative paths and the files' bytes, so moving a project keeps them.
    shutil.copytree(first["base"], tmp_path / "p", copy_function=shutil.copy2)
    ins, out = tmp_path / "p" / "inputs", tmp_path / "p" / "out"
    with open(ins / "sp01.csv", "a") as f:
        f.write("p999,12.01000,45.02000,presence,trap,x1\n")  # one more record
    m = pd.read_csv(ins / "manifest.csv", dtype=str, keep_default_na=False)
    m.loc[m.run == "sp02", "seed"] = "40"  # one changed option
    m = m[m.run != "broken"]
    m.to_csv(ins / "manifest.csv", index=False)
    before = file_times(out)
    res = run_batch(ins / "manifest.csv", out, scheduler=cluster)
    status = {r["run"]: r["status"] for r in res.rows}
    assert {r for r, s in status.items() if s == "ok"} == {"sp01", "sp02"}  # reference: the two edits above
    assert all(s == "skipped" for r, s in status.items() if r not in ("sp01", "sp02"))
    # reference: the edited input file has one more row than before
    assert len(pd.read_csv(out / "sp01" / "folds.csv")) == len(pd.read_csv(first["out"] / "sp01" / "folds.csv")) + 1
    assert json.loads((out / "sp02" / "run.json").read_text())["options"]["seed"] == 40  # reference: the edited cell
    after = file_times(out)
    for p, t in before.items():
        if p.parent.name not in ("sp01", "sp02") and p.name != "batch.csv" and "sp01" not in p.parts and "sp02" not in p.parts:
            assert after[p] == t, p
    assert partial_folders(out) == []


@pytest.mark.parametrize("header,row,words", [
    ("run,records,flavour", "a,a.csv,x", ["unknown column 'flavour'", "known columns are", "block_size"]),
    ("run,method", "a,random", ["no 'records' column"]),
    ("run,records", "a,a.csv\na,b.csv", ["line 3", "'run'", "used again (first on line 2)"]),
    ("run,records,folds", "a,a.csv,2.5", ["line 2", "'folds'", "'2.5'", "whole number"]),
    ("run,records,replicates", "a,a.csv,\nb,b.csv,many", ["line 3", "'replicates'", "'many'"]),
    ("run,records,alpha", "a,a.csv,0.05\nb,b.csv,5%", ["line 3", "'alpha'", "not a number"]),
    ("run,records", "../up,a.csv", ["'run'", "'../up'", "folder name"]),
    ("run,records,audit", "a,a.csv,maybe", ["'audit'", "yes or no"]),
    ("run,records,method", "a,a.csv,squares", ["'method'", "blocks"]),
    ("run,records,threshold", "a,a.csv,half", ["'threshold'"]),
    ("run,records,predictions", "a,a.csv,preds/p.tif", ["{fold}"]),
])
def test_a_bad_manifest_is_one_clear_error_before_any_work(tmp_path, header, row, words):
    m = tmp_path / "m.csv"
    m.write_text(f"{header}\n{row}\n")
    with pytest.raises(InputError) as e:
        run_batch(m, tmp_path / "out")
    text = str(e.value)
    assert "\n" not in text and "m.csv" in text
    for w in words:
        assert w in text, text
    assert not (tmp_path / "out").exists()  # checked before anything is written


def test_manifest_cells_defaults_and_paths(tmp_path):
    (tmp_path / "sub").mkdir()
    m = tmp_path / "sub" / "m.csv"
    m.write_text("Run,Records,Block-Size,env,audit\nx,../r.csv,auto,a.tif; b.tif,No\ny,r.csv,,,\n")
    x, y = read_manifest(m)
    assert x.records == str(tmp_path / "r.csv") and y.records == str(tmp_path / "sub" / "r.csv")
    assert x.options.env == (str(tmp_path / "sub" / "a.tif"), str(tmp_path / "sub" / "b.tif"))
    assert x.options.block_size == "auto" and x.options.audit is False
    # defaults: those of the single commands (splitter design/evaluate --help)
    assert (y.options.method, y.options.folds, y.options.seed, y.options.audit) == ("blocks", 5, 0, True)
    assert (y.options.threshold, y.options.replicates, y.options.alpha) == ("quantile:0.1", 1000, 0.05)


def _children() -> set:
    """Live child processes of this test process (Linux /proc)."""
    me, kids = os.getpid(), set()
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                stat, cmdline = (d / "stat").read_text(), (d / "cmdline").read_bytes()
            except OSError:  # ended meanwhile
                continue
            fields = stat.rsplit(")", 1)[1].split()
            # multiprocessing's resource tracker is started once per process and stays
            if int(fields[1]) == me and fields[0] != "Z" and b"resource_tracker" not in cmdline:
                kids.add(int(d.name))
    return kids


def _slow_manifest(folder: Path, n=6) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    lines = ["run,records,method,folds,env,seed,model,replicates,range_km"]
    for i in range(n):
        write_records_csv(folder / f"s{i}.csv", n_presence=70, n_background=60, seed=i, lon0=-38.0, lat0=45.0)
        lines.append(f"s{i},s{i}.csv,random,5,{ENV_CELL},{i},baseline,100,100")
    (folder / "m.csv").write_text("\n".join(lines) + "\n")
    return folder / "m.csv"


def _executing(dask_worker) -> int:
    return len(dask_worker.state.executing)


def _interrupt_after_first(done, total):
    raise KeyboardInterrupt


def test_ctrl_c_on_an_existing_cluster_leaves_only_whole_runs(tmp_path, cluster):
    import distributed

    m = _slow_manifest(tmp_path / "in")
    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        run_batch(m, out, scheduler=cluster, progress=_interrupt_after_first)
    assert partial_folders(out) == [] and not (out / "batch.csv").exists()
    # Dask cannot stop a task that is running; it notices its folder was withdrawn and stops writing.
    # The scheduler forgets a cancelled task at once, so wait on the workers' own count of tasks
    # still executing (distributed's WorkerState.executing, which keeps cancelled ones until they end).
    with distributed.Client(cluster, set_as_default=False) as c:
        deadline = time.monotonic() + 60
        while sum(c.run(_executing).values()) and time.monotonic() < deadline:
            time.sleep(0.2)
        assert sum(c.run(_executing).values()) == 0
    assert partial_folders(out) == []
    assert all((p / "run.json").is_file() for p in out.iterdir())


def _command_app():
    app = typer.Typer(add_completion=False)
    app.command("batch")(guarded(batch_command))

    @app.command("other")
    def other():  # a second command keeps 'batch' a subcommand, as in splitter's app
        pass

    return app


def test_command_prints_a_summary_and_exits_1_when_a_run_failed(first, cluster, tmp_path):
    shutil.copytree(first["base"], tmp_path / "p", copy_function=shutil.copy2)
    ins, out = tmp_path / "p" / "inputs", tmp_path / "p" / "out"
    app = _command_app()
    res = runner.invoke(app, ["batch", str(ins / "manifest.csv"), "--out", str(out), "--scheduler", cluster])
    assert res.exit_code == 1, res.output  # a failed run: exit 1 (documented in the command's help)
    assert "runs ok: 0, skipped (unchanged): 8, failed: 1" in res.output  # reference: the module's first batch
    assert "failed: broken:" in res.output and "no such file" in res.output
    assert f"summary: {out / 'batch.csv'}" in res.output
    m = pd.read_csv(ins / "manifest.csv", dtype=str, keep_default_na=False)
    m[m.run != "broken"].to_csv(ins / "manifest.csv", index=False)
    res = runner.invoke(app, ["batch", str(ins / "manifest.csv"), "--out", str(out), "--scheduler", cluster])
    assert res.exit_code == 0, res.output
    (ins / "bad.csv").write_text("run,records,colour\na,b.csv,red\n")
    res = runner.invoke(app, ["batch", str(ins / "bad.csv"), "--out", str(out)])
    assert res.exit_code == 2 and "unknown column 'colour'" in res.output
    import dask

    with dask.config.set({"distributed.comm.timeouts.connect": "0.5s"}):  # nothing listens on loopback port 1
        res = runner.invoke(app, ["batch", str(ins / "manifest.csv"), "--out", str(tmp_path / "new"),
                                  "--scheduler", "tcp://127.0.0.1:1"])
    assert res.exit_code == 2 and "cannot connect" in res.output, res.output


def _row(run, status, method="blocks", audit="independent", significant=(3, 5), seconds=1.25):
    row = {k: None for k in BATCH_COLUMNS}
    row.update(run=run, status=status, method=method, folds=5, n_presence=150, audit_verdict=audit,
               folds_significant=significant[0], folds_evaluated=significant[1], seconds=seconds)
    return row


def _printed(rows, width=80) -> list:
    from rich.console import Console

    from splitter.batch import BatchResult
    from splitter.cli import batch_table

    console = Console(width=width, record=True, file=io.StringIO())
    console.print(batch_table(BatchResult(Path("out"), Path("out/batch.csv"), tuple(rows))))
    return console.export_text().splitlines()


def test_the_terminal_table_fits_80_columns_uncut():
    """Runs named up to 10 characters: every column whole in an 80-column terminal (the
    smallest common one). Longer names squeeze the other columns, never the run's name
    or its status."""
    lines = _printed([_row("species_00", "ok"), _row("species_01", "skipped", method="leave-one-out"),
                      _row("species_02", "failed", audit="independent", significant=(10, 12), seconds=13.41)])
    assert max(len(line.rstrip()) for line in lines) <= 80
    assert not any("…" in line for line in lines), "\n".join(lines)
    assert "significant" in lines[1] and "leave-one-out" in "\n".join(lines) and "10/12" in "\n".join(lines)
    long = _printed([_row("a_rather_long_run_name_2024", "skipped"), _row("b", "ok")])
    assert max(len(line.rstrip()) for line in long) <= 80
    assert any(line.startswith("a_rather_long_run_name_2024  skipped") for line in long), "\n".join(long)
