"""Help pages read well in an 80-column terminal: value words, not Python types, the same word
for the same option in every command."""

import re

from typer.testing import CliRunner

from splitter.cli import app

COMMANDS = ("design", "range", "audit", "evaluate", "appendix", "demo", "batch")
OPTION_LINE = re.compile(r"^  (--[a-z-]+)(?: ([A-Z_]+))?\s{2,}\S")


def _help(*args):
    res = CliRunner().invoke(app, [*args, "--help"], env={"COLUMNS": "80"}, prog_name="splitter")
    assert res.exit_code == 0, res.output
    return res.output


def test_every_help_page_fits_80_columns_and_shows_no_python_type():
    for command in ("", *COMMANDS):
        text = _help(*([command] if command else []))
        for line in text.splitlines():
            assert len(line) <= 80, f"{command or 'splitter'} --help: {line!r}"
        # typer's type words look like <bool>, <path>, <list[Path]>; none may show
        assert not re.search(r"<[a-zA-Z\[\], ]+>", text), text
        usage = text.splitlines()[0]
        assert "{" not in usage and usage.startswith("Usage: splitter"), usage
        # arguments are upper-case words in the usage line, as options' values are
        for word in usage.split()[3 if command else 2:]:
            assert word.strip("[].") == word.strip("[].").upper(), usage


def _flags(command: str) -> set:
    import typer.main

    cmd = typer.main.get_command(app).commands[command]
    return {o for p in cmd.params if getattr(p, "is_flag", False) for o in p.opts} | {"--help"}


def test_each_option_names_its_value_with_the_same_word_everywhere():
    seen = {}
    for command in COMMANDS:
        flags = _flags(command)
        for line in _help(command).splitlines():
            m = OPTION_LINE.match(line)
            if not m:
                continue
            option, word = m.groups()
            if option in flags:
                assert word is None, f"{command}: the flag {option} shows a value word"  # a flag takes no value
                continue
            assert word is not None, f"{command}: {option} shows no value word"
            seen.setdefault(option, set()).add(word)
    assert {"--out", "--env", "--seed", "--x", "--region"} <= set(seen)
    mixed = {o: w for o, w in seen.items() if len(w) > 1}
    assert not mixed, mixed
    assert seen["--out"] == {"PATH"} and seen["--seed"] == {"N"} and seen["--buffer"] == {"KM"}
