"""Worked examples and an open dataset instance with published optima."""

from __future__ import annotations

from selector_oracles import highs_reference, plain_items

from server.selector import Problem, solve


def test_clrs_fractional_vs_01_example() -> None:
    # Cormen, Leiserson, Rivest and Stein, Introduction to Algorithms, 3rd ed., section 16.2
    # (from memory): weights 10, 20, 30, values 60, 100, 120, capacity 50 -> 220 with items 2, 3.
    problem = Problem(plain_items([10, 20, 30], [60, 100, 120]), capacity=50, resolution=1)
    selection = solve(problem)
    assert selection.value == 220
    assert selection.chosen == ("2", "3")
    assert selection.effort == 50
    assert selection.headroom == 0
    assert selection.feasible


def test_burkardt_knapsack_01_p01() -> None:
    # J. Burkardt, KNAPSACK_01 test data, instance P01 (after Kreher and Stinson), from memory:
    # capacity 165, optimum 309 choosing items 1-4 and 6.
    weights = [23, 31, 29, 44, 53, 38, 63, 85, 89, 82]
    profits = [92, 57, 49, 68, 60, 43, 67, 84, 87, 72]
    problem = Problem(plain_items(weights, profits), capacity=165, resolution=1)
    # The remembered optimum is confirmed here by HiGHS rather than trusted.
    reference = highs_reference(problem)
    assert reference.value == 309
    assert reference.chosen == (0, 1, 2, 3, 5)
    selection = solve(problem)
    assert selection.value == 309
    assert selection.chosen == ("1", "2", "3", "4", "6")
    assert selection.effort == 165


def test_burkardt_p01_in_half_days_gives_the_same_plan() -> None:
    # The same instance with efforts in days at the default 0.5-day resolution: the grid is
    # twice as fine but every effort is a whole number of days, so nothing changes.
    weights = [23, 31, 29, 44, 53, 38, 63, 85, 89, 82]
    profits = [92, 57, 49, 68, 60, 43, 67, 84, 87, 72]
    selection = solve(Problem(plain_items(weights, profits), capacity=165))
    assert selection.rounding.capacity_units == 330
    assert selection.chosen == ("1", "2", "3", "4", "6")
    assert selection.rounding.items_rounded_up == ()
