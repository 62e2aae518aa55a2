"""Layers import only downward, and the core imports no presentation library (DEVELOPERS.md).

Checked on the source text with the standard library's ast module: every import statement of
every module, including imports inside functions.
"""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "workbench"
ORDER = ["errors", "choices", "_lazy", "checks", "fileio", "machine", "sampling", "angle", "runs"]
PRESENTATION = {"plots", "ui", "report", "cli", "batch"}
PRESENTATION_ONLY = {"matplotlib", "ipywidgets", "IPython", "dask", "distributed", "pyarrow", "PIL"}


def _imports(path):
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            yield node.module


def _layer(path):
    rel = path.relative_to(PACKAGE).parts
    return rel[0].removesuffix(".py")


MODULES = sorted(p for p in PACKAGE.rglob("*.py"))


@pytest.mark.parametrize("path", [p for p in MODULES if _layer(p) in ORDER], ids=lambda p: str(p.relative_to(PACKAGE)))
def test_core_layers_import_only_downward_and_no_presentation_library(path):
    own = ORDER.index(_layer(path))
    for name in _imports(path):
        top = name.split(".")[0]
        if top == "workbench":
            parts = name.split(".")
            if len(parts) == 1:
                continue
            target = parts[1]
            assert target in ORDER[: own + 1], f"{path.name} imports {name}: an upper layer"
        else:
            assert top not in PRESENTATION_ONLY, f"{path.name} imports {name}: presentation only"


def test_every_module_is_in_a_known_layer():
    known = set(ORDER) | PRESENTATION | {"__init__", "__main__"}
    assert {_layer(p) for p in MODULES} <= known
