"""The cluster front end is an adapter at the top: nothing else in chainlint imports dask or
distributed, and the profiler runs without them."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "chainlint"


def _imported(path: Path) -> set[str]:
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
            names.add(node.module.split(".")[0])
    return names


def test_only_the_cluster_package_imports_dask() -> None:
    importers = sorted(str(path.relative_to(PACKAGE)) for path in PACKAGE.rglob("*.py")
                       if _imported(path) & {"dask", "distributed"})
    assert importers == ["cluster/run.py"]


def test_the_command_line_and_the_profiler_load_without_dask() -> None:
    code = ("import sys, importlib.util; import chainlint.cli, chainlint.profile.partial, chainlint.profile.pieces; "
            "importlib.util.find_spec('cryptography') and __import__('chainlint.cluster.tasks'); "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')))")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == "[]"
