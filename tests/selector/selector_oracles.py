"""Reference answers computed outside the selector: brute force, HiGHS and OR-Tools.

Each oracle applies the rounding rule from the design (efforts up, capacity down to the
resolution) with its own arithmetic, so the selector's rounding is checked as well.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp

from server.selector import Item, Problem


def units_of(days: float, resolution: float, *, up: bool) -> int:
    """Whole resolution steps in days, up for efforts and down for capacities."""
    steps = round(days / resolution, 9)
    return math.ceil(steps) if up else math.floor(steps)


@dataclass(frozen=True)
class Reference:
    """Best value and one best set (indices); None when no plan satisfies the marks."""

    value: float | None
    chosen: tuple[int, ...] | None
    units: int | None = None  # least effort in units among best sets (brute force only)


def satisfies(problem: Problem, chosen: Iterable[int]) -> bool:
    """Whether a set of indices fits the capacity and respects every mark."""
    picked = set(chosen)
    items = problem.items
    r = problem.resolution
    used = sum(units_of(items[i].effort, r, up=True) for i in picked)
    if used > units_of(problem.capacity, r, up=False):
        return False
    keys = {item.key: i for i, item in enumerate(items)}
    sets: dict[str, int] = {}
    for i, item in enumerate(items):
        if item.pinned and i not in picked:
            return False
        if item.ruled_out and i in picked:
            return False
        if i in picked:
            if any(keys[name] not in picked for name in item.needs):
                return False
            if item.either_or:
                sets[item.either_or] = sets.get(item.either_or, 0) + 1
    return all(count <= 1 for count in sets.values())


def brute_force(
    problem: Problem,
    *,
    force_in: Sequence[int] = (),
    force_out: Sequence[int] = (),
    tie_rule: bool = True,
) -> Reference:
    """Enumerate every subset (n <= 16); with tie_rule, pick as the selector documents.

    The tie rule here is the one for plain problems and marks: best value, then least units,
    then the set that leaves out the later item where two sets differ, counting from the end
    of the processing order. That order is the input order, except that a free initiative
    with the same effort in units and the same value as an earlier free one (a twin) comes
    right after the first of its twins.
    """
    items = problem.items
    n = len(items)
    assert n <= 16
    r = problem.resolution
    masks = np.arange(1 << n, dtype=np.int64)
    bits = ((masks[:, None] >> np.arange(n)) & 1).astype(bool)
    units = np.array([units_of(item.effort, r, up=True) for item in items], dtype=np.int64)
    values = np.array([item.value for item in items], dtype=np.float64)
    used = bits.astype(np.int64) @ units if n else np.zeros(1, dtype=np.int64)
    ok = used <= units_of(problem.capacity, r, up=False)
    keys = {item.key: i for i, item in enumerate(items)}
    for i, item in enumerate(items):
        if item.pinned or i in force_in:
            ok &= bits[:, i]
        if item.ruled_out or i in force_out:
            ok &= ~bits[:, i]
        for name in item.needs:
            ok &= ~bits[:, i] | bits[:, keys[name]]
    groups: dict[str, list[int]] = {}
    for i, item in enumerate(items):
        if item.either_or:
            groups.setdefault(item.either_or, []).append(i)
    for members in groups.values():
        ok &= bits[:, members].sum(axis=1) <= 1
    if not ok.any():
        return Reference(None, None)
    total = bits.astype(np.float64) @ values if n else np.zeros(1)
    candidates = np.flatnonzero(ok)
    best = total[candidates].max()
    candidates = candidates[np.isclose(total[candidates], best, rtol=1e-12, atol=1e-9)]
    least = int(used[candidates].min())
    if tie_rule:
        candidates = candidates[used[candidates] == least]
        # Reverse-lexicographic in processing order: with each item's bit moved to its place in
        # that order, a smaller mask, read from the highest bit, leaves later items out.
        place = processing_places(problem, units, force_in, force_out)
        reordered = (bits[candidates].astype(np.int64) << place).sum(axis=1)
        winner = int(candidates[int(np.argmin(reordered))])
    else:
        winner = int(candidates[0])
    chosen = tuple(int(i) for i in np.flatnonzero(bits[winner]))
    return Reference(float(best), chosen, least)


def processing_places(
    problem: Problem, units: np.ndarray, force_in: Sequence[int], force_out: Sequence[int]
) -> np.ndarray:
    """Each item's place in the tie rule's processing order (see brute_force)."""
    items = problem.items
    first_twin: dict[tuple[int, float], int] = {}
    anchors = []
    for i, item in enumerate(items):
        free = not (item.pinned or item.ruled_out or i in force_in or i in force_out)
        if free:
            anchors.append(first_twin.setdefault((int(units[i]), item.value), i))
        else:
            anchors.append(i)  # decided items are in every candidate or in none
    order = sorted(range(len(items)), key=lambda i: (anchors[i], i))
    place = np.empty(len(items), dtype=np.int64)
    place[order] = np.arange(len(items))
    return place


def highs_reference(problem: Problem) -> Reference:
    """Best value by an independent binary program in scipy.optimize.milp (HiGHS)."""
    items = problem.items
    n = len(items)
    if n == 0:
        return Reference(0.0, ())
    r = problem.resolution
    keys = {item.key: i for i, item in enumerate(items)}
    rows: list[np.ndarray] = []
    upper: list[float] = []
    rows.append(np.array([units_of(item.effort, r, up=True) for item in items], dtype=float))
    upper.append(units_of(problem.capacity, r, up=False))
    for i, item in enumerate(items):
        for name in item.needs:
            row = np.zeros(n)
            row[i] = 1
            row[keys[name]] -= 1
            rows.append(row)
            upper.append(0)
    groups: dict[str, list[int]] = {}
    for i, item in enumerate(items):
        if item.either_or:
            groups.setdefault(item.either_or, []).append(i)
    for members in groups.values():
        row = np.zeros(n)
        row[members] = 1
        rows.append(row)
        upper.append(1)
    low = np.array([1.0 if item.pinned else 0.0 for item in items])
    high = np.array([0.0 if item.ruled_out else 1.0 for item in items])
    result = milp(
        -np.array([item.value for item in items], dtype=float),
        integrality=np.ones(n),
        bounds=Bounds(low, high),
        constraints=[LinearConstraint(np.array(rows), -np.inf, np.array(upper, dtype=float))],
        options={"mip_rel_gap": 0.0},
    )
    if result.status == 2:  # infeasible
        return Reference(None, None)
    assert result.success, result.message
    chosen = tuple(int(i) for i in np.flatnonzero(np.rint(result.x) > 0.5))
    return Reference(float(-result.fun), chosen)


def ortools_reference(
    problem: Problem, *, solver_type: str = "branch_and_bound", time_limit_s: float = 5.0
) -> Reference:
    """Best value from OR-Tools' knapsack solver (pinned pre-allocated, ruled out dropped).

    solver_type is "branch_and_bound" (run under a time limit) or "dynamic_programming".
    Only for problems without needs and either-or sets, which that solver cannot express.
    """
    from ortools.algorithms.python import knapsack_solver

    items = problem.items
    assert not any(item.needs or item.either_or for item in items)
    r = problem.resolution
    capacity = units_of(problem.capacity, r, up=False)
    pinned = [i for i, item in enumerate(items) if item.pinned]
    capacity -= sum(units_of(items[i].effort, r, up=True) for i in pinned)
    if capacity < 0:
        return Reference(None, None)
    free = [i for i, item in enumerate(items) if not item.pinned and not item.ruled_out]
    base = sum(items[i].value for i in pinned)
    if not free:
        return Reference(float(base), tuple(pinned))
    types = knapsack_solver.SolverType
    kinds = {
        "branch_and_bound": types.KNAPSACK_MULTIDIMENSION_BRANCH_AND_BOUND_SOLVER,
        "dynamic_programming": types.KNAPSACK_DYNAMIC_PROGRAMMING_SOLVER,
    }
    solver = knapsack_solver.KnapsackSolver(kinds[solver_type], "reference")
    solver.set_time_limit(time_limit_s)
    values = [int(items[i].value) for i in free]
    weights = [[units_of(items[i].effort, r, up=True) for i in free]]
    solver.init(values, weights, [capacity])
    best = solver.solve()
    assert solver.is_solution_optimal(), "OR-Tools hit its time limit"
    chosen = sorted(
        [*pinned, *(free[k] for k in range(len(free)) if solver.best_solution_contains(k))]
    )
    return Reference(float(base + best), tuple(chosen))


def value_of(problem: Problem, keys: Iterable[str]) -> float:
    """Sum of the value scores of the named items."""
    by_key = {item.key: item for item in problem.items}
    return math.fsum(by_key[key].value for key in keys)


def indices(problem: Problem, keys: Iterable[str]) -> tuple[int, ...]:
    """Input positions of the named items, sorted."""
    position = {item.key: i for i, item in enumerate(problem.items)}
    return tuple(sorted(position[key] for key in keys))


def plain_items(efforts: Sequence[float], values: Sequence[float]) -> tuple[Item, ...]:
    """Items keyed 1, 2, 3, ... as in printed examples."""
    return tuple(
        Item(key=str(i + 1), effort=effort, value=value)
        for i, (effort, value) in enumerate(zip(efforts, values, strict=True))
    )
