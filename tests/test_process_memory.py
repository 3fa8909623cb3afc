"""A splitter command keeps the memory it frees for its next fold (splitter.memory).

Measured by the operating system's own count of page faults (getrusage's ru_minflt):
an array allocated again after being freed touches fresh pages unless the allocator
kept them. Linux with glibc only (the only place the setting applies).
"""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's allocator only")

_SCRIPT = """
import resource, sys
import numpy as np
from splitter.memory import keep_freed_memory
np._core.multiarray._set_madvise_hugepage(False)  # count 4 KB pages, not 2 MB ones
applied = keep_freed_memory() if sys.argv[1] == "keep" else None
pages = (16 << 20) // 4096
a = np.ones(16 << 20, np.uint8); del a   # a fold's array, freed
b = np.ones(1 << 20, np.uint8)           # something small allocated in between
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
a = np.ones(16 << 20, np.uint8)          # the next fold's array
print(applied, (resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before) / pages)
"""


def _fresh_share(mode: str) -> tuple[str, float]:
    # Without the allocator's environment settings: a Dask cluster started earlier in this
    # test process sets them here for its workers (splitter.memory.ENVIRON), and a child
    # would inherit them.
    env = {k: v for k, v in os.environ.items() if not k.startswith("MALLOC_")}
    out = subprocess.run([sys.executable, "-c", _SCRIPT, mode], capture_output=True, text=True, check=True, env=env)
    applied, share = out.stdout.split()
    return applied, float(share)


def test_freed_arrays_are_reused_not_touched_afresh():
    applied, kept = _fresh_share("keep")
    if applied != "True":
        pytest.skip("this C library does not take glibc's mallopt settings")
    _, default = _fresh_share("default")
    # Without the setting the allocator hands the 16 MB back and the next array faults in
    # nearly every page; with it, almost none (the pages are still the process's own).
    assert default > 0.5
    assert kept < 0.1


def test_every_command_asks_for_it(monkeypatch):
    import splitter.cli as cli
    import splitter.memory

    calls = []
    monkeypatch.setattr(splitter.memory, "keep_freed_memory", lambda: calls.append("asked") or True)
    assert cli.guarded(lambda: "ran")() == "ran"
    assert calls == ["asked"]
