"""One file's analysis: its chains and the errors met reading it."""

from __future__ import annotations

from dataclasses import dataclass

from chainlint.model.chains import Chain
from chainlint.model.spans import Cell, CellLines


@dataclass(frozen=True)
class FileError:
    path: str
    line: int
    column: int
    message: str
    cell: Cell | None = None


@dataclass(frozen=True)
class FileAnalysis:
    """One file's chains and errors; `digest` identifies the text analysed (to spot a file
    that changed on disk before it is rewritten).

    For a notebook, `cells` maps the analysed text's lines to code cells: the chains are
    located in that text (the rewriter works on it) until `chainlint.notebook.locate` moves
    them into their cells; the errors are already located in cells.
    """

    path: str
    chains: tuple[Chain, ...] = ()
    errors: tuple[FileError, ...] = ()
    digest: str = ""
    cells: tuple[CellLines, ...] = ()
