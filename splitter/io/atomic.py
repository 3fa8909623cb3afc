"""Atomic file output: write beside the target, then rename.

Every output of ``splitter`` goes through one of these two context managers, so an
interrupted run (an error, Ctrl-C) never leaves a half-written file and never damages
a file that was already there: the data go to a hidden temporary file in the same
directory (same file system, so the final ``os.replace`` is atomic) and only a
complete, fsync'ed file takes the target's name. That a run's many files take effect
together is :mod:`splitter.io.journal`'s part.

Examples
--------
>>> import tempfile, pathlib
>>> out = pathlib.Path(tempfile.mkdtemp()) / "folds.csv"
>>> with atomic_write(out) as f:
...     _ = f.write("record_id,fold\\n1,2\\n")
>>> out.read_text()
'record_id,fold\\n1,2\\n'
"""

from __future__ import annotations

import os
import secrets
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Iterator

from splitter.io.journal import before_put

__all__ = ["atomic_write", "atomic_path", "remove_unfinished"]

_TEXT_MODES = {"w", "wt"}
_BINARY_MODES = {"wb"}


# Temporary files of the writes now in progress. A stop (Ctrl-C, SIGTERM) is handled at
# whatever bytecode runs next, which may lie where no cleanup block covers it yet (inside
# a context manager's __enter__, after the file was created): the command line's stop
# handler calls remove_unfinished() for whatever is still listed.
_UNFINISHED: dict[Path, bool] = {}  # temporary file -> whether side files share its stem


def remove_unfinished() -> None:
    """Delete the temporary files of every write in progress (the stop handler's call)."""
    for temp, with_side_files in list(_UNFINISHED.items()):
        _discard(temp, with_side_files)


def _discard(temp: Path, with_side_files: bool) -> None:
    _remove(_companions(temp) if with_side_files else [temp])
    _UNFINISHED.pop(temp, None)


def _temp_name(path: Path) -> Path:
    """A fresh hidden name beside ``path`` that keeps its extension.

    ``.name.tmp-1a2b3c4d.gpkg`` for ``name.gpkg``: drivers that pick a format from the
    extension (GDAL, pandas) still recognise it.
    """
    while True:
        candidate = path.with_name(f".{path.stem}.tmp-{secrets.token_hex(4)}{path.suffix}")
        if not candidate.exists():
            return candidate


def _companions(temp: Path) -> list[Path]:
    """The temporary file plus any side files a driver wrote next to it.

    A Shapefile is several files (``.shp``, ``.shx``, ``.dbf``, ``.prj``...) and GDAL
    may add ``.aux.xml``; they all share the temporary stem.
    """
    prefix = _stem(temp) + "."
    # startswith, not glob: the user's file name may hold glob characters such as "[".
    return sorted(p for p in temp.parent.iterdir() if p.name.startswith(prefix))


def _stem(path: Path) -> str:
    """File name without its last extension (``Path.stem``, spelled out for clarity)."""
    return path.name[: len(path.name) - len(path.suffix)]


def _put(temp: Path, path: Path) -> None:
    """The finished file takes its name (noted first when the run's outputs go together)."""
    before_put(path)
    os.replace(temp, path)


def _fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(directory: Path) -> None:
    # Makes the rename itself durable; some file systems refuse to open a directory.
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _remove(paths) -> None:
    for p in paths:
        try:
            p.unlink()
        except FileNotFoundError:
            pass


@contextmanager
def atomic_write(path, mode: str = "w", encoding: str = "utf-8", newline: str | None = None) -> Iterator[IO]:
    """Open a file for writing that appears at ``path`` only if the block succeeds.

    Parameters
    ----------
    path : str or Path
        Final file name. Its directory must exist.
    mode : {"w", "wb"}
        Text or binary.
    encoding, newline
        As for :func:`open`, text mode only.

    Yields
    ------
    file object
        Writes go to a temporary file beside ``path``. On normal exit it is flushed,
        fsync'ed and renamed over ``path``; on any exception (KeyboardInterrupt
        included) it is deleted and ``path`` is left as it was.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "a.bin"
    >>> with atomic_write(out, "wb") as f:
    ...     _ = f.write(b"abc")
    >>> out.read_bytes()
    b'abc'
    """
    if mode not in _TEXT_MODES | _BINARY_MODES:
        raise ValueError(f"atomic_write mode must be 'w' or 'wb', not {mode!r}.")
    path = Path(path)
    temp = _temp_name(path)
    handle = None
    _UNFINISHED[temp] = False
    try:
        # Mode "x" (O_EXCL) never reuses someone else's file. The file is created inside
        # this try: a stop (Ctrl-C, SIGTERM) can land the instant open() returns, before
        # the file object is even named here, and must still remove it.
        if mode in _BINARY_MODES:
            handle = open(temp, "xb")
        else:
            handle = open(temp, "x", encoding=encoding, newline=newline)
        with handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
        _put(temp, path)
    except BaseException as e:
        if handle is None and isinstance(e, FileExistsError):  # not ours to remove
            _UNFINISHED.pop(temp, None)
        else:
            _discard(temp, False)
        raise
    _UNFINISHED.pop(temp, None)
    _fsync_dir(path.parent)


@contextmanager
def atomic_path(path) -> Iterator[Path]:
    """Yield a temporary file name for a library that writes by name.

    For GDAL/rasterio, ``DataFrame.to_parquet``, ``GeoDataFrame.to_file`` and the like.
    The temporary name sits beside ``path`` and keeps its extension
    (``.name.tmp-XXXXXXXX.gpkg``) so format detection still works. On success the file
    (and any side files the driver wrote with the same stem, e.g. a Shapefile's
    ``.dbf``) is fsync'ed and renamed to the final name; on any exception, including
    KeyboardInterrupt, they are all deleted and ``path`` is left as it was.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "table.txt"
    >>> with atomic_path(out) as tmp:
    ...     _ = tmp.write_text("ok")
    >>> out.read_text()
    'ok'
    """
    path = Path(path)
    temp = _temp_name(path)
    temp_stem, final_stem = _stem(temp), _stem(path)
    # Without an extension there is no stem to share, so only the file itself.
    _UNFINISHED[temp] = bool(path.suffix)
    try:
        yield temp
        if not temp.exists():
            raise FileNotFoundError(f"Nothing was written to the temporary file for {path}.")
        written = _companions(temp) if path.suffix else [temp]
        for p in written:
            _fsync_file(p)
        # The main file is renamed last, so a reader never sees it without its side files.
        for p in written:
            if p != temp:
                _put(p, path.with_name(final_stem + p.name[len(temp_stem):]))
        _put(temp, path)
    except BaseException:
        _discard(temp, bool(path.suffix))
        raise
    _UNFINISHED.pop(temp, None)
    _fsync_dir(path.parent)
