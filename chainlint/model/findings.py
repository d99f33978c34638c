"""What the rules report and what a fix changes: the values reporters and the rewriter share."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from chainlint.model.spans import Cell, Span


@dataclass(frozen=True)
class Edit:
    """Replace characters `start`..`end` of the file's text (0-based offsets) with `text`."""

    start: int
    end: int
    text: str
    span: Span


@dataclass(frozen=True)
class Finding:
    """One finding; `literal` and `suggestions` (closest first) name the value a
    `never-matches` finding is about and the known values that could replace it."""

    rule: str
    path: str
    span: Span
    message: str
    speedup: float | None = None
    current_seconds: float | None = None
    planned_seconds: float | None = None
    order: tuple[int, ...] | None = None
    #: The planned plan of a `reorder` finding: groups of steps, each run as one mask, in order
    #: (`order` is the same steps flattened).
    groups: tuple[tuple[int, ...], ...] | None = None
    fix: Edit | None = None
    fix_error: str | None = None
    cell: Cell | None = None
    literal: Any = None
    suggestions: tuple[Any, ...] = ()
