"""What a rule is and what it is given."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

from chainlint.bind.binding import Binding
from chainlint.estimate.selectivity import Estimator
from chainlint.model import Chain, Finding
from chainlint.plan.chains import ChainPlan


@dataclass(frozen=True)
class RuleContext:
    """Thresholds: `min_gain` (speedup) and `min_saving` (seconds at the estimated row count)."""

    min_gain: float = 1.25
    min_saving: float = 0.005


@dataclass(frozen=True)
class Subject:
    """One chain as every rule sees it: its binding; when bound, its plan and the estimator of
    its profile; `site` (how a profile names the chain); `held` once a rule that `holds_order`
    found something, so that no order is advised around it."""

    chain: Chain
    binding: Binding
    plan: ChainPlan | None = None
    estimator: Estimator | None = None
    site: str = ""
    context: RuleContext = RuleContext()
    held: bool = False


Level = Literal["error", "warning", "note"]


@dataclass(frozen=True)
class Rule:
    """A rule: its name, its `level` (the SARIF level, which is also the editor's severity),
    whether it runs unless asked otherwise (`default`), whether its findings fail a run
    (`fails`), its texts, and `check`. A rule that `holds_order` holds back the order advice
    of the chains it finds something in (the engine runs it first)."""

    name: str
    level: Level
    summary: str
    description: str
    help: str
    check: Callable[[Subject], list[Finding]]
    default: bool = True
    fails: bool = True
    holds_order: bool = False
