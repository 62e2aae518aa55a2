"""Layers import only downward, and the core imports no presentation library (DEVELOPERS.md,
"Layers").

Checked on the source text with the standard library's ast module: every import statement of
every module, including imports inside functions (a lazy import is still a dependency).
"""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "workbench"
#: The ground floor and the core, lowest first: each imports only those before it (and itself).
ORDER = ["errors", "choices", "textparse", "_lazy", "checks", "fileio", "htmltable", "machine", "sampling", "angle", "runs"]
#: The presentation packages and the other presentation packages each may import (besides the
#: whole core).  Nothing imports ``cli`` (the panels read order lists with the ground floor's
#: parser, ``workbench/textparse.py``); ``report`` and ``batch`` are libraries the command
#: calls, not the other way.
PRESENTATION = {
    "plots": set(),
    "report": {"plots"},
    "batch": set(),
    "cli": {"plots", "report", "batch"},
    "ui": {"plots"},
}
#: Modules at the package's top that are not layers: the version and ``python -m workbench``.
ENTRY = {"__init__": set(ORDER), "__main__": {"cli"}}
PRESENTATION_ONLY = {"matplotlib", "ipywidgets", "IPython", "dask", "distributed", "pyarrow", "PIL"}


def _module_name(path):
    rel = path.relative_to(PACKAGE.parent).with_suffix("")
    parts = rel.parts[:-1] if rel.name == "__init__" else rel.parts
    return ".".join(parts)


def _imports(path):
    """Every module name an import statement of ``path`` names (relative ones resolved)."""
    tree = ast.parse(path.read_text())
    package = _module_name(path) if path.name == "__init__.py" else _module_name(path).rpartition(".")[0]
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                yield ".".join(base + ([node.module] if node.module else []))
            elif node.module:
                yield node.module


def _layer(path):
    rel = path.relative_to(PACKAGE).parts
    return rel[0].removesuffix(".py")


def _target(name):
    """The layer of ``workbench`` an imported module name belongs to (None: outside, or the
    package itself)."""
    parts = name.split(".")
    if parts[0] != "workbench" or len(parts) == 1:
        return None
    return parts[1]


MODULES = sorted(p for p in PACKAGE.rglob("*.py"))


@pytest.mark.parametrize("path", [p for p in MODULES if _layer(p) in ORDER], ids=lambda p: str(p.relative_to(PACKAGE)))
def test_core_layers_import_only_downward_and_no_presentation_library(path):
    own = ORDER.index(_layer(path))
    for name in _imports(path):
        target = _target(name)
        if target is not None:
            assert target in ORDER[: own + 1], f"{path.name} imports {name}: an upper layer"
        elif name.split(".")[0] != "workbench":
            assert name.split(".")[0] not in PRESENTATION_ONLY, f"{path.name} imports {name}: presentation only"


@pytest.mark.parametrize("path", [p for p in MODULES if _layer(p) in PRESENTATION],
                         ids=lambda p: str(p.relative_to(PACKAGE)))
def test_presentation_packages_import_the_core_and_only_the_presentation_below_them(path):
    own = _layer(path)
    allowed = set(ORDER) | PRESENTATION[own] | {own}
    for name in _imports(path):
        target = _target(name)
        assert target is None or target in allowed, (
            f"{path.relative_to(PACKAGE)} imports {name}: {own} may import the core and "
            f"{sorted(PRESENTATION[own]) or 'no other presentation package'}")


@pytest.mark.parametrize("path", [p for p in MODULES if _layer(p) in ENTRY], ids=lambda p: p.name)
def test_entry_modules_import_what_they_start(path):
    for name in _imports(path):
        target = _target(name)
        assert target is None or target in ENTRY[_layer(path)], f"{path.name} imports {name}"


def test_every_module_is_in_a_known_layer():
    known = set(ORDER) | set(PRESENTATION) | set(ENTRY)
    assert {_layer(p) for p in MODULES} <= known


def test_presentation_order_has_no_loop():
    """The allowed imports between presentation packages form an order, not a circle."""
    done, visiting = set(), set()

    def visit(node):
        assert node not in visiting, f"the presentation order loops through {node}"
        if node in done:
            return
        visiting.add(node)
        for below in PRESENTATION[node]:
            visit(below)
        visiting.discard(node)
        done.add(node)

    for node in PRESENTATION:
        visit(node)


def _package_graph():
    """``{layer: {layer it imports, ...}}`` over every module of the package."""
    graph = {}
    for path in MODULES:
        own = _layer(path)
        graph.setdefault(own, set())
        for name in _imports(path):
            target = _target(name)
            if target is not None and target != own:
                graph[own].add(target)
    return graph


def _find_cycle(graph):
    """One cycle of ``graph`` as a list of nodes (first == last), or None (depth-first search)."""
    state, stack = {}, []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == "open":
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = "done"
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_find_cycle_finds_one():
    assert _find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _find_cycle({"a": {"b"}, "b": {"c"}, "c": set()}) is None


def test_no_import_cycle_between_packages():
    graph = _package_graph()
    assert {"cli", "report", "batch", "runs"} <= set(graph)   # the graph was built
    cycle = _find_cycle(graph)
    assert cycle is None, "import cycle: " + " -> ".join(cycle)
