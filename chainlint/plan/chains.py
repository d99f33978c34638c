"""The plan of one chain: estimates per step, the written and the planned order, their costs.

Barriers stay where they are, and so do steps whose answer depends on the rows they see; each
segment of movable steps between them is planned for the rows that reach it, a step that may
raise on rows an earlier step removes never moving before the steps written before it
(`chainlint.plan.totality`). Selectivities are taken as independent.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from chainlint.bind.binding import Binding
from chainlint.bind.dtypes import frame_dtypes, unknown_because
from chainlint.estimate.cost import (
    DEFAULT_MODEL,
    CostModel,
    FrameShape,
    predicate_cost,
    step_cost,
    step_costs,
)
from chainlint.estimate.selectivity import Basis, Estimate, Estimator
from chainlint.ir import And, Column, Compare, Member, Node, Not, NullTest, NumericTest, Or, Range, StrTest
from chainlint.model import Chain, ChainForm, Step, StepKind, consecutive_runs
from chainlint.plan.groups import EXACT_LIMIT as GROUP_LIMIT
from chainlint.plan.groups import plan_groups
from chainlint.plan.planner import EXACT_LIMIT, plan_segment, walk
from chainlint.plan.totality import ANY, LATER, STAYS, Limit, judge


@dataclass(frozen=True)
class StepEstimate:
    """One step in one order: the share of its own input it keeps, its rows and its time."""

    step: int
    selectivity: float
    basis: Basis
    rows_in: float
    rows_out: float
    seconds: float
    #: In a planned order: the steps run with it as one mask (`step` is the first of them).
    group: tuple[int, ...] = ()

    @property
    def steps(self) -> tuple[int, ...]:
        return self.group or (self.step,)


@dataclass(frozen=True)
class ChainPlan:
    chain: Chain
    binding: Binding
    rows: int
    written: tuple[StepEstimate, ...]
    planned: tuple[StepEstimate, ...]
    fused_seconds: float
    #: How far each step may move (None for a barrier the finder set).
    limits: tuple[Limit | None, ...] = ()
    rows_from: str = "profile"
    #: The cheapest order of single steps (no fused masks), for `measure` to time beside the plan.
    single: tuple[int, ...] = ()

    @property
    def groups(self) -> tuple[tuple[int, ...], ...]:
        """The planned plan: groups of steps, each run as one mask, in order."""
        return tuple(e.steps for e in self.planned)

    @property
    def as_written(self) -> bool:
        """Whether the plan is the chain as written (every step alone in the written order; one
        mask of every conjunct for a mask written whole)."""
        return self.groups == written_groups(self.chain)

    @property
    def order(self) -> tuple[int, ...]:
        return tuple(s for e in self.planned for s in e.steps)

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
               model: CostModel = DEFAULT_MODEL, rows_from: str = "profile",
               dtypes: dict[str, str] | None = None) -> ChainPlan:
    """Plan a bound chain with the estimator of its profile; `rows` scales the estimates and
    `rows_from` says where that count came from (`profile`, `option`, `configuration`);
    `dtypes` (a live frame's own) replace the profile's for the totality judgement."""
    profile = estimator.profile
    shape = estimator.shape
    total_rows = rows or profile.rows
    estimates = [estimator.estimate(step.predicate) for step in chain.steps]
    predicates = [predicate_cost(step.predicate, shape, model) for step in chain.steps]

    texts = [step.predicate.canonical() for step in chain.steps]
    joint_steps = _joint_steps(chain, estimator, texts)
    cache: dict[int, float] = {}
    # Long chains: walks add one step at a time, so a mask is usually the one asked before plus
    # one step; under independence its rows follow from that one's in O(1) (a run of thousands
    # of statements would otherwise cost O(k) per mask, O(k^2) per walk).
    incremental = len(estimates) > EXACT_LIMIT
    joint_mask = sum(1 << i for i in joint_steps)
    last = [0]

    def rows_after(mask: int) -> float:
        """Rows left after the steps in `mask`: exact joint counts for the steps a joint entry
        covers, independence for the rest."""
        previous, last[0] = last[0], mask
        if mask in cache:
            return cache[mask]
        added = mask ^ previous
        if (incremental and previous in cache and mask & previous == previous and added & (added - 1) == 0
                and not mask & joint_mask):
            cache[mask] = cache[previous] * estimates[added.bit_length() - 1].selectivity
            return cache[mask]
        chosen = _bits(mask)
        joined = frozenset(texts[i] for i in chosen if i in joint_steps)
        share = estimator.joint_share(joined) if joined else None
        if share is None:
            share, joined = 1.0, frozenset()
        rest = math.prod(estimates[i].selectivity for i in chosen if texts[i] not in joined)
        cache[mask] = total_rows * share * rest
        return cache[mask]

    clustered = [estimator.clustering(step.predicate) for step in chain.steps]
    unknown = None if dtypes is not None else unknown_because(chain.origin)
    dtypes = dtypes if dtypes is not None else frame_dtypes(chain.origin, profile.dtypes())
    limits = tuple(judge(step.predicate, dtypes, binding.profile or "", unknown) if step.movable else None for step in chain.steps)

    joinable = may_join(chain, limits, dtypes)

    per_mask: dict[int, tuple[float, float]] = {}

    def cost(mask: int, rows_in: float, kept: float) -> float:
        known = per_mask.get(mask)
        if known is None:
            members = _bits(mask)
            known = per_mask[mask] = (sum(predicates[i] for i in members) + model.combine * (len(members) - 1),
                                      min(clustered[i] for i in members))
        return step_cost(rows_in, known[0], kept, shape, model, known[1])

    def single_cost(step: int, rows_in: float, kept: float) -> float:
        return cost(1 << step, rows_in, kept)

    def costs(masks: Sequence[int], which: np.ndarray, rows_in: np.ndarray, kept: np.ndarray) -> np.ndarray:
        for mask in masks:
            cost(mask, 0.0, 1.0)  # fills per_mask
        known = np.array([per_mask[mask] for mask in masks], dtype=float).reshape(-1, 2)
        return step_costs(rows_in, known[which, 0], kept, shape, model, known[which, 1])

    planned: list[tuple[int, ...]] = []
    single: list[int] = []
    done = 0
    # A mask written whole is split only where every conjunct is total: alone, a conjunct that
    # may raise or give missing values (`.str` of an object column) raises where the written
    # `&` did not (pandas: a mask holding NA cannot select; the written mask's `&` reads it as
    # False).
    whole = chain.form is ChainForm.MASK and any(limit is None or limit.moves != ANY for limit in limits)
    if whole:
        planned.extend(written_groups(chain))
        single.extend(range(len(chain.steps)))
    for segment in [] if whole else plan_segments(limits):
        base = done

        def segment_rows(mask: int, base: int = base) -> float:
            return rows_after(base | mask)

        before = precedence(segment, limits, chain)
        order = plan_segment(segment, segment_rows, single_cost, before)[0]
        single.extend(order)
        if any(joinable(1 << a | 1 << b) for a, b in zip(order, order[1:])) or (
                len(segment) <= GROUP_LIMIT and any(joinable(1 << a | 1 << b) for a in segment for b in segment if a < b)):
            planned.extend(plan_groups(segment, segment_rows, cost, before, joinable, order, costs)[0])
        else:  # nothing may join: the plan is the order
            planned.extend((step,) for step in order)
        for step in segment:
            done |= 1 << step
    written = _walk(written_groups(chain), estimates, rows_after, cost, joint_steps)
    planned_estimates = _walk(planned, estimates, rows_after, cost, joint_steps)
    fused = _fused_seconds(limits, estimates, predicates, total_rows, shape, model, clustered)
    return ChainPlan(chain, binding, total_rows, written, planned_estimates, fused, limits,
                     rows_from if rows else "profile", tuple(single))


def plan_segments(limits: tuple[Limit | None, ...]) -> list[list[int]]:
    """The chain's steps in runs planned together: a step that may not move is a run alone."""
    return consecutive_runs(len(limits), lambda before, step: _moves(limits[step]) and _moves(limits[before]))


def written_groups(chain: Chain) -> tuple[tuple[int, ...], ...]:
    """The chain's steps as written, as groups: each step alone, or, for one mask written whole
    (`df[(a) & (b)]`, form `mask`), all its conjuncts in one group."""
    if chain.form is ChainForm.MASK:
        return (tuple(range(len(chain.steps))),)
    return tuple((i,) for i in range(len(chain.steps)))


def precedence(segment: list[int], limits: tuple[Limit | None, ...], chain: Chain | None = None) -> dict[int, int]:
    """For each step that may only move later, the bit mask of the segment's steps that ran
    before it as written (in an earlier group: the conjuncts of one written mask see the same
    rows): they must still run in a group before it."""
    group = {s: n for n, g in enumerate(written_groups(chain)) for s in g} if chain is not None else {s: s for s in segment}
    return {step: sum(1 << s for s in segment[:position] if group[s] < group[step])
            for position, step in enumerate(segment) if limits[step] is not None and limits[step].moves == LATER}  # type: ignore[union-attr]


def _moves(limit: Limit | None) -> bool:
    return limit is not None and limit.moves != STAYS


def _bits(mask: int) -> list[int]:
    """The indices of the set bits, in ascending order, in O(set bits) big-integer steps."""
    found = []
    while mask:
        low = mask & -mask
        found.append(low.bit_length() - 1)
        mask ^= low
    return found


def _joint_steps(chain: Chain, estimator: Estimator, texts: list[str]) -> set[int]:
    """Steps whose whole segment of movable steps has exact joint counts in the profile."""
    covered: set[int] = set()
    for segment in chain.segments():
        if len(segment) >= 2 and estimator.joint_covers(frozenset(texts[i] for i in segment)):
            covered.update(segment)
    return covered


def _walk(groups, estimates: list[Estimate], rows_after, cost, joint_steps: set[int]) -> tuple[StepEstimate, ...]:  # type: ignore[no-untyped-def]
    """Each group's rows and time when `groups` run in turn, priced as the planners price them
    (`chainlint.plan.planner.walk`); a single step's selectivity is the share of its own input
    it keeps there (conditional on the steps before it when joint counts say so), a group's
    the share the whole mask keeps."""
    out = []
    for group, (_, rows_in, rows_out, kept, nanoseconds) in zip(groups, walk(groups, rows_after, cost)):
        step = group[0]
        seconds = nanoseconds / 1e9
        if len(group) > 1:
            # The weakest of its steps' bases: a group's share is as good as its worst estimate.
            basis = Basis.JOINT if set(group) <= joint_steps else max((estimates[i].basis for i in group), key=list(Basis).index)
            out.append(StepEstimate(step, kept, basis, rows_in, rows_out, seconds, tuple(group)))
        elif step in joint_steps:
            out.append(StepEstimate(step, kept, Basis.JOINT, rows_in, rows_out, seconds))
        else:
            out.append(StepEstimate(step, estimates[step].selectivity, estimates[step].basis, rows_in, rows_out, seconds))
    return tuple(out)


#: The most steps one mask joins: each `&` nests the expression one level deeper, and Python's
#: parser refuses a few thousand levels (measured with Python 3.11: 800 parse, 3,000 do not).
MOST_JOINED = 100


def may_join(chain: Chain, limits: tuple[Limit | None, ...], dtypes: dict[str, str]) -> Callable[[int], bool]:
    """Whether the steps of a bit mask may run as one mask: all of one form (lambdas and masks,
    or queries), none of them a step that stays, each predicate boolean-valued whatever the
    rows (see `_family`), at most `MOST_JOINED` of them; in a statement run, only steps of a segment whose statements may all
    become one (`_statements_join`), since the planner may put any of them in any statement."""
    families = [_family(step, limit, dtypes) for step, limit in zip(chain.steps, limits)]
    if chain.form is ChainForm.STATEMENTS:
        joining = _statements_join(chain, limits)
        families = [family if joins else None for family, joins in zip(families, joining)]

    def joinable(mask: int) -> bool:
        if mask.bit_count() > MOST_JOINED:
            return False
        kinds = {families[i] for i in _bits(mask)}
        return len(kinds) == 1 and None not in kinds

    return joinable


def _statements_join(chain: Chain, limits: tuple[Limit | None, ...]) -> list[bool]:
    """Per step of a statement run: whether it may share one statement with others of its
    segment. Every statement of the segment must be its step's alone and each may become one
    with the one before it (`Step.alone`, `Step.merges`): the rewrite writes a group at the
    place of its first statement and removes the others, whichever steps the plan puts there."""
    steps = chain.steps
    joining = [False] * len(steps)
    for segment in plan_segments(limits):
        if steps[segment[0]].alone and all(steps[i].merges for i in segment[1:]):
            for i in segment:
                joining[i] = True
    return joining


def _family(step: Step, limit: Limit | None, dtypes: dict[str, str]) -> str | None:
    """Which form of mask the step may join (`mask` for lambdas and masks, `query`), or None
    when it must run alone: a step that stays or a `dropna`, one the rewriter could not write
    inside one mask (`Step.apart`), or a predicate whose value may
    not be booleans (a column used as a mask that is not of a boolean dtype: `&` of integers
    is a bitwise integer, not a mask)."""
    if limit is None or limit.moves == STAYS or step.apart or not _boolean(step.predicate, dtypes):
        return None
    if step.kind is StepKind.QUERY:
        return "query"
    return None if step.kind is StepKind.DROPNA else "mask"


def _boolean(node: Node, dtypes: dict[str, str]) -> bool:
    if isinstance(node, (And, Or)):
        return all(_boolean(part, dtypes) for part in node.parts)
    if isinstance(node, Not):
        return _boolean(node.operand, dtypes)
    if isinstance(node, Column):
        return dtypes.get(node.name) in ("bool", "boolean")
    return isinstance(node, (Compare, Member, Range, NullTest, NumericTest, StrTest))


def _fused_seconds(limits: tuple[Limit | None, ...], estimates: list[Estimate], predicates: list[float], rows: float,
                   shape: FrameShape, model: CostModel, clustered: list[float]) -> float:
    """Each run of total steps as one mask joined with `&`, every other step as written (a
    fused mask evaluates every part on all the rows it receives)."""
    total = 0.0
    rows_in = float(rows)
    runs = consecutive_runs(len(limits), lambda before, step: limits[step] is not None and limits[step].moves == ANY  # type: ignore[union-attr]
                            and _moves(limits[before]))
    for segment in runs:
        kept = math.prod(estimates[i].selectivity for i in segment)
        predicate = sum(predicates[i] for i in segment) + model.combine * (len(segment) - 1)
        total += step_cost(rows_in, predicate, kept, shape, model, min(clustered[i] for i in segment))
        rows_in *= kept
    return total / 1e9

