"""audit and range as a user runs them, on the demo data and on a user's own table."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from splitter.cli import app
from tests.conftest import write_records_csv
from tests.images import drawn_share, pixels
from tests.test_cli_design import assert_one_line_error

DEMO = Path(__file__).resolve().parent.parent / "demo_data"
ENV = [DEMO / "temperature.tif", DEMO / "moisture.tif", DEMO / "canopy.tif"]
runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def env_args():
    return [a for p in ENV for a in ("--env", p)]


@pytest.fixture(scope="module")
def demo_range(tmp_path_factory):
    out = tmp_path_factory.mktemp("range")
    res = run("range", *env_args(), "--seed", 2, "--out", out)
    assert res.exit_code == 0, res.output
    return out


def test_range_writes_table_json_and_figure(demo_range):
    table = pd.read_csv(demo_range / "range.csv")
    assert {"covariate", "model", "range_km", "sill", "nugget"} <= set(table.columns)
    assert set(table.covariate) == {"temperature", "moisture", "canopy"}
    doc = json.loads((demo_range / "range.json").read_text())
    truth = json.loads((DEMO / "truth.json").read_text())
    true_ranges = [c["effective_range_km"] for c in truth["covariates"].values()]
    # reference: demo_data/truth.json, the simulated ranges (40, 80, 150 km). Temperature also
    # carries a north-south trend (truth.json), so its fitted range runs to the sample's extent and
    # is not identified; the suggestion is then the median of canopy's and moisture's estimates and
    # lies between their true ranges, 40 and 150 km (measured over seeds 0..5: 105-117 km).
    assert doc["summary_rule"].endswith("over 2 covariate(s) whose range is identified")
    assert min(true_ranges) < doc["suggested_block_km"] < max(true_ranges)
    img = pixels(demo_range / "variogram.png")
    assert img.shape[0] > 300 and img.shape[1] > 300  # three panels at 150 dpi, not a thumbnail
    assert drawn_share(img) > 0.02  # curves and points, not a blank page


def test_random_split_is_dependent_and_blocks_beyond_the_range_are_not(tmp_path, demo_range):
    rng_km = json.loads((demo_range / "range.json").read_text())["suggested_block_km"]
    recs = DEMO / "records_with_background.csv"
    assert run("design", recs, "--method", "random", "--folds", 5, "--seed", 1, "--out", tmp_path / "r.csv").exit_code == 0
    res = run("design", recs, "--method", "blocks", "--folds", 5, "--block-size", rng_km, "--buffer", rng_km, "--seed", 1, "--out", tmp_path / "b.csv")
    assert res.exit_code == 0, res.output
    res_r = run("audit", tmp_path / "r.csv", *env_args(), "--range-from", demo_range, "--group-column", "method",
                "--out", tmp_path / "ar")
    res_b = run("audit", tmp_path / "b.csv", *env_args(), "--range-from", demo_range, "--group-column", "method",
                "--out", tmp_path / "ab")
    assert res_r.exit_code == 0 and res_b.exit_code == 0, res_r.output + res_b.output
    ar = pd.read_csv(tmp_path / "ar" / "audit.csv")
    ab = pd.read_csv(tmp_path / "ab" / "audit.csv")
    # common practice: evaluation records should mostly lie farther than the range from calibration records
    assert (ar.verdict == "dependent").all()
    assert (ab.verdict == "independent").all()
    assert ar.nn_median_km.max() * 5 < ab.nn_median_km.min()
    for col in ("fold", "n_evaluation", "n_calibration", "nn_median_km", "nn_p10_km", "share_within_range", "range_km",
                "wasserstein_km", "schoener_d", "share_outside_envelope", "shared_method_share", "verdict"):
        assert col in ar.columns
    for col in ("schoener_d_null_median", "schoener_d_null_share", "shared_method_null_median",
                "shared_method_null_share"):
        assert col in ar.columns and ar[col].notna().all()
    # Both survey methods occur in every fold of both splits, as in any split of these records:
    # the collection-method rule stays quiet (ties with every re-split are not held against a split).
    assert (ab.shared_method_share == 1.0).all() and (ab.shared_method_null_share == 1.0).all()
    assert not ab.reasons.str.contains("collection method").any()
    assert ar.reasons.str.contains("distance").all()
    assert "distance" in res_r.output and "threshold 0.5" in res_r.output  # the rule is printed
    assert "199 random re-splits" in res_r.output and "threshold 0.95" in res_r.output
    doc = json.loads((tmp_path / "ab" / "audit.json").read_text())
    assert doc["null_splits"] == 199
    assert [o["rule"] for o in doc["folds"][0]["outcomes"]] == ["distance", "collection method"]
    assert run("audit", tmp_path / "r.csv", "--range-from", demo_range, "--fail-on", "dependent", "--out", tmp_path / "ar2").exit_code == 1
    assert (tmp_path / "ar2" / "audit.json").is_file()  # exit 1 is a verdict on a finished run: kept
    assert drawn_share(pixels(tmp_path / "ab" / "distance_ecdf.png")) > 0.02  # drawn, not blank


def test_holdout_by_survey_method_shares_no_method(tmp_path):
    recs = DEMO / "records_with_background.csv"
    res = run("design", recs, "--method", "holdout-group", "--group-column", "method", "--calibrate-on", "transect",
              "--evaluate-on", "light-trap", "--out", tmp_path / "h.csv")
    assert res.exit_code == 0, res.output
    res = run("audit", tmp_path / "h.csv", "--group-column", "method", "--range-km", 50, "--out", tmp_path / "a")
    assert res.exit_code == 0, res.output
    a = pd.read_csv(tmp_path / "a" / "audit.csv")
    assert a.shared_method_share.tolist() == [0.0]


def test_users_own_table_with_named_folds_and_role_column(tmp_path):
    src = write_records_csv(tmp_path / "mine.csv", n_presence=150, n_background=0)
    df = pd.read_csv(src, dtype=str)
    df["split"] = np.where(df.longitude.astype(float) < 12, "west", "east")
    df["role"] = np.where(df.latitude.astype(float) < 45, "train", "test")
    df.to_csv(tmp_path / "mine.csv", index=False)
    res = run("audit", tmp_path / "mine.csv", "--fold-column", "split", "--range-km", 30, "--out", tmp_path / "a1")
    assert res.exit_code == 0, res.output
    assert pd.read_csv(tmp_path / "a1" / "audit.csv").fold.tolist() == ["east", "west"]
    res = run("audit", tmp_path / "mine.csv", "--role-column", "role", "--range-km", 30, "--out", tmp_path / "a2")
    assert res.exit_code == 0, res.output
    assert len(pd.read_csv(tmp_path / "a2" / "audit.csv")) == 1


def test_audit_bad_input(tmp_path):
    src = write_records_csv(tmp_path / "mine.csv", n_presence=60, n_background=0)
    df = pd.read_csv(src, dtype=str)
    assert_one_line_error(run("audit", src, "--fold-column", "block", "--out", tmp_path / "a"), "mine.csv", "fold column 'block'")
    df["one"] = "3"
    df["role"] = ["train", "test", "holdout"] * 20
    df["tiny"] = ["1"] * 57 + ["2"] * 3
    df.to_csv(src, index=False)
    assert_one_line_error(run("audit", src, "--fold-column", "one", "--out", tmp_path / "a"), "one value")
    assert_one_line_error(run("audit", src, "--role-column", "role", "--out", tmp_path / "a"), "row 4", "holdout")
    assert_one_line_error(run("audit", src, "--fold-column", "tiny", "--null-splits", 5, "--out", tmp_path / "a"),
                          "--null-splits 5")
    res = run("audit", src, "--fold-column", "tiny", "--range-km", 20, "--out", tmp_path / "t")
    assert res.exit_code == 0, res.output
    tiny = pd.read_csv(tmp_path / "t" / "audit.csv")
    assert tiny.set_index("fold").loc[2, "verdict"] == "insufficient"  # fewer than 5 evaluation records
    region = tmp_path / "far.gpkg"
    import geopandas as gpd
    from shapely.geometry import box

    gpd.GeoDataFrame(geometry=[box(100, -10, 101, -9)], crs=4326).to_file(region)
    assert_one_line_error(run("audit", src, "--fold-column", "tiny", "--region", region, "--out", tmp_path / "r"), "region")


def test_range_from_the_records_own_columns_and_auto_blocks(tmp_path):
    from tests.dependence.test_range_records import RANGE_KM, _survey

    _, df = _survey(tmp_path, seed=3)
    src = tmp_path / "survey.csv"
    df.to_csv(src, index=False)
    rec = ["--x", "easting", "--y", "northing", "--crs", "EPSG:3035"]
    res = run("range", src, "--covariate-column", "soil", "--response", *rec, "--out", tmp_path / "range")
    assert res.exit_code == 0, res.output
    table = pd.read_csv(tmp_path / "range" / "range.csv")
    assert set(table.covariate) == {"soil", "presence"}
    doc = json.loads((tmp_path / "range" / "range.json").read_text())
    soil = next(f for f in doc["fits"] if f["covariate"] == "soil" and f["model"] == "exponential")
    # reference: the simulated field's 40 km effective range (splitter.synthetic); one field, so a
    # loose factor: single-field estimates spread 35-62 km over 20 fields of this size (see
    # tests/dependence/test_range_records.py for the tight check on five fields)
    assert RANGE_KM / 1.6 < soil["range_km"] < RANGE_KM * 1.6
    res = run("design", src, "--method", "blocks", "--folds", 4, "--block-size", "auto", "--covariate-column", "soil",
              *rec, "--out", tmp_path / "folds.csv")
    assert res.exit_code == 0, res.output
    side = json.loads((tmp_path / "folds.design.json").read_text())
    params = side.get("parameters", side)
    assert params["block_size_rule"] == "auto"
    # The block size is the records' own range estimate (same records, same seed, same fit).
    suggested = json.loads((tmp_path / "range" / "range.json").read_text())["suggested_block_km"]
    single = run("range", src, "--covariate-column", "soil", *rec, "--out", tmp_path / "range_soil")
    assert single.exit_code == 0, single.output
    expected = json.loads((tmp_path / "range_soil" / "range.json").read_text())["suggested_block_km"]
    assert params["block_size_km"] == pytest.approx(expected)
    assert suggested > 0


def test_range_bad_input(tmp_path):
    src = write_records_csv(tmp_path / "mine.csv", n_presence=80, n_background=0)
    assert_one_line_error(run("range", "--out", tmp_path / "r"), "--env")
    assert_one_line_error(run("range", src, "--out", tmp_path / "r"), "--covariate-column")
    assert_one_line_error(run("range", "--covariate-column", "x", "--out", tmp_path / "r"), "RECORDS")
    assert_one_line_error(run("range", src, "--covariate-column", "depth", "--out", tmp_path / "r"), "depth")
    assert_one_line_error(run("range", src, "--response", "--out", tmp_path / "r"), "absences")
    assert_one_line_error(run("range", src, "--covariate-column", "longitude", "--sample", 10, "--out", tmp_path / "r"),
                          "--sample 10")


def test_a_figure_saved_first_in_a_process_is_byte_identical(tmp_path):
    """SVG element ids are hashed with matplotlib's rcParams salt at save time. In a fresh
    process nothing had set it when the first figure (a variogram from 'splitter range') was
    saved, so its ids were random. The salt is cleared here, as in a fresh process, and the
    same figure saved twice must give the same bytes (reference: the bytes themselves)."""
    import matplotlib

    from splitter import estimate_range
    from splitter.report.dependence_figures import plot_variogram
    from splitter.report.style import save

    est = estimate_range(ENV[:1], sample=300, seed=1)
    outs = []
    for name in ("a", "b"):
        with matplotlib.rc_context({"svg.hashsalt": None}):
            save(plot_variogram(est), tmp_path / name)
        outs.append((tmp_path / f"{name}.svg").read_bytes())
    assert outs[0] == outs[1]


def test_a_column_named_in_another_case_is_the_same_column(tmp_path):
    # --group-column METHOD for a 'method' column: found as the design finds it, and the
    # audit is the one the exact name gives (reference: the run with the exact name).
    recs = DEMO / "records_with_background.csv"
    assert run("design", recs, "--method", "groups", "--group-column", "METHOD", "--folds", 2, "--seed", 1,
               "--out", tmp_path / "f.csv").exit_code == 0
    for name, out in (("method", "exact"), ("Method", "other")):
        res = run("audit", tmp_path / "f.csv", "--group-column", name, "--null-splits", 19, "--out", tmp_path / out)
        assert res.exit_code == 0, res.output
    exact, other = (pd.read_csv(tmp_path / o / "audit.csv") for o in ("exact", "other"))
    pd.testing.assert_frame_equal(exact, other)
    assert json.loads((tmp_path / "other" / "audit.json").read_text())["context"]["group_column"] == "method"


def test_an_audit_without_absences_over_one_with_them_leaves_no_old_absence_table(tmp_path):
    src = write_records_csv(tmp_path / "r.csv")
    df = pd.read_csv(src, dtype=str, keep_default_na=False)
    survey = df.assign(kind=np.where(df.kind == "background", "absence", df.kind))
    survey.to_csv(tmp_path / "survey.csv", index=False)
    for name in ("survey", "r"):  # first with absences, then without, into the same folders
        assert run("design", tmp_path / f"{name}.csv", "--method", "random", "--folds", 3, "--seed", 1,
                   "--out", tmp_path / "run" / "folds.csv").exit_code == 0
        assert run("audit", tmp_path / "run" / "folds.csv", "--range-km", 20, "--out", tmp_path / "run" / "audit").exit_code == 0
        if name == "survey":
            assert (tmp_path / "run" / "audit" / "audit_absences.csv").exists()
    assert not (tmp_path / "run" / "audit" / "audit_absences.csv").exists()
