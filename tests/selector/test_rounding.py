"""Efforts round up and capacity rounds down to the resolution, without float noise."""

from __future__ import annotations

from server.selector import Item, Problem, solve
from server.selector.rounding import units_down, units_up


def test_exact_multiples_do_not_gain_a_unit_from_float_noise() -> None:
    assert units_up(1.0, 0.5) == 2
    assert units_up(0.1 + 0.2, 0.1) == 3  # 0.30000000000000004 / 0.1 is 3.0000000000000004
    assert units_down(0.7, 0.1) == 7  # 0.7 / 0.1 is 6.999999999999999
    assert units_up(1.01, 0.5) == 3
    assert units_down(1.49, 0.5) == 2


def test_rounding_is_reported() -> None:
    items = (Item("a", 1.2, 1), Item("b", 2.0, 1), Item("c", 0.3, 1))
    selection = solve(Problem(items, 3.7))
    rounding = selection.rounding
    assert rounding.capacity_units == 7
    assert rounding.capacity_days_used == 3.5
    assert abs(rounding.capacity_days_lost - 0.2) < 1e-12
    assert rounding.effort_units == {"a": 3, "b": 4, "c": 1}
    assert rounding.items_rounded_up == ("a", "c")
    # a + b + c is 3.5 real days but 8 units > 7: rounding up keeps the plan honest.
    assert selection.value == 2
    assert selection.effort <= 3.5


def test_capacity_below_one_unit_fits_nothing() -> None:
    selection = solve(Problem((Item("a", 0.1, 1),), 0.4))
    assert selection.feasible
    assert selection.chosen == ()
    assert selection.rounding.capacity_units == 0
