"""Hostile source files and paths: each ends in a clear located error or a sane report, never a
traceback or a hang; names from the file system never forge or break a report line."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.cli import main

CHAIN = "out = d.loc[lambda d: d.a > 1].loc[lambda d: d.b == 2].loc[lambda d: d.a == 7]\n"
HUGE = "0x" + "f" * 400  # about 1.6e482: beyond the float range


def _run(*args: str) -> tuple[int, str]:
    result = CliRunner().invoke(main, list(args))
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    return result.exit_code, result.output


def _cli(cwd: Path, *args: str) -> subprocess.CompletedProcess[str]:
    """The real command in a child process; the timeout only turns a hang into a failure."""
    return subprocess.run([sys.executable, "-m", "chainlint", *args], cwd=cwd, capture_output=True, text=True,
                          errors="replace", timeout=120)


@pytest.fixture()
def project(tmp_path: Path) -> Path:
    (tmp_path / "pyproject.toml").write_text("")
    (tmp_path / "t.csv").write_text("a,b\n" + "1,2\n3,4\n" * 10)
    code, output = _run("profile", str(tmp_path / "t.csv"), "--name", "t", "--store", str(tmp_path / ".chainlint"))
    assert code == 0, output
    return tmp_path


def test_integer_literal_beyond_float_range(project: Path) -> None:
    source = project / "huge.py"
    source.write_text(f"x = d.loc[lambda d: d.a > {HUGE}].loc[lambda d: d.b == 2]\ny = d[d.a < -{HUGE}][d.b == 2]\n")
    for command in ("check", "explain"):
        code, output = _run(command, str(source), "--store", str(project / ".chainlint"), "--format", "json")
        assert code in (0, 1), output
        assert len(json.loads(output).get("chains", [None, None])) == 2
    # Counting joint statistics skips the predicate with a reason instead of failing.
    result = CliRunner().invoke(main, ["profile", str(project / "t.csv"), "--name", "t", "--store",
                                       str(project / ".chainlint"), "--for", str(source)])
    assert result.exit_code == 0 and "outside the 64-bit range" in result.output


def test_estimate_of_literal_beyond_float_range_is_past_every_bound(project: Path) -> None:
    from chainlint.estimate.selectivity import _number

    assert _number(int(HUGE, 16)) == float("inf") and _number(-int(HUGE, 16)) == float("-inf")


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX file names")
def test_undecodable_file_name_and_surrogate_column_in_every_format(project: Path) -> None:
    folder = project / "src"
    folder.mkdir()
    with open(os.path.join(os.fsencode(folder), b"caf\xe9.py"), "w") as handle:
        handle.write("# chainlint: profile=t\nx = d.loc[lambda d: d['a\\udcff'] > 1].loc[lambda d: d.b == 2].loc[lambda d: d.a == 7]\n")
    store = str(project / ".chainlint")
    for form in ("text", "json", "sarif"):
        code, output = _run("check", str(folder), "--store", store, "--format", form)
        assert code == 1, output
        assert {"text": "caf\\xe9.py", "json": "caf\\\\xe9.py", "sarif": "caf%E9.py"}[form] in output
        if form != "text":
            json.loads(output)
            output.encode("utf-8")
    report = project / "report.sarif"
    code, _ = _run("check", str(folder), "--store", store, "--format", "sarif", "--output", str(report))
    assert code == 1 and "caf%E9.py" in report.read_text(encoding="utf-8")
    code, output = _run("explain", str(folder), "--format", "json")
    assert code == 0 and "`a\\\\xff` > 1" in output


@pytest.mark.skipif(sys.platform == "win32", reason="POSIX file names")
def test_newline_in_file_name_cannot_forge_a_report_line(project: Path) -> None:
    folder = project / "src"
    folder.mkdir()
    (folder / "a\nsrc").mkdir()
    (folder / "a\nsrc" / "forged.py:1:1: error: x.py").write_text(CHAIN)
    run = _cli(project, "check", "src", "--store", ".chainlint")
    lines = (run.stdout + run.stderr).splitlines()
    assert not any(line.startswith("src/forged.py") for line in lines), lines
    assert any(line.startswith("src/a\\nsrc/forged.py:1:1: error: x.py:1:") for line in lines), lines
    code, output = _run("explain", str(folder))
    assert "\\nsrc/forged.py" in output and not any(line.startswith("src/forged") for line in output.splitlines())
    code, output = _run("check", str(folder), "--store", str(project / ".chainlint"), "--format", "json")
    paths = {f["path"] for f in json.loads(output)["findings"]}  # JSON's own escapes: the exact name
    assert paths == {str(folder / "a\nsrc/forged.py:1:1: error: x.py")}


def test_symbolic_link_loop_given_on_the_command_line(tmp_path: Path) -> None:
    os.symlink(tmp_path / "two", tmp_path / "one")
    os.symlink(tmp_path / "one", tmp_path / "two")
    for command in ("check", "explain"):
        run = _cli(tmp_path, command, "one")
        assert run.returncode == 2 and "Traceback" not in run.stderr
        assert "one:1:1: error: broken or looping symbolic link" in run.stdout + run.stderr


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
def test_fifo_named_like_a_module_is_skipped_not_read(tmp_path: Path) -> None:
    folder = tmp_path / "src"
    folder.mkdir()
    os.mkfifo(folder / "x.py")
    (folder / "y.py").write_text(CHAIN)
    run = _cli(tmp_path, "explain", "src")
    assert run.returncode == 0 and "1 chain in 1 of 1 file" in run.stdout
    # Named explicitly, or reached by the reader anyway: an error, not a wait for a writer.
    run = _cli(tmp_path, "explain", "src/x.py")
    assert run.returncode == 2 and "src/x.py:1:1: error:" in run.stderr
    from chainlint.parse.source import SourceError, read_source

    with pytest.raises(SourceError, match="not a regular file"):
        read_source(str(folder / "x.py"))


def test_long_segments_sort_by_rank_as_the_greedy_order_does_without_a_fixed_cost() -> None:
    # Rank ordering (Ibaraki & Kameda 1984): with costs linear in the rows, ascending
    # cost / (1 - selectivity) is the greedy order at every stage, so sorting once agrees.
    import math
    import random

    from chainlint.plan.planner import GREEDY_LIMIT, _greedy, _sorted

    generator = random.Random(7)
    steps = list(range(GREEDY_LIMIT + 16))
    shares = [generator.uniform(0.01, 0.99) for _ in steps]
    per_row = [generator.uniform(0.1, 50.0) for _ in steps]

    def rows_after(mask: int) -> float:
        return 1e6 * math.prod(s for i, s in enumerate(shares) if mask >> i & 1)

    def cost(step: int, rows_in: float, kept: float) -> float:
        return rows_in * per_row[step]

    assert _sorted(steps, rows_after, cost)[0] == _greedy(steps, rows_after, cost, {})[0]


def test_a_run_of_thousands_of_statements_plans_in_near_linear_work(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Counted, not timed: the cost model is asked O(k) times for a run of k statements (it was
    asked O(k^2) times, each mask costing O(k), so 5,000 statements never finished)."""
    from chainlint.plan import chains

    calls = []
    real = chains.step_cost

    def counted(*args, **kwargs):  # type: ignore[no-untyped-def]
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(chains, "step_cost", counted)
    (tmp_path / "t.csv").write_text("a,b\n" + "1,2\n3,4\n" * 10)
    assert _run("profile", str(tmp_path / "t.csv"), "--name", "t", "--store", str(tmp_path / "s"))[0] == 0
    steps = 3000
    (tmp_path / "run.py").write_text("def g(df):\n" + "".join(f"    df = df[df.a > {i}]\n" for i in range(steps)) + "    return df\n")
    code, output = _run("explain", str(tmp_path / "run.py"), "--store", str(tmp_path / "s"), "--format", "json")
    assert code == 0
    (chain,) = json.loads(output)["chains"]
    assert len(chain["steps"]) == steps and sorted(chain["order"]) == list(range(steps))
    # The order planner about 2 a step, the written and planned forms 1 each, and, now that the
    # run's steps may join one mask, its neighbours merged: each step priced alone, each pair
    # offered, and again beside each merge (about 4 a step; all 3,000 here become one mask).
    assert len(calls) <= 8 * steps
