"""What converting a filter expression gives: the predicate IR and the barriers met on the way,
and the names a converter needs (`Dialect`). Shared by the Python dialect (`predicates.py`),
its calls (`calls.py`) and pandas query text (`query.py`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

from chainlint.model import Barrier, BarrierKind
from chainlint.find.bindings import Resolved
from chainlint.ir import PREDICATE_TYPES, Node


class _Frame(Node):
    """Marker for the bare frame itself (as in `d > 0`): never part of a finished predicate."""

    __slots__ = ()


FRAME = _Frame()


@dataclass(frozen=True)
class Dialect:
    """How names resolve while converting one predicate.

    `frame`: the (dotted) name that denotes the frame being filtered, or None (query text);
    `foreign`: names of other frames of the chain, whose columns a step must not read;
    `pandas`: names bound to the pandas module; `pandas_functions`: names imported from it;
    `resolve`: what a name of the code holds (column names held in constants), when known.
    """

    frame: str | None = None
    foreign: frozenset[str] = frozenset()
    pandas: frozenset[str] = frozenset()
    pandas_functions: dict[str, str] = field(default_factory=dict)
    resolve: Callable[[str], Resolved] | None = None


@dataclass
class Converted:
    """A converted predicate and the barriers the conversion met."""

    node: Node
    barriers: list[Barrier]

    @property
    def barrier(self) -> Barrier | None:
        """The most telling barrier: one that reads the frame beats one not understood."""
        for barrier in self.barriers:
            if barrier.kind is BarrierKind.FRAME:
                return barrier
        return self.barriers[0] if self.barriers else None


def is_predicate(node: Node) -> bool:
    return isinstance(node, PREDICATE_TYPES)


def clip(text: str, limit: int = 60) -> str:
    """Source text on one line, cut to `limit` characters for a message."""
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 1] + "…"
