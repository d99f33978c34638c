"""The cheapest plan of one segment of movable steps as an ordered sequence of groups.

A group runs as one mask (its predicates joined with `&`, each evaluated on every row the
group receives), then one copy of the rows it keeps. A plan of singletons is an order of
steps; one group is the whole segment fused into one mask. Which plan is cheapest depends on
the frame: each separate step copies every column of its survivors (costly on wide frames),
while a group evaluates all its predicates on all its input rows (costly for a regex on
rows an earlier step would have removed).

Planning is exact over subsets up to `EXACT_LIMIT` steps: a dynamic program over the set of
steps already run, each state extended by every allowed group of the steps left (3^k
transitions: 59,049 at 10, about 1.5 s under load; 12 steps took 11 s, too slow for the
editor). Beyond that, the order comes from the order planner (`chainlint.plan.planner`:
exact to 12 steps, greedy beyond) and neighbouring groups are merged greedily, the cheapest
merge first, while a merge lowers the cost and is allowed.

Limits: `before[step]`, a bit mask of the steps that must run in a strictly earlier group
(inside one mask every predicate sees all the group's rows, so a step that may raise on rows
an earlier step removes cannot share a group with that step); `joinable(mask)`, whether the
steps in the bit mask may form one group (their predicates give booleans whatever the rows,
and the rewrite can write them as one mask).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence

from chainlint.plan.planner import GroupCost, RowsAfter, plan_segment, share, walk
Groups = tuple[tuple[int, ...], ...]

EXACT_LIMIT = 10


def groups_cost(groups: Sequence[Sequence[int]], rows_after: RowsAfter, cost: GroupCost) -> float:
    """The cost of running `groups` in turn, each as one mask."""
    return sum(priced[-1] for priced in walk(groups, rows_after, cost))


def allowed(groups: Sequence[Sequence[int]], before: Mapping[int, int], joinable: Callable[[int], bool]) -> bool:
    """Whether `groups` respect the precedence limits and every group of two or more may join."""
    done = 0
    for group in groups:
        mask = _mask(group)
        if len(group) > 1 and not joinable(mask):
            return False
        if any(before.get(step, 0) & ~done for step in group):
            return False
        done |= mask
    return True


def plan_groups(steps: Sequence[int], rows_after: RowsAfter, cost: GroupCost,
                before: Mapping[int, int] | None = None,
                joinable: Callable[[int], bool] = lambda mask: False,
                order: Sequence[int] | None = None) -> tuple[Groups, float]:
    """The cheapest allowed sequence of groups of `steps` (indices into the bit masks), and
    its cost. Ties go to the plan that sorts first (singletons before groups, written order
    before others), so that the plan is deterministic. `order`: the cheapest order of single
    steps when the caller has it (long segments start from it)."""
    steps = sorted(steps)
    before = before or {}
    if len(steps) <= 1:
        plan = tuple((s,) for s in steps)
        return plan, groups_cost(plan, rows_after, cost)
    if len(steps) > EXACT_LIMIT:
        return _merged(steps, rows_after, cost, before, joinable, order)
    full = _mask(steps)
    need = {s: before.get(s, 0) & full for s in steps}
    # Every subset that may be one group, with its steps (the singletons always may).
    groups: dict[int, tuple[tuple[int, ...], int]] = {}
    for mask in _subsets(full):
        members = _members(mask)
        if len(members) == 1 or joinable(mask):
            needs = 0
            for s in members:
                needs |= need[s]
            groups[mask] = (members, needs)
    best: dict[int, tuple[float, Groups]] = {0: (0.0, ())}
    for done in sorted([0, *_subsets(full)], key=lambda m: (bin(m).count("1"), m)):
        if done not in best:
            continue
        spent, plan = best[done]
        rows_in = rows_after(done)
        for mask in _subsets(full & ~done):
            group = groups.get(mask)
            if group is None or group[1] & ~done:
                continue
            members = group[0]
            after = done | mask
            total = spent + cost(mask, rows_in, share(rows_after(after), rows_in))
            known = best.get(after)
            if known is None or total < known[0] * (1 - 1e-12) - 1e-9:
                best[after] = (total, plan + (members,))
            elif math.isclose(total, known[0], rel_tol=1e-12) and _key(plan + (members,)) < _key(known[1]):
                best[after] = (total, plan + (members,))
    spent, plan = best[full]
    return plan, spent


def _merged(steps: list[int], rows_after: RowsAfter, cost: GroupCost, before: Mapping[int, int],
            joinable: Callable[[int], bool], order: Sequence[int] | None) -> tuple[Groups, float]:
    """Long segments: the order planner's order, then neighbouring groups merged while a merge
    lowers the cost (the cheapest merge first), within the limits."""

    def single(step: int, rows_in: float, kept: float) -> float:
        return cost(1 << step, rows_in, kept)

    if order is None:
        order, _ = plan_segment(steps, rows_after, single, before)
    plan: list[tuple[int, ...]] = [(s,) for s in order]
    current = groups_cost(plan, rows_after, cost)
    while len(plan) > 1:
        choice = None
        for k in range(len(plan) - 1):
            merged = plan[:k] + [plan[k] + plan[k + 1]] + plan[k + 2:]
            if not joinable(_mask(merged[k])) or not allowed(merged[k:k + 1], _shifted(before, merged[:k]), joinable):
                continue
            spent = groups_cost(merged, rows_after, cost)
            if spent < current - 1e-9 and (choice is None or spent < choice[0]):
                choice = (spent, merged)
        if choice is None:
            break
        current, plan = choice
    return tuple(tuple(sorted(g)) for g in plan), current


def _shifted(before: Mapping[int, int], earlier: Sequence[Sequence[int]]) -> dict[int, int]:
    """The limits left once the steps of `earlier` have run."""
    done = 0
    for group in earlier:
        done |= _mask(group)
    return {step: mask & ~done for step, mask in before.items()}


def _key(plan: Groups) -> tuple:
    """Singletons first, then the written order: a tie never fuses or moves for nothing."""
    return (-len(plan), plan)


def _mask(steps: Sequence[int]) -> int:
    mask = 0
    for step in steps:
        mask |= 1 << step
    return mask


def _members(mask: int) -> tuple[int, ...]:
    found = []
    while mask:
        low = mask & -mask
        found.append(low.bit_length() - 1)
        mask ^= low
    return tuple(found)


def _subsets(full: int) -> list[int]:
    """Every non-empty subset of the bit mask `full`."""
    subsets, sub = [], full
    while sub:
        subsets.append(sub)
        sub = (sub - 1) & full
    return subsets




def describe(groups: Sequence[Sequence[int]]) -> str:
    """A plan in words, steps numbered from 1: "steps 3, 1, 2" for an order; "one mask of
    steps 2, 3 and 4, then step 1" once steps are fused."""
    if all(len(group) == 1 for group in groups):
        return "steps " + ", ".join(str(g[0] + 1) for g in groups)
    words: list[str] = []
    singles: list[int] = []
    for group in [*groups, ()]:
        if len(group) == 1:
            singles.append(group[0] + 1)
            continue
        if singles:
            words.append(("step " if len(singles) == 1 else "steps ") + ", ".join(map(str, singles)))
            singles = []
        if group:
            numbers = [str(i + 1) for i in group]
            words.append(f"one mask of steps {', '.join(numbers[:-1])} and {numbers[-1]}")
    return ", then ".join(words)
