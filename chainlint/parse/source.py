"""Read a Python file as text, and parse it with `ast` when the finder needs the tree.

Every failure becomes a `SourceError` with a 1-based line and column, so that one bad file is
reported and the run goes on. Nothing here imports or runs the code it reads.
"""

from __future__ import annotations

import ast
import bisect
import hashlib
import io
import itertools
import os
import re
import stat
import tokenize
from dataclasses import dataclass
from functools import cached_property

from chainlint.model import ChainlintError

#: Files larger than this are reported, not parsed: they are almost always generated.
DEFAULT_MAX_BYTES = 4 * 1024 * 1024

_NEWLINE = re.compile(r"\r\n|\r|\n")
_OTHER_BREAKS = re.compile("[\v\f\x1c\x1d\x1e\x85\u2028\u2029]")


class SourceError(ChainlintError):
    """A file that could not be read or parsed, with the place to show the user."""

    line: int
    column: int

    def __init__(self, message: str, line: int = 1, column: int = 1) -> None:
        super().__init__(message, line=max(1, line), column=max(1, column))


@dataclass(frozen=True)
class SourceText:
    """A decoded source file and how to turn `ast` byte offsets into character columns."""

    path: str
    text: str
    encoding: str
    lines: tuple[str, ...]

    def column(self, line: int, byte_offset: int) -> int:
        """1-based character column of a UTF-8 byte offset (as `ast` gives) on a 1-based line."""
        text = self.lines[line - 1] if 0 < line <= len(self.lines) else ""
        if text.isascii():
            return byte_offset + 1
        return len(text.encode("utf-8")[:byte_offset].decode("utf-8", errors="replace")) + 1

    def offset(self, line: int, byte_offset: int) -> int:
        """0-based character offset into `text` of an `ast` position."""
        return self.line_starts[line - 1] + self.column(line, byte_offset) - 1

    def position(self, offset: int) -> tuple[int, int]:
        """1-based line and character column of a 0-based character offset into `text`."""
        line = bisect.bisect_right(self.line_starts, offset)
        return line, offset - self.line_starts[line - 1] + 1

    @cached_property
    def line_starts(self) -> list[int]:
        return list(itertools.accumulate(map(len, self.lines[:-1]), initial=0))

    def segment(self, start: tuple[int, int], end: tuple[int, int]) -> str:
        """The source text between two `ast` positions (line, byte offset)."""
        return self.text[self.offset(*start) : self.offset(*end)]


def read_source(path: str, max_bytes: int = DEFAULT_MAX_BYTES) -> SourceText:
    """Read and decode a Python file (PEP 263 cookie or BOM respected)."""
    try:
        # Non-blocking open, then a check of what was opened: a FIFO must not block the run.
        descriptor = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with open(descriptor, "rb") as handle:
            if not stat.S_ISREG(os.fstat(descriptor).st_mode):
                raise SourceError("not a regular file")
            data = handle.read(max_bytes + 1)
    except OSError as error:
        raise SourceError(f"cannot read file: {error.strerror or error}") from None
    if len(data) > max_bytes:
        size = os.path.getsize(path) if os.path.exists(path) else len(data)
        raise SourceError(size_error(size, max_bytes) or "")
    return decode_source(path, data)


def size_error(size: int, max_bytes: int) -> str | None:
    """Why a text of `size` bytes is not analysed, or None when it is within the limit."""
    if size <= max_bytes:
        return None
    return (f"file is {size / 1e6:.1f} MB, over the {max_bytes / 1e6:.1f} MB limit "
            "(likely generated; raise the limit with --max-file-size)")


def decode_source(path: str, data: bytes) -> SourceText:
    """Decode source bytes the way Python does; errors name the line and column."""
    try:
        encoding, _ = tokenize.detect_encoding(io.BytesIO(data).readline)
    except SyntaxError as error:
        raise SourceError(error.msg, error.lineno or 1) from None
    try:
        text = data.decode(encoding)
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        line_start = data.rfind(b"\n", 0, error.start) + 1
        column = len(data[line_start : error.start].decode(encoding, errors="replace")) + 1
        raise SourceError(f"cannot decode as {encoding}: invalid byte 0x{data[error.start]:02x}", line, column) from None
    except LookupError:
        raise SourceError(f"unknown encoding {encoding!r}") from None
    nul = text.find("\0")
    if nul >= 0:
        line = len(_NEWLINE.findall(text, 0, nul)) + 1
        column = nul - max(text.rfind("\n", 0, nul), text.rfind("\r", 0, nul))
        raise SourceError("file contains a NUL byte", line, column)
    return text_source(path, text, encoding)


def text_digest(text: str) -> str:
    """The digest that tells whether a file still holds the text analysed."""
    return hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()


def text_source(path: str, text: str, encoding: str = "utf-8") -> SourceText:
    """A SourceText for text already decoded (an editor's buffer, a rewritten file)."""
    return SourceText(path=path, text=text, encoding=encoding, lines=tuple(_split_lines(text)))


def _split_lines(text: str) -> list[str]:
    """Lines with their terminators, split where Python's tokenizer splits them (at \\r\\n, \\r
    and \\n only: `str.splitlines` also splits at form feeds and Unicode separators)."""
    if _OTHER_BREAKS.search(text) is None:
        lines = text.splitlines(keepends=True)
        if not lines or lines[-1].endswith(("\n", "\r")):
            lines.append("")
        return lines
    lines = []
    start = 0
    for match in _NEWLINE.finditer(text):
        lines.append(text[start : match.end()])
        start = match.end()
    lines.append(text[start:])
    return lines


def parse_tree(source: SourceText) -> ast.Module:
    """Parse with `ast`; syntax errors and overly deep nesting become SourceError."""
    try:
        return ast.parse(source.text, filename=source.path)
    except SyntaxError as error:
        message = error.msg or "invalid syntax"
        raise SourceError(f"syntax error: {message}", error.lineno or 1, error.offset or 1) from None
    except (RecursionError, MemoryError):
        raise SourceError("nesting too deep to parse") from None
