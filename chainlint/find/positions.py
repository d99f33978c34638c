"""Where the finder's nodes sit in the source: their text on one line, their spans in character
columns, and a step's span from the `.` or `[` that opens it."""

from __future__ import annotations

import ast

from chainlint.model import Span
from chainlint.parse.source import SourceText


class Positions:
    """Text and spans of `ast` nodes of one source."""

    def __init__(self, source: SourceText) -> None:
        self.source = source

    def text_of(self, node: ast.AST) -> str:
        text = self.source.segment(
            (node.lineno, node.col_offset),  # type: ignore[attr-defined]
            (node.end_lineno, node.end_col_offset),  # type: ignore[attr-defined]
        )
        return " ".join(text.split())

    def node_span(self, node: ast.AST) -> Span:
        source = self.source
        return Span(
            node.lineno,  # type: ignore[attr-defined]
            source.column(node.lineno, node.col_offset),  # type: ignore[attr-defined]
            node.end_lineno,  # type: ignore[attr-defined]
            source.column(node.end_lineno, node.end_col_offset),  # type: ignore[attr-defined]
        )

    def step_span(self, inner: ast.expr, node: ast.expr) -> Span:
        """From the `.` or `[` that opens a step (after `inner`, what it filters) to its end."""
        source = self.source
        offset = source.offset(inner.end_lineno, inner.end_col_offset)  # type: ignore[arg-type]
        text = source.text
        while offset < len(text):
            char = text[offset]
            if char in ".[":
                break
            if char == "#":  # a comment runs to the line break, whichever the file uses
                breaks = [i for i in (text.find("\n", offset), text.find("\r", offset)) if i >= 0]
                offset = min(breaks) if breaks else len(text)
                continue
            offset += 1
        line, column = source.position(offset)
        end = self.node_span(node)
        return Span(line, column, end.end_line, end.end_column)
