"""Parse a new text of a document by parsing again only the top-level statements an edit touched.

The lines the new text shares with the last one at its start and at its end are found; the
top-level statements around the changed lines (with one neighbour on each side, and any
statement sharing a line with them) are cut out as a region of whole lines, which starts and
ends where a top-level statement starts and ends in both texts. When that region parses on its
own, the module is the statements before it, the region's and the statements after it (moved
by the lines the edit added or removed), exactly what parsing the whole text gives; when it
does not (an unclosed bracket or string, a decorator left alone, a `__future__` import), the
whole text is parsed.

Moving a statement moves its own line numbers and its decorators' at once, and the nodes inside
it only when `settle` is asked for them (before the finder walks it): most statements of a long
document are never walked again, and moving every node would cost as much as parsing.
"""

from __future__ import annotations

import ast

from chainlint.parse.source import SourceText, parse_tree


class Reparser:
    """Keeps the last text's lines and top-level statements (not thread-safe: one caller)."""

    def __init__(self) -> None:
        self._lines: tuple[str, ...] = ()
        self._body: list[ast.stmt] | None = None
        self._pending: dict[int, int] = {}  # id of a statement in the body: lines its inside must still move

    def parse(self, source: SourceText) -> ast.Module:
        """The module of `source`; SourceError as `parse_tree` raises it."""
        tree = None if self._body is None else self._reparse(source)
        if tree is None:
            self._body, self._pending = None, {}
            tree = parse_tree(source)
        self._lines, self._body = source.lines, list(tree.body)
        self._pending = {id(s): self._pending[id(s)] for s in self._body if id(s) in self._pending}
        return tree

    def settle(self, statements: list[ast.stmt]) -> None:
        """Move the insides of these top-level statements to their lines, where still due."""
        for statement in statements:
            delta = self._pending.pop(id(statement), 0)
            if not delta:
                continue
            decorators = {id(d) for d in getattr(statement, "decorator_list", ())}
            stack = [child for child in ast.iter_child_nodes(statement) if id(child) not in decorators]
            while stack:
                node = stack.pop()
                _move(node, delta)
                stack.extend(ast.iter_child_nodes(node))

    def _reparse(self, source: SourceText) -> ast.Module | None:
        old, new, body = self._lines, source.lines, self._body
        if not body:
            return None
        limit = min(len(old), len(new))
        same_start = 0
        while same_start < limit and old[same_start] == new[same_start]:
            same_start += 1
        same_end = 0
        while same_end < limit - same_start and old[-1 - same_end] == new[-1 - same_end]:
            same_end += 1
        if same_start == len(old) == len(new):
            return ast.Module(body=list(body), type_ignores=[])
        changed_first, changed_last = same_start + 1, len(old) - same_end  # 1-based, old text
        starts = [_first_line(statement) for statement in body]
        # The statement before the change (or holding its first line) to the one after it.
        first = max(0, max((i for i, line in enumerate(starts) if line < changed_first), default=0) - 1)
        last = min(len(body) - 1, min((i for i, s in enumerate(body) if (s.end_lineno or 0) > changed_last), default=len(body) - 1) + 1)
        while first > 0 and (body[first - 1].end_lineno or 0) >= starts[first]:
            first -= 1
        while last + 1 < len(body) and starts[last + 1] <= (body[last].end_lineno or 0):
            last += 1
        region_first = 1 if first == 0 else starts[first]
        region_last_old = len(old) if last == len(body) - 1 else (body[last].end_lineno or 0)
        delta = len(new) - len(old)
        text = "".join(new[region_first - 1 : region_last_old + delta])
        if "__future__" in text:
            return None
        try:
            region = ast.parse(text)
        except (SyntaxError, RecursionError, MemoryError, ValueError):
            return None
        ast.increment_lineno(region, region_first - 1)
        after = body[last + 1 :]
        if delta:
            for statement in after:
                _move(statement, delta)
                for decorator in getattr(statement, "decorator_list", ()):
                    ast.increment_lineno(decorator, delta)
                self._pending[id(statement)] = self._pending.get(id(statement), 0) + delta
        return ast.Module(body=body[:first] + list(region.body) + after, type_ignores=[])


def _move(node: ast.AST, delta: int) -> None:
    if "lineno" in node._attributes:
        node.lineno += delta  # type: ignore[attr-defined]
        if getattr(node, "end_lineno", None) is not None:
            node.end_lineno += delta  # type: ignore[attr-defined]


def _first_line(statement: ast.stmt) -> int:
    decorators = getattr(statement, "decorator_list", ())
    return min([statement.lineno] + [d.lineno for d in decorators])

