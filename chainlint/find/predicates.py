"""Turn an `ast` expression of a filter into predicate IR, noting what keeps it from moving.

This is the Python dialect of masks and lambdas (`d.a > 1`, `&`, `|`, `~`), where columns are
read from a named frame; `query.py` reads pandas query text with a subclass of the same
converter, and `calls.py` holds the calls both dialects know. Anything not understood becomes
an `Opaque` node holding its source text, with a barrier saying why.
"""

from __future__ import annotations

import ast
from collections.abc import Callable

from chainlint.model import Barrier, BarrierKind
from chainlint.find.barriers import DATAFRAME_ATTRIBUTES, FRAME_ATTRIBUTES, NOT_COLUMNS
from chainlint.find.bindings import dotted_name
from chainlint.find.calls import Calls
from chainlint.find.converted import FRAME, Converted, Dialect, clip, is_predicate
from chainlint.ir import (
    Arith,
    Column,
    Literal,
    Member,
    Named,
    Node,
    Not,
    Opaque,
    make_and,
    make_compare,
    make_or,
)

_COMPARE = {ast.Eq: "==", ast.NotEq: "!=", ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">="}
_ARITH = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.FloorDiv: "//", ast.Mod: "%", ast.Pow: "**"}


def convert(expr: ast.expr, dialect: Dialect, text_of: Callable[[ast.AST], str]) -> Converted:
    """Convert a filter expression; `text_of` gives the source text of a node (for opaque parts)."""
    return Converter(dialect, text_of).finish(expr)


class Converter(Calls):
    """The Python dialect: a name is the frame, another frame of the chain, or a value."""

    def __init__(self, dialect: Dialect, text_of: Callable[[ast.AST], str]) -> None:
        self.dialect = dialect
        self.text_of = text_of
        self.barriers: list[Barrier] = []

    def finish(self, expr: ast.expr) -> Converted:
        node = self.expr(expr)
        if node is FRAME:
            node = Opaque(self.text_of(expr))
            self.opaque("compares the whole frame, not a column")
        if not is_predicate(node) and not self.barriers:
            self.opaque("its result may not be a boolean mask")
        return Converted(node, self.barriers)

    # -- barriers -------------------------------------------------------------------------
    def opaque(self, reason: str) -> None:
        self.barriers.append(Barrier(BarrierKind.OPAQUE, reason))

    def depends(self, reason: str) -> None:
        self.barriers.append(Barrier(BarrierKind.FRAME, reason))

    def unknown(self, expr: ast.AST, reason: str) -> Opaque:
        self.opaque(reason)
        return Opaque(self.text_of(expr))

    # -- dispatch -------------------------------------------------------------------------
    def expr(self, expr: ast.expr) -> Node:
        method = getattr(self, "on_" + type(expr).__name__, None)
        if method is None:
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not understood")
        return method(expr)

    def value(self, expr: ast.expr) -> Node:
        """An operand of a comparison or arithmetic: anything but a mask or the whole frame."""
        node = self.expr(expr)
        if node is FRAME:
            return self.unknown(expr, "compares the whole frame, not a column")
        if is_predicate(node):
            return self.unknown(expr, "compares the result of a comparison")
        return node

    def mask(self, expr: ast.expr) -> Node:
        """An operand of `&`, `|`, `~`, `and`, `or`, `not`: must itself be a mask."""
        node = self.expr(expr)
        if node is FRAME:
            return self.unknown(expr, "combines the whole frame, not a column")
        if not is_predicate(node) and not isinstance(node, Opaque):
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` may not be a boolean mask")
        return node

    # -- leaves ---------------------------------------------------------------------------
    def on_Constant(self, expr: ast.Constant) -> Node:
        if expr.value is None or isinstance(expr.value, (str, int, float, bool)):
            return Literal(expr.value)
        return self.unknown(expr, f"the literal `{clip(self.text_of(expr))}` is not modelled")

    def on_Name(self, expr: ast.Name) -> Node:
        name = expr.id
        if name == self.dialect.frame:
            return FRAME
        if name in self.dialect.foreign:
            return self.foreign(expr, name)
        return Named(name)

    def foreign(self, expr: ast.expr, name: str) -> Opaque:
        self.barriers.append(Barrier(BarrierKind.FOREIGN, f"reads another frame, `{name}`"))
        return Opaque(self.text_of(expr))

    def is_frame(self, expr: ast.expr) -> bool:
        return self.dialect.frame is not None and dotted_name(expr) == self.dialect.frame

    def on_Attribute(self, expr: ast.Attribute) -> Node:
        base = expr.value
        if self.is_frame(expr):
            return FRAME
        if self.is_frame(base):
            if expr.attr in FRAME_ATTRIBUTES:
                self.depends(FRAME_ATTRIBUTES[expr.attr])
                return Opaque(self.text_of(expr))
            if expr.attr in NOT_COLUMNS or expr.attr.startswith("__"):
                return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not a column")
            if expr.attr in DATAFRAME_ATTRIBUTES:
                return self.unknown(expr, f"`{clip(self.text_of(expr))}` is an attribute of every DataFrame, not a column (`[\"{expr.attr}\"]` reads the column)")
            return Column(expr.attr)
        dotted = dotted_name(expr)
        if dotted is not None:
            named = self.dotted(dotted, expr)
            if named is not None:
                return named
        inner = self.expr(base)
        if inner is FRAME or inner.columns():
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not modelled")
        return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not understood")

    def dotted(self, dotted: str, expr: ast.expr) -> Node | None:
        """A dotted name that is not an attribute of the frame: another frame's, or a value."""
        for prefix in _prefixes(dotted):
            if prefix in self.dialect.foreign:
                return self.foreign(expr, prefix)
        if any(p == self.dialect.frame for p in _prefixes(dotted)):
            return None
        return Named(dotted)

    def on_Subscript(self, expr: ast.Subscript) -> Node:
        key = expr.slice
        if self.is_frame(expr.value) and isinstance(key, ast.Constant) and isinstance(key.value, str):
            return Column(key.value)
        named = dotted_name(key)
        if self.is_frame(expr.value) and named is not None and self.dialect.resolve is not None:
            found = self.dialect.resolve(named)
            if found.kind == "value" and isinstance(found.value, str):
                return Column(found.value)
            return self.unknown(expr, f"the column is named by `{named}`, known only when the code runs")
        inner = self.expr(expr.value)
        if inner is FRAME:
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not a single column")
        return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not modelled")

    def on_UnaryOp(self, expr: ast.UnaryOp) -> Node:
        if isinstance(expr.op, (ast.USub, ast.UAdd)) and isinstance(expr.operand, ast.Constant):
            value = expr.operand.value
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                return Literal(-value if isinstance(expr.op, ast.USub) else value)
        if isinstance(expr.op, ast.Invert):
            return negate(self.mask(expr.operand))
        if isinstance(expr.op, ast.Not):
            return self.unknown(expr, "`not` on a Series is a truth test, not a mask")
        return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not modelled")

    def on_BoolOp(self, expr: ast.BoolOp) -> Node:
        return self.unknown(expr, "`and`/`or` on a Series is a truth test, not a mask")

    def on_BinOp(self, expr: ast.BinOp) -> Node:
        if isinstance(expr.op, (ast.BitAnd, ast.BitOr)):
            left, right = self.expr(expr.left), self.expr(expr.right)
            if all(is_predicate(n) or isinstance(n, Opaque) for n in (left, right)):
                return make_and([left, right]) if isinstance(expr.op, ast.BitAnd) else make_or([left, right])
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` is bitwise arithmetic, not a mask")
        op = _ARITH.get(type(expr.op))
        if op is None:
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not modelled")
        return Arith(op, self.value(expr.left), self.value(expr.right))

    def on_Compare(self, expr: ast.Compare) -> Node:
        if len(expr.ops) > 1:
            # Python evaluates `a < b < c` as `a < b and b < c`: the truth value of a Series raises.
            return self.unknown(expr, "a chained comparison raises on a Series (`and` asks for one truth value)")
        return self.compare_pair(expr.left, expr.ops[0], expr.comparators[0])

    def compare_pair(self, left_expr: ast.expr, op: ast.cmpop, right_expr: ast.expr) -> Node:
        symbol = _COMPARE.get(type(op))
        if symbol is None:
            return self.unknown(left_expr, f"`{type(op).__name__}` comparison is not a row-wise mask")
        return make_compare(symbol, self.value(left_expr), self.value(right_expr))

    def member_values(self, expr: ast.expr) -> tuple[Node, ...] | Named | None:
        if isinstance(expr, (ast.List, ast.Tuple, ast.Set)):
            values = []
            for element in expr.elts:
                node = self.expr(element)
                if not isinstance(node, (Literal, Named)):
                    self.opaque(f"the value `{clip(self.text_of(element))}` is not a literal or a name")
                    return None
                values.append(node)
            return tuple(values)
        node = self.expr(expr)
        if isinstance(node, Named):
            return node
        if isinstance(node, Column):
            self.opaque("membership in another column is not modelled")
        elif not self.barriers:
            self.opaque(f"the values `{clip(self.text_of(expr))}` are not a list or a name")
        return None


def negate(node: Node) -> Node:
    """`~` / `not`, folding `~isin` into `not in` (pandas evaluates `not in` as `~isin`)."""
    if isinstance(node, Member) and not node.negated:
        return Member(node.operand, node.values, True)
    return Not(node)


def _prefixes(dotted: str) -> list[str]:
    """`a`, `a.b` for `a.b.c`: the names a dotted attribute chain is read from."""
    parts = dotted.split(".")
    return [".".join(parts[:i]) for i in range(1, len(parts))]
