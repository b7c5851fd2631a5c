"""Passes that end early: the DP's stop rule, and the fullest-plan DP for proportional values.

Tie-heavy instances (value a fixed multiple of effort, as in Pisinger's subset-sum family, and
few distinct ratios) are where a pass ends once the plan provably cannot improve; the plan must
still be the one the documented tie rule picks, checked against brute force and against the
full DP (a capacity curve keeps every step in the pass).
"""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from selector_oracles import brute_force

from server.selector import Item, Problem, default_curve_to, engine, solve


@st.composite
def tie_heavy(draw: st.DrawFn) -> Problem:
    n = draw(st.integers(1, 14))
    units = draw(st.lists(st.integers(1, 6), min_size=n, max_size=n))
    # value = effort (subset-sum) or a few shared ratios, so many plans tie
    ratios = draw(st.lists(st.sampled_from([1, 2, 3]), min_size=n, max_size=n))
    # one shared multiple for every item (the fullest-plan path), or a few mixed ratios
    shared = draw(st.sampled_from([None, 1, 2.5, 0.5]))
    items = tuple(
        Item(f"i{k}", u, u * (r if shared is None else shared))
        for k, (u, r) in enumerate(zip(units, ratios, strict=True))
    )
    capacity = draw(st.integers(1, max(1, sum(units))))
    return Problem(items, capacity, resolution=1)


@settings(max_examples=400, deadline=None, derandomize=True)
@given(tie_heavy())
def test_stopped_plans_match_brute_force_and_the_full_dp(problem: Problem) -> None:
    reference = brute_force(problem)
    expected = tuple(problem.items[i].key for i in reference.chosen)
    plain = solve(problem)
    assert plain.value == reference.value
    assert tuple(plain.chosen) == expected
    # Small DPs skip the bounds; with the threshold at zero every pass computes them and
    # may stop early, which must not change the plan.
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(engine, "BOUNDS_MIN_CELLS", 0)
        bounded = solve(problem)
    assert bounded.chosen == expected
    full = solve(problem, curve_to=default_curve_to(problem.capacity))
    assert full.chosen == plain.chosen


def _subset_sum(n: int, capacity: int) -> Problem:
    # Efforts 1..10 days in a fixed pseudo-random order; value equals effort.
    items = tuple(Item(f"i{k}", 1 + (k * 7919) % 10, 1 + (k * 7919) % 10) for k in range(n))
    return Problem(items, capacity, resolution=1)


def test_subset_sum_stops_once_the_capacity_is_filled_exactly() -> None:
    problem = _subset_sum(2000, 500)
    plain = solve(problem)
    full = solve(problem, curve_to=500)
    assert plain.value == full.value == 500
    assert plain.chosen == full.chosen
    assert (plain.method, full.method) == ("dp-subset-sum", "dp")
    assert "stopped after" in plain.method_note
    # The full pass evaluates about 2000 x 500 cells; the stopped one a prefix of them.
    assert plain.cells * 10 < full.cells


def test_stop_rule_ends_a_row_dp_pass_with_the_same_plan() -> None:
    # Efforts 1-3,000 days, each once, values within a point of the effort (after Pisinger's
    # weakly correlated family): no fullest-plan shortcut and no twins, and a core big
    # enough for the bounds to be worth computing; once the early rows reach the LP bound
    # the rest cannot change the plan.
    efforts = [1 + (k * 37) % 3000 for k in range(3000)]
    items = tuple(Item(f"i{k}", e, max(1, e + (k * 11) % 3 - 1)) for k, e in enumerate(efforts))
    problem = Problem(items, 6000, resolution=1)
    plain = solve(problem)
    full = solve(problem, curve_to=6000)
    assert plain.method == full.method == "dp"
    assert plain.chosen == full.chosen
    assert "stopped after" in plain.method_note
    assert plain.cells < full.cells


def test_no_stop_when_the_bound_is_out_of_reach() -> None:
    # Efforts 2 with capacity 5: the LP bound (5 days' worth) cannot be reached by whole items.
    items = tuple(Item(f"i{k}", 2, 2) for k in range(6))
    selection = solve(Problem(items, 5, resolution=1))
    assert selection.value == 4
    assert "stopped after" not in selection.method_note
