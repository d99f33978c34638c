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

    def string_part(self, literal: ast.Constant, start: int, end: int) -> Span | None:
        """The span of characters `start:end` of a string literal's value, when the literal is
        written as its value between quotes (no escapes, no implicit concatenation); else None."""
        source = self.source
        first = source.offset(literal.lineno, literal.col_offset)
        last = source.offset(literal.end_lineno, literal.end_col_offset)  # type: ignore[arg-type]
        written = source.text[first:last]
        prefix = len(written) - len(written.lstrip("rRuU"))
        quote = written[prefix : prefix + 3] if written[prefix : prefix + 3] in ('"""', "'''") else written[prefix : prefix + 1]
        if written[prefix + len(quote) : len(written) - len(quote)] != literal.value:
            return None
        opening = first + prefix + len(quote)
        line, column = source.position(opening + start)
        end_line, end_column = source.position(opening + end)
        return Span(line, column, end_line, end_column)
