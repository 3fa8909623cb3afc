"""A run's outputs take effect together: a failed block leaves the folder as it was."""

import os

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from splitter.io.atomic import atomic_path, atomic_write
from splitter.io.journal import all_or_nothing, make_folder, remove


def _state(folder):
    # Every file and folder under ``folder`` with its bytes (None for a folder), hidden ones included.
    return {p.relative_to(folder).as_posix(): (p.read_bytes() if p.is_file() else None)
            for p in sorted(folder.rglob("*"))}


def _run(out, stop=None):
    """A run that replaces one file, adds a nested new one, removes one, and writes a
    Shapefile-like set through atomic_path; ``stop`` is raised at the end."""
    with all_or_nothing(keep_on=(SystemExit,)):
        with atomic_write(out / "table.csv") as f:
            f.write("new table\n")
        make_folder(out / "figures" / "deep")
        with atomic_write(out / "figures" / "deep" / "map.png", "wb") as f:
            f.write(b"new figure")
        remove(out / "stale.csv")
        with atomic_path(out / "grid.shp") as tmp:
            tmp.write_bytes(b"shp")
            tmp.with_suffix(".dbf").write_bytes(b"dbf")
        if stop is not None:
            raise stop


@pytest.fixture
def out(tmp_path):
    out = tmp_path / "out"
    (out / "figures").mkdir(parents=True)
    (out / "table.csv").write_text("old table\n")
    (out / "stale.csv").write_text("old stale\n")
    (out / "grid.shp").write_bytes(b"old shp")
    return out


@pytest.mark.parametrize("stop", [KeyboardInterrupt(), ValueError("bad input found late"), RuntimeError("a bug")])
def test_a_failed_run_leaves_the_folder_as_it_was(out, stop):
    before = _state(out)
    with pytest.raises(type(stop)):
        _run(out, stop)
    # reference: the listing and bytes taken before the run (the folder it made below
    # figures/ is gone; figures/ itself existed and stays)
    assert _state(out) == before


@pytest.mark.parametrize("stop", [None, SystemExit(1)])
def test_a_finished_run_keeps_its_outputs_and_no_hidden_copies(out, stop):
    if stop is None:
        _run(out)
    else:
        with pytest.raises(SystemExit):
            _run(out, stop)
    assert _state(out) == {
        "figures": None, "figures/deep": None, "figures/deep/map.png": b"new figure",
        "grid.dbf": b"dbf", "grid.shp": b"shp", "table.csv": b"new table\n"}


def test_a_replaced_file_is_kept_by_a_hard_link_not_a_copy(out):
    # A large table replaced costs no copy: during the run its previous content is the same inode.
    inode = (out / "table.csv").stat().st_ino
    seen = {}
    with pytest.raises(KeyboardInterrupt):
        with all_or_nothing():
            with atomic_write(out / "table.csv") as f:
                f.write("new")
            hidden = [p for p in out.iterdir() if p.name.startswith(".table.old-")]
            seen["inodes"] = [p.stat().st_ino for p in hidden]
            raise KeyboardInterrupt
    assert seen["inodes"] == [inode]
    assert (out / "table.csv").read_text() == "old table\n"


def test_an_inner_block_leaves_the_decision_to_the_outer_one(out):
    before = _state(out)
    with pytest.raises(KeyboardInterrupt):
        with all_or_nothing():
            with all_or_nothing():
                with atomic_write(out / "table.csv") as f:
                    f.write("new")
            assert (out / "table.csv").read_text() == "new"  # readable at its name during the run
            raise KeyboardInterrupt
    assert _state(out) == before


def test_without_a_block_writes_and_removals_are_immediate(out):
    with atomic_write(out / "table.csv") as f:
        f.write("new")
    remove(out / "stale.csv")
    remove(out / "never-there.csv")
    assert sorted(os.listdir(out)) == ["figures", "grid.shp", "table.csv"]


def test_a_replaced_symlink_comes_back_as_a_symlink(tmp_path):
    target = tmp_path / "elsewhere.csv"
    target.write_text("theirs")
    out = tmp_path / "out"
    out.mkdir()
    (out / "table.csv").symlink_to(target)
    with pytest.raises(KeyboardInterrupt):
        with all_or_nothing():
            with atomic_write(out / "table.csv") as f:
                f.write("new")
            raise KeyboardInterrupt
    assert (out / "table.csv").is_symlink() and os.readlink(out / "table.csv") == str(target)
    assert target.read_text() == "theirs" and sorted(os.listdir(out)) == ["table.csv"]


NAMES = ("a.csv", "b.png", "sub/c.csv", "sub/deep/d.csv", "other/e.csv")


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(before=st.sets(st.sampled_from(NAMES)),
       steps=st.lists(st.tuples(st.sampled_from(["write", "remove"]), st.sampled_from(NAMES), st.integers(0, 3)),
                      max_size=12),
       ending=st.sampled_from([None, KeyboardInterrupt, ValueError]))
def test_any_run_is_undone_whole_or_kept_whole(tmp_path_factory, before, steps, ending):
    # Any sequence of writes (atomic_write, atomic_path), removals and new folders, over files
    # that did or did not exist: a failed run leaves the tree exactly as it was; a finished
    # one leaves what a plain model of the steps says (a dict of name -> bytes), nothing hidden.
    out = tmp_path_factory.mktemp("run")
    for name in before:
        make_folder((out / name).parent)
        (out / name).write_bytes(f"old {name}".encode())
    start = _state(out)
    model = {n: f"old {n}".encode() for n in before}
    try:
        with all_or_nothing(keep_on=()):
            for i, (op, name, how) in enumerate(steps):
                path = out / name
                if op == "remove":
                    remove(path)
                    model.pop(name, None)
                    continue
                make_folder(path.parent)
                data = f"new {name} {i}".encode()
                if how % 2:
                    with atomic_path(path) as tmp:
                        tmp.write_bytes(data)
                else:
                    with atomic_write(path, "wb") as f:
                        f.write(data)
                model[name] = data
            if ending is not None:
                raise ending()
    except (KeyboardInterrupt, ValueError):
        assert _state(out) == start
        return
    files = {k: v for k, v in _state(out).items() if v is not None}
    assert files == model
