"""Every option a message of the package suggests (``--something`` in any string of the
source) is an option of the command line, so no error sends a user to an option that
does not exist. Messages a command prints are checked against that very command by the
bad-input corpus (tests/test_bad_input_corpus.py); this check covers the messages no
corpus case reaches. Reference: click's own list of each command's options.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import typer

from splitter.cli import app

PACKAGE = Path(__file__).resolve().parent.parent / "splitter"
FLAG = re.compile(r"(?<![\w-])(--[a-z][a-z0-9-]*)")


def _strings():
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        docstrings = {id(n.body[0].value) for n in ast.walk(tree)
                      if isinstance(n, (ast.Module, ast.FunctionDef, ast.ClassDef, ast.AsyncFunctionDef))
                      and n.body and isinstance(n.body[0], ast.Expr) and isinstance(n.body[0].value, ast.Constant)}
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docstrings:
                yield path.relative_to(PACKAGE.parent), node.lineno, node.value


def test_every_option_a_message_names_exists():
    group = typer.main.get_command(app)
    params = [p for c in group.commands.values() for p in c.params] + list(group.params)
    known = {o for p in params for o in (*p.opts, *p.secondary_opts)} | {"--help"}
    named = [(f"{path}:{line}", flag) for path, line, text in _strings() for flag in FLAG.findall(text)]
    assert len(named) > 50  # the package's messages do name options: the scan found them
    unknown = sorted({(where, flag) for where, flag in named if flag not in known})
    assert unknown == [], unknown
