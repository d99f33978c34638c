"""The calls a filter may make, in both dialects: null tests, `isin`, `between`, `.str` tests,
pandas functions, and the frame-dependent calls that keep a step in place.

A mixin of the converter (`predicates.Converter`): it reads the operands through the
converter's own `expr` / `value` and records barriers through `unknown` / `depends`.
"""

from __future__ import annotations

import ast
from collections.abc import Callable

from chainlint.find.barriers import frame_reason, is_frame_method
from chainlint.find.converted import FRAME, Dialect, clip
from chainlint.ir import Arith, Column, Literal, Member, Named, Node, NullTest, Opaque, Range, StrTest
from chainlint.ir.nodes import INCLUSIVE

NULL_METHODS = {"isna": False, "isnull": False, "notna": True, "notnull": True}
#: Positional parameters after the pattern, per `.str` method (pandas 3 signatures).
_STR_PARAMS = {
    "startswith": ("na",),
    "endswith": ("na",),
    "contains": ("case", "flags", "na", "regex"),
    "match": ("case", "flags", "na"),
    "fullmatch": ("case", "flags", "na"),
}


class Calls:
    """Conversion of `ast.Call` nodes; the converter provides `expr`, `value`, `unknown`,
    `depends` and `member_values`."""

    dialect: Dialect
    text_of: Callable[[ast.AST], str]

    def pandas_module(self, receiver: ast.expr) -> bool:
        """Whether a call's receiver is the pandas module (`pd.isna(...)`)."""
        return isinstance(receiver, ast.Name) and receiver.id in self.dialect.pandas

    def on_Call(self, expr: ast.Call) -> Node:
        func = expr.func
        if isinstance(func, ast.Name):
            return self.function_call(expr, func.id)
        if not isinstance(func, ast.Attribute):
            return self.unknown(expr, f"`{clip(self.text_of(expr))}` is not understood")
        method = func.attr
        receiver = func.value
        if self.pandas_module(receiver):
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
        return self.unknown(expr, f"calls `{clip(self.text_of(func))}`, which chainlint does not know")

    def function_call(self, expr: ast.Call, name: str) -> Node:
        qualified = self.dialect.pandas_functions.get(name, name)
        if qualified.startswith("pandas.") and qualified[7:] in NULL_METHODS and len(expr.args) == 1 and not expr.keywords:
            operand = self.value(expr.args[0])
            return self.null_test(expr, operand, NULL_METHODS[qualified[7:]])
        if name == "len" and len(expr.args) == 1:
            target = self.expr(expr.args[0])
            if target is FRAME or target.columns():
                self.depends("reads the number of rows it receives")
                return Opaque(self.text_of(expr))
        return self.unknown(expr, f"calls `{clip(self.text_of(expr.func))}`, which chainlint does not know")

    def series_method(self, expr: ast.Call, target: Node, method: str) -> Node:
        if method in NULL_METHODS and not expr.args and not expr.keywords:
            return self.null_test(expr, target, NULL_METHODS[method])
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
        return self.unknown(expr, f"`{clip(self.text_of(expr))}` tests something other than a column")

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


def _describe(target: Node) -> str:
    if isinstance(target, Column):
        return f"`{target.name}`"
    if target is FRAME:
        return "the frame"
    columns = sorted(target.columns())
    return ", ".join(f"`{c}`" for c in columns) if columns else "its input"
