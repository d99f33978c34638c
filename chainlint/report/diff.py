"""`check --diff`: the fixes as a unified diff, one file after another.

Comparing two whole texts line by line (`difflib`) grows with the square of a long file that has
many small changes, so the lines are compared only where the edits are: the lines each edit
touches (edits sharing or touching a line together) are compared with `difflib`, and the lines
between are checked equal and shown as context. A stretch between edits that is not equal joins
the edits around it; with no edits known (a notebook's cells written back) the whole file is
one stretch, compared as a whole.

Lines end at "\n" only, as `patch` and `git apply` read them (a form feed or a lone carriage
return stays inside its line), and a last line without one is marked as GNU diff marks it.
Both match a diff's lines against the file's bytes, so each file's lines are given in its own
encoding (a byte order mark on its first line), the headers in UTF-8 (`encoded_diff`).
"""

from __future__ import annotations

import bisect
import difflib
import itertools
import os
from collections.abc import Iterator, Sequence
from pathlib import Path

from chainlint.model import Edit
from chainlint.report.escape import printable
from chainlint.rewrite.fixes import FileFix
from chainlint.rewrite.permute import apply_edits

_CONTEXT = 3  # lines of context around each change, as `diff -u` shows by default
_NO_NEWLINE = "\n\\ No newline at end of file\n"
Opcode = tuple[str, int, int, int, int]


def unified_diff(fix: FileFix, root: Path) -> str:
    """The rewrite as a unified diff, its headers naming the file relative to `root`."""
    return "".join(_diff(fix, root))


def encoded_diff(fix: FileFix, root: Path) -> bytes:
    """The diff as `patch` and `git apply` read it: the headers in UTF-8, the file's lines in
    the file's own encoding."""
    assert fix.source is not None
    codec = "utf-8" if fix.source.encoding == "utf-8-sig" else fix.source.encoding
    return b"".join(piece.encode("utf-8" if number == 0 else codec) for number, piece in enumerate(_diff(fix, root)))


def _diff(fix: FileFix, root: Path) -> Iterator[str]:
    """The headers, then the hunks' lines; a byte order mark the file starts with (which its
    decoded text leaves out) opens its first line."""
    assert fix.source is not None and fix.new_text is not None
    name = printable(os.path.relpath(fix.path, root))
    mark = "\ufeff" if fix.source.encoding == "utf-8-sig" else ""
    old = _lines(mark + fix.source.text)
    new = _lines(mark + fix.new_text)
    stretches = _stretches(fix.source.text, fix.edits) if fix.edits is not None else [(0, len(old), 0, len(new))]
    return _hunks(old, new, _opcodes(old, new, stretches), f"a/{name}", f"b/{name}")


def _lines(text: str) -> list[str]:
    """The text's lines, each with its "\n" (the last one without, when the text lacks it)."""
    lines = text.split("\n")
    return [line + "\n" for line in lines[:-1]] + ([lines[-1]] if lines[-1] else [])


def _stretches(text: str, edits: Sequence[Edit]) -> list[tuple[int, int, int, int]]:
    """The lines the edits may change, as (old first, old end, new first, new end), half-open
    line numbers from 0, by position; edits on the same or adjacent lines are one stretch."""
    lines = _lines(text)
    starts = list(itertools.accumulate(map(len, lines), initial=0))

    def line(offset: int) -> int:
        """The line holding `offset` (the end of the text: the last line, which an edit there
        may extend)."""
        return max(0, min(bisect.bisect_right(starts, offset) - 1, len(lines) - 1))

    groups: list[tuple[int, int, list[Edit]]] = []
    for edit in sorted(edits, key=lambda e: e.start):
        first, end = line(edit.start), min(line(edit.end) + 1, len(lines))
        if groups and first <= groups[-1][1]:
            groups[-1] = (groups[-1][0], max(end, groups[-1][1]), groups[-1][2] + [edit])
        else:
            groups.append((first, end, [edit]))
    stretches = []
    grown = 0  # lines the new text has gained before the current stretch
    for first, end, group in groups:
        low = starts[first]
        piece = apply_edits(text[low : starts[end]], [Edit(e.start - low, e.end - low, e.text, e.span) for e in group])
        count = len(_lines(piece))
        stretches.append((first, end, first + grown, first + grown + count))
        grown += count - (end - first)
    return stretches


def _opcodes(old: list[str], new: list[str], stretches: list[tuple[int, int, int, int]]) -> list[Opcode]:
    """`difflib` opcodes for the two texts, comparing lines only inside the stretches; the lines
    between two stretches must be equal, else that gap is compared with its neighbours."""
    codes: list[Opcode] = []

    def add(tag: str, i1: int, i2: int, j1: int, j2: int) -> None:
        if codes and tag == "equal" and codes[-1][0] == "equal":
            codes[-1] = ("equal", codes[-1][1], i2, codes[-1][3], j2)
        else:
            codes.append((tag, i1, i2, j1, j2))

    def compare(i1: int, i2: int, j1: int, j2: int) -> None:
        if i1 < i2 or j1 < j2:
            matcher = difflib.SequenceMatcher(None, old[i1:i2], new[j1:j2])
            for tag, a1, a2, b1, b2 in matcher.get_opcodes():
                add(tag, i1 + a1, i1 + a2, j1 + b1, j1 + b2)

    open_i = open_j = 0  # where the stretch not yet compared begins
    i = j = 0  # where the last stretch ended
    for first, end, new_first, new_end in [*stretches, (len(old), len(old), len(new), len(new))]:
        if first - i == new_first - j and old[i:first] == new[j:new_first]:
            compare(open_i, i, open_j, j)
            if first > i:
                add("equal", i, first, j, new_first)
            open_i, open_j = first, new_first
        i, j = end, new_end
    compare(open_i, len(old), open_j, len(new))
    return codes


class _Known(difflib.SequenceMatcher):
    """A matcher whose opcodes are already known, to group them as `difflib` does."""

    def __init__(self, codes: list[Opcode]) -> None:
        super().__init__(None, (), ())
        self._codes = codes

    def get_opcodes(self) -> list[Opcode]:
        return list(self._codes)


def _hunks(old: list[str], new: list[str], codes: list[Opcode], before: str, after: str) -> Iterator[str]:
    """The unified diff's lines: the two headers, then each hunk's range line and lines."""
    for number, group in enumerate(_Known(codes).get_grouped_opcodes(_CONTEXT)):
        if number == 0:
            yield f"--- {before}\n+++ {after}\n"
        yield f"@@ -{_range(group[0][1], group[-1][2])} +{_range(group[0][3], group[-1][4])} @@\n"
        for tag, i1, i2, j1, j2 in group:
            if tag == "equal":
                yield from _marked(" ", old[i1:i2])
            else:
                yield from _marked("-", old[i1:i2])
                yield from _marked("+", new[j1:j2])


def _marked(mark: str, lines: list[str]) -> Iterator[str]:
    for line in lines:
        yield mark + line if line.endswith("\n") else mark + line + _NO_NEWLINE


def _range(first: int, end: int) -> str:
    """A hunk's range: its first line from 1 (the line before it when empty) and its length,
    the length left out when it is 1."""
    if end - first == 1:
        return str(first + 1)
    return f"{first + 1 if end > first else first},{end - first}"
