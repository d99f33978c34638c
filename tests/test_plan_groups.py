"""Plans as groups: the planner against brute force over every grouping and order, its limits
judged against pandas, and the words a plan is reported in."""

from __future__ import annotations

import itertools
import math
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from chainlint.engine.run import analyse_source
from chainlint.estimate.cost import FrameShape, step_cost, step_costs
from chainlint.parse.source import text_source
from chainlint.plan.chains import may_join, plan_segments, precedence
from chainlint.plan.groups import EXACT_LIMIT, _merged, allowed, describe, groups_cost, plan_groups
from chainlint.plan.totality import LATER, judge

shares = st.floats(min_value=0.0, max_value=1.0)
costs = st.floats(min_value=0.1, max_value=50.0)
shapes = st.builds(
    FrameShape,
    st.dictionaries(st.sampled_from([f"c{i}" for i in range(40)]), st.sampled_from(["numeric", "str", "object", "category"]), min_size=1),
)


def _ordered_partitions(steps: list[int]):  # type: ignore[no-untyped-def]
    """Every sequence of non-empty groups holding each step once (Fubini's count: 541 for 5)."""
    if not steps:
        yield ()
        return
    for size in range(1, len(steps) + 1):
        for first in itertools.combinations(steps, size):
            rest = [s for s in steps if s not in first]
            for tail in _ordered_partitions(rest):
                yield (first, *tail)


def _rows(data: list[list[bool]], rows: float):  # type: ignore[no-untyped-def]
    """rows_after from a small table of which sample rows each step keeps: correlated shares,
    as joint counts give them."""
    sample = len(data[0]) if data else 1
    known: dict[int, float] = {}

    def rows_after(mask: int) -> float:
        if mask not in known:
            kept = sum(all(data[i][r] for i in range(len(data)) if mask >> i & 1) for r in range(sample))
            known[mask] = rows * kept / sample
        return known[mask]
    return rows_after


def _group_cost(predicates: list[float], clustered: list[float], shape: FrameShape, combine: float = 0.23):  # type: ignore[no-untyped-def]
    def cost(mask: int, rows_in: float, kept: float) -> float:
        members = [i for i in range(len(predicates)) if mask >> i & 1]
        predicate = sum(predicates[i] for i in members) + combine * (len(members) - 1)
        return step_cost(rows_in, predicate, kept, shape, clustered=min(clustered[i] for i in members))
    return cost


def _group_costs(predicates: list[float], clustered: list[float], shape: FrameShape, combine: float = 0.23):  # type: ignore[no-untyped-def]
    """The same costs over arrays, as `plan_chain` gives them to the planner."""
    def costs(masks, which, rows_in, kept):  # type: ignore[no-untyped-def]
        members = [[i for i in range(len(predicates)) if mask >> i & 1] for mask in masks]
        predicate = np.array([sum(predicates[i] for i in m) + combine * (len(m) - 1) for m in members])
        least = np.array([min(clustered[i] for i in m) for m in members])
        return step_costs(rows_in, predicate[which], kept, shape, clustered=least[which])
    return costs


step_cases = st.lists(
    st.tuples(costs, st.lists(st.booleans(), min_size=8, max_size=8), st.booleans(), st.sampled_from([None, "mask", "query"]),
              st.sampled_from([0.0, 0.0, 1.0])),
    min_size=1, max_size=5,
)


@settings(max_examples=150, deadline=None, derandomize=True)
@given(step_cases, shapes, st.integers(1_000, 10_000_000))
def test_planned_groups_are_optimal_against_brute_force(steps, shape, rows) -> None:
    predicates = [p for p, _, _, _, _ in steps]
    rows_after = _rows([kept for _, kept, _, _, _ in steps], rows)
    cost = _group_cost(predicates, [c for *_, c in steps], shape)
    before = {i: (1 << i) - 1 for i, (_, _, later, _, _) in enumerate(steps) if later}
    families = [f for _, _, _, f, _ in steps]

    def joinable(mask: int) -> bool:
        kinds = {families[i] for i in range(len(steps)) if mask >> i & 1}
        return len(kinds) == 1 and None not in kinds

    plan, planned = plan_groups(range(len(steps)), rows_after, cost, before, joinable)
    assert sorted(s for g in plan for s in g) == list(range(len(steps)))
    assert allowed(plan, before, joinable)
    assert math.isclose(planned, groups_cost(plan, rows_after, cost), rel_tol=1e-9)
    every = [p for p in _ordered_partitions(list(range(len(steps)))) if allowed(p, before, joinable)]
    best = min(groups_cost(p, rows_after, cost) for p in every)
    assert planned <= best * (1 + 1e-9) + 1e-6
    # Priced over arrays, as `plan_chain` does, the plan costs the same.
    arrays, _ = plan_groups(range(len(steps)), rows_after, cost, before, joinable,
                            costs=_group_costs(predicates, [c for *_, c in steps], shape))
    assert math.isclose(groups_cost(arrays, rows_after, cost), planned, rel_tol=1e-9, abs_tol=1e-6)
    # Singletons are today's plans: the best order is never better than the best plan.
    orders = [tuple((s,) for s in p) for p in itertools.permutations(range(len(steps)))]
    assert planned <= min(groups_cost(p, rows_after, cost) for p in orders if allowed(p, before, joinable)) * (1 + 1e-9) + 1e-6


@settings(max_examples=20, deadline=None, derandomize=True)
@given(st.lists(st.tuples(costs, shares, st.booleans()), min_size=EXACT_LIMIT + 1, max_size=EXACT_LIMIT + 4), shapes)
def test_long_segments_merge_within_limits_and_never_cost_more_than_their_order(steps, shape) -> None:
    selectivities = [s for _, s, _ in steps]

    def rows_after(mask: int) -> float:
        return 1e6 * math.prod(s for i, s in enumerate(selectivities) if mask >> i & 1)

    cost = _group_cost([p for p, _, _ in steps], [0.0] * len(steps), shape)
    before = {i: (1 << i) - 1 for i, (_, _, later) in enumerate(steps) if later}
    plan, planned = plan_groups(range(len(steps)), rows_after, cost, before, lambda mask: True)
    assert sorted(s for g in plan for s in g) == list(range(len(steps)))
    assert allowed(plan, before, lambda mask: True)
    order_only, _ = plan_groups(range(len(steps)), rows_after, cost, before, lambda mask: False)
    assert all(len(g) == 1 for g in order_only)
    assert planned <= groups_cost(order_only, rows_after, cost) * (1 + 1e-9)


def test_a_segment_at_the_exact_limit_is_planned_whole() -> None:
    rows_after = _rows([[bool((i * 7 + r * 3) % 5) for r in range(8)] for i in range(EXACT_LIMIT)], 1e6)
    cost = _group_cost([float(1 + i % 4) for i in range(EXACT_LIMIT)], [0.0] * EXACT_LIMIT, FrameShape({f"c{i}": "str" for i in range(30)}))
    costs = _group_costs([float(1 + i % 4) for i in range(EXACT_LIMIT)], [0.0] * EXACT_LIMIT, FrameShape({f"c{i}": "str" for i in range(30)}))
    plan, planned = plan_groups(range(EXACT_LIMIT), rows_after, cost, {}, lambda mask: True, costs=costs)
    assert sorted(s for g in plan for s in g) == list(range(EXACT_LIMIT))
    # No greedy plan beats it: the order planner's order with neighbours merged.
    assert planned <= _merged(list(range(EXACT_LIMIT)), rows_after, cost, {}, lambda mask: True, None)[1] * (1 + 1e-9)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.lists(st.tuples(st.floats(0.0, 1e8), st.floats(0.0, 100.0), shares, st.sampled_from([0.0, 0.3, 1.0])), min_size=1, max_size=20), shapes)
def test_step_costs_over_arrays_are_step_cost(cases, shape) -> None:
    rows, predicate, kept, clustered = (np.array(column) for column in zip(*cases))
    expected = [step_cost(*case[:3], shape, clustered=case[3]) for case in cases]
    assert np.allclose(step_costs(rows, predicate, kept, shape, clustered=clustered), expected, rtol=1e-12, atol=1e-6)


# -- the limits, against pandas ---------------------------------------------------------------

_GUARDED = """import pandas as pd
out = (
    df
    .loc[lambda d: d.kind == "number"]
    .loc[lambda d: d.value > 1]
    .loc[lambda d: d.size_cm < 50]
)
"""


def _frame() -> pd.DataFrame:
    # An object column of numbers and words: `value > 1` raises on the words, which step 1
    # removes (the common pattern of a guard and the step it guards).
    return pd.DataFrame({
        "kind": ["number", "word", "number", "number"],
        "value": pd.Series([3, "three", 0, 5], dtype=object),
        "size_cm": [10, 20, 70, 30],
    })


def _run(source: str, frame: pd.DataFrame) -> pd.DataFrame | Exception:
    scope = {"df": frame.copy()}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            exec(compile(source, "<generated>", "exec"), scope)  # the test's own code, never analysed code
        except Exception as error:  # noqa: BLE001 - the comparison is the point
            return error
    return scope["out"]


def test_a_step_that_may_raise_never_shares_a_mask_with_the_steps_written_before_it() -> None:
    frame = _frame()
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    (chain,) = analyse_source(text_source("guarded.py", _GUARDED)).chains
    limits = tuple(judge(step.predicate, dtypes, "frame") for step in chain.steps)
    assert [limit.moves for limit in limits] == ["any", LATER, "any"]
    (segment,) = plan_segments(limits)
    before, joinable = precedence(segment, limits), may_join(chain, limits, dtypes)
    plans = [p for p in _ordered_partitions(segment) if allowed(p, before, joinable)]
    # pandas is the judge: the guard and the step it guards in one mask raise ...
    assert isinstance(_run("import pandas as pd\nout = df.loc[lambda d: (d.kind == 'number') & (d.value > 1)]\n", frame), TypeError)
    assert all(not {0, 1} <= set(group) for plan in plans for group in plan)
    # ... while every plan the limits allow returns what the written chain returns.
    written = _run(_GUARDED, frame)
    assert not isinstance(written, Exception)
    from chainlint.rewrite.plans import plan_edit
    from chainlint.rewrite.permute import apply_edits
    from chainlint.rewrite.verify import verify

    text = text_source("guarded.py", _GUARDED)
    joined = 0
    for plan in plans:
        if plan == ((0,), (1,), (2,)):
            continue
        rewritten = apply_edits(_GUARDED, [plan_edit(text, chain, plan)])
        verify(text, rewritten, [(chain, plan)])
        result = _run(rewritten, frame)
        assert not isinstance(result, Exception), (rewritten, result)
        pd.testing.assert_frame_equal(result, written)
        joined += any(len(group) > 1 for group in plan)
    # The guarded step may still join the steps written after it.
    assert ((0,), (1, 2)) in plans and joined >= 1


def test_a_column_that_is_not_boolean_never_joins_a_mask() -> None:
    # `&` of an integer column is a bitwise integer, which `.loc` reads as labels (pandas).
    frame = pd.DataFrame({"flag": [1, 0, 2], "n": [1, 2, 3]})
    source = "import pandas as pd\nout = df.loc[lambda d: d.n > 0].loc[lambda d: d.flag]\n"
    (chain,) = analyse_source(text_source("flag.py", source)).chains
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    limits = tuple(judge(step.predicate, dtypes, "frame") for step in chain.steps)
    assert not may_join(chain, limits, dtypes)(0b11)
    assert may_join(chain, limits, {"flag": "bool", "n": "int64"})(0b11)


@pytest.mark.parametrize(("groups", "words"), [
    (((2,), (0,), (1,)), "steps 3, 1, 2"),
    (((1, 2, 3), (0,)), "one mask of steps 2, 3 and 4, then step 1"),
    (((2,), (3,), (0, 1)), "steps 3, 4, then one mask of steps 1 and 2"),
    (((0, 1),), "one mask of steps 1 and 2"),
])
def test_plans_in_words(groups, words) -> None:
    assert describe(groups) == words


def test_rank_of_singletons_is_kept_when_nothing_may_join() -> None:
    rows_after = _rows([[True] * 7 + [False], [True] + [False] * 7], 1e6)
    cost = _group_cost([1.0, 1.0], [0.0, 0.0], FrameShape({"a": "numeric"}))
    plan, _ = plan_groups([0, 1], rows_after, cost, {}, lambda mask: False)
    assert plan == ((1,), (0,))
    assert np.isfinite(groups_cost(plan, rows_after, cost))
