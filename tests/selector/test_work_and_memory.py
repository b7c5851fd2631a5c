"""Work counted in DP cells (not timed), and the exact low-memory path of the memory guard."""

from __future__ import annotations

import math

from hypothesis import given, settings
from selector_oracles import brute_force, indices, units_of
from selector_strategies import problems

from server.selector import Item, Problem, default_curve_to, solve

# Efforts 1..7 units, none fitting in capacity 0, one (50 units) never fitting.
EFFORT_UNITS = [1, 2, 3, 4, 5, 6, 7, 50, 3, 2]


def expected_cells(units: list[int], capacity: int) -> int:
    """The documented count: each initiative that fits evaluates its units up to the smaller
    of the capacity and the total units seen so far (above that, taking all is optimal)."""
    cells = 0
    reach = 0
    for u in units:
        if u <= capacity:
            end = min(reach + u, capacity)
            cells += end + 1 - u
            reach = end
    return cells


def _problem(capacity_units: int, **marks: dict[str, bool]) -> Problem:
    items = tuple(
        Item(f"i{k}", u * 0.5, 1 + (k * 7) % 11, **marks.get(f"i{k}", {}))
        for k, u in enumerate(EFFORT_UNITS)
    )
    return Problem(items, capacity_units * 0.5)


def test_plain_dp_cells_are_exactly_the_candidate_evaluations() -> None:
    capacity = 20
    # A curve ending at the capacity keeps every row (no reduction), so the count is exact.
    selection = solve(_problem(capacity), curve_to=capacity * 0.5)
    assert selection.method == "dp"
    assert selection.cells == expected_cells(EFFORT_UNITS, capacity)
    assert selection.cells <= sum(capacity + 1 - u for u in EFFORT_UNITS if u <= capacity)


def test_cells_scale_with_n_times_c() -> None:
    for capacity in (10, 100, 1000):
        items = tuple(Item(f"i{k}", 1 + k % 5, 1 + k % 7) for k in range(30))
        selection = solve(Problem(items, capacity, resolution=1), curve_to=capacity)
        assert selection.cells == expected_cells([1 + k % 5 for k in range(30)], capacity)
        assert selection.cells <= 30 * (capacity + 1)


def test_pinned_and_ruled_out_items_cost_no_cells() -> None:
    marks = {"i0": {"pinned": True}, "i1": {"ruled_out": True}}
    selection = solve(_problem(20, **marks), curve_to=10)
    free_capacity = 20 - EFFORT_UNITS[0]
    assert selection.cells == expected_cells(EFFORT_UNITS[2:], free_capacity)


def test_reduction_never_does_more_work() -> None:
    items = tuple(Item(f"i{k}", 1 + (k * 13) % 29, 1 + (k * 7) % 31) for k in range(200))
    full = solve(Problem(items, 400, resolution=1), curve_to=400)
    reduced = solve(Problem(items, 400, resolution=1))
    assert reduced.value == full.value
    assert reduced.chosen == full.chosen
    assert reduced.cells < full.cells
    assert "reduction fixed" in reduced.method_note


def test_multiple_choice_cells_count_every_member() -> None:
    items = (
        Item("a", 2, 5, either_or="s"),
        Item("b", 3, 6, either_or="s"),
        Item("c", 4, 7),
        Item("d", 30, 7, either_or="s"),
    )
    selection = solve(Problem(items, 10, resolution=1), curve_to=10)
    assert selection.method == "dp-multiple-choice"
    assert selection.cells == (11 - 2) + (11 - 3) + (11 - 4)


def test_needs_forest_cells_count_every_initiative() -> None:
    items = (Item("a", 2, 5), Item("b", 3, 6, needs=("a",)), Item("c", 4, 7, needs=("a",)))
    selection = solve(Problem(items, 10, resolution=1), curve_to=10)
    assert selection.method == "dp-needs-forest"
    assert selection.cells == (11 - 2) + (11 - 3) + (11 - 4)


def test_divide_and_conquer_runs_under_a_small_budget_and_agrees() -> None:
    items = tuple(Item(f"i{k}", 1 + (k * 13) % 29, 1 + (k * 7) % 31) for k in range(300))
    problem = Problem(items, 600, resolution=1)
    full = solve(problem, curve_to=600)
    small = solve(problem, curve_to=600, memory_budget_bytes=4096)
    assert full.method == "dp"
    assert small.method == "dp-divide-and-conquer"
    assert "budget" in small.method_note
    assert small.chosen == full.chosen
    assert small.value == full.value
    assert small.curve == full.curve
    # Each level of the recursion reruns at most half the items once more: with 300 rows of
    # 76 bytes and 4096 bytes per slice (53 rows) there are 3 levels.
    levels = math.ceil(math.log2(300 / (4096 // 76)))
    assert full.cells < small.cells <= full.cells * (2 + levels / 2)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(problems(max_n=12, either_or=True))
def test_low_memory_path_is_exact(problem: Problem) -> None:
    reference = brute_force(problem)
    selection = solve(problem, memory_budget_bytes=8)
    if reference.value is None:
        assert not selection.feasible
        return
    assert math.isclose(selection.value, reference.value)
    chosen = indices(problem, selection.chosen)
    used = sum(units_of(problem.items[i].effort, problem.resolution, up=True) for i in chosen)
    assert used == reference.units


def test_needs_forest_over_budget_goes_to_highs() -> None:
    items = (Item("a", 2, 5), Item("b", 3, 6, needs=("a",)), Item("c", 4, 7, needs=("a",)))
    selection = solve(Problem(items, 9, resolution=1), memory_budget_bytes=8)
    assert selection.method == "milp-highs"
    assert "memory budget" in selection.method_note
    assert selection.chosen == ("a", "b", "c")


def test_explanations_over_budget_fall_back_and_say_so() -> None:
    items = tuple(Item(f"i{k}", 1 + k % 5, 1 + k % 7) for k in range(12))
    selection = solve(Problem(items, 20, resolution=1), explain=True, memory_budget_bytes=64)
    assert selection.explanations is not None
    assert "re-solving" in selection.method_note
    roomy = solve(Problem(items, 20, resolution=1), explain=True)
    assert "prefix and suffix" in roomy.method_note
    assert [e.value_if_in for e in selection.explanations] == [
        e.value_if_in
        for e in roomy.explanations  # type: ignore[union-attr]
    ]


def test_explanations_with_checkpointed_suffix_rows_agree() -> None:
    # 40 initiatives x 201 units: both decision tables (about 2 KiB) fit a 16 KiB budget but
    # all 42 suffix rows (about 34 KiB) do not, so every 7th row is kept and the rest recomputed.
    items = tuple(Item(f"i{k}", 1 + (k * 7) % 13, 1 + (k * 5) % 17) for k in range(40))
    problem = Problem(items, 200, resolution=1)
    tight = solve(problem, explain=True, memory_budget_bytes=16 * 1024)
    roomy = solve(problem, explain=True)
    assert tight.method == "dp"
    assert "prefix and suffix" in tight.method_note
    assert tight.explanations == roomy.explanations


def test_the_method_note_counts_one_initiative_in_the_singular() -> None:
    # Proportional values take the fullest-plan bitset DP; others the value DP.
    fullest = solve(Problem(items=(Item("a", 1, 2),), capacity=2))
    valued = solve(Problem(items=(Item("a", 1, 2), Item("b", 1.5, 2)), capacity=2))
    assert "fullest: 1 initiative x 5 capacity units" in fullest.method_note
    assert "2 initiatives x 5 capacity units" in valued.method_note


def test_the_method_note_tells_the_curve_s_capacities_from_the_plan_s() -> None:
    """Found in use: with a curve the note said 24 capacity units for a plan of 19."""
    items = tuple(Item(key=f"k{i}", effort=1.0 + i, value=3.0 + i) for i in range(6))
    problem = Problem(items=items, capacity=9.5)  # 19 units at 0.5 day
    plain = solve(problem).method_note
    assert "6 initiatives x 20 capacity units;" in plain
    curved = solve(problem, curve_to=default_curve_to(problem.capacity)).method_note
    assert "6 initiatives x 24 capacity units (0 to 19 for the plan, 20 to 23 for the " in curved
