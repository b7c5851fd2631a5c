"""Pick the exact method for a decided problem and run it."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from . import dp, twins
from .constraints import Decided
from .errors import SelectorInputError
from .fullest import proportional, solve_fullest
from .milp import BinaryProgram, solve_binary_program
from .model import Problem
from .needs_forest import solve_forest
from .reduction import core_bounds, keep_by_effort, reduce_by_bounds
from .rounding import scale_values
from .validation import CheckedProblem, check_problem

DEFAULT_MEMORY_BUDGET_BYTES = 256 * 2**20
# A few seconds of DP work on a small machine (more with the low-memory method); larger grids
# are refused with a message, not attempted.
MAX_CELLS = 4 * 10**9
# Below this many DP cells the pass costs about what the stop rule's bounds cost to compute
# (tens of microseconds, scripts/bench_selector.py), so they are not computed.
BOUNDS_MIN_CELLS = 1_000_000


@dataclass(frozen=True)
class Prepared:
    """A checked problem with its DP values (whole numbers scaled by factor, or floats)."""

    checked: CheckedProblem
    scaled: np.ndarray
    factor: float
    integral: bool  # DP values are whole numbers with exact sums (see rounding.ScaledValues)

    @property
    def units(self) -> np.ndarray:
        """Efforts in units as an int64 array (checked.units)."""
        return self.checked.unit_array

    def total(self, indices: list[int] | tuple[int, ...]) -> float:
        """Plan value of the given items, exact for integer-scaled values."""
        if self.integral:
            return int(self.scaled[list(indices)].sum(dtype=np.float64)) / self.factor
        return math.fsum(self.checked.values[i] for i in indices)

    def as_value(self, scaled_amount: float) -> float:
        """Turn a DP amount back into value-score units."""
        return float(scaled_amount) / self.factor


@dataclass(frozen=True)
class Outcome:
    """One solve of the decided problem: what is chosen and how it was found."""

    feasible: bool
    chosen: tuple[int, ...]  # input order, includes in_plan
    method: str
    note: str
    cells: int
    in_units: int
    free_capacity: int
    row: np.ndarray | None  # last DP row over free capacity units 0..len-1
    decided: Decided
    # The row DP's steps when it ran whole: groups of item indices, or an array of single
    # initiatives in step order (see steps_layout).
    layout: list[list[int]] | np.ndarray | None = None
    decision_rows: int = 0  # rows of the row DP's bit-packed decision table (twins as pieces)

    def steps_layout(self) -> list[list[int]] | None:
        """The row DP's steps as groups of item indices, or None when it did not run whole."""
        if isinstance(self.layout, np.ndarray):
            # Built only when asked (explanations): a plan or curve alone never needs it.
            return [[i] for i in self.layout.tolist()]
        return self.layout


def prepare(problem: Problem, *, allow_zero_capacity: bool = False) -> Prepared:
    """Validate problem and scale its values for the DP."""
    checked = check_problem(problem, allow_zero_capacity=allow_zero_capacity)
    scaled = scale_values(checked.value_array)
    return Prepared(checked, scaled.values, scaled.factor, scaled.exact)


def run(
    prepared: Prepared,
    decided: Decided,
    *,
    width: int = 0,
    budget_bytes: int = DEFAULT_MEMORY_BUDGET_BYTES,
    allow_reduction: bool = True,
) -> Outcome:
    """Solve the free part of decided with the first exact method that applies.

    width asks for a last row over that many capacities (the capacity curve).
    allow_reduction lets the plain DP use the bound-based shortcuts; they keep the plan
    exact but leave no valid curve row, so callers asking for a curve or explanations pass
    False.
    """
    checked = prepared.checked
    units = checked.units
    in_units = sum(units[i] for i in decided.in_plan)
    free_capacity = checked.capacity_units - in_units
    if free_capacity < 0:
        note = "no method ran: pinned work exceeds the capacity"
        return Outcome(
            False, decided.in_plan, "none", note, 0, in_units, free_capacity, None, decided
        )
    width = max(width, free_capacity + 1)
    fitting = _fitting(decided, prepared.units, width)
    if not decided.free_needs and not checked.groups:
        base = Outcome(True, (), "", "", 0, in_units, free_capacity, None, decided)
        return _run_rows(prepared, base, fitting, [], width, budget_bytes, allow_reduction)
    free = fitting.tolist()
    needs: dict[int, tuple[int, ...]] = {}
    sets: list[list[int]] = []
    if decided.free_needs or checked.groups:
        free_set = set(free)
        needs = {i: decided.free_needs[i] for i in free if decided.free_needs.get(i)}
        sets = [[i for i in members if i in free_set] for members in checked.groups.values()]
        sets = [members for members in sets if len(members) > 1]
    base = Outcome(True, (), "", "", 0, in_units, free_capacity, None, decided)
    many_needs = [i for i in needs if len(needs[i]) > 1]
    if many_needs or (needs and sets):
        why = (
            f"{checked.keys[many_needs[0]]!r} needs more than one other initiative"
            if many_needs
            else "needs are combined with either-or sets"
        )
        return _run_milp(prepared, base, free, needs, sets, why)
    if needs:
        return _run_forest(prepared, base, free, needs, width, budget_bytes)
    return _run_rows(prepared, base, fitting, sets, width, budget_bytes, allow_reduction)


def _run_forest(
    prepared: Prepared,
    base: Outcome,
    free: list[int],
    needs: dict[int, tuple[int, ...]],
    width: int,
    budget_bytes: int,
) -> Outcome:
    _check_cells(len(free), width)
    parent_of = {i: (needs[i][0] if i in needs else None) for i in free}
    forest = solve_forest(
        free,
        parent_of,
        prepared.checked.units,
        prepared.scaled,
        base.free_capacity,
        width,
        budget_bytes,
    )
    if forest is None:
        why = (
            f"the needs-forest DP would exceed the memory budget of {budget_bytes / 2**20:,.1f} MiB"
        )
        return _run_milp(prepared, base, free, needs, [], why)
    chosen = tuple(sorted([*base.decided.in_plan, *forest.taken]))
    return replace(
        base,
        chosen=chosen,
        method="dp-needs-forest",
        note=forest.note,
        cells=forest.cells,
        row=forest.row,
    )


def _run_rows(
    prepared: Prepared,
    base: Outcome,
    free: np.ndarray,
    sets: list[list[int]],
    width: int,
    budget_bytes: int,
    allow_reduction: bool,
) -> Outcome:
    """The plain or multiple-choice DP over rows of capacities, after exact reductions."""
    units = prepared.units
    fixed_in: list[int] = []
    reduction_note = ""
    capacity = base.free_capacity
    low = 0
    stop = None
    layout: list[list[int]] | np.ndarray | None = None
    if sets:
        layout = step_groups(free.tolist(), sets, units, prepared.scaled)
        _check_cells(free.size, width)
        bundled = twins.bundle(layout, units, prepared.scaled, width - 1, exact=prepared.integral)
    else:
        core = free
        if allow_reduction and width == capacity + 1 and core.size:
            fullest = _try_fullest(prepared, base, core, capacity, core[:0], "", budget_bytes)
            if fullest is not None:
                return fullest  # every value in proportion: the LP bound cannot fix anything
            fixed, core, capacity, reduction_note = _reduce(prepared, core, capacity)
            fixed_in = fixed.tolist()
            width = capacity + 1
            if reduction_note:
                # The core the bound leaves can be proportional when the whole problem is not.
                fullest = _try_fullest(
                    prepared, base, core, capacity, fixed, reduction_note, budget_bytes
                )
                if fullest is not None:
                    return fullest
        # Processing order (twins after the first of them) of what is left. The LP bound fixes
        # twins alike and the cut by effort keeps the earliest twins, so this is the whole
        # problem's processing order restricted to the core; and as the reductions keep every
        # optimal plan, the order they saw does not change the plan.
        _check_cells(core.size, width)
        core, bundled = twins.ordered_steps(
            core, units, prepared.scaled, width - 1, exact=prepared.integral
        )
    steps = bundled.steps
    if allow_reduction and not sets and steps.members * width >= BOUNDS_MIN_CELLS:
        bounds = core_bounds(steps.units, steps.values, capacity, integral=prepared.integral)
        low = bounds.low
        stop = None if bounds.stop is None else dp.StopRule(*bounds.stop)
    result = dp.solve_steps(
        steps, capacity, width, budget_bytes, low=low, stop=stop, rows=bundled.describe()
    )
    chosen = _in_input_order(base, fixed_in, bundled.items(result.taken))
    if result.low_memory:
        method = "dp-divide-and-conquer"
    elif sets:
        method = "dp-multiple-choice"
    else:
        method = "dp"
    note = result.note + reduction_note
    if sets:
        note = f"{len(sets)} either-or sets as multiple-choice steps; " + note
    whole = not reduction_note and low == 0 and not result.stopped  # else exact only in part
    if whole and layout is None:
        layout = core
    return replace(
        base,
        chosen=chosen,
        method=method,
        note=note,
        cells=result.cells,
        row=result.row if whole else None,
        layout=layout if whole else None,
        decision_rows=steps.members,
    )


def _try_fullest(
    prepared: Prepared,
    base: Outcome,
    free: np.ndarray,
    capacity: int,
    fixed_in: np.ndarray,
    reduction_note: str,
    budget_bytes: int,
) -> Outcome | None:
    """The fullest plan when every free value is the same multiple of its effort, else None."""
    if not proportional(prepared.units[free], prepared.scaled[free]):
        return None
    free, bundled = twins.ordered_steps(
        free, prepared.units, prepared.scaled, capacity, exact=True
    )  # processing order
    steps = bundled.steps
    table = dp.table_bytes(steps.members, capacity + 1)
    if table > budget_bytes:
        return None
    _check_cells(free.size, capacity + 1)
    fullest = solve_fullest(steps.units, capacity)
    chosen = _in_input_order(base, fixed_in, bundled.items(fullest.taken))
    rows = bundled.describe() or dp.count_initiatives(free.size)
    note = (
        "every value score is the same multiple of its effort, so the best plan is the "
        f"fullest: {rows} x {capacity + 1:,} capacity units of reachable-total bits "
        f"({table / 1024:,.1f} KiB)"
    )
    if fullest.applied < steps.members:
        note += f"; stopped after {fullest.applied} of {steps.members} steps: the capacity is full"
    return replace(
        base,
        chosen=chosen,
        method="dp-subset-sum",
        note=note + reduction_note,
        cells=fullest.cells,
    )


def _in_input_order(base: Outcome, *parts: Sequence[int] | np.ndarray) -> tuple[int, ...]:
    """The pinned-in items and the given parts of the plan, as one sorted tuple."""
    merged = [*base.decided.in_plan]
    for part in parts:
        merged.extend(part.tolist() if isinstance(part, np.ndarray) else part)
    return tuple(sorted(merged))


def _reduce(
    prepared: Prepared, free: np.ndarray, capacity: int
) -> tuple[np.ndarray, np.ndarray, int, str]:
    """Apply the exact reductions; return fixed-in items, the rest, capacity left, a note.

    free and the rest are item indices; the rest keep free's order.
    """
    units = prepared.units
    fixed_in = free[:0]
    note = ""
    reduced = reduce_by_bounds(units[free], prepared.scaled[free], capacity)
    if reduced.fixed:
        fixed_in = free[reduced.fixed_in]
        capacity -= int(units[fixed_in].sum())
        free = free[reduced.free]
        free = free[units[free] <= capacity]
        note = (
            f"; bound-based reduction fixed {reduced.fixed} of "
            f"{reduced.fixed + len(reduced.free)} initiatives first"
        )
    kept = keep_by_effort(units[free], prepared.scaled[free], capacity)
    if kept.size < free.size:
        note += (
            f"; {free.size - kept.size} more left out: more initiatives of the same "
            "effort than the capacity holds, and better or earlier ones of it exist"
        )
        free = free[kept]
    return fixed_in, free, capacity, note


def _fitting(decided: Decided, units: np.ndarray, width: int) -> np.ndarray:
    """Free items that fit in width - 1 units and need nothing that does not fit (indices)."""
    if len(decided.free) == units.size:  # nothing decided: free is every index, in order
        free = np.arange(units.size)
    else:
        free = np.asarray(decided.free, dtype=np.int64)
    if not decided.free_needs:
        return free[units[free] < width]
    dependents: dict[int, list[int]] = {}
    for child in decided.free:
        for parent in decided.free_needs.get(child, ()):
            dependents.setdefault(parent, []).append(child)
    dropped = {i for i in decided.free if units[i] >= width}
    stack = list(dropped)
    while stack:
        for child in dependents.get(stack.pop(), ()):
            if child not in dropped:
                dropped.add(child)
                stack.append(child)
    return free[np.asarray([i not in dropped for i in decided.free], dtype=np.bool_)]


def step_groups(
    free: list[int], sets: list[list[int]], units: np.ndarray, values: np.ndarray
) -> list[list[int]]:
    """DP steps in processing order with either-or sets: one per free initiative, each twin
    (same units, same value) right after the first of them, and one per either-or set at the
    place of its first member."""
    set_of = {}
    for members in sets:
        for i in members:
            set_of[i] = members
    singles = np.asarray([i for i in free if i not in set_of], dtype=np.int64)
    after_first = twins.twins_first(singles, units, values).tolist()
    # Each twin takes the place of the first of its twins; sort by that place, then its own.
    place = {i: i for i in free}
    for k, i in enumerate(after_first):
        first = after_first[k - 1] if k else i
        if k and units[first] == units[i] and values[first] == values[i]:
            place[i] = place[first]
    groups: list[list[int]] = []
    placed: set[int] = set()
    for i in sorted(free, key=lambda i: (place[i], i)):
        members = set_of.get(i)
        if members is None:
            groups.append([i])
        elif members[0] not in placed:
            placed.add(members[0])
            groups.append(members)
    return groups


def _run_milp(
    prepared: Prepared,
    base: Outcome,
    free: list[int],
    needs: dict[int, tuple[int, ...]],
    sets: list[list[int]],
    why: str,
) -> Outcome:
    units = prepared.checked.units
    capacity = base.free_capacity
    fitting = [i for i in free if units[i] <= capacity]
    position = {item: k for k, item in enumerate(fitting)}
    program_needs = []
    blocked: set[int] = set()  # an initiative whose need cannot fit cannot be chosen either
    for i in fitting:
        for parent in needs.get(i, ()):
            if parent in position:
                program_needs.append((position[i], position[parent]))
            else:
                blocked.add(i)
    program_sets = [[position[i] for i in members if i in position] for members in sets]
    program = BinaryProgram(
        values=prepared.scaled[fitting].astype(np.float64) if fitting else np.zeros(0),
        capacities=[(np.array([units[i] for i in fitting], dtype=np.float64), capacity)],
        needs=program_needs,
        sets=[members for members in program_sets if len(members) > 1],
        integral=prepared.integral,
        upper=np.array([0.0 if i in blocked else 1.0 for i in fitting]),
    )
    picked = solve_binary_program(program)
    chosen = tuple(sorted([*base.decided.in_plan, *(fitting[k] for k in picked)]))
    note = f"{why}: exact binary program over {len(fitting)} initiatives solved by HiGHS"
    return replace(base, chosen=chosen, method="milp-highs", note=note)


def _check_cells(members: int, width: int) -> None:
    if members * width > MAX_CELLS:
        raise SelectorInputError.for_problem(
            "resolution",
            f"gives {members:,} initiatives x {width:,} capacity units = "
            f"{members * width:,} DP cells, more than the {MAX_CELLS:,} the selector "
            "evaluates: use a coarser resolution",
        )
