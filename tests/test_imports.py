"""The package's import structure: every module imports on its own, and no
module-level import cycle joins two ``layers`` modules.

Data flows one way (case -> mesh and exchange -> march -> Dataset -> archive
-> plots / compare / report), so the modules' import graph must be acyclic.
A cycle that happens to import today (because of the order in which names are
bound) breaks as soon as someone moves an import; this test finds it from the
source text, before it breaks.  Imports inside functions run later, on call,
and are left out of the graph; so are imports under ``if TYPE_CHECKING:``,
which never run.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "layers"


def package_modules() -> list[str]:
    """Every module of the package by dotted name, the package itself first."""
    names = ["layers"]
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.name == "__init__.py":
            if path.parent != PACKAGE:
                names.append(".".join(("layers", *path.parent.relative_to(PACKAGE).parts)))
            continue
        names.append(".".join(("layers", *path.relative_to(PACKAGE).with_suffix("").parts)))
    return names


def _source_of(module: str) -> Path:
    parts = module.split(".")[1:]
    candidate = PACKAGE.joinpath(*parts)
    return candidate / "__init__.py" if candidate.is_dir() or not parts else candidate.with_suffix(".py")


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def _import_time_statements(body: list[ast.stmt], *, functions: bool = False):
    """The statements that run when a module is imported (with ``functions``,
    also those inside functions, which run when called, and those under
    ``if TYPE_CHECKING:``, which only a type checker reads)."""
    for node in body:
        yield node
        if functions and isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            yield from _import_time_statements(node.body, functions=True)
        if isinstance(node, ast.If):
            if functions or not _is_type_checking(node.test):
                yield from _import_time_statements(node.body, functions=functions)
            yield from _import_time_statements(node.orelse, functions=functions)
        elif isinstance(node, (ast.Try, ast.TryStar)):
            for part in (node.body, node.orelse, node.finalbody, *(h.body for h in node.handlers)):
                yield from _import_time_statements(part, functions=functions)
        elif isinstance(node, (ast.With, ast.For, ast.While)):
            yield from _import_time_statements(node.body, functions=functions)
        elif isinstance(node, ast.ClassDef):  # a class body runs at import
            yield from _import_time_statements(node.body, functions=functions)


def import_graph(modules: list[str], *, functions: bool = False) -> dict[str, set[str]]:
    """Module -> the package modules it imports at import time (with
    ``functions``, also in its functions' bodies)."""
    known = set(modules)
    graph: dict[str, set[str]] = {}
    for module in modules:
        tree = ast.parse(_source_of(module).read_text(encoding="utf-8"))
        package = module if _source_of(module).name == "__init__.py" else module.rpartition(".")[0]
        targets: set[str] = set()
        for node in _import_time_statements(tree.body, functions=functions):
            if isinstance(node, ast.Import):
                targets.update(alias.name for alias in node.names)
            elif isinstance(node, ast.ImportFrom):
                if node.level:  # relative import
                    base = package.rsplit(".", node.level - 1)[0] if node.level > 1 else package
                    source = f"{base}.{node.module}" if node.module else base
                else:
                    source = node.module or ""
                targets.add(source)
                # `from layers import results` imports the submodule
                targets.update(f"{source}.{alias.name}" for alias in node.names)
        graph[module] = {t for t in targets if t in known and t != module}
    return graph


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One cycle of the graph as a closed path [a, b, ..., a], or None."""
    state: dict[str, int] = {}  # 1: on the current path, 2: done
    path: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        path.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                return path[path.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        path.pop()
        state[node] = 2
        return None

    for start in sorted(graph):
        if start not in state:
            found = visit(start)
            if found:
                return found
    return None


def test_cycle_finder_finds_a_planted_cycle_and_passes_a_chain():
    """The checker itself: a three-module ring is reported, a chain is not."""
    ring = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    cycle = find_cycle(ring)
    assert cycle is not None and cycle[0] == cycle[-1] and set(cycle) == {"a", "b", "c"}
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": set(), "d": {"a", "c"}}) is None


def test_graph_reads_imports_that_run_and_skips_those_that_do_not(tmp_path, monkeypatch):
    """Module-level and class-body imports count; function bodies and TYPE_CHECKING
    blocks only in the strict graph (``functions=True``)."""
    package = tmp_path / "layers"
    package.mkdir()
    (package / "__init__.py").write_text("")
    (package / "a.py").write_text(
        "from typing import TYPE_CHECKING\n"
        "from layers.b import thing\n"
        "if TYPE_CHECKING:\n    from layers.c import other\n"
        "def f():\n    from layers.d import late\n"
        "class K:\n    import layers.e\n"
        "try:\n    from . import f\nexcept ImportError:\n    pass\n"
    )
    for name in "bcdef":
        (package / f"{name}.py").write_text("")
    monkeypatch.setattr(sys.modules[__name__], "PACKAGE", package)
    graph = import_graph(package_modules())
    assert graph["layers.a"] == {"layers", "layers.b", "layers.e", "layers.f"}
    graph = import_graph(package_modules(), functions=True)
    assert graph["layers.a"] == {"layers", "layers.b", "layers.c", "layers.d", "layers.e", "layers.f"}


def test_no_import_cycle_among_the_package_modules():
    graph = import_graph(package_modules())
    assert "layers.results" in graph and "layers.cli" in graph  # the walk found the package
    cycle = find_cycle(graph)
    assert cycle is None, "module-level import cycle: " + " -> ".join(cycle)


def test_no_cycle_even_through_imports_inside_functions():
    """A lazy import inside a function (or one only a type checker reads)
    hides a cycle from the interpreter, not from the design: results ->
    archive -> plots -> results was such a one, and case -> march -> exchange
    -> case (a type-only import) another.  Counting those imports too, the
    graph is still acyclic."""
    cycle = find_cycle(import_graph(package_modules(), functions=True))
    assert cycle is None, "import cycle through a function-level import: " + " -> ".join(cycle)


def test_every_module_imports_first_in_a_fresh_interpreter():
    """Each module imported first, with no other layers module loaded before it:
    an import-order cycle shows up as an ImportError for some starting module."""
    script = (
        "import importlib, sys, traceback\n"
        "failed = []\n"
        f"for name in {package_modules()!r}:\n"
        "    for loaded in [m for m in sys.modules if m == 'layers' or m.startswith('layers.')]:\n"
        "        del sys.modules[loaded]\n"
        "    try:\n"
        "        importlib.import_module(name)\n"
        "    except Exception:\n"
        "        failed.append(name + ': ' + traceback.format_exc(limit=3))\n"
        "print('\\n'.join(failed))\n"
        "sys.exit(1 if failed else 0)\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", script], cwd=PACKAGE.parent, capture_output=True, text=True, timeout=300
    )
    assert done.returncode == 0, done.stdout + done.stderr


@pytest.mark.parametrize("module", ["layers.catalogue", "layers.formatting"])
def test_the_listing_modules_do_not_load_xarray(module):
    """``layers list`` reads headers with netCDF4 only: importing its modules must not pull in xarray
    (about half a second of start-up for every listing)."""
    done = subprocess.run(
        [sys.executable, "-c", f"import sys, {module}; print('xarray' in sys.modules)"],
        cwd=PACKAGE.parent, capture_output=True, text=True, timeout=120,
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "False"
