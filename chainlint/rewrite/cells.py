"""Put the rewriter's edits of a notebook's analysed text back into the cells they change.

Only the changed cells' `source` values are replaced in the file's text; every other byte
(outputs, metadata, key order, indentation, escapes, the trailing newline) stays. A source
kept as a list of lines is written back as one, in the layout the file used, reusing the
file's own text for every line that did not change. The result must load as the same JSON
except for those sources, and pass nbformat's validator against its schema.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass

from chainlint.model import Edit
from chainlint.parse.notebooks import CodeCell, Notebook, cell_source
from chainlint.rewrite.permute import RewriteError

_SPACE = " \t\r\n"
_DECODER = json.JSONDecoder()


@dataclass(frozen=True)
class _Value:
    start: int
    end: int
    items: tuple[tuple[int, int], ...] | None  # the spans of a list's strings


def rewrite_cells(notebook: Notebook, edits: Sequence[Edit]) -> str:
    """The notebook's new file text with `edits` (offsets into the analysed text) applied."""
    by_cell: dict[int, list[Edit]] = {}
    for edit in edits:
        cell = notebook.cell_at_offset(edit.start)
        if cell is None or edit.end > cell.end:
            raise RewriteError("the chain is not inside one cell")
        if notebook.source.text[edit.start : edit.end] != cell.text[edit.start - cell.start : edit.end - cell.start]:
            raise RewriteError("the chain runs through IPython syntax; left as written")
        by_cell.setdefault(cell.index, []).append(edit)
    cells = {cell.index: cell for cell in notebook.cells}
    values = _source_values(notebook.file_text)
    text = notebook.file_text
    intended: dict[int, str] = {}
    for index in sorted(by_cell, reverse=True):
        cell = cells[index]
        new_source = cell.text
        for edit in sorted(by_cell[index], key=lambda e: e.start, reverse=True):
            new_source = new_source[: edit.start - cell.start] + edit.text + new_source[edit.end - cell.start :]
        value = values[index]
        text = text[: value.start] + _encode(notebook.file_text, value, cell, new_source) + text[value.end :]
        intended[index] = new_source
    _check(notebook, text, intended)
    return text


def _encode(file_text: str, value: _Value, cell: CodeCell, new_source: str) -> str:
    old = file_text[value.start : value.end]
    ascii_only = "\\u" in old and not any(ord(ch) > 127 for ch in old)

    def dump(line: str) -> str:
        return json.dumps(line, ensure_ascii=ascii_only)

    if value.items is None:
        return dump(new_source)
    lines = new_source.splitlines(keepends=True)
    old_lines = cell.text.splitlines(keepends=True)
    items = value.items
    tokens = [
        file_text[items[i][0] : items[i][1]] if i < len(old_lines) and i < len(items) and old_lines[i] == line else dump(line)
        for i, line in enumerate(lines)
    ]
    if not items:
        return "[" + ", ".join(tokens) + "]"
    opening = file_text[value.start + 1 : items[0][0]]
    closing = file_text[items[-1][1] : value.end - 1]
    between = file_text[items[0][1] : items[1][0]] if len(items) > 1 else "," + opening
    return "[" + opening + between.join(tokens) + closing + "]"


def _source_values(text: str) -> dict[int, _Value]:
    """The place of each cell's `source` value in the file's text, by the cell's index."""
    found: dict[int, _Value] = {}
    for key, start, end in _members(text, _skip(text, 0)):
        if key != "cells":
            continue
        for index, (cell_start, _) in enumerate(_elements(text, start)):
            for cell_key, value_start, value_end in _members(text, cell_start):
                if cell_key == "source":
                    items = None
                    if text[value_start] == "[":
                        items = tuple(_elements(text, value_start))
                    found[index] = _Value(value_start, value_end, items)
    return found


def _skip(text: str, position: int) -> int:
    while position < len(text) and text[position] in _SPACE:
        position += 1
    return position


def _members(text: str, position: int) -> list[tuple[str, int, int]]:
    """(key, value start, value end) of the object starting at `position`."""
    members = []
    position = _skip(text, position + 1)
    while text[position] != "}":
        key, position = json.decoder.scanstring(text, position + 1)  # type: ignore[attr-defined]
        position = _skip(text, _skip(text, position) + 1)
        _, end = _DECODER.raw_decode(text, position)
        members.append((key, position, end))
        position = _skip(text, end)
        if text[position] == ",":
            position = _skip(text, position + 1)
    return members


def _elements(text: str, position: int) -> list[tuple[int, int]]:
    """(start, end) of each element of the array starting at `position`."""
    elements = []
    position = _skip(text, position + 1)
    while text[position] != "]":
        _, end = _DECODER.raw_decode(text, position)
        elements.append((position, end))
        position = _skip(text, end)
        if text[position] == ",":
            position = _skip(text, position + 1)
    return elements


def _check(notebook: Notebook, new_text: str, sources: dict[int, str]) -> None:
    """The new file is the old one with exactly these cells' sources changed, and valid."""
    old = json.loads(notebook.file_text)
    new = json.loads(new_text)
    for index, source in sources.items():
        if cell_source(new["cells"][index]) != source:
            raise RewriteError("the cell's new source did not round-trip through JSON")
        old["cells"][index]["source"] = new["cells"][index]["source"]
    if old != new:
        raise RewriteError("the rewritten notebook differs outside the changed cells' sources")
    validate(new_text)


def validate(text: str) -> None:
    """nbformat's validator against the notebook's own schema version; RewriteError if not."""
    try:
        import nbformat
    except ImportError:
        raise RewriteError("rewriting a notebook needs nbformat to validate it: pip install 'chainlint[notebook]'") from None
    try:
        nbformat.validate(nbformat.reads(text, as_version=nbformat.NO_CONVERT))
    except nbformat.ValidationError as error:
        raise RewriteError(f"the rewritten notebook does not validate: {error.message}") from None
