"""`check --diff` compares lines only where the edits are; its diff must stay a true unified diff.

References outside the project: Python's `difflib.unified_diff` over the whole two texts (the
standard library's unified diff, what `--diff` printed before it compared only the edited
lines), the unified format itself as GNU diffutils document it (`@@ -first,length
+first,length @@`, context lines prefixed by a space, removed by `-`, added by `+`, lines ended
by "\n" only, `\\ No newline at end of file` after a last line without one), and GNU patch
where the machine has it.
"""

from __future__ import annotations

import difflib
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from chainlint.model import Edit, Span
from chainlint.parse.source import text_source
from chainlint.report.diff import _stretches, unified_diff
from chainlint.rewrite.fixes import FileFix
from chainlint.rewrite.permute import apply_edits

_NOWHERE = Span(1, 1, 1, 1)
_HUNK = re.compile(r"@@ -(\d+)(?:,(\d+))? \+(\d+)(?:,(\d+))? @@\n")
_NO_NEWLINE = "\\ No newline at end of file\n"


def _lines(text: str) -> list[str]:
    return re.findall(r"[^\n]*\n|[^\n]+$", text)


def _difflib(old: str, new: str) -> str:
    return "".join(difflib.unified_diff(_lines(old), _lines(new), "a/m.py", "b/m.py"))


def _diff(old: str, edits: list[Edit] | None, new: str | None = None) -> str:
    new = apply_edits(old, edits) if new is None else new
    fix = FileFix("/p/m.py", text_source("/p/m.py", old), new, edits=None if edits is None else tuple(edits))
    return unified_diff(fix, Path("/p"))


def _patched(old: str, diff: str) -> str:
    """The old text with the diff applied, read by the unified format's rules (the test's own
    reader): every hunk's context and removed lines must be the old text's at its place."""
    lines = _lines(old)
    if not diff:
        return old
    assert diff.startswith("--- a/m.py\n+++ b/m.py\n")
    out: list[str] = []
    cursor = 0
    rest = diff[len("--- a/m.py\n+++ b/m.py\n"):]
    while rest:
        header = _HUNK.match(rest)
        assert header, rest[:80]
        first, length = int(header[1]), int(header[2] or 1)
        start = first - 1 if length else first
        assert start >= cursor
        out += lines[cursor:start]
        cursor = start
        rest = rest[header.end():]
        taken = 0
        while rest and not rest.startswith("@@ "):
            # A hunk line is its mark and one line of the old or new text, up to its "\n";
            # the marker after it says that line has no "\n" in its text.
            mark, body, rest = rest[0], *rest[1:].split("\n", 1)
            if rest.startswith(_NO_NEWLINE):
                rest = rest[len(_NO_NEWLINE):]
            else:
                body += "\n"
            if mark in " -":
                assert lines[cursor] == body
                cursor += 1
                taken += 1
            if mark in " +":
                out.append(body)
        assert taken == length
    return "".join(out + lines[cursor:])


@st.composite
def _edited(draw: st.DrawFn, pieces: st.SearchStrategy[str], inserted: st.SearchStrategy[str] | None = None) -> tuple[str, list[Edit]]:
    """A text of lines drawn from `pieces` and edits apart replacing any characters (within a
    line, across lines, at the very start or end) with text drawn from `inserted`."""
    old = "".join(draw(st.lists(pieces, max_size=60)))
    edits: list[Edit] = []
    position = 0
    for _ in range(draw(st.integers(0, 8))):
        if position > len(old):
            break
        start = draw(st.integers(position, min(len(old), position + 30)))
        end = draw(st.integers(start, min(len(old), start + 12)))
        text = "".join(draw(st.lists(pieces if inserted is None else inserted, max_size=3)))
        edits.append(Edit(start, end, text, _NOWHERE))
        position = end + 1
    return old, edits


_SMALL = st.sampled_from(["a\n", "b\n", "    return d\n", "\n", "x", "\r\n", "c\r\n"])


@settings(max_examples=300)
@given(_edited(_SMALL))
def test_the_diff_applied_to_the_old_text_gives_the_new(case: tuple[str, list[Edit]]) -> None:
    old, edits = case
    new = apply_edits(old, edits)
    diff = _diff(old, edits)
    assert _patched(old, diff) == new
    assert (diff == "") == (old == new)
    # The stretches said to hold every change do: the lines between them are the same lines.
    old_lines, new_lines = _lines(old), _lines(new)
    i = j = 0
    for first, end, new_first, new_end in [*_stretches(old, edits), (len(old_lines), len(old_lines), len(new_lines), len(new_lines))]:
        assert old_lines[i:first] == new_lines[j:new_first]
        i, j = end, new_end
    assert _patched(old, _diff(old, None, new)) == new
    if old.endswith("\n") and new.endswith("\n"):
        # The whole texts compared, when the edits are not known, give difflib's diff.
        assert _diff(old, None, new) == _difflib(old, new)


@settings(max_examples=200)
@given(_edited(st.integers(0, 10**6).map(lambda n: f"line {n}\n"), st.integers(0, 10**6).map(lambda n: f"new {n}\n")))
def test_where_no_line_repeats_or_moves_the_diff_is_the_whole_file_diff_of_difflib(case: tuple[str, list[Edit]]) -> None:
    # Only where a line repeats or lines trade places can two alignments be equally good;
    # otherwise comparing the edited lines alone finds the alignment the whole-file comparison
    # finds (every line the two texts share, matched in order).
    old, edits = case
    new = apply_edits(old, edits)
    old_lines, new_lines = _lines(old), _lines(new)
    assume(len(set(old_lines)) == len(old_lines) and len(set(new_lines)) == len(new_lines))
    shared = set(old_lines) & set(new_lines)
    assume([line for line in old_lines if line in shared] == [line for line in new_lines if line in shared])
    assume(new.endswith("\n") or not new)
    assert _diff(old, edits) == _difflib(old, new)


def test_a_long_file_with_many_small_edits() -> None:
    # 3,000 lines, a line in every ten changed: 300 hunks, as the whole-file comparison gives.
    old = "".join(f"value_{n} = {n}\n" for n in range(3000))
    edits = [Edit(old.index(f"value_{n} ="), old.index(f"value_{n} =") + len(f"value_{n}"), f"renamed_{n}", _NOWHERE)
             for n in range(5, 3000, 10)]
    diff = _diff(old, edits)
    assert diff.count("\n@@ ") == 300
    assert diff == _difflib(old, apply_edits(old, edits))


@pytest.mark.skipif(shutil.which("patch") is None, reason="GNU patch is not installed")
@pytest.mark.parametrize(("old", "start", "end", "text"), [
    ("a = 1\nb = 2", 10, 11, "3"),  # the last line without "\n", before and after
    ("a = 1\nb = 2", 11, 11, "\n"),  # a "\n" given to the last line
    ("a = 1\nb = 2\n", 11, 12, ""),  # and taken from it
    ("a = 1\r\nb = 2\r\n", 4, 5, "9"),  # Windows line ends kept in their lines
    ("\x0cdef f():\n    return 1\rx = 2\n", 20, 21, "2"),  # a form feed, a lone carriage return
])
def test_gnu_patch_applies_the_diff(tmp_path: Path, old: str, start: int, end: int, text: str) -> None:
    edits = [Edit(start, end, text, _NOWHERE)]
    (tmp_path / "m.py").write_bytes(old.encode())
    (tmp_path / "fix.diff").write_bytes(_diff(old, edits).encode())
    subprocess.run(["patch", "-p1", "--quiet", "-i", "fix.diff"], cwd=tmp_path, check=True, timeout=60)
    assert (tmp_path / "m.py").read_bytes() == apply_edits(old, edits).encode()


def test_a_long_file_is_compared_only_near_its_edits(monkeypatch: pytest.MonkeyPatch) -> None:
    """Counted, not timed: difflib sees a few lines around each edit, not the whole file (the
    whole-file comparison rescanned the rest of the file at every unchanged stretch)."""
    from chainlint.report import diff

    compared: list[int] = []
    real = difflib.SequenceMatcher

    def counted(junk, a, b):  # type: ignore[no-untyped-def]
        compared.append(len(a) + len(b))
        return real(junk, a, b)

    monkeypatch.setattr(diff.difflib, "SequenceMatcher", counted)
    old = "".join(f"value_{n} = {n}\n" for n in range(20_000))
    edits = [Edit(old.index(f"value_{n} ="), old.index(f"value_{n} =") + len(f"value_{n}"), f"renamed_{n}", _NOWHERE)
             for n in range(5, 20_000, 10)]
    assert _diff(old, edits).count("\n@@ ") == 2_000
    assert sum(compared) <= 2 * 2 * len(edits)


def test_a_file_changed_during_the_run_is_left_out_of_the_diff_with_a_warning(project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from click.testing import CliRunner

    from chainlint import cli

    real = cli.attach_fixes

    def edited_meanwhile(*args):  # type: ignore[no-untyped-def]
        path = project / "pipeline.py"
        path.write_text(path.read_text() + "\n# edited meanwhile\n")
        return real(*args)

    monkeypatch.setattr(cli, "attach_fixes", edited_meanwhile)
    result = CliRunner().invoke(cli.main, ["check", "--jobs", "1", "--diff", "pipeline.py"])
    assert result.exit_code == 1 and "--- a/pipeline.py" not in result.output
    assert "pipeline.py:1:1: warning: left out of the diff: the file changed on disk since it was read" in result.output
