"""The selector: exact value-optimal plans that fit capacity (pure numpy/scipy, no web, no DB).

Python API, dataclasses in and out:

    from server.selector import Item, Problem, solve
    selection = solve(Problem(items=(Item("A", effort=3, value=5), ...), capacity=20))
    selection.chosen, selection.value, selection.headroom, selection.method

- solve(problem, *, curve_to=None, explain=False, memory_budget_bytes=256 MiB) -> Selection.
  curve_to=None computes no capacity curve; default_curve_to(capacity) gives the usual end
  (capacity + DEFAULT_CURVE_MARGIN, i.e. 25 %). explain=True adds one Explanation per
  initiative. Bad input raises SelectorInputError (.key, .field); pinned work over capacity
  is a Selection with feasible=False, infeasibility and excess_days, not an exception.
- chosen_at(problem, capacity_days) -> Selection at any point of the capacity curve.
- check_marks(items) raises SelectorInputError when pins, rule-outs, needs and either-or sets
  contradict each other whatever the capacity (for refusing such marks before storing them).
- solve_joint(items, capacities, *, resolution=0.5) -> JointSelection for initiatives that
  spend several teams' capacity.
- selection_to_dict / joint_selection_to_dict: JSON-ready dictionaries.

Rounding: efforts are rounded UP and the capacity DOWN to the resolution (default 0.5 day),
so a plan called feasible is feasible in real days; Selection.rounding reports it.

Methods (Selection.method): "dp" (0/1 knapsack DP with a bit-packed decision table, after an
exact bound-based reduction when only the plan is asked; a run of twins is one bounded step
of 1, 2, 4, ... twins at a time, see twins.py), "dp-multiple-choice" (either-or
sets), "dp-needs-forest" (each initiative needs at most one other), "dp-divide-and-conquer"
(when the decision table would exceed the memory budget), "dp-subset-sum" (every value the
same multiple of its effort, plan only: the fullest plan, from bitsets of reachable totals),
"milp-highs" (general needs graph, needs with either-or sets, cross-team plans), "none"
(pinned work alone overruns).

Tie rule: among plans of equal best value, the one with the least effort in resolution units
wins; among those, the one that leaves out the initiative latest in processing order where
they differ (counting from the end). Processing order is input order, except that a twin
(an undecided initiative with the same effort in units and the same value as an earlier one
outside either-or sets) is processed right after the first of its twins, so earlier twins
are taken first; an either-or set is processed where its first member stands; and with
needs, each initiative comes after everything that needs it. The binary-program methods
keep the first two parts (best value, then least effort) and HiGHS's deterministic choice
for the rest. Value scores with up to six decimals are compared exactly (scaled to
integers).

Marks: pinned initiatives are always in, and so is everything they need (reported in
Selection.forced_by_needs); ruled-out ones are never in, nor is anything needing them;
members of an either-or set with a pinned member stay out. Two pinned members of one set,
a pinned and a ruled-out member in one set, pinned and ruled_out on one initiative, a pinned
initiative needing a ruled-out one, and needs cycles are bad input.
"""

from .coupled import solve_joint
from .engine import DEFAULT_MEMORY_BUDGET_BYTES
from .errors import SelectorInputError
from .model import (
    Curve,
    Explanation,
    Item,
    JointItem,
    JointSelection,
    Problem,
    Rounding,
    Selection,
)
from .serialize import joint_selection_to_dict, selection_to_dict
from .solve import DEFAULT_CURVE_MARGIN, check_marks, chosen_at, default_curve_to, solve
from .validation import MAX_CAPACITY_UNITS

__all__ = [
    "DEFAULT_CURVE_MARGIN",
    "DEFAULT_MEMORY_BUDGET_BYTES",
    "MAX_CAPACITY_UNITS",
    "Curve",
    "Explanation",
    "Item",
    "JointItem",
    "JointSelection",
    "Problem",
    "Rounding",
    "Selection",
    "SelectorInputError",
    "check_marks",
    "chosen_at",
    "default_curve_to",
    "joint_selection_to_dict",
    "selection_to_dict",
    "solve",
    "solve_joint",
]
