"""Reading a run folder back: the audit, evaluation and range come back as the objects the steps returned.

Reference throughout: the original in-memory result. A result read back from its JSON must give
the same ``to_dict`` (after the same JSON cleaning), and the tables written from it must be the
same bytes as those written from the original (consistency: our writer on both sides, beside the
field-by-field comparisons below, which need no writer).
"""

from __future__ import annotations

import json
import re
import shutil
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from splitter.dependence.audit import AuditResult, audit_split
from splitter.dependence.resplit import NullComparison, NullSummary
from splitter.dependence.variogram import RangeEstimate
from splitter.errors import InputError
from splitter.evaluate import EvaluationResult
from splitter.geo import Points
from splitter.io.foldtable import read_fold_table, to_json, write_design
from splitter.io.results import write_audit_tables, write_evaluation_tables, write_range_tables
from splitter.report.appendix import build_appendix
from splitter.report.outputs import write_audit, write_evaluation, write_range
from splitter.report.rundir import load_run
from splitter.workflow.audit import audit
from splitter.workflow.design import design
from splitter.workflow.evaluation import evaluate
from splitter.workflow.range_estimate import estimate_range


DEMO = Path(__file__).resolve().parents[2] / "demo_data"


def _json(doc) -> dict:
    """The JSON cleaning every result file goes through (sorted keys, NaN as null)."""
    return json.loads(to_json(doc))


def _survey_csv(path: Path, n: int, seed: int) -> Path:
    """Invented presence/absence survey: three survey areas west to east (the folds), two
    collection methods, two site covariates and a year, missing in the eastern area."""
    rng = np.random.default_rng(seed)
    lon = rng.uniform(9.0, 12.0, n)
    lat = rng.uniform(49.0, 51.0, n)
    temp = 8 + 1.5 * (lon - 9) + rng.normal(0, 0.6, n)
    wet = 0.4 + 0.2 * (lat - 49) + rng.normal(0, 0.05, n)
    found = rng.random(n) < np.exp(-((temp - 11) ** 2) / 4)
    area = np.array(["west", "middle", "east"])[np.minimum(((lon - 9) // 1).astype(int), 2)]
    year = rng.integers(2001, 2021, n).astype(object)
    year[area == "east"] = ""  # no dates in one fold: its time gaps are NaN
    pd.DataFrame({"record_id": [f"s{i}" for i in range(n)], "longitude": lon.round(5), "latitude": lat.round(5),
                  "kind": np.where(found, "presence", "absence"), "area": area,
                  "method": np.where(rng.random(n) < 0.5, "net", "trap"), "temp": temp.round(3),
                  "wet": wet.round(4), "year": year}).to_csv(path, index=False)
    return path


def _predictions(assignment, names, seed: int) -> pd.DataFrame:
    """A model with some skill: the niche curve on temp plus noise, for every record and fold."""
    rng = np.random.default_rng(seed)
    temp = assignment.records.table["temp"].astype(float).to_numpy()
    ids = assignment.record_id.astype(str)
    return pd.concat([pd.DataFrame({"record_id": ids, "fold": label,
                                    "prediction": np.exp(-((temp - 11) ** 2) / 4) + rng.normal(0, 0.2, ids.size)})
                      for label in names.values()], ignore_index=True)


@dataclass
class Run:
    folder: Path
    audit: AuditResult
    context: dict
    evaluation: EvaluationResult
    range: RangeEstimate
    loo: EvaluationResult
    loo_folder: Path


@pytest.fixture(scope="module")
def run(tmp_path_factory) -> Run:
    """A run written through the public API: groups design, audit (covariate columns, methods,
    absences, years), evaluation (a prediction table) and range; plus a leave-one-out run."""
    base = tmp_path_factory.mktemp("typed")
    csv = _survey_csv(base / "survey.csv", 300, seed=4)
    root = base / "run"
    write_design(design(csv, method="groups", group_column="area", seed=1), root / "survey" / "folds.csv")
    recs, assignment, names = read_fold_table(root / "survey" / "folds.csv")
    result, context = audit(assignment, covariates=["temp", "wet"], group_column="method", fold_names=names,
                            null_splits=19, seed=1)
    context["command"] = "splitter audit survey/folds.csv --covariate-column temp,wet --group-column method"
    write_audit(result, context, root / "survey" / "audit")
    ev = evaluate(assignment, prediction_table=_predictions(assignment, names, 2), replicates=99, seed=2,
                  fold_names=names)
    write_evaluation(ev, root / "survey" / "evaluation", extra={"command": "splitter evaluate survey/folds.csv"})
    est = estimate_range(records=recs, covariates=["temp", "wet"], seed=1)
    write_range(est, root / "range", extra={"seed": 1, "command": "splitter range --seed 1"})

    # Leave-one-out on a dozen demo presences with the baseline model on two demo rasters: one
    # presence per fold, so the jackknife decides and no fold has records to set a confusion matrix on.
    demo = pd.read_csv(DEMO / "records_with_background.csv")
    pd.concat([demo[demo["kind"] == "presence"].head(12), demo[demo["kind"] == "background"].head(200)]).to_csv(
        base / "small.csv", index=False)
    loo_folder = base / "loo"
    write_design(design(base / "small.csv", method="leave-one-out", seed=1), loo_folder / "folds.csv")
    _, loo_assignment, loo_names = read_fold_table(loo_folder / "folds.csv")
    loo = evaluate(loo_assignment, model="baseline", env=[DEMO / "temperature.tif", DEMO / "moisture.tif"],
                   prediction_dir=loo_folder / "evaluation" / "predictions", replicates=99, seed=3,
                   fold_names=loo_names)
    write_evaluation(loo, loo_folder / "evaluation", extra={"command": "splitter evaluate folds.csv"})
    return Run(root, result, context, ev, est, loo, loo_folder)


# --- audit --------------------------------------------------------------------------------------

def test_audit_read_back_is_the_same_audit(run):
    for original in (run.audit, run.context["absences"]):
        doc = _json(original.to_dict())
        back = AuditResult.from_dict(doc)
        assert _json(back.to_dict()) == doc
        assert back.verdicts == original.verdicts and back.verdict == original.verdict
        assert back.reasons == original.reasons
        assert back.outcomes == original.outcomes  # RuleOutcome: rule, measured value, threshold, null summary
        applied = {o.rule: o for outs in back.outcomes for o in outs}
        assert set(applied) == {"environment", "collection method"}  # no range given: the re-split rules
        for i, (d, m) in enumerate(zip(original.schoener_d_null, original.shared_method_null)):
            for comp, summary in ((d, back.schoener_d_null[i]), (m, back.shared_method_null[i])):
                assert isinstance(comp, NullComparison) and isinstance(summary, NullSummary)
                assert (summary.statistic, summary.median, summary.share) == (comp.statistic, comp.median,
                                                                              comp.share)
        np.testing.assert_array_equal(back.schoener_d, original.schoener_d)
        np.testing.assert_array_equal(back.distance.nn_median_km, original.distance.nn_median_km)
        np.testing.assert_array_equal(back.distance.n_evaluation, original.distance.n_evaluation)
        assert back.distance.record_median_km == original.distance.record_median_km > 0
        # The raw distances were never written: empty, not made up.
        assert all(d.size == 0 for d in back.distance.evaluation_to_calibration_km)
        assert all(d.size > 0 for d in original.distance.evaluation_to_calibration_km)
        for a, b in zip(back.ranges, original.ranges):
            assert a.names == b.names == ("temp", "wet")
            np.testing.assert_array_equal(a.calibration_max, b.calibration_max)
            np.testing.assert_array_equal(a.share_outside, b.share_outside)


def test_insufficient_folds_and_the_distance_rule_read_back():
    rng = np.random.default_rng(5)
    pts = Points.lonlat(rng.uniform(0, 2, 120), rng.uniform(0, 2, 120))
    fold = np.r_[np.zeros(58, int), np.ones(58, int), np.full(4, 2)]  # fold 3: 4 < min_evaluation records
    cal = [fold != f for f in range(3)]
    ev = [fold == f for f in range(3)]
    original = audit_split(pts, cal, ev, range_km=40.0)
    assert original.verdicts[2] == "insufficient"
    doc = _json(original.to_dict())
    back = AuditResult.from_dict(doc)
    assert _json(back.to_dict()) == doc
    assert back.notes == original.notes and back.notes[2] == "4 evaluation record(s) < 5"
    assert back.outcomes[0][0].range_km == 40.0 and back.outcomes[0][0].threshold == 0.5
    assert back.outcomes[0][0].null_median is None  # the distance rule has no re-splits
    assert back.schoener_d_null == (None, None, None)  # no covariates: no comparison recorded


def test_audit_tables_from_the_loaded_audit_are_the_run_files(run):
    split = load_run(run.folder).splits[0]
    assert isinstance(split.audit, AuditResult) and isinstance(split.audit_absences, AuditResult)
    assert split.audit_context["command"] == run.context["command"]
    out = run.folder.parent / "rewritten-audit"
    write_audit_tables(split.audit, {**split.audit_context, "absences": split.audit_absences}, out)
    for name in ("audit.csv", "audit_absences.csv", "audit.json"):
        assert (out / name).read_bytes() == (run.folder / "survey" / "audit" / name).read_bytes(), name
    gaps = pd.read_csv(out / "audit.csv", dtype={"fold": str}).set_index("fold")["time_gap_median_years"]
    assert gaps.isna().sum() == 1 and gaps.notna().sum() == 2  # the undated fold's gap: NaN, read back as NaN


# --- evaluation ---------------------------------------------------------------------------------

@pytest.mark.parametrize("which", ["evaluation", "loo"])
def test_evaluation_read_back_is_the_same_evaluation(run, which):
    original = getattr(run, which)
    doc = _json(original.to_dict())
    back = EvaluationResult.from_dict(doc)
    assert _json(back.to_dict()) == doc
    # pvalue, counts, means (NaN where no fold is interpretable), the jackknife (expected recomputed)
    np.testing.assert_equal(asdict(back.summary), asdict(original.summary))
    assert back.warnings == original.warnings
    for a, b in zip(back.folds, original.folds):
        assert (a.fold, a.significant, a.p_adjusted, a.p_fold) == (b.fold, b.significant, b.p_adjusted, b.p_fold)
        assert a.threshold == b.threshold and a.binomial == b.binomial
        # The confusion counts too, recovered from the stored rates.
        np.testing.assert_equal(None if a.measures is None else asdict(a.measures),
                                None if b.measures is None else asdict(b.measures))
        assert a.warnings == b.warnings  # one tuple entry per warning, though a warning may hold "; "
        ra, rb = a.partial_roc, b.partial_roc
        assert (ra.auc_ratio, ra.pvalue, ra.null_median, ra.ratio_low, ra.ratio_high, ra.can_omit) == \
            (rb.auc_ratio, rb.pvalue, rb.null_median, rb.ratio_low, rb.ratio_high, rb.can_omit)
        np.testing.assert_array_equal(a.curve_x, b.curve_x)
        np.testing.assert_array_equal(a.curve_y, b.curve_y)
        # Never written, so empty or None rather than made up.
        assert a.scores is None and a.partial_roc.ratios.size == 0 and a.partial_roc.null_ratios.size == 0
        assert a.partial_roc.sample_size is None and rb.ratios.size == 99
    extra = {"command": "splitter evaluate folds.csv"}
    paths = [write_evaluation_tables(r, run.folder.parent / f"rewritten-{which}-{i}", extra=extra)
             for i, r in enumerate((original, back))]
    for key in ("table", "json"):
        assert paths[0][key].read_bytes() == paths[1][key].read_bytes(), key


def test_the_cases_the_evaluation_tests_cover(run):
    """The round trip above meets jackknife, missing measures and warnings holding "; "."""
    assert run.loo.summary.jackknife is not None and run.loo.summary.combined_test == "jackknife"
    assert all(f.measures is None for f in run.loo.folds)
    assert run.evaluation.summary.jackknife is None
    assert all(f.measures is not None and f.measures.other_kind == "absence" for f in run.evaluation.folds)
    several = [f.warnings for f in run.evaluation.folds + run.loo.folds if len(f.warnings) > 1]
    assert several and any("; " in w for ws in several for w in ws)


def test_evaluation_and_range_tables_from_the_loaded_run_are_the_run_files(run):
    loaded = load_run(run.folder)
    split = loaded.splits[0]
    assert split.evaluation_context == {"command": "splitter evaluate survey/folds.csv"}
    paths = write_evaluation_tables(split.evaluation, run.folder.parent / "rewritten-ev",
                                    extra=split.evaluation_context)
    assert paths["table"].read_bytes() == (run.folder / "survey" / "evaluation" / "evaluation.csv").read_bytes()
    assert paths["json"].read_bytes() == (run.folder / "survey" / "evaluation" / "evaluation.json").read_bytes()
    assert loaded.range_context == {"seed": 1, "command": "splitter range --seed 1"}
    assert loaded.range.to_frame().equals(run.range.to_frame())
    assert loaded.range.best.keys() == run.range.best.keys() and loaded.range.notes == run.range.notes
    paths = write_range_tables(loaded.range, run.folder.parent / "rewritten-range", extra=loaded.range_context)
    for key, name in (("table", "range.csv"), ("json", "range.json")):
        assert paths[key].read_bytes() == (run.folder / "range" / name).read_bytes(), name


def test_the_demo_run_loads_as_results(demo_run, tmp_path):
    """A run written by the command line of this version: every result file rewritten from what
    was read back gives the same bytes."""
    loaded = load_run(demo_run)
    for s in loaded.splits:
        assert s.evaluation.summary.pvalue == pd.read_csv(
            demo_run / s.name / "evaluation" / "evaluation.csv", dtype={"fold": str}).set_index("fold").loc[
            "all", "p_adjusted"]  # reference: the run's own table, read with pandas
        write_audit_tables(s.audit, s.audit_context, tmp_path / s.name / "audit")
        write_evaluation_tables(s.evaluation, tmp_path / s.name / "evaluation", extra=s.evaluation_context)
        for name in ("audit/audit.csv", "audit/audit.json", "evaluation/evaluation.csv",
                     "evaluation/evaluation.json"):
            assert (tmp_path / s.name / name).read_bytes() == (demo_run / s.name / name).read_bytes(), name
    write_range_tables(loaded.range, tmp_path / "range", extra=loaded.range_context)
    assert (tmp_path / "range" / "range.json").read_bytes() == (demo_run / "range" / "range.json").read_bytes()


# --- the appendix and the terminal show the same p ------------------------------------------------

def _cells(table) -> list:
    """A rich table's rows as text."""
    columns = [list(c.cells) for c in table.columns]
    return [tuple(str(c[i]) for c in columns) for i in range(len(columns[0]))]


def test_terminal_and_appendix_show_the_same_p_values(run, tmp_path):
    from splitter.cli import evaluation_table

    terminal = {r[0]: r[2:5] for r in _cells(evaluation_table(run.evaluation, "t"))}  # p adj., binom p, pROC p
    app = build_appendix(run.folder, tmp_path / "appendix")
    md = app.markdown.read_text(encoding="utf-8")
    table = md.split("Per-fold significance, split `survey`", 1)[1].split("\n\n", 2)[1]
    rows = [[c.strip().replace("\\<", "<") for c in line.strip("|").split("|")] for line in table.splitlines()[2:]]
    shown = {("all" if r[0] == "all folds" else r[0]): tuple(r[3:6]) for r in rows}
    assert shown == {k: tuple("" if v == "-" else v for v in p) for k, p in terminal.items()}
    assert len(shown) == len(run.evaluation.folds) + 1



def test_the_terminal_evaluation_table_fits_80_columns_uncut(run):
    """The per-fold table in an 80-column terminal (the smallest common one): every value
    whole, the longest verdict ("do not interpret") included."""
    import io

    from rich.console import Console

    from splitter.cli import evaluation_table

    console = Console(width=80, record=True, file=io.StringIO())
    for result in (run.evaluation, run.loo):
        console.print(evaluation_table(result, "per-fold evaluation"))
    lines = console.export_text().splitlines()
    verdicts = {r[1] for result in (run.evaluation, run.loo) for r in _cells(evaluation_table(result, "t"))}
    assert "do not interpret" in verdicts, verdicts  # the widest value is among them
    assert max(len(line.rstrip()) for line in lines) <= 80
    assert not any("…" in line for line in lines), "\n".join(lines)


# --- bad result files ------------------------------------------------------------------------------

def _truncate(path: Path):
    text = path.read_text()
    path.write_text(text[: len(text) // 2])


def _drop(key):
    def edit(path: Path):
        doc = json.loads(path.read_text())
        doc.pop(key)
        path.write_text(json.dumps(doc))
    return edit


def _drop_in_first_fold(key):
    def edit(path: Path):
        doc = json.loads(path.read_text())
        doc["folds"][0].pop(key)
        path.write_text(json.dumps(doc))
    return edit


def _not_an_object(path: Path):
    path.write_text("[]")


@pytest.mark.parametrize("file, edit, says", [
    ("survey/audit/audit.json", _truncate, "cannot be read as JSON"),
    ("survey/audit/audit.json", _drop("folds"), "not a complete audit as splitter writes it (no 'folds')"),
    ("survey/audit/audit.json", _not_an_object, "not a complete audit"),
    ("survey/evaluation/evaluation.json", _drop_in_first_fold("auc"), "not a complete evaluation"),
    ("survey/evaluation/evaluation.json", _drop("curves"), "run 'splitter evaluate' again"),
    ("range/range.json", _drop("fits"), "not a complete range estimate"),
])
def test_a_garbled_result_file_is_one_line_naming_it(run, tmp_path, file, edit, says):
    folder = tmp_path / "run"
    shutil.copytree(run.folder, folder)
    edit(folder / file)
    with pytest.raises(InputError) as err:
        load_run(folder)
    message = str(err.value)
    assert message.startswith(str(folder / file)) and says in message and "\n" not in message
    from splitter.cli import app

    res = CliRunner().invoke(app, ["appendix", str(folder), "--out", str(tmp_path / "appendix")])
    assert res.exit_code == 2  # DESIGN §3.4: bad input
    lines = [line for line in res.output.splitlines() if line.strip()]
    assert len(lines) == 1 and Path(file).name in lines[0] and says in re.sub(r"\s+", " ", lines[0])
    assert not (tmp_path / "appendix" / "appendix.md").exists()


def test_an_audit_or_evaluation_of_earlier_folds_is_not_reported_beside_new_ones(tmp_path):
    # design -> audit -> evaluate, then the folds designed again (another seed) into the same
    # folder: the appendix refuses to put the old audit and evaluation beside the new folds,
    # naming the step to run again; once both are run again it builds.
    from splitter.cli import app

    run = lambda *a: CliRunner().invoke(app, [str(x) for x in a])  # noqa: E731
    recs, folder = DEMO / "records_with_background.csv", tmp_path / "run"

    def evaluate_it():
        table = pd.read_csv(folder / "folds.csv", dtype=str, keep_default_na=False)
        rng = np.random.default_rng(3)
        preds = pd.concat([pd.DataFrame({"record_id": table.record_id, "fold": f,
                                         "prediction": rng.random(len(table))}) for f in ("1", "2", "3")])
        preds.to_csv(tmp_path / "preds.csv", index=False)
        res = run("evaluate", folder / "folds.csv", "--prediction-table", tmp_path / "preds.csv", "--replicates", 20,
                  "--out", folder / "evaluation")
        assert res.exit_code == 0, res.output

    for seed in (1, 2):
        assert run("design", recs, "--method", "random", "--folds", 3, "--seed", seed, "--out", folder / "folds.csv").exit_code == 0
        if seed == 1:
            assert run("audit", folder / "folds.csv", "--range-km", 50, "--out", folder / "audit").exit_code == 0
            evaluate_it()
            assert run("appendix", folder, "--out", tmp_path / "app1").exit_code == 0
    res = run("appendix", folder, "--out", tmp_path / "app2")
    assert res.exit_code == 2 and "audit.json: made from another fold table than folds.csv" in res.output
    assert "run 'splitter audit' on folds.csv again" in res.output
    assert run("audit", folder / "folds.csv", "--range-km", 50, "--out", folder / "audit").exit_code == 0
    res = run("appendix", folder, "--out", tmp_path / "app2")
    assert res.exit_code == 2 and "evaluation.json: made from another fold table" in res.output
    evaluate_it()
    assert run("appendix", folder, "--out", tmp_path / "app2").exit_code == 0
    assert (tmp_path / "app2" / "appendix.md").is_file()
