"""Cross-team plans (one capacity per team) against brute force over every subset."""

from __future__ import annotations

import math
from itertools import product

from hypothesis import given, settings
from hypothesis import strategies as st
from selector_oracles import units_of

from server.selector import JointItem, joint_selection_to_dict, solve_joint

TEAMS = ("web", "data", "ops")


@st.composite
def joint_problems(draw: st.DrawFn) -> tuple[list[JointItem], dict[str, float]]:
    n = draw(st.integers(1, 9))
    teams = TEAMS[: draw(st.integers(2, 3))]
    items = []
    for k in range(n):
        efforts = {}
        for team in teams:
            units = draw(st.sampled_from([0, 0, 1, 2, 3, 5, 8]))
            if units:
                efforts[team] = units * 0.5
        if not efforts:
            efforts[teams[0]] = 1.0
        state = draw(st.sampled_from(["free"] * 6 + ["pinned", "ruled_out"]))
        needs = (f"j{draw(st.integers(0, k - 1))}",) if k and draw(st.booleans()) else ()
        items.append(
            JointItem(
                key=f"j{k}",
                efforts=efforts,
                value=draw(st.integers(1, 50)),
                pinned=state == "pinned" and not needs,
                ruled_out=state == "ruled_out",
                needs=needs,
                either_or=draw(st.sampled_from([None, None, None, "s"])),
            )
        )
    # Keep marks consistent: at most one pinned item per set, no ruled-out item beside it,
    # and nothing pinned that needs a ruled-out item.
    pinned_sets: set[str] = set()
    for k, item in enumerate(items):
        if item.pinned and item.either_or:
            if item.either_or in pinned_sets:
                items[k] = JointItem(item.key, item.efforts, item.value, either_or=item.either_or)
            pinned_sets.add(item.either_or)
    for k, item in enumerate(items):
        if item.ruled_out and (item.either_or in pinned_sets):
            items[k] = JointItem(item.key, item.efforts, item.value, either_or=item.either_or)
    capacities = {team: draw(st.sampled_from([2.0, 3.5, 5.0, 8.0])) for team in teams}
    return items, capacities


def _brute_force(items: list[JointItem], capacities: dict[str, float]) -> float | None:
    index = {item.key: k for k, item in enumerate(items)}
    best = None
    for picks in product((False, True), repeat=len(items)):
        ok = True
        for k, item in enumerate(items):
            if (item.pinned and not picks[k]) or (item.ruled_out and picks[k]):
                ok = False
            if picks[k] and any(not picks[index[name]] for name in item.needs):
                ok = False
        if sum(1 for k, item in enumerate(items) if picks[k] and item.either_or) > 1:
            ok = False
        for team, capacity in capacities.items():
            used = sum(
                units_of(item.efforts[team], 0.5, up=True)
                for k, item in enumerate(items)
                if picks[k] and team in item.efforts
            )
            ok = ok and used <= units_of(capacity, 0.5, up=False)
        if ok:
            value = sum(item.value for k, item in enumerate(items) if picks[k])
            best = value if best is None else max(best, value)
    return best


@settings(max_examples=150, deadline=None, derandomize=True)
@given(joint_problems())
def test_joint_plans_match_brute_force(problem: tuple[list[JointItem], dict[str, float]]) -> None:
    items, capacities = problem
    selection = solve_joint(items, capacities)
    reference = _brute_force(items, capacities)
    if reference is None:
        assert not selection.feasible
        return
    assert selection.feasible
    assert math.isclose(selection.value, reference)
    chosen = set(selection.chosen)
    for team, capacity in capacities.items():
        used = sum(item.efforts.get(team, 0.0) for item in items if item.key in chosen)
        assert math.isclose(selection.effort[team], used)
        assert used <= capacity + 1e-9
        assert math.isclose(selection.headroom[team], capacity - used)
    assert joint_selection_to_dict(selection)["chosen"] == list(selection.chosen)
