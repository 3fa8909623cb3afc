"""A run's outputs take effect together, or the output is left as it was.

Each file is already written atomically (:mod:`splitter.io.atomic`), but a run writes
many: a demo writes some seventy, an evaluation a table, a sidecar, figures and
rasters. A run stopped half-way (Ctrl-C, SIGTERM, bad input found late, a bug) would
otherwise leave a folder that mixes this run's finished files with the last run's
others, say a new fold table beside an appendix that describes the old one.

While :func:`all_or_nothing` is open, every file the atomic writers put in place is
noted first: a new name is listed, and a file about to be replaced keeps its previous
content under a hidden name (a hard link, so nothing is copied). When the block fails,
new files are removed and replaced ones restored; when it succeeds, the hidden copies
are dropped. The command line opens one around each command but ``batch``, whose
finished runs must stay when a later run fails.

Examples
--------
>>> import tempfile, pathlib
>>> from splitter.io.atomic import atomic_write
>>> out = pathlib.Path(tempfile.mkdtemp())
>>> try:
...     with all_or_nothing():
...         with atomic_write(out / "a.csv") as f:
...             _ = f.write("x\\n")
...         raise ValueError("found late")
... except ValueError:
...     pass
>>> list(out.iterdir())
[]
"""

from __future__ import annotations

import os
import secrets
import shutil
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

__all__ = ["all_or_nothing", "before_put", "make_folder", "remove"]


class _Journal:
    def __init__(self):
        self.created: dict[Path, None] = {}  # an ordered set: names this run made
        self.replaced: dict[Path, Path] = {}  # name -> hidden copy of what it held before
        self.folders: list[Path] = []  # folders this run made

    def keep(self) -> None:
        for old in self.replaced.values():
            _unlink(old)

    def undo(self) -> None:
        for path in self.created:
            _unlink(path)
        for path, old in self.replaced.items():
            if os.path.lexists(old):  # else the stop came before the copy, and the file was never touched
                os.replace(old, path)
        for folder in sorted(self.folders, key=lambda p: len(p.parts), reverse=True):
            try:
                folder.rmdir()
            except OSError:  # not empty: something else was put there
                pass


_JOURNAL: _Journal | None = None


@contextmanager
def all_or_nothing(keep_on: tuple = ()) -> Iterator[None]:
    """Make the outputs written in the block take effect together.

    Parameters
    ----------
    keep_on : tuple of exception types
        Exceptions that end the block with its outputs complete, e.g. the command
        line's exit 1 for a verdict asked for with ``--fail-on``.

    A block inside another one changes nothing: the outer block decides.
    """
    global _JOURNAL
    if _JOURNAL is not None:
        yield
        return
    journal = _JOURNAL = _Journal()
    try:
        yield
    except keep_on:
        _JOURNAL = None
        journal.keep()
        raise
    except BaseException:
        _JOURNAL = None
        journal.undo()
        raise
    finally:
        _JOURNAL = None
    journal.keep()


def before_put(path: Path) -> None:
    """Called by the atomic writers just before a finished file takes the name ``path``."""
    journal = _JOURNAL
    if journal is None:
        return
    path = Path(os.path.abspath(path))
    if path in journal.created or path in journal.replaced:
        return
    if not os.path.lexists(path):
        journal.created[path] = None  # listed before it exists: a stop in between finds nothing to remove
        return
    old = journal.replaced[path] = _hidden(path)
    try:
        os.link(path, old, follow_symlinks=False)  # a symlink is kept as itself
    except OSError:  # a file system without hard links
        shutil.copy2(path, old)


def make_folder(path) -> Path:
    """``mkdir -p``; inside :func:`all_or_nothing`, a failed run removes the folders it made."""
    path = Path(path)
    missing, p = [], Path(os.path.abspath(path))
    while not p.exists():
        missing.append(p)
        p = p.parent
    if _JOURNAL is not None:
        _JOURNAL.folders.extend(missing)  # listed before they exist, as files are
    path.mkdir(parents=True, exist_ok=True)
    return path


def remove(path) -> None:
    """Delete ``path``; inside :func:`all_or_nothing`, so that a failed run brings it back."""
    path = Path(os.path.abspath(path))
    journal = _JOURNAL
    if journal is None or path in journal.created:
        if journal is not None:
            del journal.created[path]
        _unlink(path)
    elif path in journal.replaced:
        _unlink(path)  # its previous content is already kept
    elif os.path.lexists(path):
        old = journal.replaced[path] = _hidden(path)
        os.replace(path, old)


def _hidden(path: Path) -> Path:
    while True:
        candidate = path.with_name(f".{path.stem}.old-{secrets.token_hex(4)}{path.suffix}")
        if not os.path.lexists(candidate):
            return candidate


def _unlink(path: Path) -> None:
    try:
        path.unlink()
    except FileNotFoundError:
        pass
