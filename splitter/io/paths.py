"""How a file is named in an output: never by an absolute path of this machine.

Outputs travel into manuscripts and to co-authors. A file is named relative to the
run's folder when it lies inside it, else relative to the working folder when it
lies inside that, else by its file name alone (the SHA-256 beside it identifies it).
"""

from __future__ import annotations

import os
import re
from pathlib import Path

__all__ = ["shown", "portable_text", "portable"]


def shown(path, root=None) -> str:
    """``path`` as it appears in an output (see the module notes).

    Examples
    --------
    >>> shown("/data/run/blocks/folds.csv", root="/data/run")
    'blocks/folds.csv'
    >>> shown("/somewhere/else/records.csv", root="/data/run")
    'records.csv'
    >>> shown("records.csv")
    'records.csv'
    """
    text = str(path)
    p = Path(text)
    if not p.is_absolute():
        return text
    p = Path(os.path.abspath(p))
    for base in (root, Path.cwd()):
        if base is None:
            continue
        try:
            return p.relative_to(os.path.abspath(base)).as_posix() or "."
        except ValueError:
            continue
    return p.name


# An absolute POSIX path inside free text: a "/" that does not follow a word, a dot, a
# colon or another slash (so "1/n", "km/h", "https://" and "</td>" are left alone), and
# at least two components.
_ABSOLUTE = re.compile(r"(?<![\w.:/<~-])(/[^\s\"'(),;:<>|`*\[\]]+/[^\s\"'(),;:<>|`*\[\]]+)")


def portable_text(text: str, root=None) -> str:
    """Every absolute path in ``text`` replaced by :func:`shown`.

    >>> portable_text("splitter audit /data/run/folds.csv --env /maps/t.tif", root="/data/run")
    'splitter audit folds.csv --env t.tif'
    >>> portable_text("p = 1/n for (alpha/k)^(1/n) at https://example.org/a/b, </td></tr>")
    'p = 1/n for (alpha/k)^(1/n) at https://example.org/a/b, </td></tr>'
    """
    return _ABSOLUTE.sub(lambda m: shown(m.group(1), root), text)


def portable(obj, root=None):
    """A JSON-like document with every string (keys too) passed through :func:`portable_text`."""
    if isinstance(obj, str):
        return portable_text(obj, root)
    if isinstance(obj, dict):
        return {portable(k, root) if isinstance(k, str) else k: portable(v, root) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return type(obj)(portable(v, root) for v in obj)
    return obj
