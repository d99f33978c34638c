"""A Jupyter notebook as one analysed source: its code cells in order, with a position map.

The engine reads Python; a notebook becomes one text (the code cells' sources, each followed
by a `pass` line so that a statement run never spans two cells) and a map from that text back
to cells. IPython syntax that is not Python (`%magic` and `!shell` lines, `x = !cmd`,
`%time`/`%timeit`/`%prun` before a statement, which stays analysed,
`?help` / `name?`, cell magics whose body is not Python) is masked in place: the masked text
keeps its length, so every other position is unchanged. A cell that still does not parse is a
located error and is blanked; the rest of the notebook is analysed. Only the standard library
is used: the core reads notebooks without nbformat.
"""

from __future__ import annotations

import ast
import bisect
import json
import re
from collections.abc import Sequence
from dataclasses import dataclass

from chainlint.parse.source import SourceError, SourceText, text_source

#: Cell magics whose body is Python (the first line is masked, the body analysed).
PYTHON_CELL_MAGICS = frozenset({"time", "timeit", "capture", "prun", "chainlint"})

_SEPARATOR = "pass\n"
_LINE = re.compile(r"[^\r\n]*(?:\r\n|\r|\n|$)")
_ASSIGNED_SHELL = re.compile(r"^(\s*[A-Za-z_][\w\s,]*=\s*)[%!]")
#: Line magics whose argument is a Python statement (without options): only the magic is masked.
_TIMED = re.compile(r"^(\s*)%(?:time|timeit|prun)[ \t]+(?=[^\s-])")


@dataclass(frozen=True)
class CodeCell:
    """One code cell: `number` is its 1-based position among all the notebook's cells (as
    editors show it), `index` its place in the `cells` array, `start` its offset in the
    analysed text, `first_line` its first line there."""

    number: int
    id: str | None
    index: int
    text: str
    start: int
    first_line: int
    line_count: int

    @property
    def end(self) -> int:
        return self.start + len(self.text)


@dataclass(frozen=True)
class Notebook:
    """A notebook read for analysis: its file text, the analysed text and the cells."""

    path: str
    file_text: str
    source: SourceText
    cells: tuple[CodeCell, ...]
    errors: tuple[tuple[int, int, str], ...]

    def cell_at_line(self, line: int) -> CodeCell | None:
        """The code cell holding line `line` of the analysed text (None on a separator)."""
        starts = [cell.first_line for cell in self.cells]
        position = bisect.bisect_right(starts, line) - 1
        if position < 0:
            return None
        cell = self.cells[position]
        return cell if line < cell.first_line + cell.line_count else None

    def cell_at_offset(self, offset: int) -> CodeCell | None:
        starts = [cell.start for cell in self.cells]
        position = bisect.bisect_right(starts, offset) - 1
        if position < 0:
            return None
        cell = self.cells[position]
        return cell if offset <= cell.end else None


def is_notebook(path: str) -> bool:
    return path.endswith(".ipynb")


def notebook_from_text(path: str, file_text: str) -> Notebook:
    try:
        document = json.loads(file_text)
    except json.JSONDecodeError as error:
        raise SourceError(f"not a notebook: invalid JSON: {error.msg}", error.lineno, error.colno) from None
    if not isinstance(document, dict) or not isinstance(document.get("cells"), list):
        raise SourceError("not a notebook: no `cells` list (nbformat 4 is read)")
    if document.get("nbformat") != 4:
        raise SourceError(f"notebook format {document.get('nbformat')!r} is not read; nbformat 4 is")
    if not _is_python(document.get("metadata")):
        return Notebook(path, file_text, text_source(path, ""), (), ())
    cells = [
        (index, cell.get("id") if isinstance(cell.get("id"), str) else None, cell_source(cell))
        for index, cell in enumerate(document["cells"])
        if isinstance(cell, dict) and cell.get("cell_type") == "code"
    ]
    return notebook_from_cells(path, cells, file_text)


def notebook_from_cells(path: str, cells: Sequence[tuple[int, str | None, str]], file_text: str = "") -> Notebook:
    """The analysed text of code cells given as (index among all cells, id, text), in order:
    a notebook file's, or the cells an editor sent over LSP."""
    pieces: list[str] = []
    code_cells: list[CodeCell] = []
    errors: list[tuple[int, int, str]] = []
    offset, line = 0, 1
    for index, identifier, text in cells:
        masked, error = analysable(text)
        if error is not None:
            errors.append((line + error[0] - 1, error[1], error[2]))
        code_cells.append(CodeCell(index + 1, identifier, index, text, offset, line, len(_lines(text))))
        piece = masked + ("" if masked.endswith(("\n", "\r")) or not masked else "\n") + _SEPARATOR
        pieces.append(piece)
        offset += len(piece)
        line += len(_lines(piece))
    return Notebook(path, file_text, text_source(path, "".join(pieces)), tuple(code_cells), tuple(errors))


def cell_source(cell: dict) -> str:  # type: ignore[type-arg]
    source = cell.get("source", "")
    if isinstance(source, list):
        return "".join(part for part in source if isinstance(part, str))
    return source if isinstance(source, str) else ""


def _is_python(metadata: object) -> bool:
    """Whether the notebook's kernel runs Python (a notebook that does not say is taken as one)."""
    if not isinstance(metadata, dict):
        return True
    for key, field in (("language_info", "name"), ("kernelspec", "language")):
        value = metadata.get(key)
        if isinstance(value, dict) and isinstance(value.get(field), str):
            return value[field].lower() == "python"
    return True


def _lines(text: str) -> list[str]:
    """Lines with their terminators; a last empty line is kept (as a line count needs)."""
    if not text:
        return [""]
    return [match.group() for match in _LINE.finditer(text)][:-1]


def analysable(text: str) -> tuple[str, tuple[int, int, str] | None]:
    """The cell's text as Python of the same length, or blanked with the syntax error's place."""
    lines = _lines(text)
    first = lines[0].strip()
    if first.startswith("%%"):
        name = first[2:].split(maxsplit=1)[0] if len(first) > 2 else ""
        if name not in PYTHON_CELL_MAGICS:
            return _blank(text), None
        lines[0] = _mask(lines[0], _indent(lines[0]))
    masked = "".join(lines)
    if _parses(masked) is None:
        return masked, None
    masked = "".join(_mask_line(line) for line in lines)
    problem = _parses(masked)
    if problem is None:
        return masked, None
    return _blank(text), problem


def _parses(text: str) -> tuple[int, int, str] | None:
    try:
        ast.parse(text)
    except SyntaxError as error:
        return (error.lineno or 1, error.offset or 1, f"syntax error: {error.msg or 'invalid syntax'}")
    except (RecursionError, MemoryError, ValueError):
        return (1, 1, "cannot parse this cell")
    return None


def _indent(line: str) -> int:
    return len(line) - len(line.lstrip(" \t"))


def _mask_line(line: str) -> str:
    stripped = line.strip()
    if not stripped or stripped.startswith("#"):
        return line
    timed = _TIMED.match(line)
    if timed:
        start = timed.end(1)
        return line[:start] + "0;" + " " * (timed.end() - start - 2) + line[timed.end():]
    if stripped[0] in "%!?" or stripped.endswith("?"):
        return _mask(line, _indent(line))
    match = _ASSIGNED_SHELL.match(line)
    if match:
        return _mask(line, match.end(1))
    return line


def _mask(line: str, start: int) -> str:
    """`0` and spaces in place of the line's text from `start`; the line ending stays."""
    body = line.rstrip("\r\n")
    if len(body) <= start:
        return line
    return body[:start] + "0" + " " * (len(body) - start - 1) + line[len(body):]


def _blank(text: str) -> str:
    return re.sub(r"[^\r\n]", " ", text)
