import numpy as np
import pyproj
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.model_selection import cross_validate

import splitter
from splitter.errors import InputError
from splitter.geo import Points
from splitter.io.foldtable import write_design
from splitter.io.records import Records
from tests.conftest import write_records_csv

GEOD = pyproj.Geod(ellps="WGS84")


def _records(n_p, n_b, seed, lat0=45.0):
    rng = np.random.default_rng(seed)
    lon = np.r_[rng.normal(10, 1.0, n_p), rng.uniform(7, 13, n_b)]
    lat = np.clip(np.r_[rng.normal(lat0, 0.8, n_p), rng.uniform(lat0 - 2, lat0 + 2, n_b)], -89, 89)
    import pandas as pd

    n = n_p + n_b
    return Records(
        table=pd.DataFrame({"lon": [f"{v:.5f}" for v in lon], "lat": [f"{v:.5f}" for v in lat]}),
        points=Points.lonlat(lon, lat),
        record_id=np.array([str(i + 1) for i in range(n)], object),
        kind=np.array(["presence"] * n_p + ["background"] * n_b, object),
        dropped=np.full(n, "", object), x_column="lon", y_column="lat",
    )


def _geod_min_km(a: Points, b: Points) -> np.ndarray:
    # reference: pyproj.Geod brute force over all pairs
    ax, bx = np.meshgrid(a.x, b.x, indexing="ij")
    ay, by = np.meshgrid(a.y, b.y, indexing="ij")
    _, _, d = GEOD.inv(ax.ravel(), ay.ravel(), bx.ravel(), by.ravel())
    return d.reshape(ax.shape).min(axis=1) / 1000


def test_every_kept_record_evaluates_once_and_the_buffer_holds():
    """Property over seeds, methods, fold counts, buffers and latitudes (hypothesis).

    A design may refuse with InputError (e.g. a checkerboard fold without presences); those
    cases are counted, and the test fails unless most generated cases reach the checks."""
    seen = {"checked": 0, "refused": []}

    @settings(max_examples=15, deadline=None, derandomize=True, database=None,
              suppress_health_check=[HealthCheck.too_slow])
    @given(seed=st.integers(0, 10_000), method=st.sampled_from(["blocks", "hexagons", "checkerboard", "random"]),
           k=st.sampled_from([2, 4, 5]), buffer=st.sampled_from([0.0, 15.0, 40.0]),
           lat0=st.sampled_from([0.0, 45.0, 68.0]))
    def check(seed, method, k, buffer, lat0):
        recs = _records(120, 60, seed, lat0)
        try:
            a = splitter.design(recs, method=method, folds=k, block_size=40, buffer=buffer, seed=seed)
        except InputError as e:
            seen["refused"].append((method, k, str(e)))
            return
        kept = a.fold >= 0
        hits = np.zeros(len(a), int)
        for i in a.folds:
            hits[a.evaluation(i)] += 1
            ev, cal = a.evaluation(i), a.calibration(i)
            assert not np.intersect1d(ev, cal).size
            if buffer:
                # The guarantee: no calibration record of fold i lies closer than the buffer.
                d = _geod_min_km(recs.points.take(cal), recs.points.take(ev))
                assert d.min() >= buffer
                gaps = a.gaps(i)
                if gaps.size:  # and nothing was removed needlessly
                    assert _geod_min_km(recs.points.take(gaps), recs.points.take(ev)).max() < buffer
        assert np.all(hits[kept] == 1) and np.all(hits[~kept] == 0)
        seen["checked"] += 1

    check()
    total = seen["checked"] + len(seen["refused"])
    # Most generated cases must reach the checks; refusals may only be the checkerboard's.
    assert total >= 15 and seen["checked"] >= 0.75 * total, seen  # 15 = max_examples
    assert all(m == "checkerboard" for m, _, _ in seen["refused"]), seen["refused"]


def test_blocks_balance_presences_and_same_seed_gives_identical_files(tmp_path):
    path = write_records_csv(tmp_path / "r.csv")
    outs = []
    for run in range(2):
        a = splitter.design(path, method="blocks", folds=5, block_size=40, buffer=10, seed=7)
        p = write_design(a, tmp_path / f"run{run}" / "folds.csv")
        outs.append({k: v.read_bytes() for k, v in p.items() if k != "design"})
        outs[-1]["design"] = p["design"].read_text().replace(str(tmp_path / f"run{run}"), "")
    assert outs[0] == outs[1]
    counts = a.counts()["evaluation_presence"]
    # analytic: 240 presences over 5 folds can be dealt 48 each; the best of balance_cells' 64 seeded
    # greedy deals reaches that optimum here (measured at seeds 1, 2, 3, 7 and 8: exact every time)
    assert counts.sum() == 240 and counts.tolist() == [48] * 5
    assert a.parameters["presence_imbalance"] == 0.0  # (largest - smallest) / mean, documented in balance.py
    b = splitter.design(path, method="blocks", folds=5, block_size=40, buffer=10, seed=8)
    assert not np.array_equal(a.fold, b.fold)


class _Recorder(BaseEstimator, ClassifierMixin):
    def fit(self, X, y):
        self.classes_ = np.unique(y)
        return self

    def predict(self, X):
        return np.full(len(X), self.classes_[0])


def test_as_cv_gives_exactly_the_calibration_and_evaluation_sets():
    recs = _records(150, 80, 5)
    a = splitter.design(recs, method="blocks", folds=4, block_size=50, buffer=25, seed=2)
    X = np.column_stack([recs.points.x, recs.points.y])
    y = (recs.kind == "presence").astype(int)
    # reference: sklearn.model_selection.cross_validate(return_indices=True)
    res = cross_validate(_Recorder(), X, y, cv=a.as_cv(), return_indices=True)
    assert a.as_cv().get_n_splits() == 4
    for i, (tr, te) in enumerate(zip(res["indices"]["train"], res["indices"]["test"]), start=1):
        assert np.array_equal(np.sort(tr), a.calibration(i))
        assert np.array_equal(np.sort(te), a.evaluation(i))


def test_groups_holdout_loo_and_clusters():
    recs = _records(90, 30, 1)
    groups = np.where(recs.points.x < 10, "transect", "trap").astype(object)
    groups[recs.kind == "background"] = ""
    recs = Records(**{**recs.__dict__, "table": recs.table.assign(method=groups)})
    g = splitter.design(recs, method="groups", group_column="method", seed=1)
    assert g.n_folds == 2
    for i in g.folds:  # leave-one-group-out: one survey method per evaluation fold
        ev = g.evaluation(i)
        assert len(set(groups[ev][recs.kind[ev] == "presence"])) == 1
    h = splitter.design(recs, method="holdout-group", group_column="method", calibrate_on="transect", evaluate_on="trap")
    assert set(groups[h.evaluation(1)][recs.kind[h.evaluation(1)] == "presence"]) == {"trap"}
    assert set(groups[h.calibration(1)][recs.kind[h.calibration(1)] == "presence"]) == {"transect"}
    loo = splitter.design(recs, method="leave-one-out", buffer=20)
    assert loo.n_folds == 90 and all(len(loo.evaluation(i)) == 1 for i in (1, 45, 90))
    env = np.column_stack([recs.points.x, recs.points.y])
    recs2 = Records(**{**recs.__dict__, "table": recs.table.assign(t=[f"{v}" for v in env[:, 0]], m=[f"{v}" for v in env[:, 1]])})
    c = splitter.design(recs2, method="clusters", folds=3, covariates=["t", "m"], seed=0)
    assert c.n_folds == 3 and set(np.unique(c.fold)) == {1, 2, 3}


def test_refusals_are_input_errors():
    recs = _records(50, 0, 2)
    with pytest.raises(InputError, match="occupied"):
        splitter.design(recs, method="blocks", folds=5, block_size=5000)
    with pytest.raises(InputError, match="unknown method"):
        splitter.design(recs, method="stripes", folds=5)
    with pytest.raises(InputError, match="at least 2 folds"):
        splitter.design(recs, method="random", folds=1)
    with pytest.raises(InputError, match="no calibration presences"):
        splitter.design(recs, method="blocks", folds=2, block_size=100, buffer=3000)


@pytest.mark.parametrize("suffix", [".csv", ".gpkg"])
@pytest.mark.parametrize("stop_in", ["write_table", "to_json"])
def test_a_stop_while_writing_keeps_the_previous_set_whole(tmp_path, monkeypatch, suffix, stop_in):
    # A design writes three files (table, gaps, sidecar). Stopped while the table or the
    # sidecar is being written, the previous run's three files stay byte for byte, and no
    # new one appears beside an old one (a new table beside an old sidecar misdescribes it).
    from splitter.io import foldtable

    path = write_records_csv(tmp_path / "r.csv")
    out = tmp_path / "run" / f"folds{suffix}"
    before = write_design(splitter.design(path, method="blocks", folds=5, block_size=40, buffer=10, seed=7), out)
    assert set(before) == {"folds", "gaps", "design"}
    kept = {k: p.read_bytes() for k, p in before.items()}
    real = getattr(foldtable, stop_in)

    def work_then_stop(*args, **kwargs):
        if stop_in == "write_table":  # the real work, beside the output, then the stop
            frame, path, *rest = args
            real(frame, path.with_name("scratch" + path.suffix), *rest, **kwargs)
        else:
            real(*args, **kwargs)
        raise KeyboardInterrupt

    monkeypatch.setattr(foldtable, stop_in, work_then_stop)
    again = splitter.design(path, method="blocks", folds=5, block_size=40, buffer=10, seed=8)
    with pytest.raises(KeyboardInterrupt):
        write_design(again, out)
    assert {k: p.read_bytes() for k, p in before.items()} == kept
    assert sorted(p.name for p in out.parent.iterdir() if not p.name.startswith("scratch")) == sorted(
        p.name for p in before.values())
