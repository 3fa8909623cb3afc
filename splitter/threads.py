"""How many threads one splitter process may use inside its kernels.

The nearest-neighbour queries, geodesics, an audit's searches, GDAL's tile decoding
and the summary of cells kept in memory each spread over every core by default. Processes that already run side
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


def side_by_side(calls, workers: int | None = None) -> list:
    """Results of ``calls`` (callables without arguments), in order, computed on up to
    ``workers`` threads (default :func:`threads`); in this thread when one would do.

    For kernels that release the GIL (numpy, the KD-tree, pyproj's geodesics): the first
    error raised is raised here, after every call has ended.

    Examples
    --------
    >>> side_by_side([lambda: 1, lambda: 2], workers=2)
    [1, 2]
    """
    calls = list(calls)
    n = min(threads() if workers is None else int(workers), len(calls))
    if n < 2:
        return [call() for call in calls]
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(n) as pool:
        futures = [pool.submit(call) for call in calls]
    return [f.result() for f in futures]
