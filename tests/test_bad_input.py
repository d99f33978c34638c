"""Bad input: each failure is an error entry naming path, line and column; the run goes on.

A file the screen proves chain-free is not parsed, so a syntax error is reported only in a
file whose text could hold a chain: the bad files below all carry one.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.engine.run import analyse_file
from chainlint.cli import main

GOOD = 'out = df[df.a == 1].loc[lambda d: d.b > 2]\n'


def _explain(*args: str) -> tuple[int, dict]:
    result = CliRunner().invoke(main, ["explain", "--format", "json", "--jobs", "1", *args])
    return result.exit_code, json.loads(result.output)


def _single_error(path: Path) -> tuple[int, int, str]:
    result = analyse_file(str(path))
    assert result.chains == ()
    (error,) = result.errors
    assert error.path == str(path)
    return error.line, error.column, error.message


def test_syntax_error_names_line_and_character_column(tmp_path: Path) -> None:
    path = tmp_path / "bad.py"
    path.write_text("x = df[df.a == 1][df.b == 2]\nééé ? 2\n", encoding="utf-8")
    line, column, message = _single_error(path)
    assert (line, column) == (2, 5)
    assert message.startswith("syntax error")


def test_undecodable_bytes(tmp_path: Path) -> None:
    path = tmp_path / "latin.py"
    path.write_bytes(b"x = 1\ny = 'caf\xe9'\n")
    line, column, message = _single_error(path)
    assert (line, column) == (2, 9)
    assert "cannot decode as utf-8" in message


def test_coding_cookie_is_respected(tmp_path: Path) -> None:
    path = tmp_path / "latin.py"
    path.write_bytes(b"# -*- coding: latin-1 -*-\ny = 'caf\xe9'; out = df[df.a == 1][df.b == 2]\n")
    (chain,) = analyse_file(str(path)).chains
    assert chain.span.column == len("y = 'café'; out = ") + 1


def test_nul_byte(tmp_path: Path) -> None:
    path = tmp_path / "nul.py"
    path.write_bytes(b"x = 1\nab\x00c = 2\n")
    assert _single_error(path)[:2] == (2, 3)


def test_file_that_vanishes(tmp_path: Path) -> None:
    line, column, message = _single_error(tmp_path / "gone.py")
    assert (line, column) == (1, 1) and "cannot read" in message


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root reads files whatever their mode")
def test_permission_denied(tmp_path: Path) -> None:
    path = tmp_path / "secret.py"
    path.write_text(GOOD)
    path.chmod(0)
    assert "Permission denied" in _single_error(path)[2]


def test_permission_denied_as_reported_by_the_system(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Root cannot be denied by file modes, so the operating system's answer is stood in for.
    path = tmp_path / "secret.py"
    path.write_text(GOOD)
    real_open = os.open

    def denying_open(file, *args, **kwargs):  # type: ignore[no-untyped-def]
        if str(file) == str(path):
            raise PermissionError(13, "Permission denied", str(file))
        return real_open(file, *args, **kwargs)

    monkeypatch.setattr(os, "open", denying_open)
    assert "Permission denied" in _single_error(path)[2]


def test_symlink_loop_is_reported_and_the_run_goes_on(tmp_path: Path) -> None:
    (tmp_path / "loop.py").symlink_to(tmp_path / "loop.py")
    (tmp_path / "dirloop").symlink_to(tmp_path)
    (tmp_path / "good.py").write_text(GOOD)
    status, report = _explain(str(tmp_path), str(tmp_path / "loop.py"))
    assert status == 2
    assert [c["path"] for c in report["chains"]] == [str(tmp_path / "good.py")]
    assert {e["path"] for e in report["errors"]} == {str(tmp_path / "loop.py")}


def test_huge_generated_file_is_reported_not_parsed(tmp_path: Path) -> None:
    path = tmp_path / "generated.py"
    with path.open("w") as handle:
        for number in range(200_000):
            handle.write(f"value_{number:08d} = frame[frame.a == {number:08d}][frame.b == 2]\n")
    assert path.stat().st_size > 10_000_000
    line, column, message = _single_error(path)
    assert "limit" in message and "--max-file-size" in message


def test_absurd_nesting_is_an_error_not_a_crash(tmp_path: Path) -> None:
    path = tmp_path / "deep.py"
    path.write_text("out = df[" + "(" * 150 + "df.a == 1" + ")" * 150 + "][df.b == 2]\nx = " + "-" * 100_000 + "1\n")
    assert _single_error(path) == (1, 1, "nesting too deep to parse")


def test_deep_mask_is_an_error_not_a_crash(tmp_path: Path) -> None:
    path = tmp_path / "deep.py"
    # Python parses this; the finder's own recursion gives up and says so.
    mask = " & ".join(["(df.a == 1)"] * 600)
    path.write_text(f"out = df[{mask}][df.b == 2]\n")
    assert _single_error(path) == (1, 1, "nesting too deep to analyse")


def test_bad_files_do_not_stop_the_others(tmp_path: Path) -> None:
    (tmp_path / "a_bad.py").write_text("out = df[df.a == 1][df.b == 2]\ndef (:\n")
    (tmp_path / "b_good.py").write_text(GOOD)
    (tmp_path / "c_nul.py").write_bytes(b"\x00")
    status, report = _explain(str(tmp_path))
    assert status == 2
    assert [c["path"] for c in report["chains"]] == [str(tmp_path / "b_good.py")]
    assert [e["path"] for e in report["errors"]] == [str(tmp_path / "a_bad.py"), str(tmp_path / "c_nul.py")]
    assert all(e["line"] >= 1 and e["column"] >= 1 for e in report["errors"])


def test_analysed_code_is_never_executed(tmp_path: Path) -> None:
    marker = tmp_path / "executed"
    path = tmp_path / "payload.py"
    path.write_text(
        f"open({str(marker)!r}, 'w').write('ran')\n"
        f"out = df[df.a == __import__('os').system('touch {marker}')][df.b == 2]\n"
        f"q = df.query(\"a == @open({str(marker)!r}, 'w')\").query('b == 1')\n"
    )
    status, report = _explain(str(path))
    assert status == 0 and len(report["chains"]) == 2
    assert not marker.exists()
