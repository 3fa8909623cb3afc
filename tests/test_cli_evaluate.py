"""evaluate as a user runs it: baseline model, own rasters, own tables, bad input."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rasterio
from scipy import stats
from sklearn.metrics import roc_auc_score
from typer.testing import CliRunner

from splitter.cli import app
from splitter.io.rasters import write_geotiff
from tests.conftest import write_records_csv
from tests.images import drawn_share, pixels
from tests.reference_areas import geodesic_row_areas_km2
from tests.test_cli_design import assert_one_line_error

DEMO = Path(__file__).resolve().parent.parent / "demo_data"
ENV = [DEMO / "temperature.tif", DEMO / "moisture.tif", DEMO / "canopy.tif"]
runner = CliRunner()
REQUIRED = ["fold", "n_evaluation", "threshold_rule", "threshold", "area_predicted", "successes", "binomial_p", "auc",
            "auc_ratio", "auc_ratio_low", "auc_ratio_high", "partial_roc_p", "omission", "replicates", "omission_rate",
            "sensitivity", "specificity", "tss", "kappa", "boyce", "significant"]


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


@pytest.fixture(scope="module")
def demo_folds(tmp_path_factory):
    d = tmp_path_factory.mktemp("folds")
    res = run("design", DEMO / "records_with_background.csv", "--method", "blocks", "--folds", 4, "--block-size", 150,
              "--buffer", 20, "--seed", 3, "--out", d / "folds.csv")
    assert res.exit_code == 0, res.output
    return d / "folds.csv"


def _niche_rasters(folder: Path, folds, noise=0.0, constant=False, scale=1.0, offset=0.0):
    """Prediction rasters from the demo's known niche (temperature/moisture), one per fold."""
    with rasterio.open(DEMO / "temperature.tif") as t, rasterio.open(DEMO / "moisture.tif") as m:
        T = t.read(1, masked=True).filled(np.nan).astype(float)
        M = m.read(1, masked=True).filled(np.nan).astype(float)
        transform, crs = t.transform, t.crs
    suit = np.exp(-((T - 14) ** 2) / 8 - ((M - 38) ** 2) / 72)
    rng = np.random.default_rng(0)
    folder.mkdir(parents=True, exist_ok=True)
    for f in folds:
        s = suit + noise * rng.normal(size=suit.shape)
        if constant:
            s = np.where(np.isfinite(suit), 0.5, np.nan)
        write_geotiff(folder / f"pred_{f}.tif", s * scale + offset, transform, crs)
    return str(folder / "pred_{fold}.tif")


def test_baseline_model_on_the_demo(demo_folds, tmp_path):
    res = run("evaluate", demo_folds, "--model", "baseline", *[a for p in ENV for a in ("--env", p)],
              "--replicates", 200, "--seed", 4, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    assert all(c in ev.columns for c in REQUIRED)
    assert ev.fold.astype(str).tolist() == ["1", "2", "3", "4", "all"]
    assert list(ev.columns).index("significant") < list(ev.columns).index("auc")  # significance first
    assert len(list((tmp_path / "ev" / "predictions").glob("fold_*.tif"))) == 4
    roc = pixels(tmp_path / "ev" / "roc_curves.png")
    assert drawn_share(roc) > 0.02  # drawn, not blank
    # one row of four panels: 9.0 x 3.15 in at 150 dpi (plot_roc_panels: 2.1 in per column + 0.6)
    assert roc.shape[:2] == (472, 1350)
    # four folds, four different curves: distinct inputs give distinct pixels (the panels' plot areas)
    quarters = np.array_split(roc[:, :, :3], 4, axis=1)
    assert all(np.any(a[:, : b.shape[1]] != b[:, : a.shape[1]]) for i, a in enumerate(quarters) for b in quarters[i + 1:])
    folds = ev[ev.fold != "all"]
    for r in folds.itertuples():
        # reference: scipy.stats.binomtest, one-tailed
        ref = stats.binomtest(int(r.successes), int(r.n_evaluation), r.area_predicted, alternative="greater").pvalue
        assert r.binomial_p == pytest.approx(ref, rel=1e-6, abs=1e-300)
    allrow = ev[ev.fold == "all"].iloc[0]
    # reference: scipy.stats.combine_pvalues (Fisher)
    assert allrow.binomial_p == pytest.approx(stats.combine_pvalues(folds.binomial_p, method="fisher").pvalue, rel=1e-6)
    assert allrow.auc == pytest.approx(folds.auc.mean())


def test_user_prediction_rasters_match_sklearn_auc(demo_folds, tmp_path):
    pattern = _niche_rasters(tmp_path / "preds", [1, 2, 3, 4], noise=0.02)
    res = run("evaluate", demo_folds, "--predictions", pattern, "--threshold", "lowest", "--replicates", 200, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    assert ev.significant[:4].all()
    folds = pd.read_csv(demo_folds, dtype=str, keep_default_na=False)
    with rasterio.open(pattern.format(fold=2)) as src:
        a = src.read(1, masked=True)
        assert src.crs.to_epsg() == 4326  # WGS84 lon/lat: the ellipsoid reference_areas uses
        # reference: pyproj.Geod.polygon_area_perimeter of each row's cell (tests/reference_areas.py)
        areas = np.repeat(geodesic_row_areas_km2(src.transform, src.height)[:, None], src.width, axis=1)
        ev_p = folds[(folds.fold == "2") & (folds.kind == "presence")]
        pres = np.array([v[0] for v in src.sample(zip(ev_p.longitude.astype(float), ev_p.latitude.astype(float)))])
    cells = a.compressed()
    w = areas[~a.mask]
    y = np.r_[np.ones(pres.size), np.zeros(cells.size)]
    # reference: sklearn.metrics.roc_auc_score with pyproj.Geod cell areas as sample weights
    ref = roc_auc_score(y, np.r_[pres, cells], sample_weight=np.r_[np.full(pres.size, 1.0), w])
    # abs=1e-9: the densified Geod outlines match exact ellipsoidal zone areas to ~1e-11 relative
    assert ev.auc[1] == pytest.approx(ref, abs=1e-9)
    # threshold "lowest" = the lowest prediction at fold 2's calibration presences (common practice),
    # computed here from the fold table, the gaps file and rasterio's own sampling
    gaps = pd.read_csv(demo_folds.with_name("folds.gaps.csv"), dtype=str)
    gap2 = set(gaps[gaps.fold == "2"].record_id)
    cal = folds[(folds.fold != "2") & (folds.fold != "") & (folds.kind == "presence") & ~folds.record_id.isin(gap2)]
    with rasterio.open(pattern.format(fold=2)) as src:
        cal_pred = np.array([v[0] for v in src.sample(zip(cal.longitude.astype(float), cal.latitude.astype(float)))])
    assert ev.threshold[1] == pytest.approx(float(cal_pred.min()), abs=1e-7)


def test_prediction_table_and_users_own_fold_table(tmp_path):
    src = write_records_csv(tmp_path / "mine.csv", n_presence=200, n_background=300)
    df = pd.read_csv(src, dtype=str, keep_default_na=False)
    df["block"] = (np.arange(len(df)) % 3 + 1).astype(str)
    df.drop(columns=["kind"]).assign(kind=df.kind).to_csv(src, index=False)
    rng = np.random.default_rng(1)
    lat = df.latitude.astype(float).to_numpy()
    rows = []
    for f in ("1", "2", "3"):
        score = 1 / (1 + np.exp(-(lat - 45) * 2)) * 0.3 + (df.kind == "presence") * 0.4 + rng.uniform(0, 0.3, len(df))
        rows.append(pd.DataFrame({"record_id": df.record_id, "fold": f, "prediction": score}))
    table = pd.concat(rows)
    table.to_csv(tmp_path / "preds.csv", index=False)
    res = run("evaluate", src, "--fold-column", "block", "--prediction-table", tmp_path / "preds.csv", "--replicates", 100, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    assert ev.area_source[0] == "evaluation background records"
    # reference: sklearn.metrics.roc_auc_score on evaluation presences vs evaluation background of fold 1
    f1 = df[df.block == "1"]
    s1 = table[table.fold == "1"].set_index("record_id").prediction
    y = (f1.kind == "presence").to_numpy().astype(int)
    assert ev.auc[0] == pytest.approx(roc_auc_score(y, s1.loc[f1.record_id].to_numpy()), abs=1e-12)
    table[table.fold != "3"].to_csv(tmp_path / "preds2.csv", index=False)
    assert_one_line_error(run("evaluate", src, "--fold-column", "block", "--prediction-table", tmp_path / "preds2.csv",
                              "--out", tmp_path / "ev2"), "fold 3")


def test_evaluate_bad_and_awkward_input(demo_folds, tmp_path):
    pattern = _niche_rasters(tmp_path / "preds", [1, 2, 3])
    assert_one_line_error(run("evaluate", demo_folds, "--predictions", pattern, "--out", tmp_path / "e1"), "pred_4.tif", "not found")
    flat = _niche_rasters(tmp_path / "flat", [1, 2, 3, 4], constant=True)
    assert_one_line_error(run("evaluate", demo_folds, "--predictions", flat, "--replicates", 50, "--out", tmp_path / "e2"), "pred_1.tif", "equal")
    wide = _niche_rasters(tmp_path / "wide", [1, 2, 3, 4], scale=40, offset=-10)
    res = run("evaluate", demo_folds, "--predictions", wide, "--replicates", 50, "--out", tmp_path / "e3")
    assert res.exit_code == 0 and "ranks" in res.output
    assert_one_line_error(run("evaluate", demo_folds, "--threshold", "median", "--predictions", wide, "--out", tmp_path / "e4"), "median")
    noise = _niche_rasters(tmp_path / "noise", [1, 2, 3, 4], noise=5.0)
    res = run("evaluate", demo_folds, "--predictions", noise, "--replicates", 100, "--fail-on", "not-significant", "--out", tmp_path / "e5")
    assert res.exit_code == 1 and "do not interpret" in res.output
    # exit 1 is a verdict on a finished run: its outputs are kept (a stopped run's are not)
    assert {"evaluation.csv", "evaluation.json"} <= {p.name for p in (tmp_path / "e5").iterdir()}
    assert not any((tmp_path / e).exists() for e in ("e1", "e2", "e4"))  # refused runs leave nothing


def test_few_presences_and_nodata_records(tmp_path):
    src = write_records_csv(tmp_path / "mine.csv", n_presence=40, n_background=100, lon0=-38, lat0=45)
    df = pd.read_csv(src, dtype=str, keep_default_na=False)
    pres = np.flatnonzero(df.kind == "presence")
    df["f"] = "1"
    df.loc[pres[:3], "f"] = "2"  # fold 2: three evaluation presences
    bg = np.flatnonzero(df.kind == "background")
    df.loc[bg[:50], "f"] = "2"
    df.loc[pres[3], ["longitude", "latitude"]] = ["-32.01", "49.9"]  # on the nodata sea strip
    df.to_csv(src, index=False)
    pattern = _niche_rasters(tmp_path / "preds", [1, 2], noise=0.01)
    res = run("evaluate", src, "--fold-column", "f", "--predictions", pattern, "--replicates", 50, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    assert "only 3 evaluation presences" in res.output
    assert ev.n_evaluation[1] == 3 and np.isfinite(ev.binomial_p[1])
    assert ev.dropped_no_prediction[0] >= 1


def test_region_polygon_cuts_the_testing_area(demo_folds, tmp_path):
    import geopandas as gpd
    import shapely
    from shapely.geometry import box

    pattern = _niche_rasters(tmp_path / "preds", [1, 2, 3, 4], noise=0.02)
    region = tmp_path / "west.gpkg"
    gpd.GeoDataFrame(geometry=[box(-44.0, 40.0, -38.0, 50.0)], crs=4326).to_file(region)
    res = run("evaluate", demo_folds, "--predictions", pattern, "--region", region, "--replicates", 50, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    folds = pd.read_csv(demo_folds, dtype=str, keep_default_na=False)
    with rasterio.open(pattern.format(fold=1)) as src:
        a = src.read(1, masked=True)
        rows, cols = np.nonzero(~a.mask)
        xs, ys = rasterio.transform.xy(src.transform, rows, cols)
        inside = shapely.contains_xy(box(-44.0, 40.0, -38.0, 50.0), np.asarray(xs), np.asarray(ys))
        assert src.crs.to_epsg() == 4326
        areas = geodesic_row_areas_km2(src.transform, src.height)[rows]  # reference: pyproj.Geod (tests/reference_areas.py)
        ev_p = folds[(folds.fold == "1") & (folds.kind == "presence")]
        pres = np.array([v[0] for v in src.sample(zip(ev_p.longitude.astype(float), ev_p.latitude.astype(float)))])
    cells = a.data[rows, cols][inside]
    w = areas[inside]
    y = np.r_[np.ones(pres.size), np.zeros(cells.size)]
    # reference: sklearn.metrics.roc_auc_score over the cells whose centres fall in the region (shapely)
    ref = roc_auc_score(y, np.r_[pres, cells], sample_weight=np.r_[np.ones(pres.size), w])
    assert ev.auc[0] == pytest.approx(ref, abs=1e-9)  # abs: as in test_user_prediction_rasters_match_sklearn_auc


def test_same_seed_gives_byte_identical_evaluation_and_audit(demo_folds, tmp_path):
    pattern = _niche_rasters(tmp_path / "preds", [1, 2, 3, 4], noise=0.02)
    for i in range(2):
        assert run("evaluate", demo_folds, "--predictions", pattern, "--replicates", 100, "--seed", 9,
                   "--out", tmp_path / f"ev{i}").exit_code == 0
        assert run("audit", demo_folds, "--range-km", 80, "--env", ENV[0], "--seed", 9, "--out", tmp_path / f"au{i}").exit_code == 0
    for kind in ("ev", "au"):
        files = sorted(p.relative_to(tmp_path / f"{kind}0") for p in (tmp_path / f"{kind}0").rglob("*") if p.is_file())
        assert files
        for f in files:
            a, b = (tmp_path / f"{kind}0" / f).read_bytes(), (tmp_path / f"{kind}1" / f).read_bytes()
            if f.suffix == ".json":  # the recorded command names its own output folder
                a, b = a.replace(f"{kind}0".encode(), b"X"), b.replace(f"{kind}1".encode(), b"X")
            assert a == b, f


def test_scores_file_lists_every_record_the_tests_used_or_left_out(tmp_path):
    src = write_records_csv(tmp_path / "mine.csv", n_presence=40, n_background=60, lon0=-38, lat0=45)
    df = pd.read_csv(src, dtype=str, keep_default_na=False)
    df["f"] = np.where(np.arange(len(df)) % 2 == 0, "1", "2")
    df.loc[0, ["longitude", "latitude"]] = ["-32.01", "49.9"]  # presence on the nodata sea strip
    df.to_csv(src, index=False)
    pattern = _niche_rasters(tmp_path / "preds", [1, 2], noise=0.01)
    res = run("evaluate", src, "--fold-column", "f", "--predictions", pattern, "--replicates", 50, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    sc = pd.read_csv(tmp_path / "ev" / "scores.csv", dtype={"record_id": str, "fold": str}, keep_default_na=False)
    ev = sc[sc.role == "evaluation"]
    # every evaluation record of every fold is listed once, the one on nodata with its reason
    assert sorted(ev.record_id) == sorted(df.record_id)
    assert ev.set_index("record_id").loc[df.record_id[0], "dropped"] == "no-prediction"
    table = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    f1 = ev[(ev.fold == "1") & (ev.kind == "presence") & (ev.dropped == "")]
    assert table.n_evaluation[0] == len(f1)
    assert table.successes[0] == (f1.predicted_present.astype(str) == "True").sum()


def test_prediction_rasters_in_another_crs_are_read_with_a_note(demo_folds, tmp_path):
    from rasterio.warp import Resampling, calculate_default_transform, reproject

    pattern = _niche_rasters(tmp_path / "ll", [1, 2, 3, 4], noise=0.02)
    for f in (1, 2, 3, 4):
        with rasterio.open(pattern.format(fold=f)) as src:
            tr, w, h = calculate_default_transform(src.crs, "EPSG:3035", src.width, src.height, *src.bounds)
            dst = np.full((h, w), np.nan, dtype="float32")
            reproject(rasterio.band(src, 1), dst, dst_transform=tr, dst_crs="EPSG:3035", resampling=Resampling.nearest,
                      dst_nodata=np.nan)
        write_geotiff(tmp_path / f"laea_{f}.tif", dst, tr, "EPSG:3035")
    res = run("evaluate", demo_folds, "--predictions", tmp_path / "laea_{fold}.tif", "--replicates", 199, "--out", tmp_path / "ev")
    assert res.exit_code == 0, res.output
    assert "reprojected" in res.output and "EPSG:3035" in res.output
    ev = pd.read_csv(tmp_path / "ev" / "evaluation.csv")
    ref = pd.read_csv(tmp_path / "ev" / "scores.csv")
    assert (ref.dropped.fillna("") == "").mean() > 0.95  # records land on the reprojected cells
    assert ev.significant[:4].all()
