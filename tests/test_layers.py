"""The package's layers run one way, and ``import splitter`` stays light.

The import graph is read from the source (every ``import`` statement of every
module, at any depth, parsed with :mod:`ast`), not from what happens to be
loaded at run time, so an import inside a function counts too.
"""

import ast
import subprocess
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "splitter"
CORE = ("partition", "dependence", "evaluate", "geo")
SHELLS = ("io", "report", "cli")


def _modules():
    """Dotted name -> path of every module in the package."""
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


def _imports(name: str, path: Path):
    """(imported module, line) for every import statement in a module, relative ones resolved."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name, node.lineno
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            if module == "splitter":  # "from splitter import x": x may be a submodule
                for alias in node.names:
                    yield f"splitter.{alias.name}", node.lineno
            else:
                yield module, node.lineno


def _unit(dotted: str) -> str:
    """The layer a module belongs to: its subpackage, or the top-level module itself."""
    parts = dotted.split(".")
    return parts[1] if len(parts) > 1 else "splitter"


def _graph():
    """Edges between splitter's subpackages and top-level modules, with where each comes from."""
    edges = {}
    for name, path in _modules().items():
        for target, line in _imports(name, path):
            if target != "splitter" and not target.startswith("splitter."):
                continue
            a, b = _unit(name), _unit(target)
            if a != b:
                edges.setdefault((a, b), []).append(f"{path.relative_to(PACKAGE.parent)}:{line} imports {target}")
    return edges


def _cycle(edges):
    """One cycle of the directed graph as a list of nodes, or None."""
    succ = {}
    for a, b in edges:
        succ.setdefault(a, set()).add(b)
    state, stack = {}, []

    def visit(n):
        state[n] = "open"
        stack.append(n)
        for m in sorted(succ.get(n, ())):
            if state.get(m) == "open":
                return stack[stack.index(m):] + [m]
            if m not in state:
                found = visit(m)
                if found:
                    return found
        stack.pop()
        state[n] = "done"
        return None

    for n in sorted(succ):
        if n not in state:
            found = visit(n)
            if found:
                return found
    return None


def test_the_graph_reader_sees_what_it_must():
    # The checks below are only as good as the reader: it must find this package's own
    # edges, both module-level and inside functions (cli imports the API lazily).
    edges = _graph()
    assert ("io", "geo") in edges  # io.records reads coordinates into geo.Points
    assert ("cli", "workflow") in edges  # inside the design command
    assert _cycle({("a", "b"), ("b", "c"), ("c", "a")}) == ["a", "b", "c", "a"]
    assert _cycle({("a", "b"), ("b", "c")}) is None


def test_no_import_cycle_between_subpackages_and_top_level_modules():
    edges = _graph()
    cycle = _cycle(edges)
    where = [] if cycle is None else [w for a, b in zip(cycle, cycle[1:]) for w in edges[(a, b)][:2]]
    assert cycle is None, f"import cycle {' -> '.join(cycle)}: " + "; ".join(where)


def test_io_imports_nothing_from_report_and_the_core_no_shell():
    edges = _graph()
    assert ("io", "report") not in edges, edges.get(("io", "report"))
    for core in CORE:
        for shell in SHELLS:
            assert (core, shell) not in edges, edges[(core, shell)]


def test_the_workflow_sits_between_core_and_shells():
    # The steps of a job use the core, io and the report writers; they neither talk to users nor run batches.
    edges = _graph()
    for shell in ("cli", "batch", "demo"):
        assert ("workflow", shell) not in edges, edges[("workflow", shell)]
    for core in CORE + ("io", "report"):
        assert (core, "workflow") not in edges, edges[(core, "workflow")]
    top = {p.stem for p in PACKAGE.glob("*.py")}
    assert not top & {"fold_design", "auditor", "evaluation", "rangefinder", "matching", "loading"}


def test_batch_does_not_import_the_cli_and_nothing_imports_the_package_root():
    edges = _graph()
    assert ("batch", "cli") not in edges, edges.get(("batch", "cli"))
    for name, path in _modules().items():
        if name == "splitter":
            continue
        for target, line in _imports(name, path):
            # "from splitter import x" resolves to "splitter.x"; only a bare "import splitter"
            # or a name that is not a submodule is the package root.
            root = target == "splitter" or (
                target.startswith("splitter.") and target.count(".") == 1 and target not in _modules()
                and not (PACKAGE / target.split(".")[1]).is_dir()
            )
            assert not root, f"{path.relative_to(PACKAGE.parent)}:{line} imports the package root ({target})"


def test_only_the_figure_modules_draw():
    # io writes and reads; figures live in report/ (matplotlib imported nowhere else).
    for name, path in _modules().items():
        drawn = [t for t, _ in _imports(name, path) if t.split(".")[0] == "matplotlib"]
        if drawn:
            assert name.startswith("splitter.report."), f"{name} imports {drawn}"


def _python(code: str) -> subprocess.CompletedProcess:
    """``code`` in a fresh interpreter (what a first import loads), from the project root."""
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                          cwd=PACKAGE.parent)


def test_import_splitter_loads_no_heavy_library():
    code = ("import splitter, sys; "
            "print([m for m in ('matplotlib','dask','typer','rich','geopandas','rasterio') if m in sys.modules])")
    out = _python(code)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr


def test_the_cli_module_loads_only_typer():
    code = ("import splitter.cli, sys; "
            "print([m for m in ('matplotlib','dask','distributed','rich','pandas','numpy','geopandas',"
            "'rasterio','pyproj','scipy','sklearn','click') if m in sys.modules])")
    out = _python(code)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr


def test_lazy_names_are_the_real_objects():
    code = ("import splitter, sys; from splitter.evaluate import binomial as b; "
            "from splitter.workflow.evaluation import evaluate; from splitter.workflow.design import design; "
            "from splitter.workflow.audit import audit; "
            "print(splitter.evaluate is evaluate, splitter.design is design, splitter.audit is audit, "
            "callable(b.binomial_test), sorted(set(splitter.__all__) - set(dir(splitter))))")
    out = _python(code)
    assert out.stdout.strip() == "True True True True []", out.stdout + out.stderr


def test_a_blocks_design_loads_no_scikit_learn():
    """Only environmental clusters need scikit-learn (k-means); importing it costs a
    design about 0.6 s, so the partition package and a blocks design leave it unloaded."""
    code = ("import sys; from splitter.workflow.design import design; "
            "a = design('demo_data/records_with_background.csv', method='blocks', block_size=150, folds=4, seed=1); "
            "print(a.n_folds, 'sklearn' in sys.modules)")
    out = _python(code)
    assert out.stdout.strip() == "4 False", out.stdout + out.stderr
