"""Results moved by whole lines: a unit of a document reused below or above where it was
found, its chains, plans and findings moved without being found or planned again."""

from __future__ import annotations

from typing import Any

from chainlint.model import Chain, Finding, Span


def _span(span: Span | None, delta: int) -> Span | None:
    return None if span is None else Span(span.line + delta, span.column, span.end_line + delta, span.end_column)


def _moved(value: Any, **changes: Any) -> Any:
    """A copy of a frozen dataclass with some fields changed, without running its checks again."""
    copy = object.__new__(type(value))
    copy.__dict__.update(value.__dict__)
    copy.__dict__.update(changes)
    return copy


def shift_chain(chain: Chain, delta: int) -> Chain:
    """A chain with every line moved by `delta`."""
    if not delta:
        return chain
    steps = tuple(_moved(s, span=_span(s.span, delta), mask_span=_span(s.mask_span, delta), conjunct=_span(s.conjunct, delta))
                  for s in chain.steps)
    return _moved(chain, span=_span(chain.span, delta), steps=steps)  # type: ignore[no-any-return]


def shift(items: tuple[Any, ...], delta: int) -> tuple[Any, ...]:
    """Planned chains or findings with every line moved by `delta` (a unit moves by whole lines)."""
    if not delta:
        return items
    moved = []
    for item in items:
        if isinstance(item, Finding):
            moved.append(_moved(item, span=_span(item.span, delta)))
            continue
        chain = shift_chain(item.chain, delta)
        plan = None if item.plan is None else _moved(item.plan, chain=chain)
        moved.append(_moved(item, chain=chain, plan=plan))
    return tuple(moved)
