"""The cheapest order of one segment of movable steps.

Under independence, with a per-row cost a_i and a selectivity s_i that do not depend on the
order, ascending a_i / (1 - s_i) is optimal (rank ordering: Ibaraki & Kameda 1984;
Krishnamurthy, Boral & Zaniolo 1986; Hellerstein 1998). chainlint's take cost depends on the
share a step keeps, and joint selectivities may be known, so the planner runs an exact dynamic
program over subsets (2^k * k) for up to 12 steps, a greedy rank order (each step chosen at the
rows it would receive) up to 64, and beyond that the rank order at the segment's input rows,
sorted once, so that a run of thousands of statements plans in O(k log k).

Both respect precedence limits: `before[step]`, a bit mask of the steps that must run before
`step` (a step that may raise on rows an earlier step removes keeps those steps before it);
the sorted order is used only for segments without such limits.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence

#: `cost(step, rows_in, kept_share)` in nanoseconds.
StepCost = Callable[[int, float, float], float]
#: `group_cost(mask, rows_in, kept_share)` in nanoseconds: the steps in the bit mask as one group.
GroupCost = Callable[[int, float, float], float]
#: `rows_after(mask)`: rows left after the steps in the bit mask (in any order).
RowsAfter = Callable[[int], float]

EXACT_LIMIT = 12
GREEDY_LIMIT = 64


def walk(groups: Iterable[Sequence[int]], rows_after: RowsAfter,
         cost: GroupCost) -> Iterator[tuple[int, float, float, float, float]]:
    """For each group when `groups` run in turn, each as one mask: its bit mask, rows in, rows
    out, share kept and cost. The one pricing of an order, shared by the planners and the plan
    they report. Rows out never exceed rows in: a filter never keeps more rows than it gets,
    though estimates of different bases may say so (a joint count for some steps, independence
    for the others)."""
    done = 0
    for group in groups:
        rows_in = rows_after(done)
        mask = 0
        for step in group:
            mask |= 1 << step
        done |= mask
        rows_out = min(rows_after(done), rows_in)
        kept = share(rows_out, rows_in)
        yield mask, rows_in, rows_out, kept, cost(mask, rows_in, kept)


def order_cost(order: Sequence[int], rows_after: RowsAfter, cost: StepCost) -> float:
    """The cost of running the single steps of `order` in turn."""
    def single(mask: int, rows_in: float, kept: float) -> float:
        return cost(mask.bit_length() - 1, rows_in, kept)

    return sum(priced[-1] for priced in walk(((step,) for step in order), rows_after, single))


def share(rows_out: float, rows_in: float) -> float:
    """The share of `rows_in` a step keeps, at most 1.0 (see `walk`)."""
    return 1.0 if rows_in <= 0 else min(1.0, rows_out / rows_in)


def plan_segment(steps: Sequence[int], rows_after: RowsAfter, cost: StepCost,
                 before: Mapping[int, int] | None = None) -> tuple[tuple[int, ...], float]:
    """The cheapest order of `steps` (indices into the bit masks) that runs every step after
    the steps in its `before` mask, and its cost."""
    steps = list(steps)
    before = before or {}
    if len(steps) <= 1:
        return tuple(steps), order_cost(steps, rows_after, cost)
    if len(steps) > GREEDY_LIMIT and not any(before.values()):
        return _sorted(steps, rows_after, cost)
    if len(steps) > EXACT_LIMIT:
        return _greedy(steps, rows_after, cost, before)
    full = 0
    for step in steps:
        full |= 1 << step
    best: dict[int, tuple[float, tuple[int, ...]]] = {0: (0.0, ())}
    # Masks in order of size, so every subset is final before it is extended.
    for size in range(len(steps)):
        for mask, (spent, order) in [(m, v) for m, v in best.items() if bin(m).count("1") == size]:
            rows_in = rows_after(mask)
            for step in steps:
                bit = 1 << step
                if mask & bit or before.get(step, 0) & ~mask:
                    continue
                after = mask | bit
                total = spent + cost(step, rows_in, share(rows_after(after), rows_in))
                if after not in best or total < best[after][0] - 1e-9 or (
                    math.isclose(total, best[after][0], rel_tol=1e-12) and order + (step,) < best[after][1]
                ):
                    best[after] = (total, order + (step,))
    spent, order = best[full]
    return order, spent


def _greedy(steps: list[int], rows_after: RowsAfter, cost: StepCost, before: Mapping[int, int]) -> tuple[tuple[int, ...], float]:
    order: list[int] = []
    mask = 0
    remaining = list(steps)
    while remaining:
        rows_in = rows_after(mask)

        def rank(step: int, mask: int = mask, rows_in: float = rows_in) -> float:
            kept = share(rows_after(mask | 1 << step), rows_in)
            spend = cost(step, rows_in, kept)
            return spend / max(1.0 - kept, 1e-12)

        ready = [s for s in remaining if not before.get(s, 0) & ~mask]
        choice = min(ready, key=lambda s: (rank(s), s))
        order.append(choice)
        remaining.remove(choice)
        mask |= 1 << choice
    return tuple(order), order_cost(order, rows_after, cost)


def _sorted(steps: list[int], rows_after: RowsAfter, cost: StepCost) -> tuple[tuple[int, ...], float]:
    """Rank order at the segment's input rows: what the greedy order becomes when the fixed cost
    per step is small against the rows' cost, at O(k log k) instead of O(k^2) rank evaluations."""
    rows_in = rows_after(0)

    def rank(step: int) -> float:
        kept = share(rows_after(1 << step), rows_in)
        return cost(step, rows_in, kept) / max(1.0 - kept, 1e-12)

    ranks = {step: rank(step) for step in steps}
    order = sorted(steps, key=lambda s: (ranks[s], s))
    return tuple(order), order_cost(order, rows_after, cost)

