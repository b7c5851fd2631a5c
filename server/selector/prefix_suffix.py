"""Forced-in and forced-out plan values for every DP initiative from prefix and suffix rows.

With P[s] the best row over steps before s and Q[s + 1] the best row over steps after s,

    best without step s          = max_c P[s][c] + Q[s + 1][C - c]
    best with member m of step s = v[m] + max_c P[s][c] + Q[s + 1][C - w[m] - c]

so each initiative costs O(C) after one backward and one forward pass. The suffix rows are
stored whole when they fit the memory budget, else every K-th one is kept and the rows in
between are recomputed block by block (K about sqrt(steps)). The forced plans themselves (for
"displaces") are read back for all initiatives at once: the prefix part from the forward
decision table, the suffix part from a backward one, one vectorised step per DP step.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import dp
from .engine import Outcome, Prepared


@dataclass(frozen=True)
class ForcedPlan:
    """Best plan with an initiative forced one way, as a change to the chosen plan.

    value is None when forcing is impossible. added / removed are item indices entering and
    leaving compared with the chosen plan.
    """

    value: float | None
    added: frozenset[int] = frozenset()
    removed: frozenset[int] = frozenset()


IMPOSSIBLE = ForcedPlan(None)


def forced_plans(
    prepared: Prepared, outcome: Outcome, budget_bytes: int
) -> tuple[dict[int, tuple[ForcedPlan, ForcedPlan]], str]:
    """Map each DP initiative to (forced in, forced out); empty with a note when not possible."""
    groups = outcome.steps_layout()
    if groups is None or outcome.method not in ("dp", "dp-multiple-choice"):
        return {}, ""
    capacity = outcome.free_capacity
    width = capacity + 1
    units = list(prepared.checked.units)
    layout = [[i for i in group if units[i] < width] for group in groups]
    steps = dp.make_steps([group for group in layout if group], units, prepared.scaled)
    count = steps.count
    if count == 0:
        return {}, ""
    stride = (width + 7) // 8
    tables = 2 * steps.members * stride
    row_bytes = width * prepared.scaled.itemsize
    every = 1 if tables + (count + 2) * row_bytes <= budget_bytes else math.isqrt(count) + 1
    rows_needed = (count // every + every + 3) * row_bytes
    if tables + rows_needed > budget_bytes:
        note = (
            "explanations by prefix and suffix rows would need "
            f"{(tables + rows_needed) / 2**20:,.1f} MiB > {budget_bytes / 2**20:,.1f} MiB budget"
        )
        return {}, note
    backward = np.empty((steps.members, stride), dtype=np.uint8)
    suffix = _SuffixRows(steps, width, every, backward)
    forward = np.empty((steps.members, stride), dtype=np.uint8)
    prefix = np.zeros(width, dtype=prepared.scaled.dtype)
    # Per query: the step, its prefix and suffix capacities and the member taken (-1: none).
    queries: list[tuple[int, int, int, int]] = []
    values: list[float] = []
    pairs: list[tuple[int, int, int]] = []  # (item, query forced in, query forced out)
    for s in range(count):
        after = suffix.row(s + 1)
        first_query = len(queries)
        below, above = _best_split(prefix, after, capacity)
        queries.append((s, below, above, -1))
        values.append(prefix[below] + after[above])
        for m in range(steps.bounds[s], steps.bounds[s + 1]):
            below, above = _best_split(prefix, after, capacity - steps.units[m])
            queries.append((s, below, above, m))
            values.append(prefix[below] + after[above] + steps.values[m])
        options = range(first_query, len(queries))
        for k in options[1:]:
            best_other = max((j for j in options if j != k), key=lambda j: values[j])
            pairs.append((steps.ids[queries[k][3]], k, best_other))
        prefix, _, _ = dp.run_forward(
            steps,
            width,
            init=prefix,
            table=forward[steps.bounds[s] : steps.bounds[s + 1]],
            first=s,
            last=s + 1,
        )
    chosen = np.zeros(steps.members, dtype=np.bool_)
    chosen_items = set(outcome.chosen)
    for m, item in enumerate(steps.ids):
        chosen[m] = item in chosen_items
    added, removed = _differences(steps, forward, backward, queries, chosen)
    base = prepared.total(outcome.decided.in_plan)
    plans = [
        ForcedPlan(base + prepared.as_value(value), frozenset(add), frozenset(rem))
        for value, add, rem in zip(values, added, removed, strict=True)
    ]
    results = {item: (plans[inside], plans[outside]) for item, inside, outside in pairs}
    return results, "explanations from prefix and suffix DP rows"


def _best_split(prefix: np.ndarray, suffix: np.ndarray, capacity: int) -> tuple[int, int]:
    """Capacities (a, b) for the prefix and suffix parts of the best plan within capacity.

    Of the best plans the one with the least units, as the tie rule wants: each split c
    reaching the best value is read at the least capacities worth prefix[c] and
    suffix[capacity - c] (the rows do not decrease), and the split needing least in all wins.
    """
    total = prefix[: capacity + 1] + suffix[capacity::-1]
    splits = np.flatnonzero(total == total.max())
    below = np.searchsorted(prefix, prefix[splits], side="left")
    above = np.searchsorted(suffix, suffix[capacity - splits], side="left")
    k = int(np.argmin(below + above))
    return int(below[k]), int(above[k])


class _SuffixRows:
    """Rows Q[s] (best over steps s onwards) handed out for s = 1, 2, ... in order."""

    def __init__(self, steps: dp.Steps, width: int, every: int, table: np.ndarray) -> None:
        self._steps = steps
        self._width = width
        self._every = every
        count = steps.count
        row = np.zeros(width, dtype=steps.values.dtype)
        self._checkpoints: dict[int, np.ndarray] = {count: row}
        for s in range(count - 1, -1, -1):
            bits = table[steps.bounds[s] : steps.bounds[s + 1]]
            row = dp.run_forward(steps, width, init=row, table=bits, first=s, last=s + 1).row
            if s % every == 0:
                self._checkpoints[s] = row
        self._block: dict[int, np.ndarray] = {}

    def row(self, s: int) -> np.ndarray:
        """Q[s]; calls must come with increasing s."""
        if s in self._checkpoints:
            return self._checkpoints[s]
        if s not in self._block:
            top = min(self._steps.count, -(-s // self._every) * self._every)
            row = self._checkpoints[top]
            self._block = {}
            for t in range(top - 1, s - 1, -1):
                row = dp.run_forward(self._steps, self._width, init=row, first=t, last=t + 1).row
                self._block[t] = row
        return self._block[s]


def _differences(
    steps: dp.Steps,
    forward: np.ndarray,
    backward: np.ndarray,
    queries: list[tuple[int, int, int, int]],
    chosen: np.ndarray,
) -> tuple[list[set[int]], list[set[int]]]:
    """For every query, the items it adds to and removes from the chosen plan."""
    total = len(queries)
    at_step = np.array([q[0] for q in queries], dtype=np.int64)
    prefix_capacity = np.array([q[1] for q in queries], dtype=np.int64)
    suffix_capacity = np.array([q[2] for q in queries], dtype=np.int64)
    member = np.array([q[3] for q in queries], dtype=np.int64)
    added: list[set[int]] = [set() for _ in range(total)]
    removed: list[set[int]] = [set() for _ in range(total)]
    ids = steps.ids

    def note(query_index: np.ndarray, taken: np.ndarray, m: int) -> None:
        differs = taken != chosen[m]
        for q in query_index[differs & taken].tolist():
            added[q].add(ids[m])
        for q in query_index[differs & ~taken].tolist():
            removed[q].add(ids[m])

    # The step's own member, fixed by the query.
    for s in range(steps.count):
        here = np.flatnonzero(at_step == s)
        for m in range(steps.bounds[s], steps.bounds[s + 1]):
            note(here, member[here] == m, m)
    # Prefix part: the forward table read from the last step down, as dp.backtrack does.
    for s in range(steps.count - 1, -1, -1):
        active = np.flatnonzero(at_step > s)
        if active.size:
            _read_step(steps, forward, s, active, prefix_capacity, note)
    # Suffix part: the backward table read from the first step up.
    for s in range(steps.count):
        active = np.flatnonzero(at_step < s)
        if active.size:
            _read_step(steps, backward, s, active, suffix_capacity, note)
    return added, removed


def _read_step(
    steps: dp.Steps,
    table: np.ndarray,
    s: int,
    active: np.ndarray,
    capacity: np.ndarray,
    note: object,
) -> None:
    """Apply step s's decisions to the active queries' capacities, noting differences."""
    c = capacity[active]
    winner = np.full(active.size, -1, dtype=np.int64)
    for m in range(steps.bounds[s], steps.bounds[s + 1]):
        bits = ((table[m][c >> 3] >> (c & 7).astype(np.uint8)) & 1).astype(np.bool_)
        bits &= c >= steps.units[m]  # bits below a member's units are not written
        winner[bits] = m  # later members override: last set bit wins
    for m in range(steps.bounds[s], steps.bounds[s + 1]):
        taken = winner == m
        capacity[active[taken]] -= steps.units[m]
        note(active, taken, m)  # type: ignore[operator]
