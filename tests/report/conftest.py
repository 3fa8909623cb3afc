"""One small demo run shared by the report tests (made once per test session)."""

from __future__ import annotations

import shutil

import pytest


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """A complete run folder (range, blocks, random; audited and evaluated).

    ``run_demo`` builds its own appendix at the end (``<run>/appendix``), which
    the tests use as one of the builds.
    """
    from splitter.demo import run_demo

    out = tmp_path_factory.mktemp("demo") / "run"
    run_demo(out, replicates=100)
    return out


@pytest.fixture
def run_copy(demo_run, tmp_path):
    """A private copy of the demo run without its appendix, to build from or to alter."""
    dst = tmp_path / "run"
    shutil.copytree(demo_run, dst, ignore=shutil.ignore_patterns("appendix"))
    return dst
