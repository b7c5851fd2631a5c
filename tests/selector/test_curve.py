"""The capacity curve: best value at every capacity step, and the plan at any point."""

from __future__ import annotations

import math
from dataclasses import replace

from hypothesis import given, settings
from selector_oracles import brute_force
from selector_strategies import problems

from server.selector import (
    DEFAULT_CURVE_MARGIN,
    Item,
    Problem,
    chosen_at,
    default_curve_to,
    solve,
)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(problems(max_n=9, either_or=True))
def test_curve_matches_brute_force_at_every_capacity(problem: Problem) -> None:
    selection = solve(problem, curve_to=default_curve_to(problem.capacity))
    if not selection.feasible:
        assert selection.curve is None
        return
    curve = selection.curve
    assert curve is not None
    for days, value in zip(curve.capacity_days, curve.values, strict=True):
        reference = brute_force(replace(problem, capacity=max(days, 1e-9)), tie_rule=False)
        assert reference.value is not None
        assert math.isclose(value, reference.value, abs_tol=1e-9), (days, value, reference)


@settings(max_examples=100, deadline=None, derandomize=True)
@given(problems(max_n=8, needs="forest"))
def test_forest_curve_matches_chosen_at(problem: Problem) -> None:
    selection = solve(problem, curve_to=default_curve_to(problem.capacity))
    if selection.curve is None:
        return
    for days, value in list(
        zip(selection.curve.capacity_days, selection.curve.values, strict=True)
    )[::3]:
        point = chosen_at(problem, days)
        assert math.isclose(point.value, value, abs_tol=1e-9)


def test_curve_steps_and_default_end() -> None:
    items = (Item("a", 1, 3), Item("b", 2, 4), Item("c", 3, 8))
    problem = Problem(items, 4)
    assert default_curve_to(4) == 4 * (1 + DEFAULT_CURVE_MARGIN) == 5
    curve = solve(problem, curve_to=default_curve_to(4)).curve
    assert curve is not None
    assert curve.capacity_days == tuple(k * 0.5 for k in range(11))
    assert curve.values == (0, 0, 3, 3, 4, 4, 8, 8, 11, 11, 12)
    assert chosen_at(problem, 2.5).chosen == ("b",)
    assert chosen_at(problem, 3).chosen == ("c",)
    assert chosen_at(problem, 4).chosen == ("a", "c")
    assert chosen_at(problem, 0).chosen == ()
    assert chosen_at(problem, 0).feasible


def test_curve_starts_at_the_pinned_work() -> None:
    items = (Item("p", 2, 1, pinned=True), Item("b", 1, 5))
    curve = solve(Problem(items, 3), curve_to=4).curve
    assert curve is not None
    assert curve.capacity_days[0] == 2.0
    assert curve.values[:3] == (1, 1, 6)


def test_curve_is_none_for_the_binary_program() -> None:
    items = (Item("a", 1, 1), Item("b", 1, 1), Item("c", 1, 5, needs=("a", "b")))
    selection = solve(Problem(items, 3), curve_to=4)
    assert selection.method == "milp-highs"
    assert selection.curve is None
