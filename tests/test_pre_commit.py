"""The pre-commit hooks, run by the real pre-commit framework (PyPI `pre-commit`) with
`pre-commit try-repo` on a temporary git repository. pre-commit builds the hooks' own
environment from this repository, so the first run installs chainlint's dependencies."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "examples"
CLEAN = 'def good(scans):\n    return scans.loc[lambda d: d["status"] == "returned"].loc[lambda d: d["vehicle_type"] == "van"]\n'

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is needed to run pre-commit")


@pytest.fixture(scope="module")
def environment(tmp_path_factory: pytest.TempPathFactory) -> dict[str, str]:
    home = tmp_path_factory.mktemp("pre-commit-home")
    return {**os.environ, "PRE_COMMIT_HOME": str(home), "GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.invalid",
            "GIT_COMMITTER_NAME": "t", "GIT_COMMITTER_EMAIL": "t@example.invalid"}


def _notebook(path: Path) -> None:
    """A notebook written by nbformat's own writer, holding a costly chain in its third cell."""
    import nbformat
    from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

    book = new_notebook(metadata={"kernelspec": {"name": "python3", "language": "python", "display_name": "Python 3"}})
    book.cells = [
        new_markdown_cell("# Damaged parcels"),
        new_code_cell("import pandas as pd\nscans = pd.read_parquet('data/parcel_scans.parquet')"),
        new_code_cell("late = (\n    scans\n    .loc[lambda d: d.weight_kg > 0.5]\n    .loc[lambda d: d.status == 'damaged']\n)"),
    ]
    nbformat.write(book, str(path))


def _repository(folder: Path, text: str, env: dict[str, str]) -> Path:
    shutil.copytree(DEMO / ".chainlint", folder / ".chainlint")
    (folder / "pipeline.py").write_text(text)
    _notebook(folder / "tour.ipynb")
    for command in (["git", "init", "-q"], ["git", "add", "-A"], ["git", "commit", "-qm", "start"]):
        subprocess.run(command, cwd=folder, env=env, check=True)
    return folder


def _try(folder: Path, hook: str, env: dict[str, str], *files: str) -> subprocess.CompletedProcess[str]:
    command = [sys.executable, "-m", "pre_commit", "try-repo", str(ROOT), hook, "--files", *(files or ["pipeline.py"])]
    return subprocess.run(command, cwd=folder, env=env, capture_output=True, text=True, timeout=900)


def test_check_hook_fails_on_a_costly_chain_and_passes_on_a_clean_one(tmp_path: Path, environment: dict[str, str]) -> None:
    costly = _repository(tmp_path / "costly", (DEMO / "pipeline.py").read_text(), environment)
    failed = _try(costly, "chainlint-check", environment, "pipeline.py", "tour.ipynb")
    assert failed.returncode == 1, failed.stdout + failed.stderr
    assert "pipeline.py:15:9: reorder:" in failed.stdout
    assert "tour.ipynb:2:5: reorder: cell 3:" in failed.stdout
    clean = _repository(tmp_path / "clean", CLEAN, environment)
    passed = _try(clean, "chainlint-check", environment)
    assert passed.returncode == 0, passed.stdout + passed.stderr


def test_fix_hook_rewrites_a_file_and_a_notebook(tmp_path: Path, environment: dict[str, str]) -> None:
    import nbformat

    folder = _repository(tmp_path / "fix", (DEMO / "pipeline.py").read_text(), environment)
    result = _try(folder, "chainlint-fix", environment, "pipeline.py", "tour.ipynb")
    assert result.returncode == 1  # files were modified (and a never-matches finding remains)
    text = (folder / "pipeline.py").read_text()
    assert text.index('"damaged"') < text.index('"WEST"')
    assert "tour.ipynb:2:5: fixed: reorder: cell 3: now runs as one mask of steps 1 and 2" in result.stdout
    book = nbformat.read(str(folder / "tour.ipynb"), as_version=nbformat.NO_CONVERT)
    nbformat.validate(book)  # nbformat's own validator, against the schema it ships
    source = book.cells[2].source
    assert "(d.weight_kg > 0.5) & (d.status == 'damaged')" in source
