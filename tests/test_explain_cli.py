"""`chainlint explain`: discovery, the JSON contract, text output and exit status."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from click.testing import CliRunner

from chainlint.cli import main
from chainlint.discover import discover

CHAIN = 'out = df[df.a == 1].loc[lambda d: d.b > d.b.mean()]\n'


def _tree(root: Path, files: dict[str, str]) -> None:
    for name, text in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")


def test_discovery_skips_hidden_venv_gitignored_and_excluded(tmp_path: Path) -> None:
    (tmp_path / ".git").mkdir()
    _tree(
        tmp_path,
        {
            ".gitignore": "build/\n*_gen.py\n!keep_gen.py\n",
            "src/a.py": CHAIN,
            "src/b_gen.py": CHAIN,
            "src/keep_gen.py": CHAIN,
            "src/sub/.gitignore": "local.py\n",
            "src/sub/local.py": CHAIN,
            "src/sub/c.py": CHAIN,
            "build/x.py": CHAIN,
            ".hidden/y.py": CHAIN,
            "env1/pyvenv.cfg": "home = /usr\n",
            "env1/lib/z.py": CHAIN,
            "src/__pycache__/q.py": CHAIN,
            "notes.txt": CHAIN,
            "tests/test_skip.py": CHAIN,
        },
    )
    found = discover([str(tmp_path)], exclude=["tests/"])
    relative = [str(Path(f).relative_to(tmp_path)) for f in found.files]
    assert relative == ["src/a.py", "src/keep_gen.py", "src/sub/c.py"]
    assert found.errors == []


def test_explicit_files_are_always_analysed_once(tmp_path: Path) -> None:
    _tree(tmp_path, {"x.txt": CHAIN, "a.py": CHAIN})
    found = discover([str(tmp_path / "x.txt"), str(tmp_path), str(tmp_path / "a.py")])
    assert sorted(found.files) == sorted([str(tmp_path / "a.py"), str(tmp_path / "x.txt")])


def test_missing_path_is_an_error(tmp_path: Path) -> None:
    result = CliRunner().invoke(main, ["explain", "--format", "json", str(tmp_path / "nope")])
    assert result.exit_code == 2
    assert json.loads(result.output)["errors"][0]["message"] == "no such file or folder"


def test_json_contract(tmp_path: Path) -> None:
    _tree(tmp_path, {"m.py": "x = 1\n" + CHAIN})
    result = CliRunner().invoke(main, ["explain", "--format", "json", str(tmp_path)])
    assert result.exit_code == 0
    report = json.loads(result.output)
    assert set(report) == {"chains", "errors"} and report["errors"] == []
    (chain,) = report["chains"]
    assert {"path", "line", "column", "end_line", "end_column", "frame", "steps"} <= set(chain)
    assert (chain["line"], chain["column"], chain["frame"]) == (2, 7, "df")
    first, second = chain["steps"]
    assert {"line", "column", "kind", "predicate", "columns", "movable", "reason"} <= set(first)
    assert first == first | {"kind": "getitem_mask", "predicate": "a == 1", "columns": ["a"], "movable": True, "reason": None}
    assert second["movable"] is False
    assert second["reason"] == "reads the mean of `b` over the rows it receives"
    assert second["column"] == CHAIN.index(".loc") + 1


def test_text_output_lists_steps_and_reasons(tmp_path: Path) -> None:
    _tree(tmp_path, {"m.py": CHAIN})
    result = CliRunner().invoke(main, ["explain", str(tmp_path / "m.py")])
    assert result.exit_code == 0
    assert "method chain on `df`, 2 steps, 1 movable" in result.output
    assert "reads the mean of `b` over the rows it receives" in result.output
    assert result.output.rstrip().endswith("1 chain in 1 of 1 file")


def test_output_is_deterministic_across_job_counts(tmp_path: Path) -> None:
    _tree(tmp_path, {f"pkg/m{i:02d}.py": CHAIN * (i % 3) for i in range(40)})
    outputs = {
        jobs: CliRunner().invoke(main, ["explain", "--format", "json", "--jobs", jobs, str(tmp_path)]).output
        for jobs in ("1", "2")
    }
    assert outputs["1"] == outputs["2"]
    assert len(json.loads(outputs["1"])["chains"]) == sum(i % 3 for i in range(40))


def test_module_entry_point(tmp_path: Path) -> None:
    _tree(tmp_path, {"m.py": CHAIN})
    done = subprocess.run([sys.executable, "-m", "chainlint", "explain", str(tmp_path)], capture_output=True, text=True)
    assert done.returncode == 0 and "1 chain in 1 of 1 file" in done.stdout


def test_folder_named_explicitly_is_walked_even_if_git_ignores_it(tmp_path: Path) -> None:
    (tmp_path / ".git").mkdir()
    _tree(tmp_path, {".gitignore": "vendored/\n", "vendored/a.py": CHAIN, "vendored/.gitignore": "b.py\n", "vendored/b.py": CHAIN})
    assert discover([str(tmp_path)]).files == []
    assert discover([str(tmp_path / "vendored")]).files == [str(tmp_path / "vendored" / "a.py")]
