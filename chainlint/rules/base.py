"""What a rule returns, and what it is given."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from chainlint.analysis.model import Cell, Span
from chainlint.rewrite.permute import Edit


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
    fix: Edit | None = None
    fix_error: str | None = None
    cell: Cell | None = None
    literal: Any = None
    suggestions: tuple[Any, ...] = ()


@dataclass(frozen=True)
class RuleContext:
    """Thresholds: `min_gain` (speedup) and `min_saving` (seconds at the estimated row count)."""

    min_gain: float = 1.25
    min_saving: float = 0.005
