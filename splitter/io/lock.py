"""One run at a time per output: a second run writing to the same ``--out`` is refused.

Two runs that wrote the same folder at once would interleave files from both
(each file is written atomically, but the set would mix runs). The first run
takes an exclusive, non-blocking ``flock`` on the output folder itself (or, for
a single output file, on a hidden lock file beside it, removed afterwards); the
operating system releases it when the process ends, however it ends, so a crashed
run never leaves a stale lock. A second run gets one clear line instead.

Examples
--------
>>> import tempfile, pathlib
>>> out = pathlib.Path(tempfile.mkdtemp()) / "audit"
>>> with output_lock(out, folder=True):
...     out.is_dir()
True
"""

from __future__ import annotations

import fcntl
import os
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from splitter.errors import InputError

__all__ = ["output_lock"]


@contextmanager
def output_lock(target, folder: bool) -> Iterator[Path]:
    """Hold the output ``target`` (a folder, or a file when ``folder`` is False) for this run.

    A folder that did not exist is created, and removed again if the run leaves it
    empty (e.g. it stopped on bad input), so a refused run leaves nothing behind.

    Raises
    ------
    InputError
        Another run holds the same output, or the output's folder cannot be written.
    """
    target = Path(target)
    created = False
    if folder:
        if target.exists() and not target.is_dir():
            raise InputError(f"{target}: --out must be a folder, and a file has that name; choose another path.")
        if not target.exists():
            try:
                target.mkdir(parents=True)
            except OSError as e:
                raise InputError(f"{target}: cannot create the output folder ({e.strerror}); choose a writable --out.") from None
            created = True
        lock_path = target
    else:
        parent = target.parent if str(target.parent) else Path(".")
        if parent.exists() and not parent.is_dir():
            raise InputError(f"{parent}: --out must be inside a folder, and a file has that name; choose another path.")
        if not parent.exists():
            try:
                parent.mkdir(parents=True)
            except OSError as e:
                raise InputError(f"{parent}: cannot create the folder for --out ({e.strerror}); choose a writable --out.") from None
            created = True
        lock_path = parent / f".{target.name}.lock"
    fd = _take(target, lock_path, folder)
    try:
        yield target
    finally:
        try:
            if not folder:
                try:
                    lock_path.unlink()  # while still holding the lock
                except FileNotFoundError:
                    pass
            made = target if folder else target.parent
            if created and made.is_dir() and not any(made.iterdir()):
                made.rmdir()  # a folder this run made and left empty
        finally:
            os.close(fd)


def _take(target: Path, lock_path: Path, folder: bool) -> int:
    """Open ``lock_path`` and lock it; return the open descriptor, or raise InputError.

    For a lock file, the lock is kept only when the open file is still the one at
    ``lock_path``. A run that finishes removes its lock file; a second run that opened
    the file just before that and locked it just after would hold a lock on a removed
    file while a third run locks a new one, and both would write. So such a run opens
    the new file and tries again.
    """
    while True:
        fd = _open(lock_path, os.O_RDONLY) if folder else _open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise InputError(f"{target}: another splitter run is writing this output now; wait for it to finish "
                             "or choose another --out.") from None
        if folder:
            return fd
        held = os.fstat(fd)
        try:
            now = os.stat(lock_path)
        except FileNotFoundError:
            now = None
        if now is not None and (now.st_dev, now.st_ino) == (held.st_dev, held.st_ino):
            return fd
        os.close(fd)


def _open(path: Path, flags: int, mode: int = 0o777) -> int:
    try:
        return os.open(path, flags, mode)
    except PermissionError:
        raise InputError(f"{path}: no permission to write here; choose a writable --out.") from None
    except OSError as e:
        raise InputError(f"{path}: cannot write here ({e.strerror}); choose a writable --out.") from None
