"""output_lock: one run at a time per output, also when a lock file is removed mid-way."""

from __future__ import annotations

import contextlib
import fcntl
import os

import pytest

from splitter.errors import InputError
from splitter.io import lock


def test_a_second_holder_is_refused_and_a_finished_run_leaves_no_lock_file(tmp_path):
    out = tmp_path / "folds.csv"
    with lock.output_lock(out, folder=False):
        assert (tmp_path / ".folds.csv.lock").is_file()
        with pytest.raises(InputError, match="another splitter run is writing this output"):
            with lock.output_lock(out, folder=False):
                pass
    assert not (tmp_path / ".folds.csv.lock").exists()
    with lock.output_lock(out, folder=False):  # free again
        pass


def test_a_run_that_opened_a_lock_file_just_before_it_was_removed_does_not_write_beside_a_third(tmp_path, monkeypatch):
    """Run B opens the lock file; run A finishes (removes and releases it); run C takes a new
    lock file; then B locks its file. B must see that its file is no longer the one at the
    path and be refused, since C holds the new one. The interleaving is forced, not timed."""
    out = tmp_path / "folds.csv"
    runs = contextlib.ExitStack()
    run_a = lock.output_lock(out, folder=False)
    run_a.__enter__()
    real_open = lock._open
    removed_file = {}

    def open_then_let_a_finish_and_c_start(path, flags, mode=0o777):
        fd = real_open(path, flags, mode)
        if not removed_file:  # B's first open only
            removed_file["inode"] = os.fstat(fd).st_ino
            run_a.__exit__(None, None, None)  # A removes its lock file and releases the lock
            monkeypatch.setattr(lock, "_open", real_open)
            runs.enter_context(lock.output_lock(out, folder=False))  # C creates a new one and holds it
            monkeypatch.setattr(lock, "_open", open_then_let_a_finish_and_c_start)
        return fd

    monkeypatch.setattr(lock, "_open", open_then_let_a_finish_and_c_start)
    with runs:
        with pytest.raises(InputError, match="another splitter run is writing this output"):
            with lock.output_lock(out, folder=False):  # B
                pass
        # reference: the operating system's own view (fcntl.flock) — C's file is at the path and held
        held = os.open(tmp_path / ".folds.csv.lock", os.O_RDONLY)
        try:
            assert os.fstat(held).st_ino != removed_file["inode"]
            with pytest.raises(BlockingIOError):
                fcntl.flock(held, fcntl.LOCK_EX | fcntl.LOCK_NB)
        finally:
            os.close(held)
