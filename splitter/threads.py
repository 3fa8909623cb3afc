"""How many threads one splitter process may use inside its kernels.

The nearest-neighbour queries, GDAL's tile decoding and the summary of cells kept
in memory each spread over every core by default. Processes that already run side
by side (the worker processes of ``splitter batch``) set ``SPLITTER_THREADS=1`` so
that two workers on two cores do not start four threads and wait on each other.
"""

from __future__ import annotations

import os


def threads() -> int:
    """``SPLITTER_THREADS`` when set to a positive integer, else the number of cores.

    Examples
    --------
    >>> threads() >= 1
    True
    """
    text = os.environ.get("SPLITTER_THREADS", "")
    try:
        n = int(text)
    except ValueError:
        n = 0
    return n if n > 0 else (os.cpu_count() or 1)
