"""The cheapest plan of one segment of movable steps as an ordered sequence of groups.

A group runs as one mask (its predicates joined with `&`, each evaluated on every row the
group receives), then one copy of the rows it keeps. A plan of singletons is an order of
steps; one group is the whole segment fused into one mask. Which plan is cheapest depends on
the frame: each separate step copies every column of its survivors (costly on wide frames),
while a group evaluates all its predicates on all its input rows (costly for a regex on
rows an earlier step would have removed).

Planning is exact over subsets up to `EXACT_LIMIT` (12) steps: a dynamic program over the set
of steps already run, each state extended by every allowed group of the steps left (3^k
transitions: 531,441 at 12), priced all at once over arrays (0.6 s for 12 steps on the
shared 2-core machine at a load average of 10, against 16 s one transition at a time).
Beyond that, the order comes from the order planner (`chainlint.plan.planner`: exact to 12
steps, greedy beyond) and neighbouring groups are merged greedily, the cheapest merge first
(each merge priced by its two groups alone: O(k log k)), while a merge lowers the cost and is
allowed: never costlier than that order, but it never
splits a merged group again nor joins steps the order keeps apart, so a plan that groups
steps far apart in that order is missed.

Limits: `before[step]`, a bit mask of the steps that must run in a strictly earlier group
(inside one mask every predicate sees all the group's rows, so a step that may raise on rows
an earlier step removes cannot share a group with that step); `joinable(mask)`, whether the
steps in the bit mask may form one group (their predicates give booleans whatever the rows,
and the rewrite can write them as one mask).
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Callable, Mapping, Sequence

import numpy as np

from chainlint.plan.planner import GroupCost, RowsAfter, plan_segment, share, walk

#: `group_costs(masks, which, rows_in, kept)`: `GroupCost` over arrays, the i-th group being
#: `masks[which[i]]` (the planner prices 3^k pairs of steps run and next group at once).
GroupCosts = Callable[[Sequence[int], np.ndarray, np.ndarray, np.ndarray], np.ndarray]
Groups = tuple[tuple[int, ...], ...]

EXACT_LIMIT = 12


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
                order: Sequence[int] | None = None, costs: GroupCosts | None = None) -> tuple[Groups, float]:
    """The cheapest allowed sequence of groups of `steps` (indices into the bit masks), and
    its cost. Ties go to the plan with the most groups, then the one that sorts first
    (singletons before groups, written order before others), so that the plan is deterministic
    and a tie never fuses or moves for nothing. `order`: the cheapest order of single steps
    when the caller has it (long segments start from it); `costs`: `cost` over arrays, when
    the caller has it (else `cost` is asked once per pair)."""
    steps = sorted(steps)
    before = before or {}
    if len(steps) <= 1:
        plan = tuple((s,) for s in steps)
        return plan, groups_cost(plan, rows_after, cost)
    if len(steps) > EXACT_LIMIT:
        return _merged(steps, rows_after, cost, before, joinable, order)
    return _exact(steps, rows_after, cost, costs or _looped(cost), before, joinable)


def _looped(cost: GroupCost) -> GroupCosts:
    """`GroupCosts` from a cost of one group at a time."""
    def costs(masks: Sequence[int], which: np.ndarray, rows_in: np.ndarray, kept: np.ndarray) -> np.ndarray:
        return np.array([cost(masks[w], r, k) for w, r, k in zip(which.tolist(), rows_in.tolist(), kept.tolist())], dtype=float)
    return costs


def _exact(steps: list[int], rows_after: RowsAfter, cost: GroupCost, costs: GroupCosts, before: Mapping[int, int],
           joinable: Callable[[int], bool]) -> tuple[Groups, float]:
    """The dynamic program over subsets, in arrays: every (steps run, next group) pair, 3^k of
    them, is priced at once; the cost to go from each subset is taken layer by layer (most
    steps run first), then the plan is read forward. Ties go to the plan with the most groups,
    then the smallest first group (singletons before groups, written order before others)."""
    k = len(steps)
    size = 1 << k
    to_global = [0] * size  # local bit masks (bit i: steps[i]) to the callers' masks
    for m in range(1, size):
        low = m & -m
        to_global[m] = to_global[m ^ low] | 1 << steps[low.bit_length() - 1]
    position = {step: i for i, step in enumerate(steps)}
    need = [sum(1 << position[s] for s in _members(before.get(step, 0) & to_global[-1])) for step in steps]
    slot = np.full(size, -1)
    masks: list[int] = []
    needs = np.zeros(size, dtype=np.int64)
    for m in range(1, size):
        if m & (m - 1) == 0 or joinable(to_global[m]):
            slot[m] = len(masks)
            masks.append(to_global[m])
            for i in _members(m):
                needs[m] |= need[i]
    # Each step is in neither, in the steps run or in the next group: 3^k pairs.
    done = np.zeros(1, dtype=np.int64)
    group = np.zeros(1, dtype=np.int64)
    for i in range(k):
        done = np.concatenate((done, done | 1 << i, done))
        group = np.concatenate((group, group, group | 1 << i))
    keep = (slot[group] >= 0) & (needs[group] & ~done == 0)
    done, group = done[keep], group[keep]
    after = done | group
    rows = np.array([rows_after(m) for m in to_global], dtype=float)
    rows_in = rows[done]
    kept = np.where(rows_in > 0, np.minimum(1.0, rows[after] / np.where(rows_in > 0, rows_in, 1.0)), 1.0)
    price = costs(masks, slot[group], rows_in, kept)
    counts = np.zeros(size, dtype=np.int64)
    for i in range(k):
        counts += np.arange(size) >> i & 1
    layer = counts[done]
    togo = np.full(size, math.inf)
    togo[size - 1] = 0.0
    most = np.zeros(size, dtype=np.int64)  # the most groups of a cheapest way on
    for n in range(k - 1, -1, -1):
        here = layer == n
        d, a, through = done[here], after[here], price[here] + togo[after[here]]
        np.minimum.at(togo, d, through)
        best = through <= togo[d] * (1 + 1e-9) + 1e-9
        np.maximum.at(most, d[best], most[a[best]] + 1)
    plan: list[tuple[int, ...]] = []
    state = 0
    while state != size - 1:
        pick = np.flatnonzero(done == state)
        through = price[pick] + togo[after[pick]]
        fits = (through <= togo[state] * (1 + 1e-9) + 1e-9) & (most[after[pick]] + 1 == most[state])
        chosen = min((_members(int(m)) for m in group[pick[fits]]))
        plan.append(tuple(steps[i] for i in chosen))
        state |= _mask(chosen)
    groups = tuple(plan)
    return groups, groups_cost(groups, rows_after, cost)


def _merged(steps: list[int], rows_after: RowsAfter, cost: GroupCost, before: Mapping[int, int],
            joinable: Callable[[int], bool], order: Sequence[int] | None) -> tuple[Groups, float]:
    """Long segments: the order planner's order, then neighbouring groups merged while a merge
    lowers the cost (the cheapest merge first, the first of equals), within the limits. A merge
    changes the price of its two groups only (the groups after them receive the rows of the
    same steps), so each is priced by them alone and kept in a heap: O(k log k) prices for k
    steps, where pricing every plan after every merge took O(k^3) (a run of thousands of
    statements never finished)."""

    def single(step: int, rows_in: float, kept: float) -> float:
        return cost(1 << step, rows_in, kept)

    if order is None:
        order, _ = plan_segment(steps, rows_after, single, before)
    groups = [[step] for step in order]
    masks = [1 << step for step in order]
    prefix, done = [], 0  # the steps run before each group
    for mask in masks:
        prefix.append(done)
        done |= mask

    def price(start: int, mask: int) -> float:
        rows_in = rows_after(start)
        return cost(mask, rows_in, share(min(rows_after(start | mask), rows_in), rows_in))

    prices = [price(p, m) for p, m in zip(prefix, masks)]
    following = list(range(1, len(groups))) + [-1]
    preceding = list(range(-1, len(groups) - 1))
    versions = [0] * len(groups)
    heap: list[tuple[float, int, int, int]] = []

    def offer(first: int) -> None:
        second = following[first] if first >= 0 else -1
        if second < 0:
            return
        mask = masks[first] | masks[second]
        if not joinable(mask) or any(before.get(step, 0) & ~prefix[first] for step in groups[first] + groups[second]):
            return
        gain = price(prefix[first], mask) - prices[first] - prices[second]
        heapq.heappush(heap, (gain, first, versions[first], versions[second]))

    for first in range(len(groups) - 1):
        offer(first)
    while heap:
        gain, first, mine, theirs = heapq.heappop(heap)
        second = following[first]
        if versions[first] != mine or second < 0 or versions[second] != theirs or preceding[second] != first:
            continue  # a merge since changed one of the two groups
        if gain >= -1e-9:
            break
        groups[first] += groups[second]
        masks[first] |= masks[second]
        prices[first] += prices[second] + gain
        versions[first] += 1
        versions[second] = -1
        following[first] = following[second]
        if following[second] >= 0:
            preceding[following[second]] = first
        offer(preceding[first])
        offer(first)
    plan, total, first = [], 0.0, 0
    while first >= 0:
        plan.append(tuple(sorted(groups[first])))
        total += prices[first]
        first = following[first]
    return tuple(plan), total


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
