"""Where things are: spans in a file's text and a notebook's code cells.

Positions are 1-based lines and 1-based character (code point) columns; an end column points
one past the last character, as in LSP and SARIF regions.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Span:
    line: int
    column: int
    end_line: int
    end_column: int


@dataclass(frozen=True)
class Cell:
    """A notebook's code cell: `number` is its 1-based place among all the notebook's cells (as
    editors count them), `id` the notebook's own cell id (nbformat 4.5 on), when it has one."""

    number: int
    id: str | None = None


@dataclass(frozen=True)
class CellLines:
    """Where a code cell's lines sit in the one text a notebook is analysed as."""

    cell: Cell
    first_line: int
    line_count: int
