"""One file's analysis: its chains and the errors met reading it."""

from __future__ import annotations

from dataclasses import dataclass

from chainlint.model.chains import Chain
from chainlint.model.errors import ChainlintError
from chainlint.model.spans import Cell, CellLines


@dataclass(frozen=True)
class FileProblem:
    """One file's failure, as reports show it (an error line, a JSON entry, a SARIF result);
    `cell` for a notebook's code cell."""

    path: str
    line: int
    column: int
    message: str
    cell: Cell | None = None

    @classmethod
    def of(cls, error: ChainlintError, default_path: str) -> FileProblem:
        """An error as a file's problem, at the place it names (`default_path`, line 1 when it
        names none); the message is the reason alone, since reports print the place before it."""
        return cls(error.path or default_path, error.line or 1, error.column or 1, error.reason)


@dataclass(frozen=True)
class FileAnalysis:
    """One file's chains and errors; `digest` identifies the text analysed (to spot a file
    that changed on disk before it is rewritten).

    For a notebook, `cells` maps the analysed text's lines to code cells: the chains are
    located in that text (the rewriter works on it) until `chainlint.engine.locate` moves
    them into their cells; the errors are already located in cells.
    """

    path: str
    chains: tuple[Chain, ...] = ()
    errors: tuple[FileProblem, ...] = ()
    digest: str = ""
    cells: tuple[CellLines, ...] = ()
