"""Every kind of bad input raises SelectorInputError naming the item and the field."""

from __future__ import annotations

import math

import pytest

from server.selector import Item, Problem, SelectorInputError, solve, solve_joint
from server.selector.model import JointItem


def _raises(problem: Problem, *, key: str | None, field: str) -> SelectorInputError:
    with pytest.raises(SelectorInputError) as caught:
        solve(problem)
    error = caught.value
    assert error.key == key
    assert error.field == field
    assert field.split()[0] in str(error)
    if key is not None:
        assert repr(key) in str(error)
    return error


GOOD = Item("ok", 2, 3)


@pytest.mark.parametrize(
    ("effort", "words"),
    [
        (-1, "greater than zero"),
        (0, "greater than zero"),
        (math.nan, "NaN"),
        (math.inf, "finite"),
        ("3", "number"),
        (None, "number"),
        (True, "number"),
    ],
)
def test_bad_effort(effort: object, words: str) -> None:
    error = _raises(Problem((GOOD, Item("bad", effort, 1)), 10), key="bad", field="effort")  # type: ignore[arg-type]
    assert words in str(error)


@pytest.mark.parametrize(
    ("value", "words"),
    [
        (-2, "greater than zero"),
        (0, "greater than zero"),
        (math.nan, "NaN"),
        (-math.inf, "finite"),
        ("high", "number"),
    ],
)
def test_bad_value(value: object, words: str) -> None:
    error = _raises(Problem((GOOD, Item("bad", 1, value)), 10), key="bad", field="value")  # type: ignore[arg-type]
    assert words in str(error)


@pytest.mark.parametrize("capacity", [0, -5, math.nan, math.inf, "10"])
def test_bad_capacity(capacity: object) -> None:
    _raises(Problem((GOOD,), capacity), key=None, field="capacity")  # type: ignore[arg-type]


@pytest.mark.parametrize("resolution", [0, -0.5, math.nan, "half"])
def test_bad_resolution(resolution: object) -> None:
    _raises(Problem((GOOD,), 10, resolution), key=None, field="resolution")  # type: ignore[arg-type]


def test_absurd_capacity_is_refused_naming_capacity_and_resolution() -> None:
    error = _raises(Problem((GOOD,), 1e12), key=None, field="capacity")
    assert "resolution" in str(error)
    assert "coarser" in str(error)


def test_duplicate_keys() -> None:
    _raises(Problem((GOOD, Item("ok", 1, 1)), 10), key="ok", field="key")


def test_needs_unknown_key() -> None:
    error = _raises(Problem((GOOD, Item("b", 1, 1, needs=("ghost",))), 10), key="b", field="needs")
    assert "'ghost'" in str(error)


def test_needs_given_as_text_not_list() -> None:
    _raises(Problem((GOOD, Item("b", 1, 1, needs="ok")), 10), key="b", field="needs")  # type: ignore[arg-type]


def test_needs_cycle_is_named() -> None:
    items = (
        Item("a", 1, 1, needs=("b",)),
        Item("b", 1, 1, needs=("c",)),
        Item("c", 1, 1, needs=("a",)),
        GOOD,
    )
    error = _raises(Problem(items, 10), key="a", field="needs")
    assert "needs cycle: a -> b -> c -> a" in str(error)


def test_self_need_is_a_cycle() -> None:
    error = _raises(Problem((Item("a", 1, 1, needs=("a",)),), 10), key="a", field="needs")
    assert "a -> a" in str(error)


def test_pinned_and_ruled_out_on_one_item() -> None:
    _raises(Problem((Item("a", 1, 1, pinned=True, ruled_out=True),), 10), key="a", field="pinned")


def test_two_pinned_members_of_one_either_or_set() -> None:
    items = (
        Item("build", 3, 5, pinned=True, either_or="s"),
        Item("buy", 2, 4, pinned=True, either_or="s"),
    )
    error = _raises(Problem(items, 10), key="buy", field="either_or")
    assert "'build'" in str(error)


def test_pinned_and_ruled_out_members_of_one_either_or_set() -> None:
    items = (
        Item("build", 3, 5, pinned=True, either_or="s"),
        Item("buy", 2, 4, ruled_out=True, either_or="s"),
    )
    error = _raises(Problem(items, 10), key="buy", field="either_or")
    assert "'build'" in str(error)


def test_pinned_needing_ruled_out() -> None:
    items = (Item("a", 1, 1, pinned=True, needs=("b",)), Item("b", 1, 1, ruled_out=True))
    error = _raises(Problem(items, 10), key="a", field="needs")
    assert "'b'" in str(error)


def test_pinned_work_needing_two_members_of_one_set() -> None:
    items = (
        Item("a", 1, 1, pinned=True, needs=("x",)),
        Item("x", 1, 1, either_or="s"),
        Item("y", 1, 1, pinned=True, either_or="s"),
    )
    _raises(Problem(items, 10), key="y", field="either_or")


def test_empty_key() -> None:
    _raises(Problem((Item("  ", 1, 1),), 10), key="  ", field="key")


def test_bad_flag_type() -> None:
    _raises(Problem((Item("a", 1, 1, pinned="yes"),), 10), key="a", field="pinned")  # type: ignore[arg-type]


def test_bad_memory_budget() -> None:
    with pytest.raises(SelectorInputError) as caught:
        solve(Problem((GOOD,), 10), memory_budget_bytes=0)
    assert caught.value.field == "memory_budget_bytes"


def test_bad_curve_to() -> None:
    with pytest.raises(SelectorInputError) as caught:
        solve(Problem((GOOD,), 10), curve_to=-1)
    assert caught.value.field == "curve_to"


def test_joint_unknown_team_and_empty_efforts() -> None:
    with pytest.raises(SelectorInputError) as caught:
        solve_joint([JointItem("a", {"web": 2, "ghost": 1}, 3)], {"web": 10})
    assert (caught.value.key, caught.value.field) == ("a", "efforts")
    with pytest.raises(SelectorInputError) as caught:
        solve_joint([JointItem("a", {}, 3)], {"web": 10})
    assert (caught.value.key, caught.value.field) == ("a", "efforts")
    with pytest.raises(SelectorInputError) as caught:
        solve_joint([JointItem("a", {"web": -2}, 3)], {"web": 10})
    assert (caught.value.key, caught.value.field) == ("a", "efforts")
    with pytest.raises(SelectorInputError) as caught:
        solve_joint([JointItem("a", {"web": 2}, 3)], {"web": 0})
    assert caught.value.key is None
    assert "capacity" in caught.value.field


def test_absurd_effort_and_value_are_refused() -> None:
    error = _raises(Problem((GOOD, Item("huge", 1e300, 1)), 10), key="huge", field="effort")
    assert "absurd" in str(error)
    error = _raises(Problem((GOOD, Item("rich", 1, 1e200)), 10), key="rich", field="value")
    assert "absurd" in str(error)


def test_grid_beyond_the_cell_limit_is_refused_before_running() -> None:
    # 500 initiatives x 9,000,001 capacity units is 4.5e9 DP cells, over the 4e9 limit.
    items = tuple(Item(f"i{k}", 1 + k % 97, 1 + k % 89) for k in range(500))
    with pytest.raises(SelectorInputError) as caught:
        solve(Problem(items, 9_000_000, resolution=1), curve_to=9_000_000)
    assert caught.value.field == "resolution"
    assert "coarser resolution" in str(caught.value)
