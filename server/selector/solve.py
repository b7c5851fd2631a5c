"""The selector's entry points: solve a problem, or read one point of its capacity curve."""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from dataclasses import replace

from .constraints import decide, raise_conflict
from .engine import DEFAULT_MEMORY_BUDGET_BYTES, prepare, run
from .errors import SelectorInputError
from .explain import explain_outcome
from .model import Item, Problem, Selection
from .results import assemble
from .validation import check_budget, check_curve_to, check_problem

DEFAULT_CURVE_MARGIN = 0.25


def default_curve_to(capacity: float) -> float:
    """The default end of the capacity curve: the capacity plus DEFAULT_CURVE_MARGIN."""
    return capacity * (1.0 + DEFAULT_CURVE_MARGIN)


def solve(
    problem: Problem,
    *,
    curve_to: float | None = None,
    explain: bool = False,
    memory_budget_bytes: int = DEFAULT_MEMORY_BUDGET_BYTES,
) -> Selection:
    """Return the value-optimal selection for problem.

    curve_to=None computes no capacity curve; pass default_curve_to(problem.capacity) for the
    usual one (capacity + 25 %). explain=True adds an Explanation per initiative. Raises
    SelectorInputError for bad input; pinned work over capacity is a Selection with
    feasible=False, not an exception.
    """
    return _solve(
        problem,
        curve_to=curve_to,
        explain=explain,
        memory_budget_bytes=memory_budget_bytes,
        allow_zero_capacity=False,
    )


def chosen_at(problem: Problem, capacity_days: float) -> Selection:
    """The selection at one point of the capacity curve: any capacity of 0 days or more."""
    if isinstance(capacity_days, bool) or not isinstance(capacity_days, numbers.Real):
        raise SelectorInputError.for_problem("capacity", f"must be a number, got {capacity_days!r}")
    return _solve(
        replace(problem, capacity=float(capacity_days)),
        curve_to=None,
        explain=False,
        memory_budget_bytes=DEFAULT_MEMORY_BUDGET_BYTES,
        allow_zero_capacity=True,
    )


def check_marks(items: Sequence[Item]) -> None:
    """Raise SelectorInputError when the items' marks contradict each other for any capacity.

    The marks are pins, rule-outs, needs and either-or sets; efforts and values play no part
    (each item counts as 1 day worth 1). Keys, needs and sets are checked as solve checks them.
    """
    neutral = tuple(replace(item, effort=1.0, value=1.0) for item in items)
    checked = check_problem(Problem(items=neutral, capacity=1.0), allow_zero_capacity=True)
    raise_conflict(checked, decide(checked))


def _solve(
    problem: Problem,
    *,
    curve_to: float | None,
    explain: bool,
    memory_budget_bytes: int,
    allow_zero_capacity: bool,
) -> Selection:
    budget = check_budget(memory_budget_bytes)
    prepared = prepare(problem, allow_zero_capacity=allow_zero_capacity)
    curve_units = (
        None if curve_to is None else check_curve_to(curve_to, prepared.checked.resolution)
    )
    decided = decide(prepared.checked)
    raise_conflict(prepared.checked, decided)
    in_units = sum(prepared.checked.units[i] for i in decided.in_plan)
    width = 0 if curve_units is None else curve_units - in_units + 1
    outcome = run(
        prepared,
        decided,
        width=width,
        budget_bytes=budget,
        allow_reduction=curve_units is None and not explain,
    )
    explanations = None
    note = ""
    if explain and outcome.feasible:
        explanations, note = explain_outcome(prepared, outcome, budget)
    return assemble(
        prepared, outcome, curve_units=curve_units, explanations=explanations, extra_note=note
    )
