"""Tests for splitter.report.appendix: the files it writes and the numbers it prints."""

from __future__ import annotations

import hashlib
import json
import re
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from splitter.errors import InputError
from splitter.report.appendix import Appendix, build_appendix
from tests.images import drawn_share, pixels

SPLITS = ("blocks", "random")
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # reference: PNG specification (ISO/IEC 15948), file signature


def _digests(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def built(demo_run, tmp_path_factory):
    """An appendix built from a private copy of the demo run, outside the run folder (built once)."""
    base = tmp_path_factory.mktemp("built")
    run = base / "run"
    shutil.copytree(demo_run, run, ignore=shutil.ignore_patterns("appendix"))
    before = _digests(run)
    app = build_appendix(run, base / "appendix")
    return run, app, before


def expected_files() -> set:
    tables = {f"tables/{s}_{t}.csv" for s in SPLITS for t in ("records", "fold_counts", "fold_checks", "audit", "evaluation")}
    tables |= {"tables/range_fits.csv", "tables/audit_rules.csv", "tables/comparison.csv", "tables/optimism.csv"}
    stems = [f"map_{s}" for s in SPLITS] + [f"distance_ecdf_{s}" for s in SPLITS] + [f"roc_{s}" for s in SPLITS]
    stems += ["variogram", "auc_ratio_intervals"]
    figures = {f"figures/{s}.{ext}" for s in stems for ext in ("png", "svg")}
    return {"appendix.md", "appendix.html"} | tables | figures


def test_every_file_is_written(built):
    run, app, _ = built
    out = app.markdown.parent
    assert isinstance(app, Appendix)
    written = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    assert written == expected_files()
    # The returned paths name exactly the files on disk.
    assert {p.relative_to(out).as_posix() for p in app.tables} == {f for f in written if f.startswith("tables/")}
    assert {p.relative_to(out).as_posix() for p in app.figures} == {f for f in written if f.startswith("figures/")}
    images = {}
    for p in app.figures:
        data = p.read_bytes()
        if p.suffix == ".png":
            assert data.startswith(PNG_SIGNATURE)  # reference: PNG file signature (ISO/IEC 15948)
            images[p.stem] = img = pixels(data)  # read back with matplotlib.image.imread
            assert min(img.shape[:2]) > 200 and drawn_share(img) > 0.02, p.name  # drawn, not blank
        else:
            root = ET.fromstring(data)  # reference: xml.etree parses a well-formed SVG document
            assert root.tag.endswith("svg")
    for p in app.tables:
        assert len(pd.read_csv(p)) > 0
    # The two splits' figures come from different folds: distinct inputs, distinct pixels.
    for stem in ("map", "distance_ecdf", "roc"):
        a, b = images[f"{stem}_blocks"], images[f"{stem}_random"]
        assert a.shape != b.shape or np.any(a != b), stem


def test_figures_the_steps_drew_are_copied_and_redrawn_when_missing(built, run_copy, tmp_path):
    run, app, _ = built
    figures = app.markdown.parent / "figures"
    for ext in ("png", "svg"):  # copied byte for byte from the steps that drew them
        for split in SPLITS:
            assert (figures / f"roc_{split}.{ext}").read_bytes() == \
                (run / split / "evaluation" / f"roc_curves.{ext}").read_bytes()
        # the demo's blocks are sized 'auto', the suggested size the range figure marks
        assert (figures / f"variogram.{ext}").read_bytes() == (run / "range" / f"variogram.{ext}").read_bytes()
    # Without the evaluation's figure the appendix draws the same curves from evaluation.json.
    for ext in ("png", "svg"):
        (run_copy / "blocks" / "evaluation" / f"roc_curves.{ext}").unlink()
    again = build_appendix(run_copy, tmp_path / "again")
    redrawn = pixels(again.markdown.parent / "figures" / "roc_blocks.png")
    original = pixels(figures / "roc_blocks.png")
    assert redrawn.shape == original.shape and np.array_equal(redrawn, original)


def test_run_folder_is_only_read(built):
    run, app, before = built
    assert _digests(run) == before  # reference: hashlib.sha256 of every run file, before and after


def test_same_run_gives_identical_bytes(demo_run, built):
    """The demo's own appendix and one rebuilt from a copy of the run are byte-identical."""
    _, app, _ = built
    ours = _digests(app.markdown.parent)
    theirs = _digests(demo_run / "appendix")
    assert ours == theirs  # reference: hashlib.sha256 of every file of both builds


def test_out_dir_on_the_run_files_is_refused(run_copy):
    before = _digests(run_copy)
    for out in (run_copy / "blocks" / "evaluation", run_copy / "blocks" / "evaluation" / "figures",
                run_copy / "random" / "audit" / "new", run_copy / "range"):
        with pytest.raises(InputError, match="holds the run's files"):
            build_appendix(run_copy, out)
    for run, out in ((run_copy, run_copy), (run_copy, run_copy / "blocks"), (run_copy / "blocks", run_copy / "blocks")):
        with pytest.raises(InputError, match="is a folder of the run itself"):
            build_appendix(run, out)
    assert _digests(run_copy) == before  # reference: hashlib.sha256 of every run file


def test_no_sidecar_is_one_clear_error(tmp_path):
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError) as err:
        build_appendix(tmp_path / "empty", tmp_path / "out")
    assert "no design sidecar" in str(err.value)
    assert "\n" not in str(err.value)
    with pytest.raises(InputError, match="not a folder"):
        build_appendix(tmp_path / "missing", tmp_path / "out")


@pytest.mark.parametrize("bad", [0, -5, float("nan"), "abc"])
def test_bad_generalise_is_refused(run_copy, tmp_path, bad):
    with pytest.raises(InputError, match="--generalise"):
        build_appendix(run_copy / "random", tmp_path / "out", generalise_km=bad)


# --- the methods paragraph against the tables ---------------------------------------------------

def _methods(md: str) -> tuple[str, dict]:
    section = md.split("\n## Methods\n", 1)[1].split("\n## ", 1)[0]
    paras = [p.strip() for p in section.split("\n\n") if p.strip()]
    splits = {}
    for p in paras:
        m = re.match(r"Split `([^`]+)`\.", p)
        if m:
            splits[m.group(1)] = p
    return paras[0], splits


def _ints(text: str) -> list[int]:
    """'1565, 1418 and 1408' -> [1565, 1418, 1408]."""
    return [int(v) for v in re.split(r",\s*|\s+and\s+", text.strip())]


def _one(pattern: str, text: str):
    m = re.search(pattern, text)
    assert m, f"pattern {pattern!r} not found in: {text[:300]}..."
    return m.groups()


def test_methods_paragraph_numbers_equal_the_tables(demo_run):
    """Parse every number back out of the generated text; compare with the run's files and the
    appendix's own tables."""
    app_dir = demo_run / "appendix"
    md = (app_dir / "appendix.md").read_text(encoding="utf-8")
    intro, paras = _methods(md)
    assert set(paras) == set(SPLITS)
    rng = json.loads((demo_run / "range" / "range.json").read_text())

    # Records: reference = the design sidecar's counts and the fold table read with pandas.
    design = json.loads((demo_run / "blocks" / "folds.design.json").read_text())
    folds_csv = pd.read_csv(demo_run / "blocks" / "folds.csv", dtype=str, keep_default_na=False)
    rows, pres, absn, back, dropped = map(int, _one(
        r"holds (\d+) rows: (\d+) presence, (\d+) absence and (\d+) background records; (\d+) rows were dropped", intro))
    assert rows == design["records"]["rows"] == len(folds_csv)  # reference: pandas.read_csv row count
    assert pres == int((folds_csv["kind"] == "presence").sum())  # reference: pandas count of the kind column
    assert back == int((folds_csv["kind"] == "background").sum())
    assert absn == int((folds_csv["kind"] == "absence").sum())
    assert dropped == int((folds_csv["dropped"] != "").sum())
    (block_text,) = _one(r"suggested block size is (\d+(?:\.\d+)?) km", intro)
    assert float(block_text) == round(rng["suggested_block_km"], 1)  # reference: range.json

    for name, text in paras.items():
        d = json.loads((demo_run / name / "folds.design.json").read_text())
        counts = pd.read_csv(app_dir / "tables" / f"{name}_fold_counts.csv")
        ev = pd.read_csv(demo_run / name / "evaluation" / "evaluation.csv", dtype={"fold": str})
        ev_app = pd.read_csv(app_dir / "tables" / f"{name}_evaluation.csv", dtype={"fold": str})
        ev_folds = ev[ev["fold"] != "all"]
        audit = pd.read_csv(demo_run / name / "audit" / "audit.csv")
        audit_json = json.loads((demo_run / name / "audit" / "audit.json").read_text())
        ev_json = json.loads((demo_run / name / "evaluation" / "evaluation.json").read_text())

        (k,) = _one(r"assigned to (\d+) folds", text)
        assert int(k) == d["n_folds"] == len(counts) == len(ev_folds) == len(audit)  # reference: row counts

        e_pres, c_pres = _one(r"Evaluation presences per fold: ([\d, and]+); calibration presences per fold: "
                              r"([\d, and]+)\.", text)
        assert _ints(e_pres) == counts["evaluation_presence"].tolist() == ev_folds["n_evaluation"].astype(int).tolist()
        assert _ints(c_pres) == counts["calibration_presence"].tolist()
        # Outside check: the calibration presences recounted from the fold table and gaps file.
        kind = folds_csv["kind"].to_numpy() if name == "blocks" else pd.read_csv(
            demo_run / name / "folds.csv", dtype=str, keep_default_na=False)["kind"].to_numpy()
        table = pd.read_csv(demo_run / name / "folds.csv", dtype=str, keep_default_na=False)
        gaps_path = demo_run / name / "folds.gaps.csv"
        gaps = pd.read_csv(gaps_path, dtype=str) if gaps_path.exists() else pd.DataFrame({"record_id": [], "fold": []})
        recount = []
        for f in range(1, int(k) + 1):
            left_out = set(gaps.loc[gaps["fold"] == str(f), "record_id"])
            cal = (table["fold"] != str(f)) & (table["fold"] != "") & ~table["record_id"].isin(left_out)
            recount.append(int((cal & (kind == "presence")).sum()))
        assert _ints(c_pres) == recount  # reference: DESIGN §3.2 calibration-set definition, counted with pandas

        if name == "blocks":
            size, off_e, off_n = _one(r"square cells of (\d+(?:\.\d+)?) km .* shifted by (\d+(?:\.\d+)?) km east and (\d+(?:\.\d+)?) km north",
                                      text)
            p = d["parameters"]
            assert float(size) == round(p["block_size_km"], 1)  # reference: design sidecar
            assert [float(off_e), float(off_n)] == [round(v, 1) for v in p["grid_offset_km"]]
            (cells,) = _one(r"The (\d+) occupied cells", text)
            assert int(cells) == p["occupied_cells"]
            buffer, gap_text = _one(r"A buffer of (\d+(?:\.\d+)?) km .*?\(([\d, and]+) records left out, fold by fold\)", text)
            assert float(buffer) == round(d["buffer_km"], 1)
            per_fold = gaps["fold"].astype(int).value_counts().sort_index()
            assert _ints(gap_text) == per_fold.tolist() == counts["gap"].tolist()  # reference: folds.gaps.csv rows
            assert "block-size rule: auto" in text and p["block_size_rule"] == "auto"
        else:
            assert "No buffer was applied." in text and not d["buffer_km"]

        # Audit: reference = audit.csv read with pandas, audit.json.
        lo, hi = map(float, _one(r"nearest calibration record ran from (\d+(?:\.\d+)?) km to (\d+(?:\.\d+)?) km", text))
        assert lo == round(audit["nn_median_km"].min(), 1) and hi == round(audit["nn_median_km"].max(), 1)
        n_ind, n_all, n_dep, n_ins = map(int, _one(
            r"(\d+) of (\d+) folds were judged independent, (\d+) dependent and (\d+) insufficient", text))
        vc = audit["verdict"].value_counts()
        assert (n_ind, n_dep, n_ins) == (vc.get("independent", 0), vc.get("dependent", 0), vc.get("insufficient", 0))
        assert n_all == len(audit)
        (verdict,) = _one(r"audit verdict is (\w+)", text)
        assert verdict == audit_json["verdict"]
        for rule in audit_json["rules"]:
            (thr,) = _one(re.escape(rule["name"]) + r" \(threshold (\d+(?:\.\d+)?)\)", text)
            assert float(thr) == rule["threshold"]
        rules_csv = pd.read_csv(app_dir / "tables" / "audit_rules.csv")
        assert rules_csv["threshold"].tolist() == [r["threshold"] for r in audit_json["rules"]]

        # Evaluation: reference = evaluation.csv (run and appendix copy) and evaluation.json.
        (rule,) = _one(r"calibration presences only: `([^`]+)`", text)
        assert {rule} == set(ev["threshold_rule"])
        (e_value,) = _one(r"E = (\d+(?:\.\d+)?), in which", text)
        assert {float(e_value)} == set(ev_folds["omission"].astype(float))
        (b_value, seed) = _one(r"A bootstrap of 50% of the evaluation presences \((\d+) replicates, seed (\d+)\)", text)
        assert {int(b_value)} == set(ev_folds["replicates"].astype(int))
        assert int(seed) == ev_json["parameters"]["seed"]
        (alpha,) = _one(r"below alpha = (\d+(?:\.\d+)?)\.", text)
        alpha = float(alpha)
        assert alpha == ev_json["parameters"]["alpha"]
        n_sig, n_k = map(int, _one(r"(\d+) of (\d+) folds were significant", text))
        # reference: the significance rule recomputed from the two p-value columns: the larger
        # of the two, Holm-adjusted across folds with statsmodels' multipletests
        from statsmodels.stats.multitest import multipletests

        p_fold = np.maximum(ev_folds["binomial_p"].astype(float), ev_folds["partial_roc_p"].astype(float))
        recomputed = pd.Series(multipletests(p_fold, method="holm")[1] < alpha)
        assert n_sig == int(recomputed.sum()) == int(ev_folds["significant"].astype(str).eq("True").sum())
        assert n_k == len(ev_folds)
        sig = ev_app[(ev_app["fold"] != "all") & ev_app["significant"].astype(str).eq("True")]
        r_lo, r_hi, a_lo, a_hi = map(float, _one(
            r"observed partial AUC ratio ran from (\d+(?:\.\d+)?) to (\d+(?:\.\d+)?) and the full AUC from (\d+(?:\.\d+)?) to "
            r"(\d+(?:\.\d+)?)", text))
        assert (r_lo, r_hi) == (round(sig["auc_ratio"].min(), 3), round(sig["auc_ratio"].max(), 3))
        assert (a_lo, a_hi) == (round(sig["auc"].min(), 3), round(sig["auc"].max(), 3))


def test_records_table_keeps_exact_coordinates_without_generalise(demo_run):
    """Control for the generalisation tests: without it the records table carries the input positions."""
    rec = pd.read_csv(demo_run / "appendix" / "tables" / "blocks_records.csv", dtype={"record_id": str})
    src = pd.read_csv(demo_run / "blocks" / "folds.csv", dtype={"record_id": str})
    np.testing.assert_allclose(rec["longitude"], src["longitude"], atol=1e-9)  # reference: the fold table itself
    np.testing.assert_allclose(rec["latitude"], src["latitude"], atol=1e-9)
    assert rec["fold"].tolist() == src["fold"].tolist()


# --- significance first ------------------------------------------------------------------------

def _mark_fold_not_significant(split_dir: Path, fold: str) -> None:
    """Edit a copy of an evaluation as if fold ``fold`` had failed its tests."""
    path = split_dir / "evaluation" / "evaluation.json"
    doc = json.loads(path.read_text())
    for row in doc["folds"]:
        if row["fold"] == fold:
            row.update(significant=False, interpretation="do not interpret", binomial_p=0.4, partial_roc_p=0.3)
    path.write_text(json.dumps(doc))
    csv = split_dir / "evaluation" / "evaluation.csv"
    table = pd.read_csv(csv, dtype=str, keep_default_na=False)
    sel = table["fold"] == fold
    table.loc[sel, ["significant", "interpretation", "binomial_p", "partial_roc_p"]] = ["False", "do not interpret",
                                                                                        "0.4", "0.3"]
    table.to_csv(csv, index=False)


def test_a_fold_that_is_not_significant_is_not_presented_as_a_finding(run_copy, tmp_path):
    split = run_copy / "blocks"
    _mark_fold_not_significant(split, "2")
    app = build_appendix(split, tmp_path / "out")
    md = app.markdown.read_text(encoding="utf-8")
    page = app.html.read_text(encoding="utf-8")
    ev = pd.read_csv(split / "evaluation" / "evaluation.csv", dtype={"fold": str})
    auc2 = f"{float(ev.loc[ev['fold'] == '2', 'auc'].iloc[0]):.3f}"
    ratio2 = f"{float(ev.loc[ev['fold'] == '2', 'auc_ratio'].iloc[0]):.3f}"

    # The text counts 4 of 5 and names fold 2.
    assert "4 of 5 folds were significant" in md
    assert 'Fold 2 was not significant: marked "do not interpret"' in md

    # Significance table before performance table; fold 2's row is flagged and its numbers withheld.
    assert page.index('id="significance-blocks"') < page.index('id="performance-blocks"')
    perf = page.split('id="performance-blocks"', 1)[1].split("</table>", 1)[0]
    rows = re.findall(r"<tr( class=\"[^\"]*\")?>(.*?)</tr>", perf, flags=re.S)
    row2 = [cells for cls, cells in rows if re.match(r'<td class="\w+">2</td>', cells)]
    assert len(row2) == 1
    assert "do not interpret" in row2[0] and row2[0].count("—") == 10
    assert auc2 not in row2[0] and ratio2 not in row2[0]
    assert any('not-significant' in cls and '>2</td>' in cells for cls, cells in rows)
    # The 'all folds' row shows the evaluation's own all-row means (over interpretable folds,
    # as evaluate wrote them), never a number recomputed here.
    all_row = [cells for _, cells in rows if ">all folds<" in cells][0]
    all_auc = f"{float(ev.loc[ev['fold'] == 'all', 'auc'].iloc[0]):.3f}"
    assert all_auc in all_row
    # The significance table still reports fold 2's p-values (significance is always shown).
    sig = page.split('id="significance-blocks"', 1)[1].split("</table>", 1)[0]
    assert ">0.4<" in sig and ">0.3<" in sig  # reference: the values written into the edited evaluation.csv


def test_missing_audit_and_evaluation_are_said(run_copy, demo_run):
    split = run_copy / "random"
    shutil.rmtree(split / "audit")
    shutil.rmtree(split / "evaluation")
    before = _digests(split)
    # Rebuild over an older appendix (the full demo's) plus a file of the user's own.
    out = run_copy / "random-appendix"
    shutil.copytree(demo_run / "appendix", out)
    (out / "my-notes.txt").write_text("keep me")
    # OUT_DIR may sit inside RUN_DIR (the demo puts its appendix there), beside the split.
    app = build_appendix(split, out)
    assert _digests(split) == before  # reference: hashlib.sha256 of the split's files
    # Figures and tables of the older build are gone; the user's file stays.
    left = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    assert left == {"appendix.md", "appendix.html", "my-notes.txt", "figures/map_random.png", "figures/map_random.svg",
                    "tables/random_records.csv", "tables/random_fold_counts.csv", "tables/random_fold_checks.csv"}
    md = app.markdown.read_text(encoding="utf-8")
    assert "The split was not audited for residual dependence" in md
    assert "The split was not evaluated" in md
    assert "Split `random` was not audited" in md and "Split `random` was not evaluated" in md
    names = {p.name for p in app.figures}
    assert names == {"map_random.png", "map_random.svg"}
    assert {p.name for p in app.tables} == {"random_records.csv", "random_fold_counts.csv", "random_fold_checks.csv"}
    # No range in a single random split: said, not invented.
    assert "No autocorrelation range was estimated" in md


# --- the same model under both splits ------------------------------------------------------------

def test_optimism_section_prints_the_run_s_figures(demo_run):
    md = (demo_run / "appendix" / "appendix.md").read_text(encoding="utf-8")
    section = md.split("\n## The same model under both splits\n", 1)[1].split("\n## ", 1)[0]
    df = pd.read_csv(demo_run / "optimism.csv", dtype={"fold": str})
    mean = df[df["fold"] == "mean"].set_index("split")
    rows = {r[0]: r[1:] for r in (line.strip("| ").split(" | ") for line in section.splitlines()
                                  if line.startswith("| ") and "---" not in line)}
    for label, m in (("AUC (full ROC)", "auc"), ("partial AUC ratio", "auc_ratio"), ("omission rate", "omission_rate")):
        # reference: the values in the run's optimism.csv, rounded to three decimals
        assert rows[label] == [f"{mean.loc['blocks', m]:.3f}", f"{mean.loc['random', m]:.3f}",
                               f"{mean.loc['random - blocks', m]:+.3f}"]
    d = mean.loc["random - blocks", "auc"]
    word = "higher" if d > 0 else "lower"
    assert f"split `random` reports an AUC {abs(d):.3f} {word} than split `blocks`" in section
    assert "HistGradientBoostingClassifier(max_iter=100, early_stopping=False, random_state=1)" in section
    # The run files the section was built from are hashed with the others.
    assert "`optimism.csv`" in md.split("## Reproducibility", 1)[1]


def test_without_optimism_file_the_section_says_so(run_copy, tmp_path):
    (run_copy / "optimism.csv").unlink()
    (run_copy / "optimism.json").unlink()
    app = build_appendix(run_copy, tmp_path / "appendix")
    md = app.markdown.read_text(encoding="utf-8")
    section = md.split("\n## The same model under both splits\n", 1)[1].split("\n## ", 1)[0]
    assert "No `optimism.csv` in the run folder" in section
    assert "tables/optimism.csv" not in {p.relative_to(app.markdown.parent).as_posix() for p in app.tables}


def test_what_the_reader_warned_of_is_in_the_appendix(tmp_path):
    # A table naming two species among its presences: the design's warning reaches the
    # appendix beside that split's folds (not only the terminal and the sidecar).
    import splitter
    from splitter.io.foldtable import write_design

    rng = np.random.default_rng(5)
    n = 240
    pd.DataFrame({"record_id": np.arange(1, n + 1), "longitude": (10 + 3 * rng.random(n)).round(4),
                  "latitude": (45 + 2 * rng.random(n)).round(4),
                  "kind": np.where(np.arange(n) < 100, "presence", "background"),
                  "species": np.where(np.arange(n) % 2, "Alpha one", "Alpha two")}).to_csv(tmp_path / "two.csv", index=False)
    write_design(splitter.design(tmp_path / "two.csv", method="random", folds=3, seed=1), tmp_path / "run" / "folds.csv")
    build_appendix(tmp_path / "run", tmp_path / "app")
    md = (tmp_path / "app" / "appendix.md").read_text(encoding="utf-8")
    assert "Warning when the records were read: two.csv: column 'species' names 2 species among the presences" in md
    assert md.index("Warning when the records were read") > md.index("## Split `run`")
