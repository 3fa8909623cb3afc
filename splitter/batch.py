"""Many runs (species, record sets, option sets) from one manifest, on Dask.

A manifest is a CSV with one run per row: ``run`` (an id that becomes a folder
name), ``records`` (a path) and any design / audit / evaluate option as a
column. Each run does what ``splitter design``, ``splitter audit`` and
``splitter evaluate`` would do with the same options, through the same API
calls, so its outputs are byte-for-byte those of the single commands:

    OUT/<run>/folds.csv (+ folds.design.json, folds.gaps.csv with a buffer)
    OUT/<run>/audit/                  (unless audit = no)
    OUT/<run>/evaluation/             (when predictions, prediction_table or model is given)
    OUT/<run>/run.json                options, input hashes and fingerprint
    OUT/batch.csv                     one row per run, sorted by run id

Runs are Dask tasks (a local cluster of worker processes by default, or an
existing cluster by scheduler address). A failing run is recorded with a
one-line reason and the others go on. Each run is written into a hidden
``OUT/.<run>.partial-XXXX`` folder and renamed to ``OUT/<run>`` only when it
is complete, so a folder named after a run is always a whole run. A rerun
skips runs whose ``run.json`` fingerprint (SHA-256 over the options, the input
files' bytes and the software version) still matches, and redoes the others.

:func:`run_batch` is the entry point (its docstring has a worked example);
:func:`read_manifest` checks a manifest without running it.
"""

from __future__ import annotations

import dataclasses
import glob
import hashlib
import io as _io
import json
import os
import re
import secrets
import shutil
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from splitter._version import __version__
from splitter.errors import InputError
from splitter.workflow.job import JobOptions, parse_option

# Manifest columns: every option of a job (splitter.workflow.job.JobOptions, where the
# defaults and the way each cell is read live), besides the run id and the records file.
OPTIONS = JobOptions.names()
REQUIRED = ("run", "records")
KNOWN = REQUIRED + tuple(OPTIONS)
BATCH_COLUMNS = ("run", "status", "error", "method", "folds", "n_presence", "audit_verdict",
                 "folds_significant", "folds_evaluated", "seconds")
# A run id becomes a folder name: letters, digits, '.', '_', '-', not starting with '.'
# (hidden folders are the batch's own temporary ones).
RUN_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,127}$")
SENTINEL = ".in-progress"
YES = {"yes": True, "y": True, "true": True, "1": True, "no": False, "n": False, "false": False, "0": False}


@dataclass(frozen=True)
class RunSpec:
    """One manifest row, checked and resolved.

    Attributes
    ----------
    run : str
        Run id (the output folder's name).
    line : int
        Line of the manifest file the row is on (header = line 1).
    records : str
        Absolute path of the records file.
    options : JobOptions
        Every option, parsed, with defaults filled in and paths made absolute
        against the manifest's folder.
    cells : dict
        The non-empty cells as written in the manifest (for run.json and the fingerprint).
    """

    run: str
    line: int
    records: str
    options: JobOptions
    cells: dict = field(default_factory=dict)

    @property
    def evaluates(self) -> bool:
        return self.options.evaluates


@dataclass(frozen=True)
class BatchResult:
    """What a batch did: one row per run (the content of ``batch.csv``).

    Attributes
    ----------
    out_dir : Path
        The batch's output folder.
    table : Path
        ``out_dir / "batch.csv"``.
    rows : tuple of dict
        One dict per run, sorted by run id, with the keys of :data:`BATCH_COLUMNS`.
    """

    out_dir: Path
    table: Path
    rows: tuple

    def _count(self, status) -> int:
        return sum(r["status"] == status for r in self.rows)

    @property
    def n_ok(self) -> int:
        return self._count("ok")

    @property
    def n_failed(self) -> int:
        return self._count("failed")

    @property
    def n_skipped(self) -> int:
        return self._count("skipped")

    @property
    def failures(self) -> dict:
        """Run id -> one-line reason, for the runs that failed."""
        return {r["run"]: r["error"] for r in self.rows if r["status"] == "failed"}

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame(list(self.rows), columns=list(BATCH_COLUMNS))

    def to_dict(self) -> dict:
        return {"out_dir": str(self.out_dir), "table": str(self.table), "rows": [dict(r) for r in self.rows],
                "ok": self.n_ok, "failed": self.n_failed, "skipped": self.n_skipped}


# ---------------------------------------------------------------------------
# Manifest


def _column_name(raw: str) -> str:
    # "Block-Size" and "block size" mean block_size: spreadsheets invite all three.
    return re.sub(r"[\s-]+", "_", raw.strip().lower())


def _bad(path, line, column, value, what) -> InputError:
    return InputError(f"{path}: line {line}, column '{column}': '{value}' {what}")


def _parse_cell(path, line, column, value, base: Path):
    try:
        return parse_option(column, value, base)
    except InputError as e:
        raise InputError(f"{path}: line {line}, column '{column}': {e}") from None


def read_manifest(path) -> tuple:
    """Read and check a batch manifest.

    Parameters
    ----------
    path : path-like
        CSV, UTF-8, one run per row: ``run`` and ``records`` are required; any
        column of :data:`OPTIONS` may follow (empty cells take the defaults of
        the single commands). ``env`` and ``covariate_column`` take several
        values separated by ';'. Relative paths are taken from the manifest's folder.

    Returns
    -------
    tuple of RunSpec, in manifest order

    Raises
    ------
    InputError
        On a missing or unknown column, a bad or duplicate run id, or a cell that
        cannot be read, naming the line and column. Missing input files are not
        checked here: such a run fails on its own and the others go on.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> manifest = Path(tempfile.mkdtemp()) / "species.csv"
    >>> _ = manifest.write_text("run,records,method,block_size\\n"
    ...                         "sp01,demo_data/records.csv,blocks,100\\n"
    ...                         "sp02,demo_data/records.csv,random,\\n")
    >>> specs = read_manifest(manifest)
    >>> [(s.run, s.options.method, s.options.block_size, s.options.folds) for s in specs]
    [('sp01', 'blocks', '100', 5), ('sp02', 'random', None, 5)]
    """
    import pandas as pd

    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: no such file; give the manifest CSV (one run per row).")
    raw = path.read_bytes()
    if not raw.strip():
        raise InputError(f"{path}: the manifest is empty; give a header row (run,records,...) and one row per run.")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        line = raw[: e.start].count(b"\n") + 1
        raise InputError(f"{path}: line {line} is not UTF-8 text; re-save the manifest as UTF-8.") from None
    try:
        table = pd.read_csv(_io.StringIO(text), dtype=str, keep_default_na=False, na_filter=False, skip_blank_lines=True)
    except pd.errors.ParserError as e:
        raise InputError(f"{path}: cannot be read as CSV ({str(e).splitlines()[0]}); check the commas and quoting.") from None
    columns = [_column_name(c) for c in table.columns]
    unknown = [orig for orig, c in zip(table.columns, columns) if c not in KNOWN]
    if unknown:
        raise InputError(f"{path}: unknown column '{unknown[0].strip()}'; known columns are: {', '.join(KNOWN)}.")
    dup = sorted({c for c in columns if columns.count(c) > 1})
    if dup:
        raise InputError(f"{path}: column '{dup[0]}' appears twice; keep one.")
    missing = [c for c in REQUIRED if c not in columns]
    if missing:
        raise InputError(f"{path}: no '{missing[0]}' column; a manifest needs columns run and records (one run per row).")
    table.columns = columns
    if len(table) == 0:
        raise InputError(f"{path}: the manifest has a header but no rows; add one row per run.")
    base = path.resolve().parent
    specs, seen = [], {}
    # Line numbers count the header as line 1 and assume no blank lines in between,
    # as a spreadsheet writes them.
    for n, row in enumerate(table.to_dict(orient="records")):
        line = n + 2
        cells = {k: str(v).strip() for k, v in row.items() if str(v).strip() != ""}
        run = cells.get("run", "")
        if not run:
            raise InputError(f"{path}: line {line}, column 'run': empty; give every run an id.")
        if not RUN_ID.match(run):
            raise _bad(path, line, "run", run, "cannot be a folder name; use letters, digits, '.', '_' and '-' "
                                                 "(not first), at most 128 characters.")
        # Case-insensitive: on macOS and Windows 'Sp1' and 'sp1' are one folder.
        key = run.lower()
        if key in seen:
            raise _bad(path, line, "run", run, f"is used again (first on line {seen[key]}); give each run its own id.")
        seen[key] = line
        if "records" not in cells:
            raise InputError(f"{path}: line {line}, column 'records': empty; give the records file of run '{run}'.")
        options = JobOptions(**{k: _parse_cell(path, line, k, v, base) for k, v in cells.items() if k in OPTIONS})
        specs.append(RunSpec(run=run, line=line, records=str((base / cells["records"]).resolve()),
                             options=options, cells=cells))
    return tuple(specs)


# ---------------------------------------------------------------------------
# Fingerprint


def _input_files(spec: RunSpec) -> list:
    """(role, path) of every input file the run reads."""
    o = spec.options
    files = [("records", spec.records)]
    for k in ("background", "region", "prediction_table"):
        if getattr(o, k) is not None:
            files.append((k, getattr(o, k)))
    files += [(f"env[{i}]", p) for i, p in enumerate(o.env)]
    if o.predictions is not None:
        # Every raster the pattern can name (the fold labels are known only after the design).
        for p in sorted(glob.glob(glob.escape(o.predictions).replace("{fold}", "*"))):
            files.append((f"predictions[{Path(p).name}]", p))
    return files


def fingerprint(spec: RunSpec, hashes: Optional[dict] = None) -> tuple:
    """SHA-256 over a run's options, its input files' bytes and the software version.

    Parameters
    ----------
    spec : RunSpec
    hashes : dict, optional
        Path -> SHA-256 cache shared between runs (covariate rasters are often
        the same for every run).

    Returns
    -------
    fingerprint : str
        Hex digest; equal fingerprints mean the run would write the same outputs.
    inputs : dict
        Role -> {"path", "sha256"}; a missing file has sha256 None.
    """
    from splitter.io.records import sha256_of

    hashes = {} if hashes is None else hashes
    inputs = {}
    for role, p in _input_files(spec):
        if p not in hashes:
            hashes[p] = sha256_of(p) if Path(p).is_file() else None
        inputs[role] = {"path": p, "sha256": hashes[p]}
    # The cells as written, not the resolved paths: moving the whole project keeps
    # the fingerprints, while changing a file's bytes changes them.
    doc = {"software": __version__, "cells": {k: v for k, v in sorted(spec.cells.items())},
           "inputs": {k: v["sha256"] for k, v in sorted(inputs.items())}}
    digest = hashlib.sha256(json.dumps(doc, sort_keys=True).encode("utf-8")).hexdigest()
    return digest, inputs


# ---------------------------------------------------------------------------
# One run (executed on a Dask worker)


class _Withdrawn(Exception):
    """The batch took the run's temporary folder away (Ctrl-C on the client)."""


def one_line(exc: BaseException) -> str:
    """A failure reason on one line: the InputError message, else 'Type: message'."""
    if isinstance(exc, InputError):
        text = str(exc)
    elif isinstance(exc, FileNotFoundError) and exc.filename:
        text = f"{exc.filename}: no such file; check the path."
    else:
        text = f"{type(exc).__name__}: {exc}" if str(exc) else type(exc).__name__
    return " ".join(text.split())


def _steps(spec: RunSpec, work: Path, final: Path, check) -> tuple:
    """The job (design -> write -> read back -> audit -> evaluate), as the single commands do it.

    Returns the batch.csv fields of the run and the equivalent single commands.
    """
    import numpy as np

    from splitter.workflow.job import run_job

    job = run_job(spec.records, spec.options, work, final_dir=final, check=check)
    a = job.assignment
    # The method asked for: the fold table read back for the audit only knows it was given one.
    summary = {"method": spec.options.method, "folds": int(a.n_folds),
               "n_presence": int(np.sum((a.fold >= 0) & (a.kind == "presence"))),
               "audit_verdict": job.audit.verdict if job.audit is not None else None,
               "folds_significant": None, "folds_evaluated": None}
    if job.evaluation is not None:
        summary["folds_significant"] = int(sum(bool(f.row["significant"]) for f in job.evaluation.folds))
        summary["folds_evaluated"] = len(job.evaluation.folds)
    return summary, job.commands


def _point_json_at(work: Path, final: Path) -> None:
    """Paths written while the run sat in its temporary folder now name the final one."""
    old, new = json.dumps(str(work))[1:-1], json.dumps(str(final))[1:-1]
    for p in work.rglob("*.json"):
        text = p.read_text(encoding="utf-8")
        if old in text:
            from splitter.io.atomic import atomic_write

            with atomic_write(p, "w") as f:
                f.write(text.replace(old, new))


def _new_partial(out: Path, run: str) -> Path:
    """A fresh hidden folder beside the run's final folder (same file system: rename is atomic)."""
    while True:
        work = out / f".{run}.partial-{secrets.token_hex(4)}"
        try:
            work.mkdir()  # permissions from the umask, as the single commands' folders
            return work
        except FileExistsError:
            continue


def _install(work: Path, final: Path) -> None:
    """Give the finished folder the run's name, replacing an older complete run."""
    if final.exists() or final.is_symlink():
        old = final.with_name(f".{final.name}.old-{secrets.token_hex(4)}")
        os.replace(final, old)
        os.replace(work, final)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(work, final)


def execute_run(spec: RunSpec, out_dir: str, fingerprint_hex: str, inputs: dict) -> dict:
    """Do one run into ``out_dir/<run>`` and return its batch.csv row.

    Runs on a Dask worker (or anywhere). Never raises for a failing run: the
    row says ``failed`` with a one-line reason, and nothing is left behind.

    Parameters
    ----------
    spec : RunSpec
    out_dir : str
        The batch's output folder (must be reachable from the worker).
    fingerprint_hex, inputs
        From :func:`fingerprint`, stored in ``run.json``.

    Returns
    -------
    dict
        The keys of :data:`BATCH_COLUMNS`.
    """
    from splitter.io.atomic import atomic_write
    from splitter.io.foldtable import to_json

    t0 = time.perf_counter()
    out = Path(out_dir)
    final = out / spec.run
    row = {"run": spec.run, "status": "ok", "error": "", "method": spec.options.method,
           "folds": spec.options.folds, "n_presence": None, "audit_verdict": None,
           "folds_significant": None, "folds_evaluated": None, "seconds": None}
    work, installing = None, False
    try:
        out.mkdir(parents=True, exist_ok=True)
        work = _new_partial(out, spec.run)
        sentinel = work / SENTINEL
        sentinel.touch()

        def check():
            # The client removes temporary folders on Ctrl-C; a task still running on
            # a worker it cannot stop notices here and stops writing.
            if not sentinel.exists():
                raise _Withdrawn(spec.run)

        summary, commands = _steps(spec, work, final, check)
        seconds = time.perf_counter() - t0
        doc = {"run": spec.run, "fingerprint": fingerprint_hex, "software": f"splitter {__version__}",
               "manifest_line": spec.line, "cells": spec.cells, "options": dataclasses.asdict(spec.options), "inputs": inputs,
               "commands": commands, "summary": summary, "seconds": round(seconds, 3)}
        with atomic_write(work / "run.json", "w") as f:
            f.write(to_json(doc))
        _point_json_at(work, final)
        check()
        sentinel.unlink()  # FileNotFoundError here also means the folder was taken away
        installing = True
        _install(work, final)
        work = None
        row.update(summary)
        row["seconds"] = seconds
        return row
    except _Withdrawn:
        row.update(status="failed", error="interrupted")
    except Exception as e:  # one failing run must not stop the batch
        # A write into a folder the batch just took away fails too: that is the interrupt.
        withdrawn = work is not None and not installing and not (work / SENTINEL).exists()
        row.update(status="failed", error="interrupted" if withdrawn else one_line(e))
    finally:
        if work is not None:
            shutil.rmtree(work, ignore_errors=True)
    row["seconds"] = time.perf_counter() - t0
    return row


# ---------------------------------------------------------------------------
# The batch (client side)


def _skipped_row(spec: RunSpec, final: Path, fp: str) -> Optional[dict]:
    """The row of a run already done with the same fingerprint, else None."""
    p = final / "run.json"
    try:
        doc = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if doc.get("fingerprint") != fp or not isinstance(doc.get("summary"), dict):
        return None
    row = {k: None for k in BATCH_COLUMNS}
    row.update({k: v for k, v in doc["summary"].items() if k in BATCH_COLUMNS})
    row.update(run=spec.run, status="skipped", error="", seconds=0.0)
    return row


def _partials(out: Path, runs) -> list:
    """Temporary folders of these runs: being written, withdrawn, or an older run being replaced."""
    prefixes = tuple(f".{r}.{tag}-" for r in runs for tag in ("partial", "old"))
    if not out.is_dir():
        return []
    return [p for p in out.iterdir() if p.name.startswith(prefixes)]


def _remove_partials(out: Path, runs) -> None:
    """Take the temporary folders away: rename first, then delete.

    The rename is atomic, so a worker that is just renaming the same folder to its
    final name either wins (the run is complete and stays) or finds it gone; a
    folder is never deleted while it becomes a run's folder.
    """
    for _ in range(2):  # twice: a worker may be creating one while the first sweep runs
        for p in _partials(out, runs):
            target = p
            if not p.name.endswith(".withdrawn"):
                target = p.with_name(p.name + ".withdrawn")
                try:
                    os.replace(p, target)
                except OSError:
                    continue
            shutil.rmtree(target, ignore_errors=True)


def _fmt(v, key) -> str:
    if v is None:
        return ""
    if key == "seconds":
        return f"{float(v):.2f}"
    return str(v)


def write_batch_table(rows, path) -> Path:
    """batch.csv, written atomically, one row per run in the order given."""
    import csv

    from splitter.io.atomic import atomic_write

    with atomic_write(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(BATCH_COLUMNS)
        for r in rows:
            w.writerow([_fmt(r.get(k), k) for k in BATCH_COLUMNS])
    return Path(path)


# Dask's housekeeping, checked less often. At its defaults an idle 2-worker cluster burns
# 1.75 s of CPU every 20 s (client, scheduler and nannies 0.94 s, each worker 0.4 s): on
# 2 cores that is about 4 % taken from the runs. Measured one setting at a time: the
# event-loop health check (every 20 ms in every server; it only ever writes a warning,
# and worker logs are silenced) is two thirds of it, the memory monitor (every 100 ms)
# most of the rest. With these, 0.24 s per 20 s. A memory monitor once a second still
# catches a run outgrowing its worker's memory within a second; the system monitor and
# the cluster's printed summary feed a status page and a notebook display a batch has not.
_RARE_CHECKS = {"distributed.admin.tick.interval": "1s",
                "distributed.worker.memory.monitor-interval": "1s",
                "distributed.admin.system-monitor.interval": "5s",
                "distributed.deploy.cluster-repr-interval": "10s"}


def _quiet_cluster(distributed, n_workers: int):
    """A local cluster whose worker processes leave Ctrl-C to the client.

    Ctrl-C in a terminal reaches every process of the foreground group; worker
    processes would each print a traceback. A signal that is ignored when a
    process starts stays ignored in it, so SIGINT is ignored while the workers
    are spawned (a few seconds) and restored at once after. Worker logs are
    silenced below CRITICAL: a run's own failure comes back as its row, and
    shutdown chatter (heartbeats to a closed scheduler) is no concern of the user.
    """
    import logging
    import signal
    import threading
    import warnings

    import dask

    main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN) if main else None
    try:
        with warnings.catch_warnings():
            # Two clusters on one machine: Dask moves the second's status page to a free
            # loopback port and says so; that is no concern of a batch.
            warnings.filterwarnings("ignore", message="Port .* is already in use")
            # Each worker is one of several processes sharing the cores: one thread inside
            # its kernels too (nearest neighbours, GDAL decoding, numerical libraries).
            single = {name: "1" for name in ("SPLITTER_THREADS", "GDAL_NUM_THREADS", "OMP_NUM_THREADS",
                                             "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")}
            # Two Dask defaults cost each run about a seventh of its time here (1.48 -> 1.27 s
            # per run on 2 workers, 30 runs): the statistical profiler samples every task's stack each 10 ms
            # (no one reads a batch's profile), and MALLOC_TRIM_THRESHOLD_=65536 hands freed
            # memory back to the system at once, so numpy's large temporaries are mapped afresh
            # each time. The workers keep what they free instead, as a splitter command does
            # (splitter.memory; set before they start, when the C library reads it).
            from splitter.memory import ENVIRON

            quiet = {"distributed.worker.profile.enabled": False, **_RARE_CHECKS,
                     **{f"distributed.nanny.pre-spawn-environ.{k}": v for k, v in ENVIRON.items()}}
            with dask.config.set(quiet):
                return distributed.LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                                                dashboard_address=None, silence_logs=logging.CRITICAL,
                                                env=single)
    finally:
        if main:
            signal.signal(signal.SIGINT, previous)


def _connect(workers, scheduler):
    import distributed

    if scheduler:
        if workers is not None:
            raise InputError("give --workers (a local cluster) or --scheduler (an existing one), not both.")
        try:
            # Connect timeout: Dask's setting distributed.comm.timeouts.connect (default 30 s).
            return distributed.Client(scheduler, set_as_default=False), None
        except (OSError, TimeoutError, ValueError) as e:
            raise InputError(f"--scheduler {scheduler}: cannot connect ({one_line(e)}); "
                             "start one with 'dask scheduler' or leave out --scheduler.") from None
    cluster = _quiet_cluster(distributed, workers or 2)
    try:
        return distributed.Client(cluster, set_as_default=False), cluster
    except BaseException:
        cluster.close()
        raise


def _close(client, cluster) -> None:
    try:
        client.close()
    finally:
        if cluster is not None:
            cluster.close()


def run_batch(manifest, out_dir, *, workers: Optional[int] = None, scheduler: Optional[str] = None,
              progress=None) -> BatchResult:
    """Run every row of a manifest as a Dask task and write ``out_dir/batch.csv``.

    Parameters
    ----------
    manifest : path-like
        CSV, one run per row (see :func:`read_manifest`).
    out_dir : path-like
        Output folder: ``out_dir/<run>/`` per run and ``out_dir/batch.csv``. Must be
        reachable, at the same path, from every worker.
    workers : int, optional
        Worker processes of the local cluster started for the batch (default 2,
        one thread each). Not with ``scheduler``.
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://HOST:PORT``); its workers
        need ``splitter`` installed.
    progress : callable(done, total), optional
        Called after each run (skipped runs included).

    Returns
    -------
    BatchResult
        One row per run: ``ok`` (done now), ``skipped`` (done before with the same
        fingerprint: no work, ``seconds`` 0) or ``failed`` (with its reason).

    Notes
    -----
    The manifest is checked whole before any run starts (InputError). A failing
    run does not stop the others; it leaves no folder, and an older complete
    folder of the same run stays as it was. On Ctrl-C (KeyboardInterrupt) the
    pending runs are cancelled, the local cluster is closed, temporary folders
    are removed and ``batch.csv`` is left as it was; finished runs stay and a
    rerun skips them. On an existing cluster a run already executing when
    Ctrl-C comes cannot be stopped by Dask; it notices that its temporary folder
    was removed at its next step and stops writing.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> here = Path(tempfile.mkdtemp())
    >>> records = Path("demo_data/records_with_background.csv").resolve()
    >>> _ = (here / "species.csv").write_text("run,records,method,folds,block_size,audit\\n"
    ...                                       f"sp01,{records},blocks,4,150,no\\n"
    ...                                       "sp07,sp07.csv,blocks,4,150,no\\n")
    >>> res = run_batch(here / "species.csv", here / "out", workers=1)
    >>> res.n_ok, res.n_failed
    (1, 1)
    >>> res.failures["sp07"].endswith("sp07.csv: no such file; check the path.")
    True
    """
    specs = read_manifest(manifest)
    if workers is not None and int(workers) < 1:
        raise InputError(f"--workers {workers}: give 1 or more worker processes.")
    out = Path(out_dir).resolve()
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out_dir}: exists and is not a folder; give a folder for the batch outputs.")
    out.mkdir(parents=True, exist_ok=True)
    runs = [s.run for s in specs]
    # Left by a batch that was killed outright (power cut, SIGKILL): never complete runs.
    _remove_partials(out, runs)

    total, done = len(specs), 0
    rows: dict = {}
    todo = []
    hashes: dict = {}
    for spec in specs:
        fp, inputs = fingerprint(spec, hashes)
        row = _skipped_row(spec, out / spec.run, fp)
        if row is None:
            todo.append((spec, fp, inputs))
            continue
        rows[spec.run] = row
        done += 1
        if progress is not None:
            progress(done, total)

    if todo:
        from distributed import as_completed

        client, cluster = _connect(workers, scheduler)
        futures = {}
        try:
            for spec, fp, inputs in todo:
                fut = client.submit(execute_run, spec, str(out), fp, inputs, pure=False)
                futures[fut] = spec
            for fut in as_completed(list(futures), loop=client.loop):
                spec = futures[fut]
                try:
                    row = fut.result()
                except Exception as e:  # the task itself died (worker lost, unpicklable...)
                    row = {k: None for k in BATCH_COLUMNS}
                    row.update(run=spec.run, status="failed", error=one_line(e), method=spec.options.method,
                               folds=spec.options.folds)
                rows[spec.run] = row
                done += 1
                if progress is not None:
                    progress(done, total)
        except BaseException:
            # Ctrl-C (or anything else here): stop what is queued, close our cluster
            # (its workers die with it), then sweep the temporary folders.
            try:
                client.cancel(list(futures), force=True)
            finally:
                _close(client, cluster)
                _remove_partials(out, runs)
            raise
        _close(client, cluster)

    ordered = tuple(rows[r] for r in sorted(rows))
    table = write_batch_table(ordered, out / "batch.csv")
    return BatchResult(out, table, ordered)
