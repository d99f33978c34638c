"""The planner against brute force: its order costs the minimum over all permutations."""

from __future__ import annotations

import itertools
import math

from hypothesis import given, settings
from hypothesis import strategies as st

from chainlint.estimate.cost import DEFAULT_MODEL, FrameShape, fixed_cost, predicate_cost, step_cost
from chainlint.ir.text import parse_predicate
from chainlint.plan.groups import groups_cost
from chainlint.plan.planner import EXACT_LIMIT, order_cost, plan_segment, walk

shares = st.floats(min_value=0.0, max_value=1.0)
costs = st.floats(min_value=0.1, max_value=50.0)
shapes = st.builds(
    FrameShape,
    st.dictionaries(st.sampled_from([f"c{i}" for i in range(12)]), st.sampled_from(["numeric", "str", "object", "category"]), min_size=1),
)


def _independent(selectivities, rows):  # type: ignore[no-untyped-def]
    def rows_after(mask: int) -> float:
        return rows * math.prod(s for i, s in enumerate(selectivities) if mask >> i & 1)
    return rows_after


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(costs, shares), min_size=1, max_size=6), shapes, st.integers(1_000, 10_000_000))
def test_planned_order_is_optimal_against_brute_force(steps, shape, rows) -> None:
    predicates = [p for p, _ in steps]
    rows_after = _independent([s for _, s in steps], rows)

    def cost(step: int, rows_in: float, kept: float) -> float:
        return step_cost(rows_in, predicates[step], kept, shape)

    order, planned = plan_segment(range(len(steps)), rows_after, cost)
    assert sorted(order) == list(range(len(steps)))
    assert math.isclose(planned, order_cost(order, rows_after, cost), rel_tol=1e-9)
    best = min(order_cost(p, rows_after, cost) for p in itertools.permutations(range(len(steps))))
    assert planned <= best * (1 + 1e-9)


def _limits(later: list[bool]) -> dict[int, int]:
    """Precedence as the planner gets it: a step that may only move later keeps every step
    written before it in front of it."""
    return {i: (1 << i) - 1 for i, flag in enumerate(later) if flag}


def _respects(order, before) -> bool:  # type: ignore[no-untyped-def]
    done = 0
    for step in order:
        if before.get(step, 0) & ~done:
            return False
        done |= 1 << step
    return True


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(costs, shares, st.booleans()), min_size=1, max_size=6), shapes, st.integers(1_000, 10_000_000))
def test_planned_order_is_optimal_under_precedence_limits(steps, shape, rows) -> None:
    predicates = [p for p, _, _ in steps]
    rows_after = _independent([s for _, s, _ in steps], rows)
    before = _limits([later for _, _, later in steps])

    def cost(step: int, rows_in: float, kept: float) -> float:
        return step_cost(rows_in, predicates[step], kept, shape)

    order, planned = plan_segment(range(len(steps)), rows_after, cost, before)
    assert sorted(order) == list(range(len(steps))) and _respects(order, before)
    allowed = [p for p in itertools.permutations(range(len(steps))) if _respects(p, before)]
    assert planned <= min(order_cost(p, rows_after, cost) for p in allowed) * (1 + 1e-9)


@settings(max_examples=50, deadline=None)
@given(st.lists(st.tuples(costs, shares, st.booleans()), min_size=EXACT_LIMIT + 1, max_size=EXACT_LIMIT + 3))
def test_greedy_order_respects_precedence_limits(steps) -> None:
    rows_after = _independent([s for _, s, _ in steps], 1e6)
    before = _limits([later for _, _, later in steps])

    def cost(step: int, rows_in: float, kept: float) -> float:
        return rows_in * steps[step][0]

    order, planned = plan_segment(range(len(steps)), rows_after, cost, before)
    assert sorted(order) == list(range(len(steps))) and _respects(order, before)
    assert math.isclose(planned, order_cost(order, rows_after, cost), rel_tol=1e-9)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(costs, st.floats(min_value=0.0, max_value=0.999)), min_size=2, max_size=6))
def test_rank_ordering_is_optimal_for_order_free_costs(steps) -> None:
    # Ibaraki & Kameda 1984; Krishnamurthy, Boral & Zaniolo 1986: ascending a_i / (1 - s_i).
    rows_after = _independent([s for _, s in steps], 1e6)

    def cost(step: int, rows_in: float, kept: float) -> float:
        return rows_in * steps[step][0]

    _, planned = plan_segment(range(len(steps)), rows_after, cost)
    ranked = sorted(range(len(steps)), key=lambda i: steps[i][0] / (1 - steps[i][1]))
    assert math.isclose(planned, order_cost(ranked, rows_after, cost), rel_tol=1e-9)


@settings(max_examples=50, deadline=None)
@given(st.lists(st.tuples(costs, shares), min_size=EXACT_LIMIT + 1, max_size=EXACT_LIMIT + 3))
def test_long_segments_get_a_complete_greedy_order(steps) -> None:
    rows_after = _independent([s for _, s in steps], 1e6)

    def cost(step: int, rows_in: float, kept: float) -> float:
        return rows_in * steps[step][0]

    order, planned = plan_segment(range(len(steps)), rows_after, cost)
    assert sorted(order) == list(range(len(steps)))
    ranked = sorted(range(len(steps)), key=lambda i: (steps[i][0] / max(1 - steps[i][1], 1e-12), i))
    assert math.isclose(planned, order_cost(ranked, rows_after, cost), rel_tol=1e-6)


def test_kept_rows_in_runs_cost_what_dense_keeps_cost() -> None:
    from chainlint.estimate.cost import DEFAULT_MODEL, take_cost

    shape = FrameShape({"a": "numeric", "b": "str"})
    scattered = take_cost(1e6, 0.02, shape)
    clustered = take_cost(1e6, 0.02, shape, clustered=1.0)
    dense_numeric = DEFAULT_MODEL.numeric_take_kept[-1][1]
    dense_string = DEFAULT_MODEL.string_take_kept[-1][1]
    expected = 1e6 * DEFAULT_MODEL.numeric_take_in + 2e4 * dense_numeric + 1e6 * DEFAULT_MODEL.string_take_in + 2e4 * dense_string
    assert math.isclose(clustered, expected) and scattered > clustered


def test_one_pricing_of_an_order_and_a_share_never_above_one() -> None:
    # Rows from estimates of different bases need not fall as steps are added (an exact joint
    # count for step 0 alone, independence for both): step 1 after step 0 would "keep" 1.2 of
    # its rows. A filter never adds rows: every pricing caps it at 1.0, and they agree.
    rows = {0: 100.0, 0b01: 50.0, 0b10: 80.0, 0b11: 60.0}
    seen: list[float] = []

    def cost(step_or_mask: int, rows_in: float, kept: float) -> float:
        seen.append(kept)
        return rows_in * (1.0 + kept)

    priced = list(walk([(0,), (1,)], rows.__getitem__, cost))
    assert [(rows_in, rows_out, kept) for _, rows_in, rows_out, kept, _ in priced] == [(100.0, 50.0, 0.5), (50.0, 50.0, 1.0)]
    assert order_cost([0, 1], rows.__getitem__, cost) == groups_cost([(0,), (1,)], rows.__getitem__, cost) == 150.0 + 100.0
    assert max(seen) == 1.0
    order, planned = plan_segment([0, 1], rows.__getitem__, cost)
    assert planned == order_cost(order, rows.__getitem__, cost)


def test_a_string_test_is_priced_as_pandas_runs_it() -> None:
    # pandas' `.str.contains` reads its pattern as a regular expression unless told
    # `regex=False`; `match` and `fullmatch` always do (pandas' API reference).
    shape = FrameShape({"name": "str"})
    regex = {parse_predicate(t) for t in ('name.str.contains("a.b")', 'name.str.match("a")', 'name.str.fullmatch("ab")')}
    plain = {parse_predicate(t) for t in ('name.str.contains("ab", regex=False)', 'name.str.startswith("ab")', 'name.str.endswith("b")')}
    assert {predicate_cost(node, shape) for node in regex} == {DEFAULT_MODEL.regex_test}
    assert {predicate_cost(node, shape) for node in plain} == {DEFAULT_MODEL.string_test}


def test_the_fixed_cost_of_a_step_counts_the_columns_pandas_holds_apart() -> None:
    # pandas keeps numpy columns of one dtype in one block, and each pyarrow string,
    # categorical or nullable column as an array of its own (pandas' internals guide).
    numeric = FrameShape({f"n{i}": "numeric" for i in range(8)})
    mixed = FrameShape({"s": "str", "c": "category", "m": "numeric", "o": "object"}, {"m": "nullable"})
    assert fixed_cost(numeric) == DEFAULT_MODEL.fixed
    assert fixed_cost(mixed) == DEFAULT_MODEL.fixed + 3 * DEFAULT_MODEL.fixed_per_column
    assert step_cost(0.0, 1.0, 1.0, mixed) == fixed_cost(mixed)
