"""Turn an `ast` expression of a filter into predicate IR, noting what keeps it from moving.

Two dialects share one converter: Python masks and lambdas (`d.a > 1`, `&`, `|`, `~`), where
columns are read from a named frame, and pandas query text (`a > 1 and b in [1, 2]`), where bare
names are columns and `@x` is a local. Anything not understood becomes an `Opaque` node holding
its source text, with a barrier saying why.
"""

from __future__ import annotations

import ast
from collections.abc import Callable
from dataclasses import dataclass, field

from chainlint.model import Barrier
from chainlint.find.bindings import Resolved, dotted_name
from chainlint.find.barriers import (
    FRAME_ATTRIBUTES,
    NOT_COLUMNS,
    frame_reason,
    is_frame_method,
)
from chainlint.ir import (
    PREDICATE_TYPES,
    Arith,
    Column,
    Literal,
    Member,
    Named,
    Node,
    Not,
    NullTest,
    Opaque,
    Range,
    StrTest,
    make_and,
    make_compare,
    make_or,
)
from chainlint.ir.nodes import INCLUSIVE

_COMPARE = {ast.Eq: "==", ast.NotEq: "!=", ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">="}
_ARITH = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.FloorDiv: "//", ast.Mod: "%", ast.Pow: "**"}
_NULL_METHODS = {"isna": False, "isnull": False, "notna": True, "notnull": True}
#: Positional parameters after the pattern, per `.str` method (pandas 3 signatures).
_STR_PARAMS = {
    "startswith": ("na",),
    "endswith": ("na",),
    "contains": ("case", "flags", "na", "regex"),
    "match": ("case", "flags", "na"),
    "fullmatch": ("case", "flags", "na"),
}


class _Frame(Node):
    """Marker for the bare frame itself (as in `d > 0`): never part of a finished predicate."""

    __slots__ = ()


FRAME = _Frame()


@dataclass(frozen=True)
class Dialect:
    """How names resolve while converting one predicate.

    `frame`: the (dotted) name that denotes the frame being filtered (Python dialect), or None;
    `foreign`: names of other frames of the chain, whose columns a step must not read;
    `query`: pandas query dialect (bare names are columns); `columns` and `locals` map the
    placeholders the query reader put in for backtick names and `@names`;
    `pandas`: names bound to the pandas module; `pandas_functions`: names imported from it.
    """

    frame: str | None = None
    foreign: frozenset[str] = frozenset()
    query: bool = False
    columns: dict[str, str] = field(default_factory=dict)
    locals: dict[str, str] = field(default_factory=dict)
    pandas: frozenset[str] = frozenset()
    pandas_functions: dict[str, str] = field(default_factory=dict)
    #: What a name of the code holds (for column names held in constants), when known.
    resolve: Callable[[str], Resolved] | None = None


@dataclass
class Converted:
    """A converted predicate and what the conversion learned about it."""

    node: Node
    barriers: list[Barrier]
    frame_wide: bool

    @property
    def barrier(self) -> Barrier | None:
        """The most telling barrier: one that reads the frame beats one not understood."""
        for barrier in self.barriers:
            if barrier.kind == "frame":
                return barrier
        return self.barriers[0] if self.barriers else None


def convert(expr: ast.expr, dialect: Dialect, text_of: Callable[[ast.AST], str]) -> Converted:
    """Convert a filter expression; `text_of` gives the source text of a node (for opaque parts)."""
    converter = _Converter(dialect, text_of)
    node = converter.expr(expr)
    if node is FRAME:
        converter.frame_wide = True
        node = Opaque(text_of(expr))
        converter.opaque("compares the whole frame, not a column")
    if not isinstance(node, PREDICATE_TYPES) and not converter.barriers:
        converter.opaque("its result may not be a boolean mask")
    return Converted(node, converter.barriers, converter.frame_wide)


def is_predicate(node: Node) -> bool:
    return isinstance(node, PREDICATE_TYPES)


class _Converter:
    def __init__(self, dialect: Dialect, text_of: Callable[[ast.AST], str]) -> None:
        self.dialect = dialect
        self.text_of = text_of
        self.barriers: list[Barrier] = []
        self.frame_wide = False

    # -- barriers -------------------------------------------------------------------------
    def opaque(self, reason: str) -> None:
        self.barriers.append(Barrier("opaque", reason))

    def depends(self, reason: str) -> None:
        self.barriers.append(Barrier("frame", reason))

    def unknown(self, expr: ast.AST, reason: str) -> Opaque:
        self.opaque(reason)
        return Opaque(self.text_of(expr))

    # -- dispatch -------------------------------------------------------------------------
    def expr(self, expr: ast.expr) -> Node:
        method = getattr(self, "on_" + type(expr).__name__, None)
        if method is None:
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not understood")
        return method(expr)

    def value(self, expr: ast.expr) -> Node:
        """An operand of a comparison or arithmetic: anything but a mask or the whole frame."""
        node = self.expr(expr)
        if node is FRAME:
            self.frame_wide = True
            return self.unknown(expr, "compares the whole frame, not a column")
        if is_predicate(node):
            return self.unknown(expr, "compares the result of a comparison")
        return node

    def mask(self, expr: ast.expr) -> Node:
        """An operand of `&`, `|`, `~`, `and`, `or`, `not`: must itself be a mask."""
        node = self.expr(expr)
        if node is FRAME:
            self.frame_wide = True
            return self.unknown(expr, "combines the whole frame, not a column")
        if not is_predicate(node) and not isinstance(node, Opaque):
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` may not be a boolean mask")
        return node

    # -- leaves ---------------------------------------------------------------------------
    def on_Constant(self, expr: ast.Constant) -> Node:
        if expr.value is None or isinstance(expr.value, (str, int, float, bool)):
            return Literal(expr.value)
        return self.unknown(expr, f"the literal `{_clip(self.text_of(expr))}` is not modelled")

    def on_Name(self, expr: ast.Name) -> Node:
        name = expr.id
        if self.dialect.query:
            if name in self.dialect.columns:
                return Column(self.dialect.columns[name])
            if name in self.dialect.locals:
                return Named(self.dialect.locals[name])
            if name in ("index", "ilevel_0"):
                self.depends("may read the index (`index` in a query)")
                return Opaque(name)
            return Column(name)
        if name == self.dialect.frame:
            return FRAME
        if name in self.dialect.foreign:
            return self.foreign(expr, name)
        return Named(name)

    def foreign(self, expr: ast.expr, name: str) -> Opaque:
        self.barriers.append(Barrier("foreign", f"reads another frame, `{name}`"))
        return Opaque(self.text_of(expr))

    def is_frame(self, expr: ast.expr) -> bool:
        return not self.dialect.query and self.dialect.frame is not None and dotted_name(expr) == self.dialect.frame

    def on_Attribute(self, expr: ast.Attribute) -> Node:
        base = expr.value
        if self.is_frame(expr):
            return FRAME
        if self.is_frame(base):
            if expr.attr in FRAME_ATTRIBUTES:
                self.depends(FRAME_ATTRIBUTES[expr.attr])
                return Opaque(self.text_of(expr))
            if expr.attr in NOT_COLUMNS or expr.attr.startswith("__"):
                return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not a column")
            return Column(expr.attr)
        dotted = dotted_name(expr)
        if dotted is not None:
            head, _, rest = dotted.partition(".")
            if self.dialect.query and head in self.dialect.locals:
                return Named(self.dialect.locals[head] + "." + rest)
            if not self.dialect.query:
                for prefix in _prefixes(dotted):
                    if prefix in self.dialect.foreign:
                        return self.foreign(expr, prefix)
                if not any(p == self.dialect.frame for p in _prefixes(dotted)):
                    return Named(dotted)
        inner = self.expr(base)
        if inner is FRAME or inner.columns():
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not modelled")
        return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not understood")

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
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not a single column")
        return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not modelled")

    def on_UnaryOp(self, expr: ast.UnaryOp) -> Node:
        if isinstance(expr.op, (ast.USub, ast.UAdd)) and isinstance(expr.operand, ast.Constant):
            value = expr.operand.value
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                return Literal(-value if isinstance(expr.op, ast.USub) else value)
        if isinstance(expr.op, ast.Invert) or (isinstance(expr.op, ast.Not) and self.dialect.query):
            return _negate(self.mask(expr.operand))
        if isinstance(expr.op, ast.Not):
            return self.unknown(expr, "`not` on a Series is a truth test, not a mask")
        return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not modelled")

    def on_BoolOp(self, expr: ast.BoolOp) -> Node:
        if not self.dialect.query:
            return self.unknown(expr, "`and`/`or` on a Series is a truth test, not a mask")
        parts = [self.mask(value) for value in expr.values]
        return make_and(parts) if isinstance(expr.op, ast.And) else make_or(parts)

    def on_BinOp(self, expr: ast.BinOp) -> Node:
        if isinstance(expr.op, (ast.BitAnd, ast.BitOr)):
            left, right = self.expr(expr.left), self.expr(expr.right)
            if all(is_predicate(n) or isinstance(n, Opaque) for n in (left, right)):
                return make_and([left, right]) if isinstance(expr.op, ast.BitAnd) else make_or([left, right])
            if FRAME in (left, right):
                self.frame_wide = True
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is bitwise arithmetic, not a mask")
        op = _ARITH.get(type(expr.op))
        if op is None:
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not modelled")
        return Arith(op, self.value(expr.left), self.value(expr.right))

    def on_Compare(self, expr: ast.Compare) -> Node:
        if len(expr.ops) > 1 and not self.dialect.query:
            # Python evaluates `a < b < c` as `a < b and b < c`: the truth value of a Series raises.
            return self.unknown(expr, "a chained comparison raises on a Series (`and` asks for one truth value)")
        parts: list[Node] = []
        left_expr = expr.left
        for op, right_expr in zip(expr.ops, expr.comparators):
            parts.append(self.compare_pair(left_expr, op, right_expr))
            left_expr = right_expr
        return make_and(parts)

    def compare_pair(self, left_expr: ast.expr, op: ast.cmpop, right_expr: ast.expr) -> Node:
        symbol = _COMPARE.get(type(op))
        if self.dialect.query and isinstance(op, (ast.In, ast.NotIn)):
            return self.membership(left_expr, right_expr, isinstance(op, ast.NotIn))
        if self.dialect.query and symbol in ("==", "!=") and isinstance(right_expr, (ast.List, ast.Tuple)):
            return self.membership(left_expr, right_expr, symbol == "!=")
        if symbol is None:
            return self.unknown(left_expr, f"`{type(op).__name__}` comparison is not a row-wise mask")
        return make_compare(symbol, self.value(left_expr), self.value(right_expr))

    def membership(self, operand_expr: ast.expr, values_expr: ast.expr, negated: bool) -> Node:
        operand = self.value(operand_expr)
        values = self.member_values(values_expr)
        if values is None:
            return Opaque(self.text_of(values_expr))
        return Member(operand, values, negated)

    def member_values(self, expr: ast.expr) -> tuple[Node, ...] | Named | None:
        if isinstance(expr, (ast.List, ast.Tuple, ast.Set)):
            values = []
            for element in expr.elts:
                node = self.expr(element)
                if not isinstance(node, (Literal, Named)):
                    self.opaque(f"the value `{_clip(self.text_of(element))}` is not a literal or a name")
                    return None
                values.append(node)
            return tuple(values)
        node = self.expr(expr)
        if isinstance(node, Named):
            return node
        if isinstance(node, Column):
            self.opaque("membership in another column is not modelled")
        elif not self.barriers:
            self.opaque(f"the values `{_clip(self.text_of(expr))}` are not a list or a name")
        return None

    # -- calls ----------------------------------------------------------------------------
    def on_Call(self, expr: ast.Call) -> Node:
        func = expr.func
        if isinstance(func, ast.Name):
            return self.function_call(expr, func.id)
        if not isinstance(func, ast.Attribute):
            return self.unknown(expr, f"`{_clip(self.text_of(expr))}` is not understood")
        method = func.attr
        receiver = func.value
        if isinstance(receiver, ast.Name) and receiver.id in self.dialect.pandas and not self.dialect.query:
            return self.function_call(expr, "pandas." + method)
        if isinstance(receiver, ast.Attribute) and receiver.attr == "str" and method in _STR_PARAMS:
            return self.string_test(expr, self.value(receiver.value), method)
        target = self.expr(receiver)
        reads_frame = target is FRAME or bool(target.columns())
        if reads_frame and is_frame_method(method):
            self.depends(frame_reason(method, _describe(target)))
            return Opaque(self.text_of(expr))
        if target is FRAME:
            return self.unknown(expr, f"calls `{method}` on the frame, which chainlint does not model")
        if isinstance(target, Column) or (isinstance(target, Arith) and reads_frame):
            return self.series_method(expr, target, method)
        return self.unknown(expr, f"calls `{_clip(self.text_of(func))}`, which chainlint does not know")

    def function_call(self, expr: ast.Call, name: str) -> Node:
        qualified = self.dialect.pandas_functions.get(name, name)
        if qualified.startswith("pandas.") and qualified[7:] in _NULL_METHODS and len(expr.args) == 1 and not expr.keywords:
            operand = self.value(expr.args[0])
            return self.null_test(expr, operand, _NULL_METHODS[qualified[7:]])
        if name == "len" and len(expr.args) == 1:
            target = self.expr(expr.args[0])
            if target is FRAME or target.columns():
                self.depends("reads the number of rows it receives")
                return Opaque(self.text_of(expr))
        return self.unknown(expr, f"calls `{_clip(self.text_of(expr.func))}`, which chainlint does not know")

    def series_method(self, expr: ast.Call, target: Node, method: str) -> Node:
        if method in _NULL_METHODS and not expr.args and not expr.keywords:
            return self.null_test(expr, target, _NULL_METHODS[method])
        if method == "isin" and len(expr.args) == 1 and not expr.keywords:
            values = self.member_values(expr.args[0])
            if values is None:
                return Opaque(self.text_of(expr))
            return self.column_only(expr, target, Member(target, values))
        if method == "between":
            return self.between(expr, target)
        return self.unknown(expr, f"calls `{method}`, which chainlint does not model")

    def null_test(self, expr: ast.Call, operand: Node, negated: bool) -> Node:
        return self.column_only(expr, operand, NullTest(operand, negated))

    def column_only(self, expr: ast.Call, operand: Node, node: Node) -> Node:
        if isinstance(operand, Column):
            return node
        return self.unknown(expr, f"`{_clip(self.text_of(expr))}` tests something other than a column")

    def between(self, expr: ast.Call, target: Node) -> Node:
        args = list(expr.args)
        keywords = {k.arg: k.value for k in expr.keywords if k.arg is not None}
        if len(expr.keywords) != len(keywords) or len(args) > 3:
            return self.unknown(expr, "`between` with unpacked arguments is not modelled")
        names = ("left", "right", "inclusive")
        for name, arg in zip(names, args):
            keywords.setdefault(name, arg)
        if set(keywords) - set(names) or "left" not in keywords or "right" not in keywords:
            return self.unknown(expr, "`between` arguments are not understood")
        inclusive = "both"
        if "inclusive" in keywords:
            given = keywords["inclusive"]
            if not (isinstance(given, ast.Constant) and given.value in INCLUSIVE):
                return self.unknown(expr, "`between` with a computed `inclusive` is not modelled")
            inclusive = given.value
        low, high = self.value(keywords["left"]), self.value(keywords["right"])
        return self.column_only(expr, target, Range(target, low, high, inclusive))

    def string_test(self, expr: ast.Call, operand: Node, method: str) -> Node:
        params = ("pat",) + _STR_PARAMS[method]
        if len(expr.args) > len(params) or any(k.arg is None for k in expr.keywords):
            return self.unknown(expr, f"`.str.{method}` arguments are not understood")
        given = dict(zip(params, expr.args))
        for keyword in expr.keywords:
            if keyword.arg not in params or keyword.arg in given:
                return self.unknown(expr, f"`.str.{method}` argument `{keyword.arg}` is not understood")
            given[keyword.arg] = keyword.value
        if "pat" not in given:
            return self.unknown(expr, f"`.str.{method}` without a pattern is not understood")
        pattern = self.expr(given.pop("pat"))
        if not isinstance(pattern, (Literal, Named)):
            return self.unknown(expr, f"the pattern of `.str.{method}` is not a literal or a name")
        options = []
        for key in sorted(given):
            value = self.expr(given[key])
            if not isinstance(value, (Literal, Named)):
                return self.unknown(expr, f"`{key}=` of `.str.{method}` is not a literal or a name")
            options.append((key, value))
        return self.column_only(expr, operand, StrTest(operand, method, pattern, tuple(options)))


def _negate(node: Node) -> Node:
    """`~` / `not`, folding `~isin` into `not in` (pandas evaluates `not in` as `~isin`)."""
    if isinstance(node, Member) and not node.negated:
        return Member(node.operand, node.values, True)
    return Not(node)




def _prefixes(dotted: str) -> list[str]:
    """`a`, `a.b` for `a.b.c`: the names a dotted attribute chain is read from."""
    parts = dotted.split(".")
    return [".".join(parts[:i]) for i in range(1, len(parts))]


def _describe(target: Node) -> str:
    if isinstance(target, Column):
        return f"`{target.name}`"
    if target is FRAME:
        return "the frame"
    columns = sorted(target.columns())
    return ", ".join(f"`{c}`" for c in columns) if columns else "its input"


def _clip(text: str, limit: int = 60) -> str:
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 1] + "…"
