"""How a splitter command holds the memory it frees: kept for its next use.

A command passes over large arrays fold after fold (a prediction raster's cells, a
fold's distances), freeing them in between. By default glibc's allocator hands large
freed blocks straight back to the operating system, so the next fold asks for them
again and touches every page afresh. On an ordinary machine that first touch costs
about a tenth of a microsecond per 4 KB page; on virtual machines whose host takes
freed memory back it has been measured at 11-21 us per page (the machine line of
``docs/performance.md``), more than the work done on the page. So the command line
asks the allocator to keep what it freed (up to 32 MB per block in the process's own
heap, which is never trimmed): the process then stays at its high-water mark until it
exits, as a short-lived command may. The library alone (``import splitter``) leaves
the allocator as it finds it.
"""

from __future__ import annotations

import sys

# From glibc's <malloc.h>.
_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
# glibc's largest mmap threshold on 64-bit systems: blocks up to this size then come
# from the heap (a raster window, a kept block of cells); larger ones are still mapped
# and unmapped one by one.
_HEAP_BLOCK_LIMIT = 32 << 20
# mallopt takes a C int: the largest trim threshold it can be given (2 GB free at the
# top of the heap before any is returned).
_NEVER_TRIM = 2**31 - 1

#: The same settings for a process about to start, as environment variables: glibc reads
#: them when the process starts (``splitter batch`` gives them to its local workers).
ENVIRON = {"MALLOC_MMAP_THRESHOLD_": str(_HEAP_BLOCK_LIMIT), "MALLOC_TRIM_THRESHOLD_": str(_NEVER_TRIM)}


def keep_freed_memory() -> bool:
    """Ask the C allocator to keep freed memory for reuse; whether it agreed.

    Only glibc on Linux is asked; elsewhere (macOS, Windows, musl) nothing changes
    and False is returned. Applies to the whole process and lasts until it exits.

    Examples
    --------
    >>> keep_freed_memory() in (True, False)
    True
    """
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        mallopt = ctypes.CDLL(None).mallopt  # the C library this process runs on
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    return bool(mallopt(_M_MMAP_THRESHOLD, _HEAP_BLOCK_LIMIT)) and bool(mallopt(_M_TRIM_THRESHOLD, _NEVER_TRIM))
