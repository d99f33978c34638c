"""The calls a filter may make, in both dialects: null tests, `isin`, `between`, `.str` tests,
pandas functions, and the frame-dependent calls that keep a step in place.

A mixin of the converter (`predicates.Converter`): it reads the operands through the
converter's own `expr` / `value` and records barriers through `unknown` / `depends`.
"""

from __future__ import annotations

import ast
from collections.abc import Callable

from chainlint.find.barriers import frame_reason, is_frame_method
from chainlint.find.bindings import dotted_name
from chainlint.find.converted import FRAME, Dialect, clip
from chainlint.ir import Arith, Column, Literal, Member, Named, Node, NullTest, NumericTest, Opaque, Range, StrTest
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
        if method == "isin" and _dict_map(receiver) is not None:
            return self.mapped_membership(expr, receiver)
        if method in NULL_METHODS and not expr.args and not expr.keywords and self.parses_numbers(receiver):
            return self.numeric_test(expr, receiver, not NULL_METHODS[method])  # type: ignore[arg-type]
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

    def parses_numbers(self, expr: ast.expr) -> bool:
        """Whether `expr` calls pandas' `to_numeric` (`pd.to_numeric(...)`, or imported by name)."""
        if not isinstance(expr, ast.Call):
            return False
        func = expr.func
        if isinstance(func, ast.Attribute):
            return func.attr == "to_numeric" and self.pandas_module(func.value)
        return isinstance(func, ast.Name) and self.dialect.pandas_functions.get(func.id) == "pandas.to_numeric"

    def numeric_test(self, expr: ast.Call, parse: ast.Call, negated: bool) -> Node:
        """`pd.to_numeric(COLUMN, errors="coerce").notna()` (or `.isna()`): never raises, so it
        is a test like a null test; any other form of the call stays a barrier."""
        errors = [k.value for k in parse.keywords if k.arg == "errors"] + parse.args[1:2]
        if not (len(errors) == 1 and isinstance(errors[0], ast.Constant) and errors[0].value == "coerce"):
            return self.unknown(expr, "`to_numeric` without `errors=\"coerce\"` raises on a value that is not a number")
        if len(parse.args) < 1 or len(parse.args) + len(parse.keywords) != 2:
            return self.unknown(expr, "`to_numeric` with arguments other than a column and `errors=\"coerce\"` is not modelled")
        operand = self.value(parse.args[0])
        return self.column_only(expr, operand, NumericTest(operand, negated))

    def function_call(self, expr: ast.Call, name: str) -> Node:
        qualified = self.dialect.pandas_functions.get(name, name)
        if qualified == "pandas.to_numeric" and any(self.reads_frame(a) for a in expr.args):
            return self.unknown(expr, "chainlint models `to_numeric` only as `pd.to_numeric(COLUMN, errors=\"coerce\")` "
                                      "followed by `.notna()` / `.isna()`; its values compared or computed with are not modelled")
        if qualified.startswith("pandas.") and qualified[7:] in NULL_METHODS and len(expr.args) == 1 and not expr.keywords:
            operand = self.value(expr.args[0])
            return self.null_test(expr, operand, NULL_METHODS[qualified[7:]])
        if name == "len" and len(expr.args) == 1:
            target = self.expr(expr.args[0])
            if target is FRAME or target.columns():
                self.depends("reads the number of rows it receives")
                return Opaque(self.text_of(expr))
        arguments = [*expr.args, *(k.value for k in expr.keywords)]
        if not any(self.reads_frame(argument) for argument in arguments):
            reason = (
                f"calls `{clip(self.text_of(expr))}`, which chainlint does not follow: it may raise, "
                "have side effects or return something other than one value"
            )
            return self.unknown(expr, reason)
        return self.unknown(expr, f"calls `{clip(self.text_of(expr.func))}`, which chainlint does not know")

    def reads_frame(self, expr: ast.expr) -> bool:
        """Whether an argument mentions the frame filtered or another frame of the chain."""
        frames = {self.dialect.frame, *self.dialect.foreign} - {None}
        return any(
            (isinstance(node, ast.Name) and node.id in frames) or (isinstance(node, ast.Attribute) and dotted_name(node) in frames)
            for node in ast.walk(expr)
        )

    def mapped_membership(self, expr: ast.Call, mapped: ast.Call) -> Node:
        """`s.map({k: v, ...}).isin(V)` as `s.isin([k for k, v in the dict if v in V])`: a value
        the dict does not hold maps to a missing value, which `isin` never finds in literal
        strings; string keys and values only, so that equality is Python's and pandas' alike."""
        table = _dict_map(mapped)
        assert table is not None and isinstance(mapped.func, ast.Attribute)
        wanted = _strings(expr.args[0]) if len(expr.args) == 1 and not expr.keywords else None
        if wanted is None:
            return self.unknown(expr, "`isin` after `map` tests values that are not literal strings")
        target = self.value(mapped.func.value)
        keys = tuple(Literal(key) for key, value in table.items() if value in wanted)
        if not keys:
            return self.unknown(expr, "no key of the `map` dictionary maps to a value `isin` looks for")
        return self.column_only(expr, target, Member(target, keys))

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


def _dict_map(call: ast.expr) -> dict[str, str] | None:
    """The dictionary of a `.map({...})` call whose keys and values are all string literals
    (a later key wins, as in Python), else None."""
    if not (isinstance(call, ast.Call) and isinstance(call.func, ast.Attribute) and call.func.attr == "map"):
        return None
    if len(call.args) != 1 or call.keywords or not isinstance(call.args[0], ast.Dict):
        return None
    table = call.args[0]
    keys, values = [_string(k) for k in table.keys], [_string(v) for v in table.values]
    if any(k is None for k in keys) or any(v is None for v in values):
        return None
    return dict(zip(keys, values))  # type: ignore[arg-type]


def _strings(expr: ast.expr) -> tuple[str, ...] | None:
    """The strings of a list, tuple or set of string literals."""
    if not isinstance(expr, (ast.List, ast.Tuple, ast.Set)):
        return None
    found = tuple(_string(e) for e in expr.elts)
    return None if None in found else found  # type: ignore[return-value]


def _string(expr: ast.expr | None) -> str | None:
    return expr.value if isinstance(expr, ast.Constant) and isinstance(expr.value, str) else None


def _describe(target: Node) -> str:
    if isinstance(target, Column):
        return f"`{target.name}`"
    if target is FRAME:
        return "the frame"
    columns = sorted(target.columns())
    return ", ".join(f"`{c}`" for c in columns) if columns else "its input"
