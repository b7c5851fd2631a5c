"""Twins (same effort in units, same value) taken as pieces of 1, 2, 4, ... in one DP step.

The pieces must give exactly the plan the DP over single initiatives gives, tie rule
included: checked against that DP at every capacity, against brute force with the documented
tie rule, and across every path (plan only, capacity curve, explanations, low memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from selector_oracles import brute_force

from server.selector import Item, Problem, default_curve_to, dp, engine, solve, twins
from server.selector.engine import step_groups


@st.composite
def twin_heavy_rows(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Item indices in processing order over few (units, value) pairs, and a DP width."""
    kinds = draw(st.lists(st.tuples(st.integers(1, 3), st.integers(1, 4)), min_size=1, max_size=4))
    picks = draw(st.lists(st.integers(0, len(kinds) - 1), min_size=1, max_size=40))
    units = np.array([kinds[k][0] for k in picks], dtype=np.int64)
    values = np.array([kinds[k][1] for k in picks], dtype=np.int32)
    order = twins.twins_first(np.arange(len(picks)), units, values)
    width = draw(st.integers(1, int(units.sum()) + 3))
    return order, units, values, width


@settings(max_examples=300, deadline=None, derandomize=True)
@given(twin_heavy_rows())
def test_pieces_give_the_single_steps_row_and_plan_at_every_capacity(
    rows: tuple[np.ndarray, np.ndarray, np.ndarray, int],
) -> None:
    order, units, values, width = rows
    singles = dp.make_steps([[i] for i in order.tolist()], units.tolist(), values)
    bundled = twins.bundle_items(order, units, values, width - 1, exact=True)
    assert bundled.steps.members <= singles.members
    single_table = np.empty((singles.members, (width + 7) // 8), dtype=np.uint8)
    piece_table = np.empty((bundled.steps.members, (width + 7) // 8), dtype=np.uint8)
    single_reach: list[int] = []
    piece_reach: list[int] = []
    single_row = dp.run_forward(singles, width, table=single_table, reach_out=single_reach).row
    piece_row = dp.run_forward(bundled.steps, width, table=piece_table, reach_out=piece_reach).row
    assert piece_row.tolist() == single_row.tolist()
    for capacity in range(width):
        taken, _ = dp.backtrack(singles, single_table, capacity, reach=single_reach)
        pieces, _ = dp.backtrack(bundled.steps, piece_table, capacity, reach=piece_reach)
        assert sorted(bundled.items(pieces)) == sorted(singles.ids[m] for m in taken)


@st.composite
def twin_heavy_problems(draw: st.DrawFn, *, either_or: bool = False) -> Problem:
    n = draw(st.integers(1, 14))
    kinds = draw(st.lists(st.tuples(st.integers(1, 4), st.integers(1, 6)), min_size=1, max_size=3))
    picks = draw(st.lists(st.integers(0, len(kinds) - 1), min_size=n, max_size=n))
    states = draw(st.lists(st.sampled_from(["free"] * 6 + ["pinned", "ruled_out"]), min_size=n))
    sets = draw(st.lists(st.sampled_from([None, None, "x", "y"]), min_size=n, max_size=n))
    items = []
    for k, kind in enumerate(picks):
        units, value = kinds[kind]
        items.append(
            Item(
                f"i{k}",
                units * 0.5,
                value,
                pinned=states[k] == "pinned" and not either_or,
                ruled_out=states[k] == "ruled_out" and not either_or,
                either_or=sets[k] if either_or else None,
            )
        )
    total = sum(item.effort for item in items)
    capacity = draw(st.sampled_from([0.3, 0.5, 0.8])) * total + 0.5
    return Problem(tuple(items), capacity, resolution=0.5)


@settings(max_examples=400, deadline=None, derandomize=True)
@given(twin_heavy_problems())
def test_twin_heavy_plans_match_brute_force_and_the_tie_rule_on_every_path(
    problem: Problem,
) -> None:
    reference = brute_force(problem)
    if reference.value is None:
        assert not solve(problem).feasible
        return
    expected = tuple(problem.items[i].key for i in reference.chosen)
    assert solve(problem).chosen == expected
    assert solve(problem, curve_to=default_curve_to(problem.capacity)).chosen == expected
    assert solve(problem, explain=True).chosen == expected
    assert solve(problem, memory_budget_bytes=16).chosen == expected
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(engine, "BOUNDS_MIN_CELLS", 0)  # the stop rule's bounds on pieces too
        assert solve(problem).chosen == expected


@settings(max_examples=200, deadline=None, derandomize=True)
@given(twin_heavy_problems(either_or=True))
def test_twins_beside_either_or_sets_keep_the_best_value_and_one_plan(problem: Problem) -> None:
    reference = brute_force(problem, tie_rule=False)
    plain = solve(problem)
    assert plain.value == reference.value
    assert solve(problem, curve_to=default_curve_to(problem.capacity)).chosen == plain.chosen
    assert solve(problem, memory_budget_bytes=16).chosen == plain.chosen


def test_processing_order_puts_each_twin_after_the_first_of_its_twins() -> None:
    units = np.array([2, 1, 2, 3, 1, 2], dtype=np.int64)
    values = np.array([5, 4, 5, 6, 4, 7], dtype=np.int32)
    order = twins.twins_first(np.arange(6), units, values)
    assert order.tolist() == [0, 2, 1, 4, 3, 5]
    # Either-or members are never twins and keep the set at its first member's place.
    assert step_groups([0, 1, 2, 3, 4, 5], [[1, 3]], units, values) == [
        [0],
        [2],
        [1, 3],
        [4],
        [5],
    ]


def test_a_thousand_twins_cost_a_handful_of_rows() -> None:
    # 1,000 equal initiatives of 1 day (value 2) and a 100-day capacity: at most 100 fit, so
    # the run is cut to 100 and taken as pieces of 1, 2, 4, 8, 16, 32 and 37.
    items = (*(Item(f"i{k:04d}", 1, 2) for k in range(1000)), Item("odd", 3, 5))
    problem = Problem(items, 100, resolution=1)
    full = solve(problem, curve_to=100)
    assert full.chosen == tuple(f"i{k:04d}" for k in range(100))
    assert "1000 twins of equal effort and value in 1 run," in full.method_note
    assert "1001 initiatives as 8 decision rows" in full.method_note
    assert full.cells <= 8 * 101
    assert full.curve is not None
    assert full.curve.values[:4] == (0.0, 2.0, 4.0, 6.0)
    assert solve(problem).chosen == full.chosen


@settings(max_examples=300, deadline=None, derandomize=True)
@given(
    st.lists(st.tuples(st.integers(1, 6), st.integers(1, 7)), min_size=0, max_size=120),
    st.integers(0, 60),
)
def test_the_one_pass_order_and_pieces_equal_the_two_step_ones(
    pairs: list[tuple[int, int]], top: int
) -> None:
    # ordered_steps loops over the kinds when they are few and falls back to twins_first and
    # bundle_items otherwise; either way the order and the steps must be theirs.
    units = np.array([w for w, _ in pairs], dtype=np.int64)
    values = np.array([v for _, v in pairs], dtype=np.int32)
    items = np.arange(len(pairs), dtype=np.int64)[::-1].copy()  # not in position order
    order, bundled = twins.ordered_steps(items, units, values, top, exact=True)
    expected_order = twins.twins_first(items, units, values)
    expected = twins.bundle_items(expected_order, units, values, top, exact=True)
    assert order.tolist() == expected_order.tolist()
    assert bundled.steps.ids == expected.steps.ids
    assert bundled.steps.units == expected.steps.units
    assert bundled.steps.values.tolist() == expected.steps.values.tolist()
    assert bundled.steps.values.dtype == expected.steps.values.dtype
    assert bundled.pieces == expected.pieces
    assert bundled.runs == expected.runs
