"""Recognise one row-filter step in an `ast` node, and turn it into an analysed `Step`.

`peel` looks at shape only (is this `.loc[...]`, `[...]`, `.query(...)`, `.dropna(subset=...)`
and what does it apply to); `build_step` converts the predicate once the chain around the step
is known, because a mask's meaning depends on which frame it reads.
"""

from __future__ import annotations

import ast
from collections.abc import Callable
from dataclasses import dataclass

from chainlint.analysis.model import Barrier, Span, Step
from chainlint.find.bindings import Resolved
from chainlint.find.predicates import Converted, Dialect, convert, dotted_name
from chainlint.find.query import convert_query
from chainlint.find.values import settle
from chainlint.ir import Column, NullTest, Opaque, make_and, make_or

_MASK_TOPS = (ast.Compare, ast.BinOp, ast.UnaryOp, ast.Call)
#: `query` keywords that change where the names of the text resolve.
_QUERY_SCOPES = ("local_dict", "global_dict", "resolvers", "level")
_NOT_A_FRAME_ATTRIBUTE = frozenset({"iloc", "iat", "at", "ix", "str", "dt", "cat", "sparse", "plot"})


@dataclass(frozen=True)
class Shape:
    """A step found by shape: its node, the expression it filters, and its argument."""

    kind: str
    node: ast.expr
    inner: ast.expr
    arg: ast.expr | None


@dataclass(frozen=True)
class Names:
    """What the module's imports bind: module aliases (never frames) and pandas names."""

    modules: frozenset[str] = frozenset()
    pandas: frozenset[str] = frozenset()
    pandas_functions: tuple[tuple[str, str], ...] = ()


def peel(node: ast.AST, names: Names) -> Shape | None:
    """The step whose outermost node is `node`, or None when it is not a row filter."""
    if isinstance(node, ast.Subscript):
        return _peel_subscript(node, names)
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
        method = node.func.attr
        if method == "query":
            return _peel_query(node)
        if method == "dropna":
            return _peel_dropna(node)
    return None


def _peel_subscript(node: ast.Subscript, names: Names) -> Shape | None:
    value = node.value
    key = node.slice
    loc = isinstance(value, ast.Attribute) and value.attr == "loc"
    if isinstance(value, ast.Attribute) and value.attr in _NOT_A_FRAME_ATTRIBUTE:
        return None
    inner = value.value if loc and isinstance(value, ast.Attribute) else value
    if loc and isinstance(key, ast.Tuple) and len(key.elts) == 2 and _is_full_slice(key.elts[1]):
        key = key.elts[0]
    prefix = "loc_" if loc else "getitem_"
    if isinstance(key, ast.Lambda):
        return Shape(prefix + "lambda", node, inner, key)
    if isinstance(key, _MASK_TOPS) and _is_mask_top(key) and mask_frames(key, names):
        return Shape(prefix + "mask", node, inner, key)
    return None


def _is_full_slice(expr: ast.expr) -> bool:
    return isinstance(expr, ast.Slice) and expr.lower is None and expr.upper is None and expr.step is None


def _is_mask_top(expr: ast.expr) -> bool:
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
    if node.args or any(k.arg is None for k in node.keywords) or _keyword(node, "subset") is None:
        return None
    if _truthy_or_unknown(_keyword(node, "inplace")):
        return None
    axis = _keyword(node, "axis")
    if axis is not None and not (isinstance(axis, ast.Constant) and axis.value in (0, "index", "rows")):
        return None
    assert isinstance(node.func, ast.Attribute)
    return Shape("dropna", node, node.func.value, None)


def mask_frames(expr: ast.expr, names: Names) -> set[str]:
    """Dotted names a mask reads columns from (`df` in `df.a > 1` or `df["a"] > 1`)."""
    found: set[str] = set()
    called = {id(n.func) for n in ast.walk(expr) if isinstance(n, ast.Call)}
    for node in ast.walk(expr):
        if isinstance(node, ast.Attribute) and id(node) not in called:
            base = dotted_name(node.value)
        elif isinstance(node, ast.Subscript) and isinstance(node.slice, ast.Constant) and isinstance(node.slice.value, str):
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
        mask_name, mask_span = frame, context.span_of(shape.arg)
    elif shape.kind == "query":
        converted = _convert_query_step(shape, context)
    else:
        converted = _convert_dropna(shape, context)
    predicate, named = settle(converted.node, context.resolve, context.assigned)
    barriers = extra + converted.barriers + named
    if not barriers and not predicate.columns():
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
    text = context.text_of(node)
    subset = _keyword(node, "subset")
    if isinstance(subset, ast.Constant) and isinstance(subset.value, str):
        columns = [subset.value]
    elif isinstance(subset, (ast.List, ast.Tuple)) and all(
        isinstance(e, ast.Constant) and isinstance(e.value, str) for e in subset.elts
    ) and subset.elts:
        columns = [e.value for e in subset.elts]  # type: ignore[attr-defined]
    else:
        return Converted(Opaque(text), [Barrier("opaque", "`subset=` is not a literal list of column names")], False)
    how = _keyword(node, "how")
    if how is not None and not (isinstance(how, ast.Constant) and how.value in ("any", "all")):
        return Converted(Opaque(text), [Barrier("opaque", "`how=` is not a literal 'any' or 'all'")], False)
    tests = [NullTest(Column(c), True) for c in columns]
    predicate = make_or(tests) if how is not None and how.value == "all" else make_and(tests)  # type: ignore[attr-defined]
    barriers = []
    if _keyword(node, "thresh") is not None:
        return Converted(Opaque(text), [Barrier("opaque", "`thresh=` is not modelled")], False)
    if _truthy_or_unknown(_keyword(node, "ignore_index")):
        barriers.append(Barrier("frame", "renumbers the index (`ignore_index=True`)"))
    return Converted(predicate, barriers, False)
