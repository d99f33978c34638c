"""The one base of every error chainlint reports about its input.

An error knows its place as data (`path`, 1-based `line` and `column`), so that no caller reads
a path back out of a message; the text users read is the place followed by the `reason`, as
GNU tools write it (`path:line:column: reason`; only the parts that are known).
"""

from __future__ import annotations


class ChainlintError(Exception):
    """An input chainlint cannot use (a file, a document, an option, a chain); `reason` says why,
    `path`, `line` and `column` say where, when the raiser knows."""

    def __init__(self, reason: str, *, path: str | None = None, line: int | None = None, column: int | None = None) -> None:
        self.reason = reason
        self.path = path
        self.line = line
        self.column = column
        super().__init__(self.message)

    @property
    def message(self) -> str:
        """The text users read: `path[:line[:column]]: reason`, or the reason alone."""
        if self.path is None:
            return self.reason
        place = self.path + "".join(f":{n}" for n in (self.line, self.column) if n is not None)
        return f"{place}: {self.reason}"

    @property
    def detail(self) -> str:
        """The message without the path, for a caller whose own message names the file."""
        if self.line is None:
            return self.reason
        return f"line {self.line}, column {self.column}: {self.reason}"

    def __str__(self) -> str:
        return self.message
