"""Recognise one row-filter step in an `ast` node by its shape alone.

`peel` tells whether a node is `.loc[...]`, `[...]`, `.query(...)` or `.dropna(...)` and what it
applies to; `steps.py` converts the predicate once the chain around the step is known, because a
mask's meaning depends on which frame it reads.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass

from chainlint.find.barriers import DATAFRAME_ATTRIBUTES, NOT_COLUMNS
from chainlint.find.bindings import dotted_name
from chainlint.model import StepKind

_MASK_TOPS = (ast.Compare, ast.BinOp, ast.UnaryOp, ast.Call)
_LABELS = frozenset({"columns", "index", "values", "dtypes", "axes", "keys"})
_NOT_A_FRAME_ATTRIBUTE = frozenset({"iloc", "iat", "at", "ix", "str", "dt", "cat", "sparse", "plot"})


@dataclass(frozen=True)
class Shape:
    """A step found by shape: its node, the expression it filters, and its argument."""

    kind: str
    node: ast.expr
    inner: ast.expr
    arg: ast.expr | None
    #: `.loc[mask, cols]`: the column selection, which stays where it is written.
    selection: ast.expr | None = None
    #: A statement `frame.dropna(..., inplace=True)` of a run.
    inplace: bool = False
    #: For a mask bound to a name before the chain (`df[m]`): the key as written.
    written: ast.expr | None = None
    #: A column used as the mask (`df[df.flag]`, `df[~df.flag]`).
    flag: bool = False


@dataclass(frozen=True)
class Names:
    """What the module's imports bind: module aliases (never frames) and pandas names."""

    modules: frozenset[str] = frozenset()
    pandas: frozenset[str] = frozenset()
    pandas_functions: tuple[tuple[str, str], ...] = ()


def module_names(tree: ast.Module) -> Names:
    """The imports of a module that the finder reads names by (pandas and other modules)."""
    modules: set[str] = set()
    pandas: set[str] = set()
    functions: dict[str, str] = {}
    for node in tree.body:
        statements = [node]
        if isinstance(node, (ast.If, ast.Try)):
            statements = list(node.body) + list(node.orelse)
        for statement in statements:
            if isinstance(statement, ast.Import):
                for alias in statement.names:
                    bound = alias.asname or alias.name.split(".")[0]
                    modules.add(bound)
                    if alias.name == "pandas":
                        pandas.add(bound)
            elif isinstance(statement, ast.ImportFrom) and statement.module:
                for alias in statement.names:
                    bound = alias.asname or alias.name
                    if statement.module == "pandas":
                        functions[bound] = "pandas." + alias.name
                    elif statement.module.split(".")[0] != "pandas":
                        modules.add(bound)
    return Names(frozenset(modules), frozenset(pandas), tuple(sorted(functions.items())))


#: Masks bound to a name earlier in the block: name -> (the mask expression, its frame).
Masks = dict[str, tuple[ast.expr, str]]


def peel(node: ast.AST, names: Names, masks: Masks | None = None) -> Shape | None:
    """The step whose outermost node is `node`, or None when it is not a row filter."""
    shape = None
    if isinstance(node, ast.Subscript):
        shape = _peel_subscript(node, names, masks or {})
    elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
        method = node.func.attr
        if method == "query":
            shape = _peel_query(node)
        elif method == "dropna":
            shape = _peel_dropna(node)
    if shape is not None and _not_a_frame(shape.inner):
        return None
    return shape


def _not_a_frame(expr: ast.expr) -> bool:
    """Whether an expression is derived from a frame's labels or values, not rows of a frame
    (`df.columns.drop(["a"])`, `df.index`, `df.values`)."""
    while True:
        if isinstance(expr, ast.Attribute):
            if expr.attr in _LABELS:
                return True
            expr = expr.value
        elif isinstance(expr, ast.Call):
            expr = expr.func
        elif isinstance(expr, ast.Subscript):
            expr = expr.value
        else:
            return False


def _peel_subscript(node: ast.Subscript, names: Names, masks: Masks) -> Shape | None:
    value = node.value
    key = node.slice
    loc = isinstance(value, ast.Attribute) and value.attr == "loc"
    if isinstance(value, ast.Attribute) and value.attr in _NOT_A_FRAME_ATTRIBUTE:
        return None
    inner = value.value if loc and isinstance(value, ast.Attribute) else value
    selection = None
    if loc and isinstance(key, ast.Tuple) and len(key.elts) == 2:
        if not _is_full_slice(key.elts[1]):
            if not isinstance(node.ctx, ast.Load):
                return None
            selection = key.elts[1]
        key = key.elts[0]
    prefix = "loc_" if loc else "getitem_"
    if isinstance(key, ast.Lambda):
        return Shape(StepKind.subscript(loc, mask=False), node, inner, key, selection)
    if _column_mask(key.operand if isinstance(key, ast.UnaryOp) and isinstance(key.op, ast.Invert) else key, inner):
        return Shape(StepKind.subscript(loc, mask=True), node, inner, key, selection, flag=True)
    if isinstance(key, _MASK_TOPS) and is_mask_top(key) and mask_frames(key, names):
        return Shape(StepKind.subscript(loc, mask=True), node, inner, key, selection)
    substituted = _substitute(key, masks) if masks else None
    if substituted is not None:
        return Shape(StepKind.subscript(loc, mask=True), node, inner, substituted, selection, written=key)
    return None


def _column_mask(key: ast.expr, frame: ast.expr) -> bool:
    """`df[df.flag]`, `df[df["flag"]]` or `df[a][df.flag]`: a column of the frame the chain
    starts from used as the mask (a boolean column, if it is one)."""
    if not isinstance(key, (ast.Attribute, ast.Subscript)):
        return False
    if isinstance(key, ast.Attribute):
        if key.attr in DATAFRAME_ATTRIBUTES or key.attr in NOT_COLUMNS or key.attr.startswith("_"):
            return False
    elif not (isinstance(key.slice, ast.Constant) and isinstance(key.slice.value, str)):
        return False
    name = dotted_name(key.value)
    return name is not None and _chain_root(frame) == name


def _chain_root(expr: ast.expr) -> str | None:
    """The dotted name under a run of subscripts, `.query(...)` and `.dropna(...)` (`df` for
    `df[a].query(b)`), walked by shape alone: one pass, however long the run."""
    while (name := dotted_name(expr)) is None:
        if isinstance(expr, ast.Subscript):
            value = expr.value
            if isinstance(value, ast.Attribute) and value.attr in _NOT_A_FRAME_ATTRIBUTE:
                return None
            expr = value.value if isinstance(value, ast.Attribute) and value.attr == "loc" else value
        elif isinstance(expr, ast.Call) and isinstance(expr.func, ast.Attribute) and expr.func.attr in ("query", "dropna"):
            expr = expr.func.value
        else:
            return None
    return name


def _substitute(key: ast.expr, masks: Masks) -> ast.expr | None:
    """`key` with the mask names it combines (`m`, `~m`, `m1 & m2`) replaced by their masks."""
    if isinstance(key, ast.Name):
        return masks[key.id][0] if key.id in masks else None
    parts: list[ast.expr | None]
    if isinstance(key, ast.UnaryOp) and isinstance(key.op, ast.Invert):
        parts = [_substitute(key.operand, masks)]
        if parts[0] is None:
            return None
        return ast.copy_location(ast.UnaryOp(op=key.op, operand=parts[0]), key)
    if isinstance(key, ast.BinOp) and isinstance(key.op, (ast.BitAnd, ast.BitOr)):
        left, right = _substitute(key.left, masks), _substitute(key.right, masks)
        if left is None and right is None:
            return None
        return ast.copy_location(ast.BinOp(left=left or key.left, op=key.op, right=right or key.right), key)
    return None


def _is_full_slice(expr: ast.expr) -> bool:
    return isinstance(expr, ast.Slice) and expr.lower is None and expr.upper is None and expr.step is None


def is_mask_top(expr: ast.expr) -> bool:
    if isinstance(expr, ast.BinOp):
        return isinstance(expr.op, (ast.BitAnd, ast.BitOr))
    if isinstance(expr, ast.UnaryOp):
        return isinstance(expr.op, ast.Invert)
    if isinstance(expr, ast.Call):
        return isinstance(expr.func, ast.Attribute)
    return True


def keyword(node: ast.Call, name: str) -> ast.expr | None:
    for keyword in node.keywords:
        if keyword.arg == name:
            return keyword.value
    return None


def truthy_or_unknown(expr: ast.expr | None) -> bool:
    """Whether a flag like `inplace=` may be true (anything but an absent or false literal)."""
    return expr is not None and not (isinstance(expr, ast.Constant) and not expr.value)


def _peel_query(node: ast.Call) -> Shape | None:
    if any(k.arg is None for k in node.keywords) or truthy_or_unknown(keyword(node, "inplace")):
        return None
    arg = node.args[0] if node.args else keyword(node, "expr")
    if arg is None or len(node.args) > 1:
        return None
    assert isinstance(node.func, ast.Attribute)
    return Shape(StepKind.QUERY, node, node.func.value, arg)


def _peel_dropna(node: ast.Call) -> Shape | None:
    if node.args or any(k.arg is None for k in node.keywords):
        return None
    if truthy_or_unknown(keyword(node, "inplace")) or not rows_axis(node):
        return None
    assert isinstance(node.func, ast.Attribute)
    return Shape(StepKind.DROPNA, node, node.func.value, None)


def mask_frames(expr: ast.expr, names: Names) -> set[str]:
    """Dotted names a mask reads columns from (`df` in `df.a > 1` or `df["a"] > 1`)."""
    found: set[str] = set()
    called = {id(n.func) for n in ast.walk(expr) if isinstance(n, ast.Call)}
    for node in ast.walk(expr):
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) and node.func.attr == "duplicated":
            base = dotted_name(node.func.value)  # a mask of the frame itself
        elif isinstance(node, ast.Attribute) and id(node) not in called:
            base = dotted_name(node.value)
        elif isinstance(node, ast.Subscript) and _column_key(node.slice):
            base = dotted_name(node.value)
        else:
            continue
        if base is not None and base.split(".")[0] not in names.modules:
            found.add(base)
    return found


def _column_key(key: ast.expr) -> bool:
    """A key that names one column: a string, or a name or f-string holding one."""
    if isinstance(key, ast.Constant):
        return isinstance(key.value, str)
    return isinstance(key, (ast.Name, ast.JoinedStr)) or (isinstance(key, ast.Attribute) and dotted_name(key) is not None)


def rows_axis(call: ast.Call) -> bool:
    """Whether a `dropna` call drops rows (no `axis=`, or a literal 0 / 'index' / 'rows')."""
    axis = keyword(call, "axis")
    return axis is None or (isinstance(axis, ast.Constant) and axis.value in (0, "index", "rows"))


#: Methods whose result is a boolean mask of the rows.
_MASK_METHODS = frozenset({
    "isin", "isna", "isnull", "notna", "notnull", "between", "duplicated", "eq", "ne", "lt", "le",
    "gt", "ge", "startswith", "endswith", "contains", "match", "fullmatch",
})


def is_mask_value(value: ast.expr) -> bool:
    """Whether an assigned value is a row mask (`df.a > 1`, `~m`, `a & b`, `df.x.isin(...)`),
    not merely computed from a frame (`df.columns.drop(...)`)."""
    if isinstance(value, ast.Compare):
        return len(value.ops) == 1
    if isinstance(value, ast.UnaryOp):
        return isinstance(value.op, ast.Invert) and is_mask_value(value.operand)
    if isinstance(value, ast.BinOp):
        return isinstance(value.op, (ast.BitAnd, ast.BitOr)) and is_mask_value(value.left) and is_mask_value(value.right)
    if isinstance(value, ast.Call) and isinstance(value.func, ast.Attribute):
        return value.func.attr in _MASK_METHODS and not _not_a_frame(value.func.value)
    return False
