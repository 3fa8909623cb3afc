"""The split rule classes: settings checked at construction, the scikit-learn
splitter protocol on data frames, and design() as a lookup of them."""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import ColumnTransformer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_score, cross_validate
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import splitter
from splitter.errors import InputError
from splitter.io.foldtable import write_design
from splitter.workflow.design import RULES
from splitter.partition import DesignParameters, FoldRule
from tests.conftest import write_records_csv


def _planar_frame(n=300, seed=0, size_m=400_000):
    """Invented records in EPSG:3035 metres: a presence/background label, two covariates, a year."""
    rng = np.random.default_rng(seed)
    x = rng.uniform(0, size_m, n)
    y = rng.uniform(0, size_m, n)
    temp = x / 1e5 + rng.normal(0, 0.3, n)
    wet = y / 1e5 + rng.normal(0, 0.3, n)
    label = (rng.uniform(size=n) < 1 / (1 + np.exp(-(temp - 2)))).astype(int)
    year = rng.integers(2005, 2025, n)
    return pd.DataFrame({"x": x, "y": y, "temp": temp, "wet": wet, "label": label, "year": year})


def _features():
    return ColumnTransformer([("env", StandardScaler(), ["temp", "wet"])])  # only the covariates reach the model


def test_a_rule_object_is_the_cv_argument_of_cross_val_score_on_a_geodataframe_and_a_dataframe():
    import geopandas as gpd

    df = _planar_frame()
    gdf = gpd.GeoDataFrame(df.drop(columns=["x", "y"]), geometry=gpd.points_from_xy(df.x, df.y), crs="EPSG:3035")
    y = df["label"].to_numpy()
    model = make_pipeline(_features(), LogisticRegression())
    rule = splitter.SpatialBlocks(folds=4, block_size=100, seed=3, random_offset=False)
    on_gdf = cross_val_score(model, gdf, y, cv=rule, scoring="roc_auc")
    # reference: scikit-learn fits the same pipeline on each calibration set and scores its evaluation set
    res = cross_validate(model, gdf, y, cv=rule, scoring="roc_auc", return_indices=True)
    assert on_gdf.shape == (4,) and np.allclose(on_gdf, res["test_score"])
    from sklearn.metrics import roc_auc_score

    blocks = (np.floor(df.x / 100_000).astype(int) * 10 + np.floor(df.y / 100_000).astype(int)).to_numpy()
    manual = []
    for tr, te in zip(res["indices"]["train"], res["indices"]["test"]):
        # analytic: 100 km blocks on the unshifted grid; a block is never on both sides
        assert not set(blocks[tr]) & set(blocks[te])
        assert len(tr) + len(te) == len(df)
        fitted = make_pipeline(_features(), LogisticRegression()).fit(gdf.iloc[tr], y[tr])
        manual.append(roc_auc_score(y[te], fitted.predict_proba(gdf.iloc[te])[:, 1]))  # reference: sklearn.metrics
    assert np.allclose(manual, on_gdf)
    assert rule.get_n_splits() == 4
    # The same records as a DataFrame with longitude/latitude columns: the same folds and scores.
    lonlat = gdf.to_crs("EPSG:4326")
    df_ll = pd.DataFrame(lonlat.drop(columns="geometry")).assign(longitude=lonlat.geometry.x, latitude=lonlat.geometry.y)
    assert np.allclose(cross_val_score(model, df_ll, y, cv=rule, scoring="roc_auc"),
                       cross_val_score(model, lonlat, y, cv=rule, scoring="roc_auc"))


def test_y_gives_the_kinds_even_beside_a_presence_like_column_of_x():
    # X with a 0/1 'found' column (a covariate here) and y: the kinds come from y, as without
    # that column (reference: the same split of X without it); no refusal asks for a kind column.
    import geopandas as gpd

    df = _planar_frame(n=300, seed=7)
    y = df["label"].to_numpy()
    X = gpd.GeoDataFrame(df[["temp"]], geometry=gpd.points_from_xy(df.x, df.y), crs="EPSG:3035")
    rule = splitter.SpatialBlocks(folds=3, block_size=100, seed=3, random_offset=False)
    plain = [(tr.tolist(), te.tolist()) for tr, te in rule.split(X, y)]
    assert [(tr.tolist(), te.tolist()) for tr, te in rule.split(X.assign(found=1 - y), y)] == plain


def test_split_on_lon_lat_columns_uses_y_as_the_kind_and_groups_for_group_rules():
    src = write_records_csv_frame()
    y = (src["kind"] == "presence").astype(int).to_numpy()
    X = src.drop(columns=["kind"])
    rule = splitter.SpatialBlocks(folds=3, block_size=60, seed=1)
    pairs = list(rule.split(X, y))
    a = rule.assign(src)  # the kind column gives the same kinds as y
    assert len(pairs) == 3
    for i, (cal, ev) in enumerate(pairs, start=1):
        assert np.array_equal(cal, a.calibration(i)) and np.array_equal(ev, a.evaluation(i))
    # Presences are balanced across folds only if y was read as the kind (common practice: balanced folds).
    pres_per_fold = [int(y[ev].sum()) for _, ev in pairs]
    assert max(pres_per_fold) - min(pres_per_fold) <= 0.5 * np.mean(pres_per_fold)
    groups = np.where(src["longitude"].astype(float) < 12, "west", "east")
    g = splitter.Groups()
    assert g.get_n_splits(X, y, groups) == 2
    for cal, ev in g.split(X, y, groups):
        assert len(set(groups[ev])) == 1 and groups[ev][0] not in set(groups[cal])
    with pytest.raises(InputError, match="X: got ndarray"):
        next(rule.split(X[["longitude", "latitude"]].to_numpy(), y))


def write_records_csv_frame():
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as d:
        return pd.read_csv(write_records_csv(Path(d) / "r.csv"))


@pytest.mark.parametrize("cls,kwargs,words", [
    (splitter.SpatialBlocks, {"block_size": -3}, "block_size=-3"),
    (splitter.SpatialBlocks, {}, "block_size"),
    (splitter.SpatialBlocks, {"block_size": "auto"}, "covariates"),
    (splitter.SpatialBlocks, {"block_size": 10, "folds": 1}, "folds=1"),
    (splitter.Hexagons, {"block_size": 10, "folds": 2.5}, "folds=2.5"),
    (splitter.Hexagons, {"block_size": 10, "buffer": -1}, "buffer=-1"),
    (splitter.Checkerboard, {"block_size": 10, "folds": 3}, "folds=3"),
    (splitter.RandomFolds, {"seed": "x"}, "seed='x'"),
    (splitter.EnvironmentClusters, {"folds": 3}, "covariates"),
    (splitter.HoldoutGroup, {"group_column": "m", "calibrate_on": "a", "evaluate_on": "a"}, "calibrate_on"),
    (splitter.HoldoutGroup, {"group_column": "m"}, "evaluate_on"),
    (splitter.Periods, {"periods": 1}, "periods=1"),
    (splitter.HoldoutPeriod, {}, "calibrate_before"),
    (splitter.HoldoutPeriod, {"calibrate_before": "soon"}, "calibrate_before='soon'"),
])
def test_settings_are_checked_at_construction_and_the_error_names_the_parameter(cls, kwargs, words):
    with pytest.raises(InputError) as e:
        cls(**kwargs)
    assert words in str(e.value) and "--" not in str(e.value)


def test_repr_comes_from_the_constructor_and_rebuilds_the_rule():
    rules = [splitter.SpatialBlocks(folds=4, block_size=80, buffer=20, seed=2), splitter.Checkerboard(folds=2, block_size=5),
             splitter.Groups("method"), splitter.HoldoutGroup("method", calibrate_on="a", evaluate_on=["b", "c"]),
             splitter.RandomFolds(), splitter.LeaveOneOut(buffer=5), splitter.Periods("year", periods=3),
             splitter.HoldoutPeriod("year", calibrate_before=2018)]
    ns = {name: getattr(splitter, name) for name in ("SpatialBlocks", "Checkerboard", "Groups", "HoldoutGroup",
                                                     "RandomFolds", "LeaveOneOut", "Periods", "HoldoutPeriod")}
    for r in rules:
        again = eval(repr(r), ns)
        assert again == r and again.get_params() == r.get_params()
    assert repr(splitter.RandomFolds()) == "RandomFolds()"  # only changed settings are shown (as scikit-learn does)
    assert repr(rules[0]) == "SpatialBlocks(folds=4, block_size=80.0, buffer=20.0, seed=2)"


def test_design_is_a_lookup_of_the_rule_classes_and_takes_their_keyword_names(tmp_path):
    import inspect

    src = write_records_csv(tmp_path / "r.csv")
    assert set(RULES) == set(splitter.partition.METHODS) and all(issubclass(c, FoldRule) for c in RULES.values())
    design_kw = set(inspect.signature(splitter.design).parameters)
    for cls in RULES.values():
        assert set(cls._parameter_names()) - {"max_folds"} <= design_kw
    a = splitter.design(src, method="hexagons", folds=4, block_size=60, buffer=10, seed=4)
    b = splitter.Hexagons(folds=4, block_size=60, buffer=10, seed=4).assign(src)
    assert np.array_equal(a.fold, b.fold) and np.array_equal(a.gap_rows, b.gap_rows)
    assert isinstance(a.parameters, DesignParameters) and a.parameters.rule == b.parameters.rule


def test_dataframe_and_geodataframe_records_give_the_folds_of_the_file_and_keep_numbers(tmp_path):
    import geopandas as gpd

    src = write_records_csv(tmp_path / "r.csv")
    df = pd.read_csv(src)  # reference: pandas' own reading of the file (numeric columns as numbers)
    df["year"] = np.arange(len(df)) % 9 + 2010
    path = tmp_path / "with_year.csv"
    df.to_csv(path, index=False)
    from_path = splitter.design(path, method="blocks", folds=4, block_size=50, seed=2)
    from_df = splitter.design(df, method="blocks", folds=4, block_size=50, seed=2)
    gdf = gpd.GeoDataFrame(df.drop(columns=["longitude", "latitude"]),
                           geometry=gpd.points_from_xy(df.longitude, df.latitude), crs="EPSG:4326")
    from_gdf = splitter.design(gdf, method="blocks", folds=4, block_size=50, seed=2)
    assert np.array_equal(from_path.fold, from_df.fold) and np.array_equal(from_path.fold, from_gdf.fold)
    frame = from_path.to_frame()
    assert pd.api.types.is_integer_dtype(frame["year"]) and frame["year"].tolist() == df["year"].tolist()
    assert np.allclose(frame["longitude"], df["longitude"])  # numbers, equal to pandas.read_csv's
    assert frame["note"].tolist() == df["note"].fillna("").tolist()  # text stays text; blank cells stay ""
    # The written CSV keeps the file's text exactly.
    out = write_design(from_path, tmp_path / "o" / "f.csv")["folds"]
    assert out.read_text().splitlines()[1].startswith(path.read_text().splitlines()[1])
    g = from_gdf.to_geodataframe()
    assert g.crs.to_epsg() == 4326 and g.geometry.geom_equals(gdf.geometry).all()  # reference: shapely equality
    g2 = from_df.to_geodataframe()
    assert np.allclose(g2.geometry.x, df.longitude) and list(g2["fold"]) == list(from_df.to_frame()["fold"])
    assert len(df) == len(pd.read_csv(src))  # the DataFrame given is not modified
    shifted = df.set_axis(df.index + 100)  # any index: rows are taken by position
    assert np.array_equal(splitter.design(shifted, method="blocks", folds=4, block_size=50, seed=2).fold, from_df.fold)
    with pytest.raises(InputError, match="calibrate_before=2015: leave-one-out"):
        splitter.design(df, method="leave-one-out", calibrate_before=2015)
    with pytest.raises(InputError, match="records"):
        splitter.design(np.zeros((3, 2)), method="random")


def test_design_parameters_are_written_to_the_sidecar_and_read_back(tmp_path):
    src = write_records_csv(tmp_path / "r.csv")
    for method, kw in (("blocks", {"block_size": 40, "buffer": 10}), ("groups", {"group_column": "method"}),
                       ("checkerboard", {"folds": 4, "block_size": 30})):
        a = splitter.design(src, method=method, seed=5, **kw)
        side = json.loads(write_design(a, tmp_path / method / "f.csv")["design"].read_text())
        back = DesignParameters.from_dict(side["parameters"], geometry_crs=side["geometry_crs"],
                                          software=side["software"], inputs=side["inputs_sha256"], notes=tuple(side["notes"]))
        assert back.to_dict() == json.loads(json.dumps(a.parameters.to_dict()))
        assert back.method == method and back.seed == 5 and back.folds == a.n_folds
        assert side["block_size_km"] == a.parameters.block_size_km and side["buffer_km"] == a.parameters.buffer_km
    assert "fold_groups" not in DesignParameters.from_dict({"method": "blocks", "folds": 5, "seed": 1}).to_dict()


def test_time_windows_are_contiguous_and_holdout_period_splits_at_the_year(tmp_path):
    df = _planar_frame(n=400, seed=2)
    df["kind"] = np.where(df["label"] == 1, "presence", "background")
    df.loc[df.kind == "background", "year"] = pd.NA  # background points carry no year (as in the demo data)
    a = splitter.Periods(time_column="year", periods=4, seed=1).assign(df, crs="EPSG:3035")
    pres = (df.kind == "presence").to_numpy()
    years = df["year"].to_numpy(float)
    spans = [(years[pres & (a.fold == q)].min(), years[pres & (a.fold == q)].max()) for q in a.folds]
    # analytic: windows are contiguous and ordered; no year is cut in two
    assert all(spans[q][1] < spans[q + 1][0] for q in range(3))
    counts = np.array([np.sum(pres & (a.fold == q)) for q in a.folds])
    assert counts.min() > 0.5 * counts.mean()  # common practice: comparable fold sizes (years are lumps of ~1/20)
    bg = ~pres
    assert set(a.fold[bg]) == {1, 2, 3, 4}  # undated background dealt to every window
    h = splitter.HoldoutPeriod(time_column="year", calibrate_before=2018).assign(df, crs="EPSG:3035")
    ev, cal = h.evaluation(1), h.calibration(1)
    assert (years[ev][pres[ev]] >= 2018).all() and (years[cal][pres[cal]] < 2018).all()
    assert h.n_folds == 1 and h.parameters.calibrate_before == 2018.0


@pytest.mark.parametrize("name", ["Year", "eventDate", "date"])
def test_the_time_column_is_found_as_a_user_names_it(name):
    # The default 'year' in any case, else Darwin Core's eventDate or a plain date (ISO dates):
    # the same windows as the 'year' column itself gives (reference: the design on 'year').
    df = _planar_frame(n=300, seed=5)
    df["kind"] = np.where(df["label"] == 1, "presence", "background")
    want = splitter.Periods(time_column="year", periods=3, seed=1).assign(df, crs="EPSG:3035")
    other = df.drop(columns=["year"]).assign(**{name: df["year"] if name == "Year" else df["year"].astype(str) + "-06-01"})
    got = splitter.Periods(periods=3, seed=1).assign(other, crs="EPSG:3035")
    np.testing.assert_array_equal(got.fold, want.fold)
    assert got.parameters.time_column == name  # the sidecar names the column used
    with pytest.raises(InputError, match=r"time_column='season': no such column; columns are: .*" + name):
        splitter.Periods(time_column="season", periods=3).assign(other, crs="EPSG:3035")


def test_space_and_time_evaluates_the_later_period_inside_held_out_blocks():
    df = _planar_frame(n=500, seed=4)
    df["kind"] = np.where(df["label"] == 1, "presence", "background")
    a = splitter.design(df, method="blocks", folds=3, block_size=100, random_offset=False, seed=2,
                        time_column="year", calibrate_before=2016, crs="EPSG:3035")
    blocks = (np.floor(df.x / 100_000).astype(int) * 10 + np.floor(df.y / 100_000).astype(int)).to_numpy()
    years = df["year"].to_numpy()
    for i in a.folds:
        ev, cal = a.evaluation(i), a.calibration(i)
        assert (years[ev] >= 2016).all() and (years[cal] < 2016).all()  # analytic: time never runs backwards
        assert not set(blocks[ev]) & set(blocks[cal])  # analytic: a held-out block is not calibrated on
    assert a.parameters.calibrate_before == 2016.0 and a.parameters.block_size_km == 100.0
    assert repr(a.parameters.rule).startswith("LaterPeriod(rule=SpatialBlocks(")


# Sidecar `parameters` written by the release before the rule classes (the dict-based design()),
# copied from its demo outputs (ladder shortened to two rungs): old fold tables must still read.
OLD_SIDECARS = [
    {"background_imbalance": 0.015, "block_size_km": 120.0, "block_size_rule": "given", "buffer_km": 120.0,
     "cell_shape": "square", "folds": 5, "grid_offset_km": [61.4185949640308, 114.05564355911224], "method": "blocks",
     "occupied_cells": 80, "presence_imbalance": 0.0, "seed": 1},
    {"background_imbalance": 0.005, "block_size_km": 100.06417720179762, "block_size_rule": "match", "buffer_km": 0.0,
     "cell_shape": "square", "folds": 5, "grid_offset_km": [51.21500974971845, 95.10736773303395],
     "ladder": {"chosen_km": 100.06417720179762, "prediction_locations": "2000 locations sampled by area inside the records' convex hull",
                "rule": "smallest Wasserstein-1 distance between evaluation-to-calibration and prediction-to-record nearest-neighbour distances",
                "rungs": [{"block_km": 18.616862260456003, "presence_imbalance": 0.0, "wasserstein_km": 17.558906211870003},
                          {"block_km": 28.34650509264571, "presence_imbalance": 0.0, "wasserstein_km": 13.151389015893582}]},
     "method": "blocks", "occupied_cells": 114, "presence_imbalance": 0.0, "seed": 1},
    {"background_imbalance": 0.0, "buffer_km": 0.0, "fold_groups": {"1": "transect", "2": "light-trap"}, "folds": 2,
     "group_column": "method", "method": "groups", "presence_imbalance": 0.6047, "seed": 1},
    {"buffer_km": 0.0, "calibrate_on": ["transect"], "evaluate_on": ["light-trap"], "folds": 1, "group_column": "method",
     "method": "holdout-group", "seed": 1},
    {"background_imbalance": 1.164, "buffer_km": 0.0, "covariates": ["temperature", "moisture"],
     "env": ["demo_data/temperature.tif", "demo_data/moisture.tif"], "folds": 4, "method": "clusters",
     "presence_imbalance": 0.6047, "seed": 1, "standardised_on": "background"},
]


@pytest.mark.parametrize("old", OLD_SIDECARS, ids=lambda d: d["method"] + "-" + str(d.get("block_size_rule", "")))
def test_sidecars_of_the_previous_release_read_into_design_parameters_and_write_back_unchanged(old):
    p = DesignParameters.from_dict(old)
    assert json.dumps(p.to_dict(), sort_keys=True) == json.dumps(old, sort_keys=True)
    assert p.method == old["method"] and p.folds == old["folds"] and p.get("block_size_km") == old.get("block_size_km")
