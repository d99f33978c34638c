"""Recognise one row-filter step in an `ast` node, and turn it into an analysed `Step`.

`peel` looks at shape only (is this `.loc[...]`, `[...]`, `.query(...)`, `.dropna(subset=...)`
and what does it apply to); `build_step` converts the predicate once the chain around the step
is known, because a mask's meaning depends on which frame it reads.
"""

from __future__ import annotations

import ast
from collections.abc import Callable
from dataclasses import dataclass

from chainlint.find.barriers import FRAME_ATTRIBUTES, NOT_COLUMNS
from chainlint.find.bindings import VALUE, VALUES, Resolved, dotted_name
from chainlint.find.predicates import Converted, Dialect, convert
from chainlint.find.query import convert_query
from chainlint.find.values import settle
from chainlint.ir import Column, Compare, Literal, Node, Not, NullTest, Opaque, RowNulls, make_and, make_or
from chainlint.model import Barrier, Span, Step

_MASK_TOPS = (ast.Compare, ast.BinOp, ast.UnaryOp, ast.Call)
#: `query` keywords that change where the names of the text resolve.
_QUERY_SCOPES = ("local_dict", "global_dict", "resolvers", "level")
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
        return Shape(prefix + "lambda", node, inner, key, selection)
    if _column_mask(key.operand if isinstance(key, ast.UnaryOp) and isinstance(key.op, ast.Invert) else key, inner):
        return Shape(prefix + "mask", node, inner, key, selection, flag=True)
    if isinstance(key, _MASK_TOPS) and is_mask_top(key) and mask_frames(key, names):
        return Shape(prefix + "mask", node, inner, key, selection)
    substituted = _substitute(key, masks) if masks else None
    if substituted is not None:
        return Shape(prefix + "mask", node, inner, substituted, selection, written=key)
    return None


def _column_mask(key: ast.expr, frame: ast.expr) -> bool:
    """`df[df.flag]` or `df[df["flag"]]`: a column of the frame itself used as the mask (a
    boolean column, if it is one)."""
    name = dotted_name(frame)
    if name is None or not isinstance(key, (ast.Attribute, ast.Subscript)) or dotted_name(key.value) != name:
        return False
    if isinstance(key, ast.Attribute):
        return key.attr not in NOT_COLUMNS and key.attr not in FRAME_ATTRIBUTES and not key.attr.startswith("_")
    return isinstance(key.slice, ast.Constant) and isinstance(key.slice.value, str)


def hidden_by_screen(shape: Shape) -> bool:
    """A `[name]` or `[a.b]` step, which the textual screen never takes for the second step of a
    chain (it looks like `x[i]`): a method chain needs another step to be seen."""
    if not shape.kind.startswith("getitem_"):
        return False
    key = shape.written if shape.written is not None else shape.arg
    return isinstance(key, ast.Name) or (isinstance(key, ast.Attribute) and dotted_name(key) is not None)


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


def _keyword(node: ast.Call, name: str) -> ast.expr | None:
    for keyword in node.keywords:
        if keyword.arg == name:
            return keyword.value
    return None


def _truthy_or_unknown(expr: ast.expr | None) -> bool:
    """Whether a flag like `inplace=` may be true (anything but an absent or false literal)."""
    return expr is not None and not (isinstance(expr, ast.Constant) and not expr.value)


def _peel_query(node: ast.Call) -> Shape | None:
    if any(k.arg is None for k in node.keywords) or _truthy_or_unknown(_keyword(node, "inplace")):
        return None
    arg = node.args[0] if node.args else _keyword(node, "expr")
    if arg is None or len(node.args) > 1:
        return None
    assert isinstance(node.func, ast.Attribute)
    return Shape("query", node, node.func.value, arg)


def _peel_dropna(node: ast.Call) -> Shape | None:
    if node.args or any(k.arg is None for k in node.keywords):
        return None
    if _truthy_or_unknown(_keyword(node, "inplace")) or not rows_axis(node):
        return None
    assert isinstance(node.func, ast.Attribute)
    return Shape("dropna", node, node.func.value, None)


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


@dataclass(frozen=True)
class StepContext:
    """What a step needs from the chain around it: the name of the frame it filters (`own`,
    None for a step inside an expression), and the names of the frames the chain passed
    through before it (`outer`), whose masks still select rows by value."""

    own: str | None
    outer: frozenset[str]
    names: Names
    text_of: Callable[[ast.AST], str]
    span_of: Callable[[ast.AST], Span]
    span: Span
    statement: int
    resolve: Callable[[str], Resolved]
    assigned: frozenset[str] = frozenset()
    #: The columns an earlier `.loc[mask, cols]` of the chain kept, when it names them.
    selected: tuple[str, ...] | None = None


def build_step(shape: Shape, context: StepContext) -> Step:
    """Convert a shaped step's predicate and classify whether it may move."""
    mask_frame = mask_name = mask_span = None
    extra: list[Barrier] = []
    if shape.kind.endswith("lambda"):
        converted = _convert_lambda(shape.arg, context)
    elif shape.kind.endswith("mask"):
        assert shape.arg is not None
        frame, mask_frame, extra = _choose_mask_frame(mask_frames(shape.arg, context.names), context)
        converted = convert(shape.arg, _dialect(frame, context), context.text_of)
        mask_name, mask_span = frame, context.span_of(shape.written or shape.arg)
        if shape.written is not None:
            reason = f"the mask `{_clip(context.text_of(shape.written))}` was computed before the chain, on `{frame}` as it was then"
            extra = [Barrier("foreign", reason), *extra]
        if shape.flag:
            converted = _flag(shape.arg, converted, _dialect(frame, context), context)
    elif shape.kind == "query":
        converted = _convert_query_step(shape, context)
    else:
        converted = _convert_dropna(shape, context)
    predicate, named = settle(converted.node, context.resolve, context.assigned)
    barriers = extra + converted.barriers + named
    if shape.inplace:
        barriers.append(Barrier("frame", "an in-place `dropna` stays the statement it is, where it is written"))
    if shape.selection is not None:
        text = context.text_of(shape.selection)
        barriers.append(Barrier("frame", f"also selects columns (`{_clip(text)}`): the selection stays where it is written"))
    if not barriers and not predicate.columns() and not isinstance(predicate, RowNulls):
        barriers.append(Barrier("opaque", "reads no column of the frame it filters"))
    barrier = Converted(predicate, barriers, converted.frame_wide).barrier
    return Step(
        kind=shape.kind,
        span=context.span,
        predicate=predicate,
        barrier=barrier,
        mask_frame=mask_frame,
        statement=context.statement,
        own=context.own,
        mask_name=mask_name,
        mask_span=mask_span,
    )


def _dialect(frame: str | None, context: StepContext) -> Dialect:
    others = frozenset(n for n in (context.own, *context.outer) if n is not None and n != frame)
    return Dialect(
        frame=frame,
        foreign=others,
        pandas=context.names.pandas,
        pandas_functions=dict(context.names.pandas_functions),
        resolve=context.resolve,
    )


def _choose_mask_frame(candidates: set[str], context: StepContext) -> tuple[str, str, list[Barrier]]:
    if context.own in candidates:
        return context.own, "own", []
    outer = sorted(candidates & context.outer)
    if outer:
        # Realigned by index: with duplicate labels the rows it keeps depend on the frame it
        # receives, so it stays in place (written as a lambda, it could move).
        reason = f"the mask is computed on `{outer[0]}` and realigned by index; write it as a lambda to let it move"
        return outer[0], "outer", [Barrier("foreign", reason)]
    frame = sorted(candidates)[0]
    if len(candidates) == 1:
        reason = f"the mask is computed on another frame, `{frame}`, and aligned by index"
    else:
        listed = ", ".join(f"`{c}`" for c in sorted(candidates))
        reason = f"the mask reads names that may be other frames ({listed})"
    return frame, "foreign", [Barrier("foreign", reason)]


def _convert_lambda(arg: ast.expr | None, context: StepContext) -> Converted:
    assert isinstance(arg, ast.Lambda)
    params = arg.args
    positional = params.posonlyargs + params.args
    if len(positional) != 1 or params.vararg or params.kwarg or params.kwonlyargs or params.defaults:
        text = context.text_of(arg)
        return Converted(Opaque(text), [Barrier("opaque", "the callable does not take exactly the frame")], False)
    return convert(arg.body, _dialect(positional[0].arg, context), context.text_of)


def _convert_query_step(shape: Shape, context: StepContext) -> Converted:
    arg = shape.arg
    assert isinstance(shape.node, ast.Call)
    scoped = [k.arg for k in shape.node.keywords if k.arg in _QUERY_SCOPES]
    if isinstance(arg, ast.Constant) and isinstance(arg.value, str):
        names = context.names
        converted = convert_query(arg.value, names.pandas, dict(names.pandas_functions))
        parser = _keyword(shape.node, "parser")
        if parser is not None and not (isinstance(parser, ast.Constant) and parser.value == "pandas"):
            converted.barriers.append(Barrier("opaque", "`parser=` other than 'pandas' reads `&` and `|` with another precedence"))
        if scoped:
            reason = f"names in the query resolve through `{scoped[0]}=`, which chainlint does not follow"
            converted.barriers.append(Barrier("foreign", reason))
        return converted
    assert arg is not None
    text = context.text_of(arg)
    return Converted(Opaque(text), [Barrier("opaque", "the query text is built at run time")], False)


def _convert_dropna(shape: Shape, context: StepContext) -> Converted:
    assert isinstance(shape.node, ast.Call)
    node = shape.node
    text = "dropna(" + ", ".join(f"{k.arg}={context.text_of(k.value)}" for k in node.keywords) + ")"
    subset = _keyword(node, "subset")
    how = _keyword(node, "how")
    if how is not None and not (isinstance(how, ast.Constant) and how.value in ("any", "all")):
        return Converted(Opaque(text), [Barrier("opaque", "`how=` is not a literal 'any' or 'all'")], False)
    how_text = how.value if how is not None else "any"  # type: ignore[attr-defined]
    thresh = _keyword(node, "thresh")
    if thresh is not None and (how is not None or not (isinstance(thresh, ast.Constant) and type(thresh.value) is int)):
        return Converted(Opaque(text), [Barrier("opaque", "`thresh=` is not a literal number given alone")], False)
    barriers: list[Barrier] = []
    if _truthy_or_unknown(_keyword(node, "ignore_index")):
        barriers.append(Barrier("frame", "renumbers the index (`ignore_index=True`)"))
    if subset is None:
        count = thresh.value if thresh is not None else None  # type: ignore[attr-defined]
        if context.selected is not None and count is None:
            tests = [NullTest(Column(c), True) for c in context.selected]
            return Converted(make_and(tests) if how_text == "any" else make_or(tests), barriers, False)
        return Converted(RowNulls(how_text, count), barriers, False)
    columns = _column_names(subset, context)
    if columns is None:
        return Converted(Opaque(text), [Barrier("opaque", "`subset=` is not a literal list of column names")], False)
    if thresh is not None:
        return Converted(Opaque(text), [Barrier("opaque", "`thresh=` with `subset=` is not modelled")], False)
    tests = [NullTest(Column(c), True) for c in columns]
    predicate = make_or(tests) if how_text == "all" else make_and(tests)
    return Converted(predicate, barriers, False)


def selected_columns(shape: Shape) -> tuple[str, ...] | None:
    """The columns a `.loc[mask, cols]` keeps when they are written as literals."""
    selection = shape.selection
    if isinstance(selection, ast.Constant) and isinstance(selection.value, str):
        return (selection.value,)
    if isinstance(selection, (ast.List, ast.Tuple)) and selection.elts and all(
        isinstance(e, ast.Constant) and isinstance(e.value, str) for e in selection.elts
    ):
        return tuple(e.value for e in selection.elts)  # type: ignore[attr-defined]
    return None


def _clip(text: str, limit: int = 40) -> str:
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _column_names(expr: ast.expr, context: StepContext) -> list[str] | None:
    """Column names written as literals or names the code binds to them (`subset=[COL]`)."""
    if isinstance(expr, (ast.List, ast.Tuple)):
        names = [_column_names(e, context) for e in expr.elts]
        if not expr.elts or any(n is None or len(n) != 1 for n in names):
            return None
        return [n[0] for n in names]  # type: ignore[index]
    if isinstance(expr, ast.Constant):
        return [expr.value] if isinstance(expr.value, str) else None
    dotted = dotted_name(expr)
    if dotted is None:
        return None
    found = context.resolve(dotted)
    if found.kind == VALUE and isinstance(found.value, str):
        return [found.value]
    if found.kind == VALUES and found.value and all(isinstance(v, str) for v in found.value):  # type: ignore[union-attr]
        return list(found.value)  # type: ignore[arg-type]
    return None


def _column_key(key: ast.expr) -> bool:
    """A key that names one column: a string, or a name or f-string holding one."""
    if isinstance(key, ast.Constant):
        return isinstance(key.value, str)
    return isinstance(key, (ast.Name, ast.JoinedStr)) or (isinstance(key, ast.Attribute) and dotted_name(key) is not None)


def _flag(key: ast.expr, converted: Converted, dialect: Dialect, context: StepContext) -> Converted:
    """`df[df.flag]` as `flag == True` (`not flag == True` for `~`), estimated from the column's
    values; it stays in place, since only its dtype makes it a row filter (a column of labels
    would select columns)."""
    negated = isinstance(key, ast.UnaryOp)
    column = convert(key.operand if negated else key, dialect, context.text_of).node  # type: ignore[attr-defined]
    if not isinstance(column, Column):
        return converted
    test: Node = Compare("==", column, Literal(True))
    reason = f"the column `{column.name}` itself is the mask: the code does not show that it holds booleans"
    return Converted(Not(test) if negated else test, [Barrier("opaque", reason)], False)


def rows_axis(call: ast.Call) -> bool:
    """Whether a `dropna` call drops rows (no `axis=`, or a literal 0 / 'index' / 'rows')."""
    axis = _keyword(call, "axis")
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
