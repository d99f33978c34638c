"""Turn a step found by its shape into an analysed `Step`: its predicate converted in the
frame the chain gives it, and the barriers that keep it in place.
"""

from __future__ import annotations

import ast
from collections.abc import Callable
from dataclasses import dataclass

from chainlint.model import Barrier, BarrierKind, MaskFrame, Span, Step, StepKind
from chainlint.find.bindings import VALUE, VALUES, Resolved, dotted_name
from chainlint.find.converted import Converted, Dialect, clip
from chainlint.find.predicates import convert
from chainlint.find.query import convert_query
from chainlint.find.shapes import Names, Shape, keyword, mask_frames, truthy_or_unknown
from chainlint.find.values import settle
from chainlint.ir import Column, Compare, Literal, Node, Not, NullTest, Opaque, RowNulls, make_and, make_or

#: `query` keywords that change where the names of the text resolve.
_QUERY_SCOPES = ("local_dict", "global_dict", "resolvers", "level")


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
    if shape.kind.is_lambda:
        converted = _convert_lambda(shape.arg, context)
    elif shape.kind.is_mask:
        assert shape.arg is not None
        frame, mask_frame, extra = _choose_mask_frame(mask_frames(shape.arg, context.names), context)
        converted = convert(shape.arg, _dialect(frame, context), context.text_of)
        mask_name, mask_span = frame, context.span_of(shape.written or shape.arg)
        if shape.written is not None:
            reason = f"the mask `{clip(context.text_of(shape.written), 40)}` was computed before the chain, on `{frame}` as it was then"
            extra = [Barrier(BarrierKind.FOREIGN, reason), *extra]
        if shape.flag:
            converted = _flag(shape.arg, converted, _dialect(frame, context), context)
    elif shape.kind is StepKind.QUERY:
        converted = _convert_query_step(shape, context)
    else:
        converted = _convert_dropna(shape, context)
    predicate, named = settle(converted.node, context.resolve, context.assigned)
    barriers = extra + converted.barriers + named
    if shape.inplace:
        barriers.append(Barrier(BarrierKind.FRAME, "an in-place `dropna` stays the statement it is, where it is written"))
    if shape.selection is not None:
        text = context.text_of(shape.selection)
        barriers.append(Barrier(BarrierKind.FRAME, f"also selects columns (`{clip(text, 40)}`): the selection stays where it is written"))
    if not barriers and not predicate.columns() and not isinstance(predicate, RowNulls):
        barriers.append(Barrier(BarrierKind.OPAQUE, "reads no column of the frame it filters"))
    barrier = Converted(predicate, barriers).barrier
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
        return context.own, MaskFrame.OWN, []
    outer = sorted(candidates & context.outer)
    if outer:
        # Realigned by index: with duplicate labels the rows it keeps depend on the frame it
        # receives, so it stays in place (written as a lambda, it could move).
        reason = f"the mask is computed on `{outer[0]}` and realigned by index; write it as a lambda to let it move"
        return outer[0], MaskFrame.OUTER, [Barrier(BarrierKind.FOREIGN, reason)]
    frame = sorted(candidates)[0]
    if len(candidates) == 1:
        reason = f"the mask is computed on another frame, `{frame}`, and aligned by index"
    else:
        listed = ", ".join(f"`{c}`" for c in sorted(candidates))
        reason = f"the mask reads names that may be other frames ({listed})"
    return frame, MaskFrame.FOREIGN, [Barrier(BarrierKind.FOREIGN, reason)]


def _convert_lambda(arg: ast.expr | None, context: StepContext) -> Converted:
    assert isinstance(arg, ast.Lambda)
    params = arg.args
    positional = params.posonlyargs + params.args
    if len(positional) != 1 or params.vararg or params.kwarg or params.kwonlyargs or params.defaults:
        text = context.text_of(arg)
        return Converted(Opaque(text), [Barrier(BarrierKind.OPAQUE, "the callable does not take exactly the frame")])
    return convert(arg.body, _dialect(positional[0].arg, context), context.text_of)


def _convert_query_step(shape: Shape, context: StepContext) -> Converted:
    arg = shape.arg
    assert isinstance(shape.node, ast.Call)
    scoped = [k.arg for k in shape.node.keywords if k.arg in _QUERY_SCOPES]
    if isinstance(arg, ast.Constant) and isinstance(arg.value, str):
        names = context.names
        converted = convert_query(arg.value, names.pandas, dict(names.pandas_functions))
        parser = keyword(shape.node, "parser")
        if parser is not None and not (isinstance(parser, ast.Constant) and parser.value == "pandas"):
            converted.barriers.append(Barrier(BarrierKind.OPAQUE, "`parser=` other than 'pandas' reads `&` and `|` with another precedence"))
        if scoped:
            reason = f"names in the query resolve through `{scoped[0]}=`, which chainlint does not follow"
            converted.barriers.append(Barrier(BarrierKind.FOREIGN, reason))
        return converted
    assert arg is not None
    text = context.text_of(arg)
    return Converted(Opaque(text), [Barrier(BarrierKind.OPAQUE, "the query text is built at run time")])


def _convert_dropna(shape: Shape, context: StepContext) -> Converted:
    assert isinstance(shape.node, ast.Call)
    node = shape.node
    text = "dropna(" + ", ".join(f"{k.arg}={context.text_of(k.value)}" for k in node.keywords) + ")"
    subset = keyword(node, "subset")
    how = keyword(node, "how")
    if how is not None and not (isinstance(how, ast.Constant) and how.value in ("any", "all")):
        return Converted(Opaque(text), [Barrier(BarrierKind.OPAQUE, "`how=` is not a literal 'any' or 'all'")])
    how_text = how.value if how is not None else "any"  # type: ignore[attr-defined]
    thresh = keyword(node, "thresh")
    if thresh is not None and (how is not None or not (isinstance(thresh, ast.Constant) and type(thresh.value) is int)):
        return Converted(Opaque(text), [Barrier(BarrierKind.OPAQUE, "`thresh=` is not a literal number given alone")])
    barriers: list[Barrier] = []
    if truthy_or_unknown(keyword(node, "ignore_index")):
        barriers.append(Barrier(BarrierKind.FRAME, "renumbers the index (`ignore_index=True`)"))
    if subset is None:
        count = thresh.value if thresh is not None else None  # type: ignore[attr-defined]
        if context.selected is not None and count is None:
            tests = [NullTest(Column(c), True) for c in context.selected]
            return Converted(make_and(tests) if how_text == "any" else make_or(tests), barriers)
        return Converted(RowNulls(how_text, count), barriers)
    columns = _column_names(subset, context)
    if columns is None:
        return Converted(Opaque(text), [Barrier(BarrierKind.OPAQUE, "`subset=` is not a literal list of column names")])
    if thresh is not None:
        return Converted(Opaque(text), [Barrier(BarrierKind.OPAQUE, "`thresh=` with `subset=` is not modelled")])
    tests = [NullTest(Column(c), True) for c in columns]
    predicate = make_or(tests) if how_text == "all" else make_and(tests)
    return Converted(predicate, barriers)


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
    return Converted(Not(test) if negated else test, [Barrier(BarrierKind.OPAQUE, reason)])
