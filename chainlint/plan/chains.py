"""The plan of one chain: estimates per step, the written and the planned order, their costs.

Barriers stay where they are; each segment of movable steps between them is planned for the
rows that reach it. Selectivities are taken as independent.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from chainlint.analysis.model import Chain
from chainlint.bind.binding import Binding
from chainlint.estimate.cost import (
    DEFAULT_MODEL,
    CostModel,
    FrameShape,
    predicate_cost,
    step_cost,
)
from chainlint.estimate.selectivity import Estimate, Estimator
from chainlint.plan.planner import plan_segment


@dataclass(frozen=True)
class StepEstimate:
    """One step in one order: the share of its own input it keeps, its rows and its time."""

    step: int
    selectivity: float
    basis: str
    rows_in: float
    rows_out: float
    seconds: float


@dataclass(frozen=True)
class ChainPlan:
    chain: Chain
    binding: Binding
    rows: int
    written: tuple[StepEstimate, ...]
    planned: tuple[StepEstimate, ...]
    fused_seconds: float

    @property
    def order(self) -> tuple[int, ...]:
        return tuple(e.step for e in self.planned)

    @property
    def written_seconds(self) -> float:
        return sum(e.seconds for e in self.written)

    @property
    def planned_seconds(self) -> float:
        return sum(e.seconds for e in self.planned)

    @property
    def speedup(self) -> float:
        return self.written_seconds / self.planned_seconds if self.planned_seconds > 0 else 1.0


def plan_chain(chain: Chain, binding: Binding, estimator: Estimator, rows: int | None = None,
               model: CostModel = DEFAULT_MODEL) -> ChainPlan:
    """Plan a bound chain with the estimator of its profile; `rows` scales the estimates."""
    profile = estimator.profile
    shape = estimator.shape
    total_rows = rows or profile["rows"]
    estimates = [estimator.estimate(step.predicate) for step in chain.steps]
    predicates = [predicate_cost(step.predicate, shape, model) for step in chain.steps]

    texts = [step.predicate.canonical() for step in chain.steps]
    joint_steps = _joint_steps(chain, estimator, texts)
    cache: dict[int, float] = {}

    def rows_after(mask: int) -> float:
        """Rows left after the steps in `mask`: exact joint counts for the steps a joint entry
        covers, independence for the rest."""
        if mask not in cache:
            chosen = [i for i in range(len(estimates)) if mask >> i & 1]
            joined = frozenset(texts[i] for i in chosen if i in joint_steps)
            share = estimator.joint_share(joined) if joined else None
            if share is None:
                share, joined = 1.0, frozenset()
            rest = math.prod(estimates[i].selectivity for i in chosen if texts[i] not in joined)
            cache[mask] = total_rows * share * rest
        return cache[mask]

    clustered = [estimator.clustering(step.predicate) for step in chain.steps]

    def cost(step: int, rows_in: float, kept: float) -> float:
        return step_cost(rows_in, predicates[step], kept, shape, model, clustered[step])

    planned: list[int] = []
    done = 0
    index = 0
    while index < len(chain.steps):
        if not chain.steps[index].movable:
            planned.append(index)
            done |= 1 << index
            index += 1
            continue
        segment = []
        while index < len(chain.steps) and chain.steps[index].movable:
            segment.append(index)
            index += 1
        base = done

        def segment_rows(mask: int, base: int = base) -> float:
            return rows_after(base | mask)

        order, _ = plan_segment(segment, segment_rows, cost)
        planned.extend(order)
        for step in segment:
            done |= 1 << step
    written = _walk(range(len(chain.steps)), estimates, rows_after, cost, joint_steps)
    planned_estimates = _walk(planned, estimates, rows_after, cost, joint_steps)
    fused = _fused_seconds(chain, estimates, predicates, total_rows, shape, model, clustered)
    return ChainPlan(chain, binding, total_rows, written, planned_estimates, fused)


def _joint_steps(chain: Chain, estimator: Estimator, texts: list[str]) -> set[int]:
    """Steps whose whole segment of movable steps has exact joint counts in the profile."""
    covered: set[int] = set()
    for segment in chain.segments():
        if len(segment) >= 2 and estimator.joint_covers(frozenset(texts[i] for i in segment)):
            covered.update(segment)
    return covered


def _walk(order, estimates: list[Estimate], rows_after, cost, joint_steps: set[int]) -> tuple[StepEstimate, ...]:  # type: ignore[no-untyped-def]
    """Each step's rows and time in `order`; its selectivity is the share of its own input it
    keeps there (conditional on the steps before it when joint counts say so)."""
    out = []
    mask = 0
    for step in order:
        rows_in = rows_after(mask)
        mask |= 1 << step
        rows_out = rows_after(mask)
        kept = 1.0 if rows_in <= 0 else rows_out / rows_in
        seconds = cost(step, rows_in, kept) / 1e9
        if step in joint_steps:
            out.append(StepEstimate(step, kept, "joint (exact)", rows_in, rows_out, seconds))
        else:
            out.append(StepEstimate(step, estimates[step].selectivity, estimates[step].basis, rows_in, rows_out, seconds))
    return tuple(out)


def _fused_seconds(chain: Chain, estimates: list[Estimate], predicates: list[float], rows: float,
                   shape: FrameShape, model: CostModel, clustered: list[float]) -> float:
    """Each segment of movable steps as one mask joined with `&`, barriers as written."""
    total = 0.0
    rows_in = float(rows)
    index = 0
    steps = chain.steps
    while index < len(steps):
        if not steps[index].movable:
            kept = estimates[index].selectivity
            total += step_cost(rows_in, predicates[index], kept, shape, model, clustered[index])
            rows_in *= kept
            index += 1
            continue
        segment = []
        while index < len(steps) and steps[index].movable:
            segment.append(index)
            index += 1
        kept = math.prod(estimates[i].selectivity for i in segment)
        predicate = sum(predicates[i] for i in segment) + model.combine * (len(segment) - 1)
        total += step_cost(rows_in, predicate, kept, shape, model, min(clustered[i] for i in segment))
        rows_in *= kept
    return total / 1e9

