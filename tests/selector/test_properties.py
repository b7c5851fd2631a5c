"""Random problems checked against brute force, HiGHS and OR-Tools (zero disagreements)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from selector_oracles import (
    brute_force,
    highs_reference,
    indices,
    ortools_reference,
    satisfies,
    units_of,
)
from selector_strategies import problems

from server.selector import Problem, Selection, engine, solve

# derandomize keeps CI deterministic; deadline=None because HiGHS start-up varies.
FEW = settings(max_examples=150, deadline=None, derandomize=True)
MANY = settings(max_examples=400, deadline=None, derandomize=True)


def _check_feasible(problem: Problem, selection: Selection) -> None:
    chosen = indices(problem, selection.chosen)
    assert satisfies(problem, chosen), selection
    assert math.isclose(
        selection.effort, sum(problem.items[i].effort for i in chosen), abs_tol=1e-9
    )
    assert math.isclose(selection.headroom, problem.capacity - selection.effort, abs_tol=1e-9)


def _check_against_brute_force(problem: Problem, *, exact_tie_rule: bool) -> None:
    reference = brute_force(problem)
    selection = solve(problem)
    if reference.value is None:
        assert not selection.feasible
        assert selection.excess_days is not None
        assert selection.excess_days > 0
        return
    assert selection.feasible
    assert math.isclose(selection.value, reference.value, rel_tol=1e-12, abs_tol=1e-9)
    _check_feasible(problem, selection)
    r = problem.resolution
    used = sum(
        units_of(problem.items[i].effort, r, up=True) for i in indices(problem, selection.chosen)
    )
    assert used == reference.units  # tie rule, first part: least effort among best plans
    if exact_tie_rule:
        assert indices(problem, selection.chosen) == reference.chosen


@MANY
@given(problems(max_n=12))
def test_plain_and_marks_match_brute_force_and_tie_rule(problem: Problem) -> None:
    _check_against_brute_force(problem, exact_tie_rule=True)
    # Again with the stop rule's bounds computed for every DP, however small.
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(engine, "BOUNDS_MIN_CELLS", 0)
        _check_against_brute_force(problem, exact_tie_rule=True)


@FEW
@given(problems(max_n=12, decimals=True, off_grid=True))
def test_decimal_values_and_off_grid_efforts_match_brute_force(problem: Problem) -> None:
    _check_against_brute_force(problem, exact_tie_rule=True)


@MANY
@given(problems(max_n=12, either_or=True))
def test_either_or_sets_match_brute_force(problem: Problem) -> None:
    _check_against_brute_force(problem, exact_tie_rule=False)


@MANY
@given(problems(max_n=12, needs="forest"))
def test_needs_forest_matches_brute_force(problem: Problem) -> None:
    _check_against_brute_force(problem, exact_tie_rule=False)


@FEW
@given(problems(max_n=12, needs="general", either_or=True))
def test_general_needs_and_sets_match_brute_force(problem: Problem) -> None:
    _check_against_brute_force(problem, exact_tie_rule=False)


def _check_against_highs(problem: Problem) -> None:
    reference = highs_reference(problem)
    selection = solve(problem)
    if reference.value is None:
        assert not selection.feasible
        return
    assert selection.feasible
    assert math.isclose(selection.value, reference.value, rel_tol=1e-9, abs_tol=1e-6)
    _check_feasible(problem, selection)


@FEW
@given(problems(min_n=20, max_n=200, max_units=60))
def test_large_plain_matches_highs(problem: Problem) -> None:
    _check_against_highs(problem)


@FEW
@given(problems(min_n=20, max_n=200, max_units=60, either_or=True))
def test_large_either_or_matches_highs(problem: Problem) -> None:
    _check_against_highs(problem)


@FEW
@given(problems(min_n=20, max_n=120, max_units=40, needs="forest"))
def test_large_needs_forest_matches_highs(problem: Problem) -> None:
    _check_against_highs(problem)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(problems(min_n=20, max_n=80, max_units=40, needs="general", either_or=True))
def test_large_general_needs_match_highs(problem: Problem) -> None:
    _check_against_highs(problem)


@FEW
@given(problems(min_n=20, max_n=200, max_units=60))
def test_large_plain_matches_ortools_branch_and_bound(problem: Problem) -> None:
    reference = ortools_reference(problem, solver_type="branch_and_bound", time_limit_s=5.0)
    selection = solve(problem)
    if reference.value is None:
        assert not selection.feasible
        return
    assert selection.value == reference.value
    _check_feasible(problem, selection)


@FEW
@given(problems(min_n=20, max_n=200, max_units=30))
def test_large_plain_matches_ortools_dynamic_programming(problem: Problem) -> None:
    reference = ortools_reference(problem, solver_type="dynamic_programming")
    selection = solve(problem)
    if reference.value is None:
        assert not selection.feasible
        return
    assert selection.value == reference.value
    _check_feasible(problem, selection)
