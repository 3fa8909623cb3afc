"""One options object for the command line, batch and demo (splitter.workflow.job).

The checks are against the command line itself (typer/click, outside this module):
every option a command takes has the default JobOptions gives it, and every
command JobOptions records parses back, with click, into the same values.
"""

from __future__ import annotations

import shlex
from dataclasses import fields

import pytest
import typer

from splitter.cli import app
from splitter.workflow.job import JobOptions

COMMANDS = typer.main.get_command(app).commands


def _by_flag(step):
    return {f.metadata["flag"]: f for f in fields(JobOptions) if step in f.metadata["steps"]}


@pytest.mark.parametrize("step", ["design", "audit", "evaluate"])
def test_every_command_option_has_the_job_default(step):
    params = {p.opts[0]: p for p in COMMANDS[step].params if p.opts[0].startswith("--")}
    wanted = _by_flag(step)
    assert set(wanted) <= set(params), sorted(set(wanted) - set(params))
    for flag, f in wanted.items():
        default = params[flag].default
        expected = f.default
        if isinstance(expected, tuple):
            assert list(default or []) == list(expected), flag
        else:
            assert default == expected, (flag, default, expected)


def _parsed(command: str) -> dict:
    argv = shlex.split(command)
    assert argv[0] == "splitter"
    cmd = COMMANDS[argv[1]]
    ctx = cmd.make_context(argv[1], argv[2:])
    return ctx.params


@pytest.mark.parametrize("options, step", [
    (JobOptions(method="blocks", folds=4, block_size="60", buffer=12.5, seed=7, env=("a.tif", "b.tif")), "design"),
    (JobOptions(method="holdout-group", group_column="source", calibrate_on="museum", evaluate_on="survey",
                x="east", y="north", crs="EPSG:3035", alpha=0.1, adjust="none"), "design"),
    (JobOptions(range_km=40.0, null_splits=99, group_column="source", seed=3), "audit"),
    (JobOptions(model="baseline", env=("t.tif",), threshold="max-tss", omission=0.1, replicates=200,
                alpha=0.01, adjust="none", seed=2), "evaluate"),
])
def test_a_recorded_command_parses_back_to_the_same_options(options, step):
    command = options.command(step, "records.csv" if step == "design" else "folds.csv", "out")
    params = _parsed(command)
    cli_name = {p.opts[0]: p.name for p in COMMANDS[step].params if p.opts}
    for flag, f in _by_flag(step).items():
        got = params[cli_name[flag]]
        want = getattr(options, f.name)
        if isinstance(want, tuple):
            assert tuple(str(v) for v in got) == want, flag
        elif isinstance(want, float) and got is not None:
            assert float(got) == pytest.approx(want), flag
        else:
            assert (str(got) if got is not None and not isinstance(got, (int, float)) else got) == want, flag
