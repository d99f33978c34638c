"""The package-level import graph of `chainlint/`: acyclic, and every import goes down the layers.

A package's unit is its folder (`chainlint/find/`) or its module (`chainlint/units.py`). Every
import counts, a function's deferred import too; only imports under `if TYPE_CHECKING:` are left
out, since they never run (the model names the IR's `Node` that way). The order is the one
DEVELOPERS.md's architecture map gives: keep both the same.
"""

from __future__ import annotations

import ast
from collections import defaultdict
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "chainlint"

#: Bottom first. A unit may import units of lower levels only; units of one level are peers and
#: do not import each other. `chainlint` is the package's own `__init__.py` (the IPython entry
#: point and `__version__` for users).
LAYERS: list[tuple[str, ...]] = [
    ("model",),
    ("units", "arrays", "writer", "version", "redaction"),
    ("ir",),
    ("parse",),
    ("discover",),
    ("config",),
    ("find",),
    ("evaluate",),
    ("profile",),
    ("bind",),
    ("estimate",),
    ("plan",),
    ("rules",),
    ("rewrite",),
    ("measure",),
    ("engine",),
    ("report",),
    ("notebook", "cluster"),
    ("lsp",),
    ("cli_csv", "cli_store"),
    ("cli",),
    ("__main__", "chainlint"),
]

#: Imports that still go up, each with why; the list only shrinks: the test fails when an entry
#: is no longer needed, so that whoever removes the import removes the entry too.
KNOWN_UPWARD: dict[tuple[str, str], str] = {}


def _unit(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "chainlint"


def _module_of(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _type_only(tree: ast.Module) -> set[int]:
    """The ids of import nodes under `if TYPE_CHECKING:`."""
    hidden: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and isinstance(node.test, (ast.Name, ast.Attribute)) and ast.unparse(node.test).endswith("TYPE_CHECKING"):
            hidden.update(id(inner) for statement in node.body for inner in ast.walk(statement))
    return hidden


def _imported(path: Path) -> set[str]:
    """The chainlint modules (or package attributes, as `chainlint.X`) a file imports."""
    module = _module_of(path)
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    return imports_of(ast.parse(path.read_text(encoding="utf-8")), package)


def imports_of(tree: ast.Module, package: str) -> set[str]:
    """The chainlint modules a module of `package` imports, relative imports resolved."""
    hidden = _type_only(tree)
    found: set[str] = set()
    for node in ast.walk(tree):
        if id(node) in hidden:
            continue
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                parts = package.split(".")
                target = ".".join(parts[: len(parts) - node.level + 1] + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target == "chainlint":
                found.update(f"chainlint.{alias.name}" for alias in node.names)
            else:
                found.add(target)
    return {name for name in found if name == "chainlint" or name.startswith("chainlint.")}


def _is_unit(name: str) -> bool:
    return (PACKAGE / name).is_dir() or (PACKAGE / f"{name}.py").is_file()


def import_graph() -> dict[str, dict[str, list[str]]]:
    """unit -> imported unit -> the files that import it."""
    graph: dict[str, dict[str, list[str]]] = defaultdict(lambda: defaultdict(list))
    for path in sorted(PACKAGE.rglob("*.py")):
        source = _unit(_module_of(path))
        for name in _imported(path):
            target = _unit(name)
            if not _is_unit(target):  # an attribute of the package itself (`from chainlint import x`)
                target = "chainlint"
            if target != source:
                if str(path.relative_to(PACKAGE.parent)) not in graph[source][target]:
                    graph[source][target].append(str(path.relative_to(PACKAGE.parent)))
    return graph


def _level() -> dict[str, int]:
    return {unit: number for number, level in enumerate(LAYERS) for unit in level}


def test_every_unit_has_a_layer() -> None:
    units = {_unit(_module_of(p)) for p in PACKAGE.rglob("*.py")}
    assert sorted(units - set(_level())) == [], "add the new package to LAYERS and to DEVELOPERS.md's map"


def test_every_import_goes_down_the_layers() -> None:
    level = _level()
    upward = {(source, target): files for source, targets in import_graph().items() for target, files in targets.items()
              if level.get(target, -1) >= level.get(source, -1)}
    unexpected = {edge: files for edge, files in upward.items() if edge not in KNOWN_UPWARD}
    assert unexpected == {}, "imports that go up or sideways (unit -> unit: files)"
    stale = sorted(set(KNOWN_UPWARD) - set(upward))
    assert stale == [], "these known exceptions are gone: remove them from KNOWN_UPWARD"


def test_the_import_graph_is_acyclic() -> None:
    graph = {source: set(targets) - {t for s, t in KNOWN_UPWARD if s == source} for source, targets in import_graph().items()}
    done: set[str] = set()
    path: list[str] = []

    def visit(unit: str) -> None:
        if unit in path:
            raise AssertionError("import cycle: " + " -> ".join(path[path.index(unit):] + [unit]))
        if unit in done:
            return
        path.append(unit)
        for target in sorted(graph.get(unit, ())):
            visit(target)
        path.pop()
        done.add(unit)

    for unit in sorted(graph):
        visit(unit)


def test_the_walker_counts_deferred_and_relative_imports_not_type_only_ones() -> None:
    tree = ast.parse("from typing import TYPE_CHECKING\n"
                     "if TYPE_CHECKING:\n    from chainlint.ir import Node\n"
                     "from .chains import x\n"
                     "def f():\n    from chainlint.report import check\n")
    assert imports_of(tree, "chainlint.find") == {"chainlint.find.chains", "chainlint.report"}
