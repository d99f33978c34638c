"""What a rule is given: the thresholds a finding must clear."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class RuleContext:
    """Thresholds: `min_gain` (speedup) and `min_saving` (seconds at the estimated row count)."""

    min_gain: float = 1.25
    min_saving: float = 0.005
