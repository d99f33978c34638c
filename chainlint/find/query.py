"""Read the text of `DataFrame.query` into predicate IR.

pandas query syntax is Python expression syntax plus backtick-quoted column names, `@name`
locals, and `&` / `|` with the precedence of `and` / `or`. We replace those lexically with
placeholders (outside string literals), parse with `ast` in eval mode, and map positions back
so that opaque parts keep their original text. The parsed text is read by the Python dialect's
converter with the query's own name rules: a bare name is a column, `@x` a value of the code,
`and` / `or` / `not` combine masks, `in` tests membership and comparisons may be chained.
"""

from __future__ import annotations

import ast
import bisect

from collections.abc import Callable

from chainlint.model import Barrier, BarrierKind
from chainlint.find.converted import Converted, Dialect
from chainlint.find.predicates import Converter, negate
from chainlint.ir import Column, Member, Named, Node, Opaque, make_and, make_or


class _Rewritten:
    """The query text after lexical replacement, and a map back to the original offsets."""

    def __init__(self, original: str) -> None:
        self.original = original
        self.pieces: list[str] = ["("]
        self.length = 1
        # (new_start, new_end, old_start, old_end) for every piece after the opening paren.
        self.segments: list[tuple[int, int, int, int]] = []
        self.columns: dict[str, str] = {}
        self.locals: dict[str, str] = {}

    def add(self, new: str, old_start: int, old_end: int) -> None:
        self.segments.append((self.length, self.length + len(new), old_start, old_end))
        self.pieces.append(new)
        self.length += len(new)

    def text(self) -> str:
        return "".join(self.pieces) + ")"

    def original_offset(self, new_offset: int, end: bool) -> int:
        starts = [segment[0] for segment in self.segments]
        i = max(0, bisect.bisect_right(starts, new_offset - (1 if end else 0)) - 1)
        if not self.segments:
            return 0
        new_start, new_end, old_start, old_end = self.segments[i]
        if new_end - new_start == old_end - old_start:
            return old_start + min(max(new_offset - new_start, 0), old_end - old_start)
        return old_end if end else old_start


def _rewrite(query: str) -> _Rewritten:
    out = _Rewritten(query)
    i = 0
    plain_start = 0

    def flush(upto: int) -> None:
        if upto > plain_start:
            out.add(query[plain_start:upto].replace("\n", " ").replace("\r", " "), plain_start, upto)

    while i < len(query):
        char = query[i]
        if char in "'\"":
            i = _string_end(query, i)
            continue
        if char == "`":
            end = query.find("`", i + 1)
            if end < 0:
                raise SyntaxError("unclosed backtick")
            flush(i)
            placeholder = f"__chainlint_c{len(out.columns)}"
            out.columns[placeholder] = query[i + 1 : end]
            out.add(placeholder, i, end + 1)
            i = plain_start = end + 1
            continue
        if char == "@":
            end = i + 1
            while end < len(query) and (query[end].isalnum() or query[end] == "_"):
                end += 1
            flush(i)
            placeholder = f"__chainlint_l{len(out.locals)}"
            out.locals[placeholder] = query[i + 1 : end]
            out.add(placeholder, i, end)
            i = plain_start = end
            continue
        if char in "&|":
            flush(i)
            out.add(" and " if char == "&" else " or ", i, i + 1)
            i = plain_start = i + 1
            continue
        i += 1
    flush(len(query))
    return out


def _string_end(text: str, start: int) -> int:
    quote = text[start]
    if text.startswith(quote * 3, start):
        end = text.find(quote * 3, start + 3)
        return len(text) if end < 0 else end + 3
    i = start + 1
    while i < len(text):
        if text[i] == "\\":
            i += 2
            continue
        if text[i] == quote:
            return i + 1
        i += 1
    return len(text)


class _QueryConverter(Converter):
    """The query dialect: `columns` and `locals` map the placeholders the query reader put in
    for backtick names and `@names`; every other bare name is a column."""

    def __init__(self, dialect: Dialect, text_of: Callable[[ast.AST], str], columns: dict[str, str], locals: dict[str, str]) -> None:
        super().__init__(dialect, text_of)
        self.columns = columns
        self.locals = locals

    def on_Name(self, expr: ast.Name) -> Node:
        name = expr.id
        if name in self.columns:
            return Column(self.columns[name])
        if name in self.locals:
            return Named(self.locals[name])
        if name in ("index", "ilevel_0"):
            self.depends("may read the index (`index` in a query)")
            return Opaque(name)
        return Column(name)

    def is_frame(self, expr: ast.expr) -> bool:
        return False

    def pandas_module(self, receiver: ast.expr) -> bool:
        return False

    def reads_frame(self, expr: ast.expr) -> bool:
        return any(isinstance(node, ast.Name) and node.id not in self.locals for node in ast.walk(expr))

    def dotted(self, dotted: str, expr: ast.expr) -> Node | None:
        head, _, rest = dotted.partition(".")
        return Named(self.locals[head] + "." + rest) if head in self.locals else None

    def on_UnaryOp(self, expr: ast.UnaryOp) -> Node:
        if isinstance(expr.op, ast.Not):
            return negate(self.mask(expr.operand))
        return super().on_UnaryOp(expr)

    def on_BoolOp(self, expr: ast.BoolOp) -> Node:
        parts = [self.mask(value) for value in expr.values]
        return make_and(parts) if isinstance(expr.op, ast.And) else make_or(parts)

    def on_Compare(self, expr: ast.Compare) -> Node:
        parts: list[Node] = []
        left_expr = expr.left
        for op, right_expr in zip(expr.ops, expr.comparators):
            parts.append(self.compare_pair(left_expr, op, right_expr))
            left_expr = right_expr
        return make_and(parts)

    def compare_pair(self, left_expr: ast.expr, op: ast.cmpop, right_expr: ast.expr) -> Node:
        if isinstance(op, (ast.In, ast.NotIn)):
            return self.membership(left_expr, right_expr, isinstance(op, ast.NotIn))
        if isinstance(op, (ast.Eq, ast.NotEq)) and isinstance(right_expr, (ast.List, ast.Tuple)):
            return self.membership(left_expr, right_expr, isinstance(op, ast.NotEq))
        return super().compare_pair(left_expr, op, right_expr)

    def membership(self, operand_expr: ast.expr, values_expr: ast.expr, negated: bool) -> Node:
        operand = self.value(operand_expr)
        values = self.member_values(values_expr)
        if values is None:
            return Opaque(self.text_of(values_expr))
        return Member(operand, values, negated)


def convert_query(query: str, pandas: frozenset[str], pandas_functions: dict[str, str]) -> Converted:
    """Convert query text; text that does not parse, or that pandas refuses, becomes an
    opaque barrier."""
    if several_lines(query):
        return Converted(Opaque(query), [Barrier(BarrierKind.OPAQUE, "pandas refuses query text on several lines "
                                                 "(\"multi-line expressions are only valid in the context of data\"): "
                                                 "this step raises as written")])
    try:
        rewritten = _rewrite(query)
        text = rewritten.text()
        tree = ast.parse(text, mode="eval")
    except (SyntaxError, ValueError, RecursionError, MemoryError) as error:
        message = error.msg if isinstance(error, SyntaxError) else "too deeply nested"
        return Converted(Opaque(query), [Barrier(BarrierKind.OPAQUE, f"the query text does not parse: {message}")])
    encoded = text.encode("utf-8")
    ascii_text = text.isascii()

    def char_offset(byte_offset: int) -> int:
        return byte_offset if ascii_text else len(encoded[:byte_offset].decode("utf-8", errors="replace"))

    def text_of(node: ast.AST) -> str:
        start = rewritten.original_offset(char_offset(node.col_offset), end=False)
        end = rewritten.original_offset(char_offset(node.end_col_offset), end=True)
        return " ".join(query[start:end].split())

    dialect = Dialect(pandas=pandas, pandas_functions=pandas_functions)
    return _QueryConverter(dialect, text_of, rewritten.columns, rewritten.locals).finish(tree.body)


def several_lines(query: str) -> bool:
    """Whether pandas reads query text as several expressions, which `query` refuses: more
    than one line with text on it, lines split as `str.splitlines` splits them (pandas 3,
    `pandas.core.computation.eval`)."""
    return sum(1 for line in query.splitlines() if line.strip()) > 1


def query_conjuncts(query: str) -> list[tuple[int, int]] | None:
    """Where the top-level conjuncts of query text sit (`a > 1 and b < 2`, `a > 1 & b < 2`):
    0-based start and end offsets into the text, without surrounding blanks; None when the text
    is not a conjunction of two or more parts, or does not parse. Text on several lines is
    never split: pandas refuses it ("multi-line expressions are only valid in the context of
    data"), and its parts, each on one line, would not raise."""
    if several_lines(query):
        return None
    try:
        rewritten = _rewrite(query)
        text = rewritten.text()
        tree = ast.parse(text, mode="eval")
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return None
    body = tree.body
    if not (isinstance(body, ast.BoolOp) and isinstance(body.op, ast.And)) or not text.isascii():
        return None
    parts = []
    for value in body.values:
        start = rewritten.original_offset(value.col_offset, end=False)
        end = rewritten.original_offset(value.end_col_offset, end=True)
        piece = query[start:end]
        start += len(piece) - len(piece.lstrip())
        end -= len(piece) - len(piece.rstrip())
        parts.append((start, end))
    return parts

