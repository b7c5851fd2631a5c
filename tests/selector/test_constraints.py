"""Pinned, ruled-out, either-or and needs marks, and the method each case reports."""

from __future__ import annotations

from server.selector import Item, JointItem, Problem, solve, solve_joint


def test_pinned_work_over_capacity_is_an_infeasible_result_naming_the_excess() -> None:
    items = (Item("a", 20, 5, pinned=True), Item("b", 22, 5, pinned=True), Item("c", 1, 9))
    selection = solve(Problem(items, 34.5))
    assert not selection.feasible
    assert selection.infeasibility == (
        "Pinned work needs 42.0 days, 7.5 days over the capacity of 34.5 days."
    )
    assert selection.excess_days == 7.5
    assert selection.chosen == ("a", "b")
    assert selection.headroom == -7.5
    assert selection.method == "none"


def test_infeasibility_caused_by_rounding_says_so() -> None:
    items = tuple(Item(k, 0.3, 1, pinned=True) for k in "abc")
    selection = solve(Problem(items, 1.0, resolution=0.5))
    assert not selection.feasible
    assert selection.excess_days == 0.5
    assert selection.infeasibility is not None
    assert "finer resolution" in selection.infeasibility
    assert solve(Problem(items, 1.0, resolution=0.1)).feasible


def test_an_overrun_rounded_to_the_resolution_also_says_it_in_estimated_days() -> None:
    """Worked by hand: 10.2 + 0.3 days pinned round up to 10.5 + 0.5 = 11 against 10: one day
    over in steps, 0.5 as estimated, which is what the headroom says."""
    items = (Item("a", 10.2, 5, pinned=True), Item("b", 0.3, 5, pinned=True))
    selection = solve(Problem(items, 10))
    assert selection.excess_days == 1.0
    assert selection.headroom == -0.5
    assert selection.infeasibility == (
        "Pinned work needs 11.0 days, 1.0 days over the capacity of 10.0 days. As estimated, "
        "before rounding to the resolution, it is 10.5 days, 0.5 over."
    )


def test_pinned_items_are_always_chosen_even_when_poor() -> None:
    items = (Item("poor", 5, 1, pinned=True), Item("rich", 5, 100), Item("rich2", 5, 90))
    selection = solve(Problem(items, 10))
    assert selection.chosen == ("poor", "rich")
    assert selection.value == 101


def test_ruled_out_items_are_never_chosen() -> None:
    items = (Item("best", 1, 100, ruled_out=True), Item("b", 1, 1))
    assert solve(Problem(items, 10)).chosen == ("b",)


def test_pinned_item_pulls_in_what_it_needs() -> None:
    items = (
        Item("api", 3, 1),
        Item("ui", 2, 10, pinned=True, needs=("api",)),
        Item("other", 5, 50),
    )
    selection = solve(Problem(items, 10))
    assert selection.chosen == ("api", "ui", "other")
    assert selection.forced_by_needs == ("api",)


def test_nothing_that_needs_a_ruled_out_item_is_chosen() -> None:
    items = (Item("base", 1, 1, ruled_out=True), Item("top", 1, 100, needs=("base",)))
    assert solve(Problem(items, 10)).chosen == ()


def test_pinned_member_keeps_the_rest_of_its_set_out() -> None:
    items = (Item("buy", 5, 1, pinned=True, either_or="s"), Item("build", 1, 100, either_or="s"))
    assert solve(Problem(items, 10)).chosen == ("buy",)


def test_either_or_picks_at_most_one() -> None:
    items = (
        Item("build", 4, 10, either_or="delivery"),
        Item("buy", 2, 8, either_or="delivery"),
        Item("x", 4, 3),
    )
    selection = solve(Problem(items, 10))
    assert selection.method == "dp-multiple-choice"
    assert selection.chosen == ("build", "x")  # 13 beats buy + x = 11 and build + buy (not allowed)


def test_needs_forest_uses_the_tree_dp() -> None:
    items = (
        Item("core", 4, 1),
        Item("feature", 3, 20, needs=("core",)),
        Item("polish", 1, 5, needs=("feature",)),
        Item("solo", 4, 15),
    )
    selection = solve(Problem(items, 8))
    assert selection.method == "dp-needs-forest"
    assert selection.chosen == ("core", "feature", "polish")  # 26 beats solo + core (16)


def test_general_needs_graph_goes_to_highs() -> None:
    items = (
        Item("a", 2, 1),
        Item("b", 2, 1),
        Item("c", 2, 30, needs=("a", "b")),
        Item("d", 5, 20),
    )
    selection = solve(Problem(items, 6))
    assert selection.method == "milp-highs"
    assert "needs more than one" in selection.method_note
    assert selection.chosen == ("a", "b", "c")


def test_needs_with_either_or_go_to_highs() -> None:
    items = (
        Item("a", 2, 1, either_or="s"),
        Item("b", 2, 5, either_or="s"),
        Item("c", 2, 9, needs=("a",)),
    )
    selection = solve(Problem(items, 4))
    assert selection.method == "milp-highs"
    assert selection.chosen == ("a", "c")


def test_joint_plan_respects_every_team() -> None:
    items = [
        JointItem("shared", {"web": 5, "data": 5}, 10),
        JointItem("web-only", {"web": 5}, 6),
        JointItem("data-only", {"data": 5}, 6),
    ]
    selection = solve_joint(items, {"web": 5, "data": 5})
    assert selection.method == "milp-highs"
    assert selection.chosen == ("web-only", "data-only")  # 12 beats shared (10)
    assert selection.effort == {"web": 5, "data": 5}
    assert selection.headroom == {"web": 0, "data": 0}


def test_joint_plan_with_one_team_uses_the_dp() -> None:
    selection = solve_joint(
        [JointItem("a", {"web": 5}, 1), JointItem("b", {"web": 6}, 2)], {"web": 6, "data": 3}
    )
    assert selection.method == "dp"
    assert selection.chosen == ("b",)


def test_joint_pinned_overrun_names_the_team() -> None:
    items = [JointItem("big", {"web": 8, "data": 1}, 1, pinned=True)]
    selection = solve_joint(items, {"web": 5, "data": 5})
    assert not selection.feasible
    assert selection.excess_days == {"web": 3.0}
    assert selection.infeasibility is not None
    assert "'web'" in selection.infeasibility
